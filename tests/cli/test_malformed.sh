# test_malformed.sh - inputs the mutation fuzzer (tests/py/fuzz_inputs.py) broke: each must give exit 1 and a message naming the file, never a crash.
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
if ! "$PY" -c 'import nibabel, numpy' 2>/dev/null; then
	echo "skip - malformed-input tests need nibabel and numpy in $PY"
	exit 0
fi
BASE=$TMP/base
"$SPLITROI" simulate --out "$BASE" --subjects 2 --grid small --volumes 50 --quiet ||
	{ notok "could not simulate the test study"; exit 1; }
F=data/sub-01/func
# fresh: a new copy of the valid study in $V
fresh() { rm -rf "$TMP/v" "$TMP/o"; cp -r "$BASE" "$TMP/v"; V=$TMP/v; }
# py CODE: runs python with numpy/nibabel in the study copy
py() { (cd "$V" && "$PY" -c "import numpy as np, nibabel as nib, gzip, struct, os, json; $1"); }
# both WHAT REGEX: check and analyze exit 1, and stderr matches REGEX (the file's name)
both() {
	run "$SPLITROI" check "$V/study.ini"
	expect_status 1 "check: $1"
	expect_err "$2" "check names the file: $1"
	run "$SPLITROI" analyze "$V/study.ini" --quiet --no-report --out "$TMP/o"
	expect_status 1 "analyze: $1"
	expect_err "$2" "analyze names the file: $1"
	if [ -d "$TMP/o" ] && find "$TMP/o" -name '.*.tmp.*' | grep -q .; then
		notok "analyze left temporary files after failing: $1"
	else
		ok "analyze left no temporary files: $1"
	fi
}

fresh
run "$SPLITROI" check "$V/study.ini"
expect_status 0 "the simulated study is valid"

# every parcel voxel 0: check said so, analyze fitted everything and failed in the
# group step without naming the image (and both sorted/searched a null array)
fresh
py "i = nib.load('parcels.nii.gz'); nib.save(nib.Nifti1Image(np.zeros(i.shape, np.int16), i.affine, i.header), 'parcels.nii.gz')"
both "all-zero parcel image" "parcels\.nii\.gz: no parcels \(every voxel is 0\)"

# RepetitionTime 1e308: check listed "TR 1e+308 s"; analyze failed deep in the design
# ("run of inf s is too long for the time grid") without naming any file
fresh
py "p = 'data/task-memory_bold.json'; d = json.load(open(p)); d['RepetitionTime'] = 1e308; json.dump(d, open(p, 'w'))"
both "RepetitionTime 1e308" "task-memory_bold\.json: RepetitionTime 1e\+308 s is not a plausible repetition time"
fresh
py "p = 'data/task-memory_bold.json'; d = json.load(open(p)); d['RepetitionTime'] = 2000; json.dump(d, open(p, 'w'))"
both "RepetitionTime in milliseconds" "task-memory_bold\.json: RepetitionTime 2000 s is not a plausible"

# 'inf' in a confound column: analyze stopped on it, check said "no problems found"
fresh
py "p = '$F/sub-01_task-tones_run-01_desc-confounds_timeseries.tsv'; L = open(p).read().split('\n'); c = L[3].split('\t'); c[0] = 'inf'; L[3] = '\t'.join(c); open(p, 'w').write('\n'.join(L))"
both "inf in a confound column" "run-01_desc-confounds_timeseries\.tsv: line 4, column 1 \(motion_tx\): 'inf' is not a number"

# a 1 MB line in an events file: libcsv grew its buffer 128 bytes at a time, so
# analyze under ASan took over 20 s to say so (a hang in the fuzzer's eyes)
fresh
py "p = '$F/sub-01_task-tones_run-03_events.tsv'; L = open(p).read().split('\n'); L.insert(1, 'x' * (1 << 20)); open(p, 'w').write('\n'.join(L))"
start=$(date +%s)
run timeout 60 "$SPLITROI" analyze "$V/study.ini" --quiet --no-report --out "$TMP/o"
expect_status 1 "analyze: a 1 MB events line"
expect_err "run-03_events\.tsv: line 2, column 1 \(onset\): 'xxxx" "the 1 MB line's file, line and column are named"
if [ $(($(date +%s) - start)) -le 15 ]; then ok "a 1 MB events line is rejected within 15 s"; else notok "a 1 MB events line took $(($(date +%s) - start)) s"; fi

# two finite factors of one condition that add up to inf: the effect was taken and
# then "not estimable" in every run, instead of a study-file error
fresh
sed -i 's/^effects = melody, scrambled,/effects = 1e308*melody + 1e308*melody, scrambled,/' "$V/study.ini"
both "effect weights that overflow" "study\.ini: line [0-9]+: effects: (the factors of 'melody' add up to more than the largest number|position 1: factor '1e308' is beyond)"

# lines ended by a carriage return alone (as old spreadsheet exports write them): libcsv
# ends a row at each, but the reader counted only line feeds, so every row was "line 1"
# (afl++ found it through the row-order check of tests/fuzz/fuzz_events.c)
fresh
py "p = '$F/sub-01_task-tones_run-02_events.tsv'; L = open(p).read().rstrip('\n').split('\n'); L[2] = '\t'.join(L[2].split('\t')[:1] + ['-1'] + L[2].split('\t')[2:]); open(p, 'w', newline='').write('\r'.join(L) + '\r')"
both "a negative duration on line 3 of a file with CR line ends" "run-02_events\.tsv: line 3, column 2 \(duration\): negative duration"
