"""Checks the Python reference (srref) itself against outside values, so that the end-to-end comparison with the C program rests on something."""
import math
import os
import sys

import numpy as np
import scipy.fft
import scipy.linalg
import scipy.stats
import statsmodels.api as sm
from statsmodels.stats.multitest import multipletests

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import srref  # noqa: E402

failed = 0


def check(cond, name, detail=''):
    global failed
    if cond:
        print('ok - ' + name)
    else:
        failed += 1
        print('not ok - %s %s' % (name, detail))


def close(a, b, rel, name):
    a, b = float(a), float(b)
    check(abs(a - b) <= rel * max(abs(b), 1e-300), name, '(got %.10g, wanted %.10g)' % (a, b))


# Kernel before unit-area scaling: REFERENCES.md values (computed with scipy 1.10).
ref = {1: 0.00306566, 2: 0.0360894, 4: 0.156291, 5: 0.175441, 6: 0.160475, 8: 0.0900993,
       10: 0.0320469, 12: 0.000675452, 15: -0.0151369, 16: -0.0155529, 20: -0.00855318,
       30: -0.000171114}
h = srref.hrf_kernel()
raw = scipy.stats.gamma.pdf(np.arange(640) * 0.05, 6) - scipy.stats.gamma.pdf(np.arange(640) * 0.05, 16) / 6
scale = raw.sum() * 0.05
for t, v in ref.items():
    # REFERENCES.md gives 6 significant digits
    close(h[int(round(t / 0.05))] * scale, v, 5e-6, 'kernel h(%g) before scaling (REFERENCES.md)' % t)
close(h.sum() * 0.05, 1.0, 1e-12, 'kernel scaled to unit area')
check(abs(np.argmax(h) * 0.05 - 5.0) < 1e-9, 'kernel peak at 5.00 s on the 0.05 s grid')
close(scale, 0.833443, 1e-5, 'kernel area over 0..32 s = 0.833443 (REFERENCES.md)')
check(len(h) == 640, 'kernel has round(32/0.05) = 640 samples')

# A sustained stimulus plateaus at 1; a block regressor peaks 5-6 s after onset (fact of the trade).
x = srref.regressor([(0.0, 400.0, 'a')], 200, 2.0, 0.5)
close(x[-1], 1.0, 1e-6, 'sustained stimulus plateaus at 1')
x = srref.regressor([(10.0, 0.0, 'a')], 40, 0.5, 0.0)
peak = np.argmax(x) * 0.5 - 10.0
check(4.5 <= peak <= 5.5, 'impulse response peaks about 5 s after onset (%.2f s)' % peak)
close(x[int((10 + 5.0) / 0.5)], h[100], 1e-12, 'impulse of unit area reproduces the kernel')

# DCT counts (REFERENCES.md) and the orthonormal DCT-II from scipy.
for T, TR, Q in ((200, 2.0, 6), (150, 2.0, 4), (240, 2.5, 9), (256, 2.0, 8)):
    C = srref.dct_basis(T, TR, 128.0)
    check(C.shape == (T, Q), 'DCT count T=%d TR=%g gives Q=%d (got %d)' % (T, TR, Q, C.shape[1]))
C = srref.dct_basis(200, 2.0, 128.0)
k = np.arange(200)
manual = np.column_stack([math.sqrt(2 / 200) * np.cos(math.pi * q * (2 * k + 1) / 400) for q in range(1, 7)])
check(np.max(np.abs(C - manual)) < 1e-12, 'DCT columns equal the METHODS.md formula')
check(np.max(np.abs(C.T @ C - np.eye(6))) < 1e-12, "DCT columns orthonormal (C'C = I)")

# Prais-Winsten worked example (REFERENCES.md): fit_run on whitened rows with a fixed rho.
xs = np.arange(1, 8, dtype=float)
X = np.column_stack([np.ones(7), xs])
y = np.array([1, 3, 4, 5, 8, 10, 9], dtype=float)
rho = 0.5
Xw = X.copy()
yw = y.copy()
Xw[0] *= math.sqrt(1 - rho * rho)
yw[0] *= math.sqrt(1 - rho * rho)
Xw[1:] = X[1:] - rho * X[:-1]
yw[1:] = y[1:] - rho * y[:-1]
res, df = srref.fit_run(Xw, yw[None, :], False, [np.array([1.0, 0]), np.array([0, 1.0])])
close(res[0][1][0], -0.0996169, 1e-5, 'Prais-Winsten intercept -0.0996169 (REFERENCES.md)')
close(res[1][1][0], 1.41379, 1e-5, 'Prais-Winsten slope 1.41379 (REFERENCES.md)')
g = sm.GLS(y, X, sigma=scipy.linalg.toeplitz(rho ** np.arange(7))).fit()
close(res[1][1][0], g.params[1], 1e-10, 'Prais-Winsten slope equals statsmodels GLS with Toeplitz sigma')
close(res[1][2][0], g.bse[1] ** 2, 1e-9, 'Prais-Winsten slope variance equals statsmodels GLS')
res, _ = srref.fit_run(X, y[None, :], False, [np.array([1.0, 0]), np.array([0, 1.0])])
close(res[0][1][0], -0.285714, 1e-5, 'OLS worked example intercept -0.285714 (REFERENCES.md)')
close(res[1][1][0], 1.5, 1e-12, 'OLS worked example slope 1.5 (REFERENCES.md)')

