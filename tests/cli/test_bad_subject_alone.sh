# test_bad_subject_alone.sh - a tiny file whose header claims a huge image fails its subject
# alone with a clear error (no out-of-memory exit): the others complete, the group tables are
# written and marked incomplete, exit 1. Grids are checked before any fitting.
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
HERE=$(cd "$(dirname "$0")/.." && pwd)
"$PY" "$HERE/py/make_study.py" "$TMP/s" basic >/dev/null || { notok "make_study.py failed"; exit 1; }
S=$TMP/s
cd "$S" || exit 1
BAD=data/sub-02/func/sub-02_task-tones_run-03_bold.nii.gz
"$PY" - "$BAD" <<'PYEOF' || { notok "could not write the header bomb"; exit 1; }
import sys, gzip, numpy as np, nibabel as nib
h = nib.Nifti1Header(); h.set_data_dtype(np.int8); h.set_data_shape((32767, 32767, 32767, 80))
h['pixdim'][4] = 2.0; h['vox_offset'] = 352
open(sys.argv[1], 'wb').write(gzip.compress(h.binaryblock + b'\0' * 4))
PYEOF
run "$SPLITROI" check study.ini
expect_status 1 "header bomb: check fails"
grep -q "out of memory" "$TMP/err" && notok "header bomb: check ran out of memory" || ok "header bomb: check does not run out of memory"
expect_err "sub-02_task-tones_run-03_bold.nii.gz: .*(claims|larger than)" "header bomb: check names the file and says what is wrong"
run "$SPLITROI" analyze study.ini --no-report
expect_status 1 "header bomb: analyze exits 1"
grep -q "out of memory" "$TMP/err" && notok "header bomb: analyze ran out of memory" || ok "header bomb: analyze does not run out of memory"
expect_err "sub-02 failed: .*sub-02_task-tones_run-03_bold.nii.gz" "header bomb: the failed subject and file are named"
[ -s results/sub-01/run.json ] && [ -s results/sub-01/responses.csv ] && ok "header bomb: the healthy subject completes" || notok "header bomb: the healthy subject has no outputs"
"$PY" - results <<'PYEOF' && ok "header bomb: group tables written for the healthy subject and marked incomplete" || notok "header bomb: group tables missing or not marked incomplete"
import csv, sys, os
d = sys.argv[1]
rows = list(csv.DictReader(open(d + '/responses.csv')))
assert rows and {r['subject'] for r in rows} == {'sub-01'}, {r['subject'] for r in rows}
g = open(d + '/group.csv').read()
assert 'incomplete' in g, g[:300]
subs = {r['subject']: r['status'] for r in csv.DictReader(open(d + '/group_subjects.csv'))}
assert subs.get('sub-01') == 'used' and subs.get('sub-02') == 'missing', subs
PYEOF

# a gzip bomb: a small .nii.gz that inflates to far more than the deflate format allows for
# its size is refused from the header (the data would be read and allocated otherwise)
"$PY" - data/sub-02/func/big.nii.gz <<'PYEOF'
import sys, gzip, numpy as np, nibabel as nib
h = nib.Nifti1Header(); h.set_data_dtype(np.float32); h.set_data_shape((400, 400, 400, 20))
h['pixdim'][4] = 2.0; h['vox_offset'] = 352
open(sys.argv[1], 'wb').write(gzip.compress(h.binaryblock + b'\0' * 4 + b'\0' * (2 << 20)))
PYEOF
run "$SPLITROI" fit data/sub-02/func/big.nii.gz --events data/sub-01/func/sub-01_task-tones_run-01_events.tsv --out "$TMP/fitout"
expect_status 1 "gzip bomb: refused"
expect_err "big.nii.gz: .*(claims|larger than)" "gzip bomb: the error names the file"

# parcels on another grid: refused before any run is fitted
rm -rf results; cp "$TMP/s/data/sub-01/func/sub-01_task-tones_run-03_bold.nii.gz" /dev/null
"$PY" - "$S" <<'PYEOF'
import sys, nibabel as nib, numpy as np
d = sys.argv[1]
img = nib.load(d + '/parcels.nii.gz')
nib.save(nib.Nifti1Image(np.zeros((6, 6, 6), np.int16) + 1, img.affine), d + '/small.nii.gz')
PYEOF
sed 's/image = parcels.nii.gz/image = small.nii.gz/' study.ini >grid.ini
run "$SPLITROI" analyze grid.ini --no-report --no-group --subjects 01
expect_status 1 "parcels on another grid fail"
grep -q "fitting" "$TMP/err" && notok "parcel grid: runs were fitted before the grid was checked" || ok "parcel grid: checked before fitting"
