# test_parcels.sh - `splitroi parcels`: usage and input errors, --from, and the shipped demo parcels reproduced exactly.
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
ROOT=$(cd "$(dirname "$0")/../.." && pwd)

run "$SPLITROI" parcels --out "$TMP/x"
expect_status 2 "no study, --spheres or --from"
expect_err "give a study file, --spheres" "names the three ways in"
run "$SPLITROI" parcels --spheres a.tsv --from b.nii.gz --out "$TMP/x"
expect_status 2 "two modes at once"
run "$SPLITROI" parcels --spheres a.tsv --radius 5 --out "$TMP/x"
expect_status 2 "--spheres without --grid"
expect_err "needs --grid" "says what --spheres needs"
run "$SPLITROI" parcels --from "$ROOT/masks/auditory_parcels.nii.gz" --keep 1 --fwhm 4 --out "$TMP/x"
expect_status 2 "a study option with --from"
expect_err "--fwhm does not apply" "names the option that does not apply"
run "$SPLITROI" parcels "$TMP/none.ini" --p 0.001 --t 3 --out "$TMP/x"
expect_status 2 "--p and --t together"
run "$SPLITROI" parcels "$TMP/none.ini" --connectivity 18 --out "$TMP/x"
expect_status 2 "connectivity 18"
run "$SPLITROI" parcels "$TMP/none.ini" --out "$TMP/x"
expect_status 1 "a missing study file"
expect_err "none.ini" "the message names the study file"

# --from: chosen labels, names from the table, unknown labels refused
run "$SPLITROI" parcels --from "$ROOT/masks/auditory_parcels.nii.gz" --keep 3,1 \
	--names "$ROOT/masks/auditory_parcels.tsv" --out "$TMP/from" --quiet
expect_status 0 "--from --keep 3,1"
if [ "$(cut -f1,2 "$TMP/from/parcels.tsv" | tr '\t\n' ' ')" = "index name 1 left_auditory 3 frontal_pitch " ]; then
	ok "--from keeps labels 1 and 3 with their names, in label order"
else
	notok "--from table: $(cat "$TMP/from/parcels.tsv")"
fi
if "$PY" - "$ROOT/masks/auditory_parcels.nii.gz" "$TMP/from/parcels.nii.gz" <<'PYEOF'
import sys
import nibabel as nib
import numpy as np
a = np.asanyarray(nib.load(sys.argv[1]).dataobj)
b = np.asanyarray(nib.load(sys.argv[2]).dataobj)
want = np.where(np.isin(a, [1, 3]), a, 0)
sys.exit(0 if np.array_equal(b, want) else 1)
PYEOF
then ok "--from image: labels 1 and 3 as in the source, all else 0 (nibabel)"; else notok "--from image differs"; fi
run "$SPLITROI" parcels --from "$ROOT/masks/auditory_parcels.nii.gz" --keep 2,9 --out "$TMP/from9"
expect_status 1 "--keep with a label the image lacks"
expect_err "label 9 is not in" "names the missing label"
[ ! -e "$TMP/from9/parcels.nii.gz" ] && ok "no output after the error" || notok "output written despite the error"
run "$SPLITROI" parcels --from "$ROOT/masks/auditory_parcels.nii.gz" --keep 2,x --out "$TMP/fromx"
expect_status 2 "--keep 2,x"

# spheres: a bad coordinate cell names file, line and column
printf 'name\tx\ty\tz\nleft\t-40\t-20\tabc\n' >"$TMP/bad.tsv"
run "$SPLITROI" parcels --spheres "$TMP/bad.tsv" --grid "$ROOT/masks/auditory_parcels.nii.gz" --radius 6 --out "$TMP/s"
expect_status 1 "a coordinate that is not a number"
expect_err "bad.tsv: line 2, column 4" "names file, line and column"
printf 'name\tx\ty\tz\nfar\t900\t0\t0\n' >"$TMP/far.tsv"
run "$SPLITROI" parcels --spheres "$TMP/far.tsv" --grid "$ROOT/masks/auditory_parcels.nii.gz" --radius 6 --out "$TMP/s"
expect_status 1 "a sphere outside the grid"
expect_err "holds no voxel" "says the sphere is empty"

