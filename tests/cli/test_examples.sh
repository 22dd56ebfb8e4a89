# test_examples.sh - each study file in examples/ is accepted by `splitroi check` on data the simulator makes for it.
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
ROOT=$(cd "$(dirname "$0")/../.." && pwd)

# example file, then the simulate options that make its data
examples="visual_odd_even.ini:--scenario=visual
numbers_leave_one_out.ini:--scenario=numbers
motor_top_voxels_resampled.ini:--scenario=motor --parcel-grid=fine
auditory_two_localizers.ini:--scenario=auditory"

n=0
while IFS=: read -r file args; do
	n=$((n + 1))
	dir="$TMP/ex$n"
	[ -f "$ROOT/examples/$file" ] && ok "examples/$file exists" || { notok "examples/$file missing"; continue; }
	# shellcheck disable=SC2086
	run "$SPLITROI" simulate --out "$dir" --subjects 2 --volumes 50 --quiet $args
	expect_status 0 "simulate $args"
	cp "$ROOT/examples/$file" "$dir/"
	# every task and condition the example names exists in the simulated events
	missing=""
	for task in $(sed -n 's/^task *= *\([A-Za-z0-9]*\).*/\1/p' "$dir/$file"); do
		ls "$dir"/data/sub-01/func/sub-01_task-"$task"_run-01_events.tsv >/dev/null 2>&1 || missing="$missing $task"
	done
	[ -z "$missing" ] && ok "$file: its tasks exist in the simulated data" || notok "$file: tasks missing:$missing"
	run "$SPLITROI" check "$dir/$file"
	expect_status 0 "splitroi check accepts examples/$file"
done <<<"$examples"

# the fine parcel grid: nearest resampling lands every data voxel on a fine voxel of the same label
run "$SPLITROI" simulate --out "$TMP/same" --subjects 1 --volumes 50 --quiet --scenario motor
"$PY" - "$TMP/ex3/parcels.nii.gz" "$TMP/same/parcels.nii.gz" <<'PYEOF'
import sys
import numpy as np
import nibabel as nib
fine, same = (nib.load(p) for p in sys.argv[1:3])
ok = lambda c, n: print(("ok - " if c else "not ok - ") + n)
ok(fine.shape == tuple(2 * s for s in same.shape), "fine parcel grid has twice the voxels per axis %s" % (fine.shape,))
# world -> fine voxel for every data voxel centre, nearest neighbour
ijk = np.indices(same.shape).reshape(3, -1)
xyz = same.affine[:3, :3] @ ijk + same.affine[:3, 3:4]
f = np.linalg.inv(fine.affine)
fijk = np.rint(f[:3, :3] @ xyz + f[:3, 3:4]).astype(int)
lab = np.asarray(fine.dataobj)[tuple(fijk)]
ok(np.array_equal(lab, np.asarray(same.dataobj)[tuple(ijk)]),
   "nearest resampling of the fine parcels reproduces the data-grid parcels")
PYEOF