# AR(1) path of fit_run against statsmodels GLS with the rho it should estimate.
rng = np.random.default_rng(7)
T = 80
X = np.column_stack([rng.standard_normal(T), rng.standard_normal(T), srref.dct_basis(T, 2.0, 128.0), np.ones(T)])
Y = 100 + X[:, :2] @ [2.0, -1.0] + rng.standard_normal((5, T)).cumsum(axis=1) * 0.3
cs = [np.eye(X.shape[1])[0], np.eye(X.shape[1])[0] - np.eye(X.shape[1])[1]]
res, df = srref.fit_run(X, Y, True, cs)
worst = 0.0
for v in range(5):
    o = sm.OLS(Y[v], X).fit()
    e = o.resid
    r = np.clip(np.sum(e[1:] * e[:-1]) / np.sum(e * e), -0.99, 0.99)
    g = sm.GLS(Y[v], X, sigma=scipy.linalg.toeplitz(r ** np.arange(T))).fit()
    for k, c in enumerate(cs):
        tt = g.t_test(c)
        worst = max(worst, abs(res[k][1][v] - float(np.squeeze(tt.effect))) / abs(float(np.squeeze(tt.effect))),
                    abs(res[k][2][v] - float(np.squeeze(tt.sd)) ** 2) / float(np.squeeze(tt.sd)) ** 2)
check(worst < 1e-9 and df == T - X.shape[1], 'AR(1) effects and variances equal statsmodels GLS (worst rel %.2g)' % worst)

# OLS against statsmodels and the NIST Longley certified betas (REFERENCES.md).
data = sm.datasets.longley.load_pandas()
Xl = np.column_stack([np.ones(16), data.exog.values])
yl = data.endog.values
cert = [-3482258.63459582, 15.0618722713733, -0.358191792925910E-01, -2.02022980381683,
        -1.03322686717359, -0.511041056535807E-01, 1829.15146461355]  # NIST StRD Longley certified values
res, _ = srref.fit_run(Xl, yl[None, :], False, list(np.eye(7)))
worst = max(abs(res[k][1][0] - cert[k]) / abs(cert[k]) for k in range(7))
check(worst < 1e-8, 'OLS reproduces the NIST Longley certified betas (worst rel %.2g)' % worst)
o = sm.OLS(yl, Xl).fit()
worst = max(abs(res[k][2][0] - o.bse[k] ** 2) / o.bse[k] ** 2 for k in range(7))
check(worst < 1e-7, 'OLS variances equal statsmodels OLS on Longley (worst rel %.2g)' % worst)

# Estimability: a zero column and collinear columns are not estimable; their difference-free combos are.
X = np.column_stack([np.ones(10), np.arange(10.0), np.zeros(10)])
check(not srref.estimable(X, np.array([0, 0, 1.0]))[0], 'a zero column is not estimable')
check(srref.estimable(X, np.array([0, 1.0, 0]))[0], 'a full-rank column is estimable')
X = np.column_stack([np.arange(10.0), np.arange(10.0), np.ones(10)])
check(not srref.estimable(X, np.array([1.0, 0, 0]))[0], 'a collinear column is not estimable')
check(srref.estimable(X, np.array([1.0, 1.0, 0]))[0], 'the sum of two collinear columns is estimable')

# Effect expressions (INTERFACE.md).
name, w = srref.parse_effect('0.5*a + 0.5*b - c')
check(name == '0.5*a+0.5*b-c' and w == {'a': 0.5, 'b': 0.5, 'c': -1.0}, 'effect expression parsed')
name, w = srref.parse_effect('"go-left" - "go-right"')
check(w == {'go-left': 1.0, 'go-right': -1.0}, 'quoted condition names parsed')

