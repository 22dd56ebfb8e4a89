# test_simulate.sh - `splitroi simulate`: the dataset's files, reproducibility, int16 storage, events, bad options.
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
ROOT=$(cd "$(dirname "$0")/../.." && pwd)

# small runs keep this quick (also under the sanitizers): 2 subjects, 50 volumes (100 s)
SIM="$SPLITROI simulate --subjects 2 --volumes 50 --quiet"

run $SIM --out "$TMP/a" --seed 5
expect_status 0 "simulate writes a study"

missing=""
for f in study.ini truth.csv parcels.nii.gz parcels.tsv data/dataset_description.json \
	data/participants.tsv data/README data/.bidsignore data/task-tones_bold.json data/task-memory_bold.json; do
	[ -s "$TMP/a/$f" ] || missing="$missing $f"
done
for s in 01 02; do
	for r in 01 02 03 04; do
		for x in bold.nii.gz events.tsv desc-confounds_timeseries.tsv; do
			f=data/sub-$s/func/sub-${s}_task-tones_run-${r}_$x
			[ -s "$TMP/a/$f" ] || missing="$missing $f"
		done
	done
	for r in 01 02; do
		for x in bold.nii.gz events.tsv desc-confounds_timeseries.tsv; do
			f=data/sub-$s/func/sub-${s}_task-memory_run-${r}_$x
			[ -s "$TMP/a/$f" ] || missing="$missing $f"
		done
	done
done
if [ -z "$missing" ]; then ok "every expected file is there"; else notok "missing:$missing"; fi
if [ -z "$(find "$TMP/a" -name '*.tmp*' -o -name '.*tmp*' | head -1)" ]; then
	ok "no temporary files left behind"
else
	notok "temporary files left: $(find "$TMP/a" -name '*tmp*' | head -3)"
fi
extra=$(find "$TMP/a/data/sub-03" 2>/dev/null | head -1)
[ -z "$extra" ] && ok "no third subject when --subjects 2" || notok "unexpected $extra"

run $SIM --out "$TMP/b" --seed 5
if diff -r "$TMP/a" "$TMP/b" >/dev/null; then ok "same seed gives byte-identical outputs"; else
	notok "same seed differs: $(diff -rq "$TMP/a" "$TMP/b" | head -3)"; fi
run $SIM --out "$TMP/c" --seed 6
if cmp -s "$TMP/a/data/sub-01/func/sub-01_task-tones_run-01_bold.nii.gz" \
	"$TMP/c/data/sub-01/func/sub-01_task-tones_run-01_bold.nii.gz"; then
	notok "a different seed gives the same run"
else
	ok "a different seed gives different data"
fi
if cmp -s "$TMP/a/truth.csv" "$TMP/c/truth.csv"; then notok "a different seed gives the same truth"; else
	ok "a different seed gives a different truth"; fi
if cmp -s "$TMP/a/parcels.nii.gz" "$TMP/c/parcels.nii.gz"; then ok "parcels do not depend on the seed"; else
	notok "parcels changed with the seed"; fi

run $SIM --out "$TMP/i" --seed 5 --int16
expect_status 0 "--int16 run"
run $SIM --out "$TMP/n" --seed 5 --null
expect_status 0 "--null run"

# read everything back with nibabel and the csv/json modules
cat >"$TMP/check.py" <<'EOF'
import csv, json, math, os, sys
import numpy as np
import nibabel as nib

a, i16, null, masks = sys.argv[1:5]
def ok(c, name):
    print(("ok - " if c else "not ok - ") + name)

def tsv(p):
    with open(p, newline="") as f:
        return list(csv.DictReader(f, delimiter="\t"))

d = json.load(open(os.path.join(a, "data", "dataset_description.json")))
ok(d.get("BIDSVersion") == "1.8.0" and d.get("DatasetType") == "raw" and d.get("Name"),
   "dataset_description.json has Name, BIDSVersion 1.8.0, DatasetType raw")
for task in ("tones", "memory"):
    s = json.load(open(os.path.join(a, "data", "task-%s_bold.json" % task)))
    ok(s.get("TaskName") == task and s.get("RepetitionTime") == 2.0, "task-%s_bold.json names task and TR" % task)
p = tsv(os.path.join(a, "data", "participants.tsv"))
ok([r["participant_id"] for r in p] == ["sub-01", "sub-02"], "participants.tsv lists both subjects")

