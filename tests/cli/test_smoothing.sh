# test_smoothing.sh - smoothing_fwhm / fit --smoothing-fwhm: parsing, errors, records (the numbers: tests/py).
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
HERE=$(cd "$(dirname "$0")" && pwd)
if ! "$PY" -c 'import nibabel, numpy' 2>/dev/null; then
	echo "skip - smoothing tests need nibabel and numpy in $PY"
	exit 0
fi
V=$TMP/v
"$PY" "$HERE/mkstudy.py" "$V" || { notok "could not build the test study"; exit 1; }
RUN=$V/data/sub-01/func/sub-01_task-tones_run-1_bold.nii.gz
line=$(grep -n '^drift_cutoff' "$V/study.ini" | cut -d: -f1)

# ---- the study key ----
sed -i "s/^drift_cutoff = 128/drift_cutoff = 128\nsmoothing_fwhm = 5mm/" "$V/study.ini"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "smoothing_fwhm = 5mm is refused"
expect_err "study.ini: line $((line + 1)): smoothing_fwhm: '5mm' is not a FWHM in mm" \
	"the message names file, line and key"
sed -i "s/^smoothing_fwhm = 5mm/smoothing_fwhm = -2/" "$V/study.ini"
run "$SPLITROI" check "$V/study.ini"
expect_status 1 "a negative FWHM is refused"
sed -i "s/^smoothing_fwhm = -2/smoothing_fwhm = none/" "$V/study.ini"
run "$SPLITROI" check "$V/study.ini"
expect_status 0 "smoothing_fwhm = none is accepted"

# ---- fit: option values, fit.json, the maps change ----
run "$SPLITROI" fit "$RUN" --out "$TMP/f" --smoothing-fwhm wide --quiet
expect_status 2 "--smoothing-fwhm wide is bad usage"
expect_err "smoothing-fwhm" "the message names the option"
run "$SPLITROI" fit "$RUN" --out "$TMP/f0" --quiet --threads 1
expect_status 0 "unsmoothed fit"
run "$SPLITROI" fit "$RUN" --out "$TMP/f6" --smoothing-fwhm 6 --quiet --threads 1
expect_status 0 "fit --smoothing-fwhm 6"
if grep -q '"smoothing_fwhm": 6' "$TMP/f6/fit.json" && grep -q '"smoothing_fwhm": "none"' "$TMP/f0/fit.json"; then
	ok "fit.json records the FWHM (6, and none without the option)"
else
	notok "fit.json records the FWHM: $(grep smoothing "$TMP/f6/fit.json" "$TMP/f0/fit.json")"
fi
# the smoothed effect map is smoother: its voxel-to-voxel differences shrink
"$PY" - "$TMP/f0" "$TMP/f6" <<'PYEOF' >"$TMP/out" 2>&1
import sys, glob, numpy as np, nibabel as nib
a, b = (np.asanyarray(nib.load(glob.glob(d + "/*_desc-melody_tstat.nii.gz")[0]).dataobj) for d in sys.argv[1:])
ra, rb = (np.nanstd(np.diff(x, axis=0)) for x in (a, b))
print("rough", ra, rb)
sys.exit(0 if rb < 0.7 * ra else 1)
PYEOF
rc=$?
expect_status 0 "smoothing makes the t map smoother (neighbour differences: $(cat "$TMP/out"))"
run "$SPLITROI" fit "$RUN" --out "$TMP/f6b" --smoothing-fwhm 6 --quiet --threads 3
if cmp -s "$TMP/f6/sub-01_task-tones_run-1_desc-melody_tstat.nii.gz" "$TMP/f6b/sub-01_task-tones_run-1_desc-melody_tstat.nii.gz"; then
	ok "smoothed maps do not depend on the thread count"
else
	notok "smoothed maps do not depend on the thread count"
fi

# ---- voxel sizes of 0 cannot be smoothed: an error naming the file ----
"$PY" -c "
import nibabel as nib, struct, sys
nib.save(nib.load(sys.argv[1]), sys.argv[2])
with open(sys.argv[2], 'r+b') as f:  # pixdim[2] = 0 (byte 84); nibabel would repair it on save
    f.seek(84); f.write(struct.pack('<f', 0.0))" "$RUN" "$TMP/flat_bold.nii"
cp "${RUN%_bold.nii.gz}_events.tsv" "$TMP/flat_events.tsv"
run "$SPLITROI" fit "$TMP/flat_bold.nii" --out "$TMP/f9" --smoothing-fwhm 6 --quiet --tr 2
expect_status 1 "a header without voxel sizes cannot be smoothed"
expect_err "flat_bold.nii: smoothing needs positive voxel sizes" "the message names the file"

# ---- analyze: run.json and the subject page say the FWHM ----
sed -i "s/^smoothing_fwhm = none/smoothing_fwhm = 4.5/" "$V/study.ini"
run "$SPLITROI" analyze "$V/study.ini" --quiet --jobs 1
expect_status 0 "analyze with smoothing_fwhm = 4.5"
if grep -q '"smoothing_fwhm_mm": 4.5' "$V/results/sub-01/run.json"; then
	ok "run.json records smoothing_fwhm_mm 4.5"
else
	notok "run.json records smoothing_fwhm_mm 4.5: $(grep -o '"smoothing[^,]*' "$V/results/sub-01/run.json")"
fi
if [ -f "$V/results/sub-01/report.html" ]; then
	if grep -q "Gaussian of 4.5 mm FWHM" "$V/results/sub-01/report.html"; then
		ok "the subject report says 4.5 mm FWHM"
	else
		notok "the subject report says 4.5 mm FWHM"
	fi
else
	notok "analyze wrote the subject report $V/results/sub-01/report.html"
fi