# Exact top_percent: 12.5% of 8 is exactly 1, where a binary fraction could give 1.0000000000000002.
st = {'select': ('top_percent', srref.Fraction('12.5'))}
sel = srref.select(st, np.arange(8), np.array([1, 5, 5, 2, 3, 0, 4, 5.0]))
check(list(sel) == [1], 'top 12.5% of 8 keeps exactly 1, ties to the lower index')
st = {'select': ('top_percent', srref.Fraction('10'))}
sel = srref.select(st, np.arange(30), np.r_[np.full(5, 9.0), np.zeros(25)][::-1].copy())
check(list(sel) == [25, 26, 27], 'top 10% of 30 keeps 3 of 5 tied voxels, lower indices first')

# Group: the one-sample worked example and Benjamini-Hochberg (REFERENCES.md).
x = [0.5, 1.2, 0.8, -0.1, 0.9, 1.5, 0.3, 0.7]
rows = [{'subject': str(i), 'parcel': 'p', 'split': 'odd-even:mean', 'measure_task': 't', 'effect': 'e',
         'value': v} for i, v in enumerate(x)]
g = srref.group(rows)[0]
for k, v in (('mean', 0.725), ('sd', 0.503559), ('sem', 0.178035), ('t', 4.072235), ('p', 0.00473585),
             ('cohen_d', 1.439753)):
    close(g[k], v, 2e-6, 'one-sample worked example %s (REFERENCES.md)' % k)
tt = scipy.stats.ttest_1samp(x, 0)
close(g['p'], tt.pvalue, 1e-10, 'one-sample p equals scipy ttest_1samp')
check(g['df'] == 7 and g['n'] == 8, 'one-sample n and df')
p = [0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459, 0.3240, 0.4262, 0.5719,
     0.6528, 0.7590, 1.000]
qref = [0.0015, 0.003, 0.0095, 0.035625, 0.0603, 0.0638571, 0.0638571, 0.0645, 0.0765, 0.486, 0.581182,
        0.714875, 0.753231, 0.813214, 1.0]
q = srref.bh(p)
check(max(abs(a - b) / b for a, b in zip(q, qref)) < 1e-5, 'BH adjusted values of the 1995 example (REFERENCES.md)')
check(int(np.sum(q <= 0.05)) == 4, 'BH rejects 4 of 15 at q = 0.05 (Benjamini & Hochberg 1995)')
check(np.allclose(q, multipletests(p, 0.05, 'fdr_bh')[1], rtol=1e-12), 'BH equals statsmodels fdr_bh')
rows = [{'subject': '1', 'parcel': 'p', 'split': 'all', 'measure_task': 't', 'effect': 'e', 'value': 1.0}]
g = srref.group(rows)[0]
check(g['n'] == 1 and math.isnan(g['sd']) and math.isnan(g['p']), 'group with n = 1 leaves sd and p empty')


