# test_check.sh - `splitroi check` on a tiny invented BIDS study: the listing, and every kind of bad input.
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
HERE=$(cd "$(dirname "$0")" && pwd)
if ! "$PY" -c 'import nibabel, numpy' 2>/dev/null; then
	echo "skip - check tests need nibabel and numpy in $PY"
	exit 0
fi
BASE=$TMP/base
"$PY" "$HERE/mkstudy.py" "$BASE" || { notok "could not build the test study"; exit 1; }
F=sub-01/func
# fresh: a new copy of the valid study in $V
fresh() { rm -rf "$TMP/v"; cp -r "$BASE" "$TMP/v"; V=$TMP/v; }
# py CODE: runs python with numpy/nibabel in the study copy
py() { (cd "$V" && "$PY" -c "import numpy as np, nibabel as nib, gzip, struct, os; $1"); }

# ---- the listing of a valid study ----
fresh
run "$SPLITROI" check "$V/study.ini"
expect_status 0 "valid study passes"
expect_out "^subjects \(2\): 01 02$" "lists the subjects"
expect_out "run 1: sub-01_task-tones_run-1_bold.nii.gz  20 volumes, TR 2 s, 6 x 5 x 4 voxels of 3 x 3 x 3 mm" \
	"lists a run with volumes, TR (from the dataset-level sidecar) and grid"
expect_out "conditions: melody \(4\), scrambled \(4\)" "lists the conditions found in the events with counts"
expect_out "task memory \(measured\): 2 runs" "lists the measured task's runs"
expect_out "conditions: familiar \(2\), novel \(1\)" "lists the measured task's conditions"
expect_out "sub-01 odd-even:A: define on runs 1\+3, measure on 2\+4" "odd-even split A (METHODS.md 6)"
expect_out "sub-01 odd-even:B: define on runs 2\+4, measure on 1\+3" "odd-even split B"
# parcel and mask voxel counts computed by numpy in mkstudy.py
while read -r kind a b c; do
	if [ "$kind" = parcel ]; then
		expect_out "^ +$a +$b +$c$" "parcel $a ($b) has $c voxels as numpy counts"
	else
		expect_out "^mask: .*mask.nii.gz: $a voxels in the mask$" "mask has $a voxels as numpy counts"
	fi
done <"$BASE/expected.txt"
expect_out "^no problems found" "says no problems"

sed -i 's/^split = odd-even/split = leave-one-out/' "$V/study.ini"
run "$SPLITROI" check "$V/study.ini"
expect_status 0 "leave-one-out study passes"
expect_out "sub-02 leave-one-out:2: define on runs 1\+3\+4, measure on 2$" "leave-one-out lists each held-out run"
expect_out "sub-02 leave-one-out:4: define on runs 1\+2\+3, measure on 4$" "leave-one-out last run"

fresh
run "$SPLITROI" check "$V/study.ini" --subjects sub-02
expect_status 0 "--subjects narrows the check"
expect_out "^subjects \(1\): 02$" "--subjects 02 lists only sub-02"
run "$SPLITROI" check "$V/study.ini" --subjects 09
expect_status 2 "--subjects with an unknown label is a usage error"
expect_err "subject '09'" "names the unknown subject"
run "$SPLITROI" check
expect_status 2 "check without a study is a usage error"

# ---- warnings that are not errors ----
fresh
printf '45\t2\tmelody\n' >>"$V/data/$F/sub-01_task-tones_run-3_events.tsv"
run "$SPLITROI" check "$V/study.ini"
expect_status 0 "an onset past the end of the run is not an error"
expect_err "warning: .*sub-01_task-tones_run-3_events.tsv: line 10: onset 45 s is at or after the end of the run \(20 volumes x 2 s = 40 s\)" \
	"an onset past the end of the run gives a warning naming file and line"

fresh
rm "$V"/data/sub-02/func/sub-02_task-tones_run-[234]_*
run "$SPLITROI" check "$V/study.ini"
expect_status 0 "one localizer run is not an error"
expect_err "warning: sub-02 has 1 run of the localizer task tones: no cross-validated rows" \
	"fewer than 2 localizer runs: a note"

# ---- malformed variants: exit 1 and a message naming the file ----
fresh
sed -i 's/^top_percent = 10/top_percnt = 10/' "$V/study.ini"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "study key typo"
expect_err "study.ini: line 15: unknown key 'top_percnt' in \[parcels\]; did you mean 'top_percent'\?" \
	"key typo names file, line and the nearest key"

