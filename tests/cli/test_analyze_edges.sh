# test_analyze_edges.sh - analyze when something goes wrong part-way: a mask on another grid,
# an output that cannot be written, the summary's counts and what a failed subject leaves.
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
HERE=$(cd "$(dirname "$0")/.." && pwd)
"$PY" "$HERE/py/make_study.py" "$TMP/s" sessions >/dev/null || { notok "make_study.py failed"; exit 1; }
S=$TMP/s
cd "$S" || exit 1

# a mask on a smaller grid: the fit would read it with the run's voxel count, so the
# grids must be compared before any run is fitted
"$PY" - <<'PYEOF'
import nibabel as nib, numpy as np
m = nib.load('mask.nii.gz')
small = np.asarray(m.dataobj)[:5, :5, :4].astype(np.uint8)
nib.save(nib.Nifti1Image(small, m.affine), 'small_mask.nii.gz')
PYEOF
sed 's/^mask = mask.nii.gz/mask = small_mask.nii.gz/' study.ini >smallmask.ini
grep -q '^mask = small_mask.nii.gz' smallmask.ini || notok "the test could not set the mask"
run "$SPLITROI" analyze smallmask.ini --no-group --no-report --out "$TMP/m"
expect_status 1 "a mask on another grid fails"
expect_err "small_mask.nii.gz: the mask is not on the data grid" "the error names the mask file"
expect_err "5x5x4" "the error shows the mask's grid"
if grep -q "fitting" "$TMP/err"; then notok "runs were fitted with a mask of the wrong size"; else ok "no run is fitted before the mask grid is checked"; fi
[ ! -e "$TMP/m/sub-01/run.json" ] && [ ! -e "$TMP/m/sub-01/responses.csv" ] && ok "the failed subjects have no tables" || notok "a failed subject left tables"
expect_out "0 of 2 subjects complete; 0 analyzed now, 2 failed" "the summary counts the two failed subjects, not the table steps"
run "$SPLITROI" parcels smallmask.ini --out "$TMP/pm"
expect_status 1 "parcels with a mask on another grid fails"
expect_err "small_mask.nii.gz: the mask is not on the data grid" "parcels names the mask file"

# the group table cannot be written: the subjects are still counted as analyzed
run "$SPLITROI" analyze study.ini --no-report --out "$TMP/g" --no-group
expect_status 0 "the study runs"
mkdir -p "$TMP/g/group.csv/in-the-way"
run "$SPLITROI" analyze study.ini --no-report --out "$TMP/g" --force
expect_status 1 "a group table that cannot be written fails the command"
expect_out "2 of 2 subjects complete; 2 analyzed now, 0 failed" "a failed group step is not counted as a failed subject"

# a folder in the place of the completion record: the subject's outputs are made in a
# staging folder and swapped in whole, so what was in the way goes with the old outputs
# (a redo that cannot write is tests/cli/test_force_full_disk.sh)
rm -rf "$TMP/j"
mkdir -p "$TMP/j/sub-01/run.json/in-the-way"
run "$SPLITROI" analyze study.ini --no-report --no-group --quiet --out "$TMP/j"
expect_status 0 "a folder in the place of run.json is replaced with the subject's new outputs"
[ -f "$TMP/j/sub-01/run.json" ] && [ -s "$TMP/j/sub-01/responses.csv" ] && ok "the subject's outputs are complete" || notok "the subject's outputs are not complete"
[ -s "$TMP/j/sub-02/run.json" ] && [ -s "$TMP/j/sub-02/responses.csv" ] && ok "the other subject completes" || notok "the other subject did not complete"
left=$(find "$TMP/j" -name '*.tmp*' | head -3)
[ -z "$left" ] && ok "no temporary files left" || notok "temporary files left: $left"