func = os.path.join(a, "data", "sub-01", "func")
img = nib.load(os.path.join(func, "sub-01_task-tones_run-01_bold.nii.gz"))
ok(img.shape == (24, 28, 20, 50), "run is 24x28x20 with 50 volumes (%s)" % (img.shape,))
ok(abs(float(img.header["pixdim"][4]) - 2.0) < 1e-6, "pixdim[4] is the TR")
ok(img.get_data_dtype() == np.float32, "float32 by default")
y = np.asarray(img.dataobj, dtype=float)
ok(np.all(y[0, 0, 0, :] == 0) and np.all(y[-1, -1, -1, :] == 0), "background corners are exactly zero")
mean = y.mean(axis=3)
c = mean[12, 14, 10]
ok(500 <= c <= 1000, "a central brain voxel's mean is within 500-1000 (%.1f)" % c)
sd = y.std(axis=3)
ok(np.all(sd[mean > 0] > 0), "every voxel of the head varies over time")
par = nib.load(os.path.join(a, "parcels.nii.gz"))
ok(np.allclose(par.affine, img.affine) and par.shape == img.shape[:3], "parcels share the runs' grid")
lab = np.asarray(par.dataobj)
ok(set(np.unique(lab)) == {0, 1, 2, 3, 4}, "parcels are labelled 1-4")
ok(np.all(mean[lab > 0] > 400), "parcels lie inside the brain")
names = tsv(os.path.join(a, "parcels.tsv"))
ok([r["name"] for r in names] == ["left_auditory", "right_auditory", "frontal_pitch", "occipital_control"]
   and [r["index"] for r in names] == ["1", "2", "3", "4"], "parcels.tsv has index and name")

m = nib.load(os.path.join(masks, "auditory_parcels.nii.gz"))
ok(m.shape == par.shape and np.allclose(m.affine, par.affine), "masks/auditory_parcels.nii.gz has the small grid")
ok(np.array_equal(np.asarray(m.dataobj), lab), "masks/auditory_parcels.nii.gz has the same labels")
ok(open(os.path.join(masks, "auditory_parcels.tsv")).read() == open(os.path.join(a, "parcels.tsv")).read(),
   "masks/auditory_parcels.tsv matches")

bad = []
for task, conds in (("tones", {"melody", "scrambled"}), ("memory", {"familiar", "novel"})):
    runs = 4 if task == "tones" else 2
    for r in range(1, runs + 1):
        base = os.path.join(func, "sub-01_task-%s_run-%02d" % (task, r))
        ev = tsv(base + "_events.tsv")
        if list(ev[0].keys()) != ["onset", "duration", "trial_type"]:
            bad.append("columns")
        on = [float(e["onset"]) for e in ev]
        du = [float(e["duration"]) for e in ev]
        if sorted(on) != on or any(o < 0 or o + d > 100 for o, d in zip(on, du)):
            bad.append("%s run %d timing" % (task, r))
        if {e["trial_type"] for e in ev} != conds:
            bad.append("%s run %d conditions" % (task, r))
        conf = tsv(base + "_desc-confounds_timeseries.tsv")
        if len(conf) != 50 or len(conf[0]) != 6 or not all(math.isfinite(float(v)) for row in conf for v in row.values()):
            bad.append("%s run %d confounds" % (task, r))
ok(not bad, "events have onset, duration, trial_type in order; confounds have 6 columns of 50 rows %s" % bad)
first = [tsv(os.path.join(func, "sub-01_task-tones_run-%02d_events.tsv" % r))[0]["trial_type"] for r in (1, 2)]
ok(first[0] != first[1], "block order alternates between runs (%s)" % first)
on1 = [e["onset"] for e in tsv(os.path.join(func, "sub-01_task-tones_run-01_events.tsv"))]
on3 = [e["onset"] for e in tsv(os.path.join(func, "sub-01_task-tones_run-03_events.tsv"))]
ok(on1 != on3, "onsets are jittered per run")

im16 = nib.load(os.path.join(i16, "data", "sub-01", "func", "sub-01_task-tones_run-01_bold.nii.gz"))
ok(im16.get_data_dtype() == np.int16, "--int16 stores int16")
slope = float(im16.dataobj.slope)  # nibabel moves the header scaling onto dataobj
ok(math.isfinite(slope) and 0 < slope < 1, "--int16 sets scl_slope (%g)" % slope)
y16 = np.asarray(im16.dataobj, dtype=float)
err = np.abs(y16 - y).max()
ok(err <= slope / 2 + 1e-3, "int16 values equal the float ones within half a step (%.4g <= %.4g)" % (err, slope / 2))

with open(os.path.join(a, "truth.csv"), newline="") as f:
    rows = list(csv.DictReader(f))
ok(list(rows[0].keys())[:5] == ["subject", "parcel", "task", "effect", "value"], "truth.csv columns start subject, parcel, task, effect, value")
ok(len(rows) == 2 * 4 * 6, "truth.csv has a row per subject, parcel and effect (%d)" % len(rows))
ctrl = [float(r["value"]) for r in rows if r["parcel"] == "occipital_control"]
ok(ctrl and all(v == 0 for v in ctrl), "the control parcel's truth is zero")
v = {(r["subject"], r["parcel"], r["effect"]): float(r["value"]) for r in rows}
ok(abs(v[("sub-01", "left_auditory", "melody-scrambled")] - (v[("sub-01", "left_auditory", "melody")] - v[("sub-01", "left_auditory", "scrambled")])) < 1e-8,
   "a contrast's truth is the difference of its conditions")
ok(v[("sub-01", "left_auditory", "melody")] > v[("sub-01", "left_auditory", "scrambled")] > 0, "melody > scrambled > 0 in auditory parcels")
with open(os.path.join(null, "truth.csv"), newline="") as f:
    ok(all(float(r["value"]) == 0 for r in csv.DictReader(f)), "--null: every true effect is zero")