# the shipped demo parcels: the demo study (tools/demo.sh: simulate --subjects 8 --grid small
# --seed 3, as tools/demo.sh) through `parcels` with the defaults. Regenerate after a deliberate change with:
#   splitroi simulate --out D --subjects 8 --grid small --seed 3 --quiet
#   splitroi parcels D/study.ini --out P --quiet
#   cp P/parcels.nii.gz masks/demo_group_parcels.nii.gz; cp P/parcels.tsv masks/demo_group_parcels.tsv
if [ "${SPLITROI_TEST_LEVEL:-full}" = quick ]; then
	echo "skip - demo parcels reproduction (quick level: 8 subjects are slow under the sanitizers)"
else
	run "$SPLITROI" simulate --out "$TMP/demo" --subjects 8 --grid small --seed 3 --quiet
	expect_status 0 "simulate the demo study"
	run "$SPLITROI" parcels "$TMP/demo/study.ini" --out "$TMP/demo/gp" --leave-one-out --quiet
	expect_status 0 "parcels from the demo study, with leave-one-out sets"
	if cmp -s "$TMP/demo/gp/parcels.tsv" "$ROOT/masks/demo_group_parcels.tsv"; then
		ok "parcels.tsv equals masks/demo_group_parcels.tsv"
	else
		notok "parcels.tsv differs: $(diff "$TMP/demo/gp/parcels.tsv" "$ROOT/masks/demo_group_parcels.tsv" | head -5)"
	fi
	if "$PY" - "$TMP/demo/gp/parcels.nii.gz" "$ROOT/masks/demo_group_parcels.nii.gz" "$TMP/demo/parcels.nii.gz" <<'PYEOF'
import sys
import nibabel as nib
import numpy as np
a, b, truth = (nib.load(p) for p in sys.argv[1:4])
same = np.array_equal(np.asanyarray(a.dataobj), np.asanyarray(b.dataobj)) and np.allclose(a.affine, b.affine)
sys.exit(0 if same and a.get_data_dtype() == np.int32 else 1)
PYEOF
	then ok "parcels.nii.gz equals masks/demo_group_parcels.nii.gz voxel for voxel (int32)"; else notok "demo parcels image differs"; fi
	n=$(ls -d "$TMP/demo/gp"/without-sub-* 2>/dev/null | wc -l)
	[ "$n" -eq 8 ] && ok "eight leave-one-out sets" || notok "$n leave-one-out sets, wanted 8"
	lack=""
	for f in parcels.nii.gz parcels.tsv overlap.nii.gz overlap_smoothed.nii.gz; do
		[ -s "$TMP/demo/gp/without-sub-03/$f" ] || lack="$lack $f"
	done
	[ -z "$lack" ] && ok "without-sub-03 holds parcels, table and overlap maps" || notok "without-sub-03 lacks$lack"
fi

# a study with no parcels yet: make them with one command, then analyze with them
if [ "${SPLITROI_TEST_LEVEL:-full}" = quick ]; then
	echo "skip - parcels-first study at quick level"
else
	run "$SPLITROI" simulate --out "$TMP/np" --subjects 4 --grid small --seed 5 --quiet
	sed -e 's|^image = .*|image = made/parcels.nii.gz|' -e 's|^names = .*|names = made/parcels.tsv|' "$TMP/np/study.ini" >"$TMP/np/first.ini"
	run "$SPLITROI" analyze "$TMP/np/first.ini" --quiet
	expect_status 1 "analyze refuses a study whose parcels do not exist yet"
	expect_err "made/parcels.nii.gz.*does not exist" "the missing parcels are named"
	run "$SPLITROI" parcels "$TMP/np/first.ini" --out "$TMP/np/made" --quiet
	expect_status 0 "parcels accepts a study whose parcels do not exist yet"
	run "$SPLITROI" analyze "$TMP/np/first.ini" --quiet --no-report
	expect_status 0 "analyze runs with the parcels just made"
	[ -s "$TMP/np/results/group.csv" ] && ok "group table from the new parcels" || notok "no group table from the new parcels"
fi
