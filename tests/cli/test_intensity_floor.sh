# test_intensity_floor.sh - one near-zero voxel must not take over an fROI (METHODS.md section 3's floor).
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
HERE=$(cd "$(dirname "$0")/.." && pwd)
"$PY" "$HERE/py/make_study.py" "$TMP/s" basic >/dev/null || { notok "make_study.py failed"; exit 1; }
S=$TMP/s
cd "$S" || exit 1
# sub-02: one left_core voxel with a strong melody response is given a mean of 0.01 in every run
# (x - mean(x) + 0.01: its t is unchanged, so it is selected); 15 of right_core's 100 voxels get
# a mean of 50, positive but far below 10% of the 98th-percentile mean (~1190)
"$PY" - "$S" <<'PYEOF' || { notok "could not make the near-zero voxels"; exit 1; }
import glob, sys, os
import numpy as np, nibabel as nib
sys.path.insert(0, os.path.join(os.environ.get('HERE', ''), 'py'))
d = sys.argv[1]
lab = np.asarray(nib.load(d + '/parcels.nii.gz').dataobj).reshape(-1, order='F')
p1 = np.flatnonzero(lab == 1); p2 = np.flatnonzero(lab == 2)
for f in sorted(glob.glob(d + '/data/sub-02/func/*_bold.nii.gz')):
    img = nib.load(f)
    y = np.asarray(img.get_fdata(), dtype=np.float64)
    sh = y.shape
    y = y.reshape(-1, sh[3], order='F')
    T = sh[3]
    ev = [l.split('\t') for l in open(f.replace('_bold.nii.gz', '_events.tsv')).read().split('\n')[1:] if l]
    box = np.zeros(T)
    for on, du, c, *_ in ev:
        if c == 'melody':
            k0 = int(float(on) / 2.0); k1 = int((float(on) + float(du)) / 2.0)
            box[k0 + 2:min(T, k1 + 3)] = 1.0
    v = p1[3]
    x = y[v] + 40.0 * box                     # strongly selective, so surely in the fROI
    y[v] = x - x.mean() + 0.01
    for w in p2[:15]:
        y[w] = y[w] - y[w].mean() + 50.0
    out = nib.Nifti1Image(y.reshape(sh, order='F').astype(np.float32), img.affine, img.header)
    out.set_data_dtype(np.float32)
    out.header['scl_slope'] = 1; out.header['scl_inter'] = 0
    nib.save(out, f)
PYEOF
run "$SPLITROI" analyze study.ini --no-report
expect_status 0 "the study with near-zero voxels runs"
"$PY" - results/responses.csv <<'PYEOF' && ok "near-zero voxel: sub-02 left_core melody stays a few percent, not thousands" || notok "near-zero voxel took over the fROI"
import csv, sys
rows = [r for r in csv.DictReader(open(sys.argv[1])) if r['subject'] in ('02', 'sub-02') and r['parcel'] == 'left_core'
        and r['split'] == 'odd-even:mean' and r['effect'] == 'melody']
assert len(rows) == 1, rows
v = float(rows[0]['value'])
assert 0.5 < v < 10, v
PYEOF
"$PY" - results/sub-02/run.json <<'PYEOF' && ok "near-zero voxel: run.json counts the voxels below the intensity floor per run" || notok "run.json lacks the per-run counts"
import json, sys
r = json.load(open(sys.argv[1]))
runs = [x for t in r['inputs'].values() for x in t]
assert len(runs) == 6
for x in runs:
    lo = x['voxels']['left_out']
    assert lo['intensity_floor'] == 16, lo          # 1 + 15 voxels
    assert lo['nonpositive_mean'] == 100, lo        # the zero top slice
    assert 100 < x['voxels']['intensity_floor'] < 140, x['voxels']
PYEOF
expect_out "sub-02 +tones +1 +800 +0 +0 +100 +0 +16" "near-zero voxel: the summary lists what each rule left out per run"
expect_err "warning: subject 02, parcel right_core: 15 of 100 voxels .*intensity_floor 15" "near-zero voxel: a parcel losing more than a tenth of its voxels gets a warning"
grep -q "subject 02, parcel left_core:" "$TMP/err" && notok "near-zero voxel: warning for a parcel losing 1 of 100" || ok "near-zero voxel: no warning for a parcel losing 1 voxel of 100"