# the skip rule is decided from content (fingerprints in run.json, taken before the inputs
# are read): an edit with the old modification time restored redoes the subject, a touch alone does not
run "$SPLITROI" analyze study.ini --no-report --no-group --quiet --out "$TMP/k" --subjects 01
expect_status 0 "one subject runs"
ev=$(ls data/sub-01/ses-1/func/*tones*events.tsv | head -1)
t=$(stat -c %y "$ev")
sed -i 's/\t16\t/\t15\t/' "$ev"
touch -d "$t" "$ev"
run "$SPLITROI" analyze study.ini --no-report --no-group --out "$TMP/k" --subjects 01
if grep -q "sub-01: up to date" "$TMP/err"; then notok "an input edited with its time restored was taken as unchanged"; else ok "an input edited with its time restored redoes the subject"; fi
touch "$ev"
run "$SPLITROI" analyze study.ini --no-report --no-group --out "$TMP/k" --subjects 01
expect_err "sub-01: up to date" "an input only touched (same content) is not a reason to redo"
run "$SPLITROI" analyze study.ini --no-report --no-group --out "$TMP/k" --subjects 01
expect_err "sub-01: up to date, skipped" "once redone, the subject is skipped again"

# a parcel that nearest-neighbour resampling loses (one fine voxel the data grid never
# samples: data voxel centres fall on even fine indices here): its rows are empty with
# n_voxels 0 (METHODS.md 7), and the warning says why instead of "no candidate voxels"
"$PY" - <<'PYEOF'
import nibabel as nib, numpy as np
im = nib.load('parcels.nii.gz')
d = np.asarray(im.dataobj).copy()
d[1, 1, 1] = 9
nib.save(nib.Nifti1Image(d, im.affine), 'parcels_tiny.nii.gz')
open('parcels_tiny.tsv', 'w').write(open('parcels.tsv').read().rstrip('\n') + '\n9\ttiny\n')
PYEOF
sed -e 's/^image = parcels.nii.gz/image = parcels_tiny.nii.gz/' -e 's/^names = parcels.tsv/names = parcels_tiny.tsv/' study.ini >tiny.ini
run "$SPLITROI" analyze tiny.ini --no-report --no-group --quiet --out "$TMP/t"
expect_status 0 "a parcel lost in resampling does not fail the study"
expect_err "subject 01: parcel tiny .*no voxel on the data grid after nearest-neighbour resampling" "the warning says the parcel was lost in resampling"
if grep -q "parcel tiny, split .*no candidate voxels" "$TMP/err"; then notok "the lost parcel still gets a 'no candidate voxels' warning per split"; else ok "no per-split warnings for the lost parcel"; fi
"$PY" - "$TMP/t/responses.csv" <<'PYEOF' && ok "the lost parcel has empty values and n_voxels 0" || notok "rows of the lost parcel wrong"
import csv, sys
rows = [r for r in csv.DictReader(open(sys.argv[1])) if r['parcel'] == 'tiny']
assert len(rows) == 2 * (3 * 3 + 3), len(rows)   # 2 subjects x (3 splits x 3 effects + 3 memory effects)
assert all(r['value'] == '' and float(r['n_voxels']) == 0 for r in rows), rows[:2]
PYEOF

# a subject with one localizer run and no measured task in the study: the warning must
# not promise measured-task rows; the subject completes with an empty table
"$PY" - "$TMP/one" <<PYEOF >/dev/null || notok "make_study with one run failed"
import sys
sys.path.insert(0, "$HERE/py")
from make_study import make_study
make_study(sys.argv[1], subjects=('01', '02'), one_run_subject='02', measure=False)
PYEOF
run "$SPLITROI" analyze "$TMP/one/study.ini" --no-report --no-group --quiet
expect_status 0 "a subject with one localizer run completes"
expect_err "subject 02 has 1 run of task 'tones': no cross-validated rows" "the one-run subject is named"
if grep -q "subject 02 has 1 run.*measured-task rows are still made" "$TMP/err"; then notok "the warning promises measured-task rows the study does not have"; else ok "no promise of measured-task rows without a measured task"; fi
[ -s "$TMP/one/results/sub-02/run.json" ] && [ "$(wc -l <"$TMP/one/results/sub-02/responses.csv")" -eq 1 ] && ok "the one-run subject's table has only the header" || notok "one-run subject's table wrong"