fresh
rm "$V/data/$F/sub-01_task-tones_run-2_events.tsv"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "missing events file"
expect_err "sub-01_task-tones_run-2_events.tsv: events file missing" "missing events file is named"

fresh
sed -i '1s/onset/start/' "$V/data/$F/sub-01_task-tones_run-2_events.tsv"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "missing onset column"
expect_err "sub-01_task-tones_run-2_events.tsv: line 1: no column 'onset'" "missing onset column named with file and line"

fresh
sed -i '3s/^8/eight/' "$V/data/$F/sub-01_task-tones_run-2_events.tsv"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "non-numeric onset"
expect_err "sub-01_task-tones_run-2_events.tsv: line 3, column 1 \(onset\): 'eight' is not a number" \
	"non-numeric onset names file, line and column"

fresh
sed -i '4s/\t2\t/\t-2\t/' "$V/data/$F/sub-01_task-tones_run-2_events.tsv"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "negative duration"
expect_err "sub-01_task-tones_run-2_events.tsv: line 4, column 2 \(duration\): negative duration -2" \
	"negative duration names file, line and column"

fresh
echo '{"RepetitionTime": 2.5}' >"$V/data/$F/sub-01_task-tones_run-1_bold.json"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "TR disagreeing between sidecar and header"
expect_err "RepetitionTime 2.5 s in .*sub-01_task-tones_run-1_bold.json but 2 s in the header of .*sub-01_task-tones_run-1_bold.nii.gz" \
	"TR disagreement names both values and files"

fresh
py "a = np.diag([3.0, 3.0, 3.0, 1.0]); a[:3, 3] = [-9, -6, -3]; nib.save(nib.Nifti1Image(np.ones((7, 5, 4), np.int16), a), 'parcels.nii.gz')"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "parcels on another grid"
expect_err "parcels.nii.gz: the parcels are not on the data grid of .*sub-01_task-tones_run-1_bold.nii.gz \(.*6x5x4.* vs 7x5x4" \
	"grid mismatch names both files and shows both grids"
cp "$TMP/err" "$TMP/grid_err"
sed -i 's/^names = parcels.tsv/names = parcels.tsv\nresample = nearest/' "$V/study.ini"
run "$SPLITROI" check "$V/study.ini"
expect_status 0 "parcels on another grid pass with resample = nearest"
expect_out "resampled \(nearest neighbour\) onto the data grid" "says the parcels are resampled"

fresh
sed -i 's/^contrast = melody - scrambled/contrast = melody - scrambld/' "$V/study.ini"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "unknown condition in the contrast"
expect_err "study.ini: line 9: contrast 'melody-scrambld' names condition 'scrambld', unknown to every subject of task tones \(known: melody, scrambled\)" \
	"unknown condition lists the known ones with the study line"

fresh
py "p = 'data/$F/sub-01_task-tones_run-2_bold'; img = nib.load(p + '.nii.gz'); img = nib.Nifti1Image(np.asarray(img.dataobj), img.affine, img.header); os.remove(p + '.nii.gz'); nib.save(img, p + '.nii'); b = open(p + '.nii', 'rb').read(); open(p + '.nii', 'wb').write(b[:len(b) // 2])"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "truncated .nii"
expect_err "sub-01_task-tones_run-2_bold.nii: .*(truncat|short|beyond|end)" "truncated .nii is named"

fresh
py "p = 'data/$F/sub-01_task-tones_run-3_bold.nii.gz'; b = bytearray(open(p, 'rb').read()); n = len(b); b[n // 2:n // 2 + 64] = bytes(64); open(p, 'wb').write(bytes(b))"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "corrupt .nii.gz"
expect_err "sub-01_task-tones_run-3_bold.nii.gz: .*(corrupt|gzip|truncat|CRC)" "corrupt .nii.gz is named"

fresh
py "p = 'data/$F/sub-01_task-tones_run-4_bold'; img = nib.load(p + '.nii.gz'); img = nib.Nifti1Image(np.asarray(img.dataobj), img.affine, img.header); os.remove(p + '.nii.gz'); nib.save(img, p + '.nii'); b = bytearray(open(p + '.nii', 'rb').read()); b[344:348] = b'nq1\\0'; open(p + '.nii', 'wb').write(bytes(b))"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "wrong magic"
expect_err "sub-01_task-tones_run-4_bold.nii: .*magic" "wrong magic is named"