# Circular analysis (Kriegeskorte et al. 2009; Vul et al. 2009): on pure noise, selecting and measuring
# on the same runs gives a clearly positive value, measuring on the held-out runs a value near 0.
import tempfile  # noqa: E402
import make_study  # noqa: E402
with tempfile.TemporaryDirectory() as tmp:
    ini = make_study.make_study(tmp, seed=21, signal=False, subjects=('01', '02', '03'), measure=False)
    st = srref.read_study(ini)
    cn, cw = srref.parse_effect(st['contrast'])
    same, held = [], []
    for sub in ('01', '02', '03'):
        runs, conds = srref.load_task(st, sub, 'tones', 'trial_type', None)
        srref.fit_task(st, runs, conds, [(cn, cw)])
        lab, _ = srref.load_parcels(st, runs[0]['img'])
        for d, m in ((runs[0::2], runs[1::2]), (runs[1::2], runs[0::2])):
            _, t = srref.fixed(d, cn)
            for p in (1, 2, 3):
                roi = srref.select(st, np.flatnonzero(lab == p), t)
                same.append(srref.roi_value(d, cn, roi))
                held.append(srref.roi_value(m, cn, roi))
    ms, mh, se = np.mean(same), np.mean(held), np.std(held, ddof=1) / math.sqrt(len(held))
    check(ms > 0.1 and ms > 5 * se, 'circular: same-runs value on noise clearly positive (%.3f)' % ms)
    check(abs(mh) < 3 * se + 1e-3, 'held-out value on noise near 0 (%.3f, sem %.3f)' % (mh, se))
    # and with signal the selective parcel stands out in held-out runs
    ini = make_study.make_study(os.path.join(tmp, 's'), seed=22, measure=False)
    rows = [r for r in srref.analyze(ini) if r['split'] == 'odd-even:mean' and r['effect'] == 'melody-scrambled']
    v = {(r['subject'], r['parcel']): r['value'] for r in rows}
    check(all(v[(s, 'left_core')] > v[(s, '3')] + 0.3 for s in ('sub-01', 'sub-02')),
          'held-out melody-scrambled larger in the selective parcel than in the flat one')
    check(all(math.isnan(v[(s, 'top_slab')]) for s in ('sub-01', 'sub-02')) and
          all(r['n_voxels'] == 0 for r in rows if r['parcel'] == 'top_slab'),
          'a parcel in zero background has no candidates: empty value, n_voxels 0')
    # readers: int16 with scl_slope/scl_inter equals nibabel's scaled read; TR from header units and
    # from an inherited sidecar (BIDS inheritance rule)
    import nibabel as nib  # noqa: E402
    ini = make_study.make_study(os.path.join(tmp, 'e'), **make_study.PRESETS['edge'])
    ini2 = make_study.make_study(os.path.join(tmp, 'b'), **make_study.PRESETS['basic'])
    f = os.path.join(tmp, 'b', 'data', 'sub-02', 'func', 'sub-02_task-tones_run-01_bold.nii.gz')
    img, d = srref.load_bold(f)
    ref = nib.load(f).get_fdata()
    check(img.get_data_dtype() == np.int16 and np.array_equal(d, ref.reshape(-1, ref.shape[3], order='F'))
          and not np.array_equal(d, np.asanyarray(img.dataobj.get_unscaled()).reshape(d.shape, order='F')),
          'int16 data with scl_slope/scl_inter read as nibabel scales them')
    st = srref.read_study(ini)
    r1 = srref.find_runs(st, '01', 'tones')
    r2 = srref.find_runs(st, '02', 'memory')
    check(srref.sidecar_tr(st, r1[0]) is None and abs(srref.header_tr(nib.load(r1[0]['path'])) - 2.0) < 1e-12,
          'TR from pixdim[4] in ms when there is no sidecar')
    check(srref.header_tr(nib.load(r2[0]['path'])) is None and srref.sidecar_tr(st, r2[0]) == 1.5,
          'TR from the inherited task-memory_bold.json when pixdim[4] is 0')
    check([r['label'] for r in r1] == ['1', '2', '3'], 'run labels are the run indices')
    # nearest-neighbour parcels: the 1.5 mm grid (shifted 0.3 mm) maps back onto the 3 mm labels
    ini = make_study.make_study(os.path.join(tmp, 'ses'), **make_study.PRESETS['sessions'])
    st = srref.read_study(ini)
    runs = srref.find_runs(st, '02', 'tones')
    lab, names = srref.load_parcels(st, nib.load(runs[0]['path']))
    want = make_study._parcels((10, 10, 8), True).reshape(-1, order='F')
    check(np.array_equal(lab, want), 'nearest-neighbour resampling recovers the parcels on the data grid')
    check([os.path.basename(r['path'])[:19] for r in runs] == ['sub-02_ses-1_task-t'] * 2 + ['sub-02_ses-2_task-t'] * 2
          and [r['label'] for r in runs] == ['1.1', '1.2', '2.3', '2.4'],
          'runs across sessions ordered by session, then run, labelled <session>.<run> (METHODS.md 11)')
    m = srref.find_runs(st, '02', 'memory')
    check([r['label'] for r in m] == ['1', '2'], 'runs without an index labelled by position')
    # a real run with an absent condition: its column is zero, so the design is rank deficient; the
    # other condition is still estimable and its AR(1) effect equals statsmodels GLS (which uses pinv)
    st = srref.read_study(os.path.join(tmp, 'e', 'study.ini'))
    runs, conds = srref.load_task(st, '02', 'tones', 'trial_type', None)
    X = runs[0]['X']
    check(conds == ['melody', 'scrambled'] and not np.any(X[:, 1]), 'absent condition gives a zero column')
    cm, cs_ = np.eye(X.shape[1])[0], np.eye(X.shape[1])[1]
    res, df = srref.fit_run(X, runs[0]['Y'][:3], True, [cm, cs_, cm - cs_])
    check(res[0][0] and not res[1][0] and not res[2][0] and df == X.shape[0] - (X.shape[1] - 1),
          'zero column: melody estimable, scrambled and melody-scrambled not, df from the rank')
    worst = 0.0
    for v in range(3):
        y = runs[0]['Y'][v]
        e = y - X @ np.linalg.pinv(X) @ y
        r = np.clip(np.sum(e[1:] * e[:-1]) / np.sum(e * e), -0.99, 0.99)
        g = sm.GLS(y, X, sigma=scipy.linalg.toeplitz(r ** np.arange(X.shape[0]))).fit()
        worst = max(worst, abs(res[0][1][v] - g.params[0]) / abs(g.params[0]))
    check(worst < 1e-9, 'rank-deficient AR(1) fit equals statsmodels GLS (worst rel %.2g)' % worst)

sys.exit(1 if failed else 0)