EOF
"$PY" "$TMP/check.py" "$TMP/a" "$TMP/i" "$TMP/n" "$ROOT/masks"

# the study file names what is on disk
grep -q '^confounds_suffix = _desc-confounds_timeseries.tsv' "$TMP/a/study.ini" && ok "study.ini names the confounds suffix" || notok "study.ini lacks the confounds suffix"
grep -q '^\[measure memory\]' "$TMP/a/study.ini" && ok "study.ini measures the memory task" || notok "study.ini lacks [measure memory]"

# usage errors: exit 2 with a suggestion
run "$SPLITROI" simulate --out "$TMP/x" --subjets 3
expect_status 2 "misspelt option"
expect_err "did you mean '--subjects'" "misspelt option gets a suggestion"
run "$SPLITROI" simulate --out "$TMP/x" --grid smal
expect_status 2 "unknown grid"
expect_err "did you mean 'small'" "unknown grid gets a suggestion"
run "$SPLITROI" simulate --out "$TMP/x" --scenario visul
expect_status 2 "unknown scenario"
expect_err "did you mean 'visual'" "unknown scenario gets a suggestion"
run "$SPLITROI" simulate --subjects 2
expect_status 2 "--out is required"
expect_err "--out DIR is required" "missing --out is named"
run "$SPLITROI" simulate --out "$TMP/x" --noise -1
expect_status 2 "negative noise"
run "$SPLITROI" simulate --out "$TMP/x" --ar1 1
expect_status 2 "ar1 of 1"
run "$SPLITROI" simulate --out "$TMP/x" --volumes 30
expect_status 2 "too short runs"
expect_err "at least 100 s" "too short runs explained"
[ ! -e "$TMP/x" ] && ok "usage errors create nothing" || notok "usage errors left $TMP/x"
run "$SPLITROI" simulate --out "$TMP/a" --subjects 1
expect_status 1 "a non-empty folder is refused"
expect_err "not empty" "refusal says why"
run "$SPLITROI" help simulate
expect_status 0 "help simulate"
expect_out "truth.csv" "help explains truth.csv"

# --runs, --tr, --volumes and --scenario shape what is written
run "$SPLITROI" simulate --out "$TMP/o" --subjects 1 --runs 2 --tr 2.5 --volumes 44 --scenario visual --quiet
expect_status 0 "simulate with --runs 2 --tr 2.5 --volumes 44 --scenario visual"
n=$(ls "$TMP/o/data/sub-01/func/" | grep -c '_task-viewing_run-0[0-9]_bold.nii.gz')
[ "$n" -eq 2 ] && ok "--runs 2 writes two localizer runs" || notok "--runs 2 wrote $n runs"
ls "$TMP/o/data/sub-01/func/" | grep -q memory && notok "the visual scenario has no measured task" || ok "the visual scenario has no measured task"
"$PY" - "$TMP/o" <<'PYEOF'
import json, sys, nibabel as nib
d = sys.argv[1]
ok = lambda c, n: print(("ok - " if c else "not ok - ") + n)
j = json.load(open(d + "/data/task-viewing_bold.json"))
ok(j["RepetitionTime"] == 2.5 and j["TaskName"] == "viewing", "sidecar has TR 2.5 and task viewing")
im = nib.load(d + "/data/sub-01/func/sub-01_task-viewing_run-01_bold.nii.gz")
ok(im.shape[3] == 44 and abs(im.header["pixdim"][4] - 2.5) < 1e-6, "44 volumes, pixdim[4] 2.5")
PYEOF
grep -q '^contrast = scenes - objects' "$TMP/o/study.ini" && ok "study.ini has the scenario's contrast" || notok "study.ini contrast"

# the study file it writes is one the study checker accepts
run "$SPLITROI" check "$TMP/a/study.ini"
expect_status 0 "splitroi check accepts the simulated study.ini"
expect_out "no problems found" "check finds no problem in the simulated study"

# --two-localizers: the study file names both tasks as localizers, each measured in the other's fROIs
run "$SPLITROI" simulate --out "$TMP/two" --subjects 2 --volumes 50 --quiet --two-localizers
expect_status 0 "simulate --two-localizers"
if grep -q '^\[localizer tones\]' "$TMP/two/study.ini" && grep -q '^\[localizer memory\]' "$TMP/two/study.ini" &&
	grep -q '^localizers = memory' "$TMP/two/study.ini" && ! grep -q '^\[localizer\]' "$TMP/two/study.ini"; then
	ok "the two-localizer study.ini has both named localizers and the cross measures"
else
	notok "the two-localizer study.ini: $(head -c 600 "$TMP/two/study.ini")"
fi
run "$SPLITROI" check "$TMP/two/study.ini"
expect_status 0 "check accepts the two-localizer study"
expect_out "localizer memory" "check lists the second localizer"
run "$SPLITROI" simulate --out "$TMP/two-visual" --scenario visual --two-localizers --quiet
expect_status 2 "--two-localizers with a one-task scenario is a usage error"
expect_err "needs a scenario with a second task" "and says why"