fresh
py "p = 'data/$F/sub-01_task-memory_run-1_bold.nii.gz'; a = nib.load(p).affine; nib.save(nib.Nifti1Image(np.ones((6, 5, 4, 3, 2), np.float32), a), p)"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "5-D bold"
expect_err "sub-01_task-memory_run-1_bold.nii.gz: a 5-D image" "5-D bold is named"

fresh
# NIfTI-2 header (dims are int64 at byte 16): four dims of 2^40 overflow any size computation
py "p = 'data/$F/sub-01_task-memory_run-2_bold'; img = nib.load(p + '.nii.gz'); img = nib.Nifti1Image(np.asarray(img.dataobj), img.affine, img.header); os.remove(p + '.nii.gz'); nib.save(nib.Nifti2Image(np.asarray(img.dataobj), img.affine), p + '.nii'); b = bytearray(open(p + '.nii', 'rb').read()); b[16:56] = struct.pack('<5q', 4, 2**40, 2**40, 2**40, 2**40); open(p + '.nii', 'wb').write(bytes(b))"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "dims overflowing"
expect_err "sub-01_task-memory_run-2_bold.nii: .*(overflow|too large|beyond|exceed)" "overflowing dims are named"

fresh
rm "$V"/data/sub-02/func/sub-02_task-memory_*
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "a task with no runs for a subject"
expect_err "sub-02 has no runs of task memory" "the subject without runs of the task is named"

fresh
rm "$V"/data/sub-0*/func/*_task-memory_*
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "a task no subject has runs of"
expect_err "sub-01 has no runs of task memory" "the missing runs are named"
if grep -q "unknown to every subject" "$TMP/err"; then
	notok "no effect is called unknown when no subject has runs of its task: $(grep -m1 unknown "$TMP/err")"
else
	ok "no effect is called unknown when no subject has runs of its task"
fi

fresh
sed -i 's/^mask = mask.nii.gz/mask = mask.nii.gz\nsubjects = 01 sub-05/' "$V/study.ini"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "a listed subject missing from the dataset"
expect_err "study.ini: line 6: subject '05' is not in .*data" "the missing subject is named with the study line"

fresh
sed -i 's/^drift_cutoff = 128/drift_cutoff = 128\nconfounds = csf/' "$V/study.ini"
for b in "$V"/data/sub-0*/func/*_bold.nii.gz; do
	c=${b%_bold.nii.gz}_confounds.tsv
	{ echo csf; for i in $(seq 20); do echo "0.$i"; done; } >"$c"
done
run "$SPLITROI" check "$V/study.ini"
expect_status 0 "confounds with one row per volume pass"
sed -i '$d' "$V/data/$F/sub-01_task-tones_run-2_confounds.tsv"
sed -i '1s/csf/white_matter/' "$V/data/$F/sub-01_task-memory_run-1_confounds.tsv"
rm "$V/data/sub-02/func/sub-02_task-tones_run-1_confounds.tsv"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "bad confounds files"
expect_err "sub-01_task-tones_run-2_confounds.tsv: 19 rows, but the run sub-01_task-tones_run-2_bold.nii.gz has 20 volumes" \
	"a confounds table with a row missing"
expect_err "sub-01_task-memory_run-1_confounds.tsv: line 1: no column 'csf' \(named in \[model\] confounds\)" \
	"a confounds table without the named column"
expect_err "sub-02_task-tones_run-1_confounds.tsv" "a missing confounds file is named"

# ---- several problems are all listed at once ----
fresh
rm "$V/data/$F/sub-01_task-tones_run-2_events.tsv"
echo '{"RepetitionTime": 3}' >"$V/data/sub-02/func/sub-02_task-memory_run-1_bold.json"
sed -i 's/^effects = familiar, novel, familiar - novel/effects = familiar, new, familiar - new/' "$V/study.ini"
sed -i '5s/\t2\t/\t-1\t/' "$V/data/sub-02/func/sub-02_task-tones_run-4_events.tsv"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "several problems"
expect_err "sub-01_task-tones_run-2_events.tsv: events file missing" "several: the missing events file"
expect_err "RepetitionTime 3 s in .*sub-02_task-memory_run-1_bold.json" "several: the TR disagreement"
expect_err "study.ini: line 22: effects 'new' names condition 'new'.*\(known: familiar, novel\)" "several: the unknown condition"
expect_err "sub-02_task-tones_run-4_events.tsv: line 5, column 2 \(duration\): negative duration" "several: the negative duration"
expect_err "4 problems found" "several: counted once each"
