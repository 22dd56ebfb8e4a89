"""Independent Python reference of METHODS.md (sections 1-11) for the end-to-end table checks.

Written from METHODS.md, INTERFACE.md and REFERENCES.md only (not from the C
sources), so that agreement between the two means something.  Public:
analyze(study_ini_path) -> list of response rows (section 10) and
group(rows) -> list of group rows (section 9).  Values are floats (NaN for
empty) and n_voxels ints (floats on :mean rows).
"""
import configparser
import fnmatch
import glob
import json
import math
import os
import re
from fractions import Fraction

import nibabel as nib
import numpy as np
import scipy.fft
import scipy.stats

DT = 0.05
KERNEL_SECONDS = 32.0
SVD_TOL = 1e-10
ESTIMABLE_TOL = 1e-6  # relative residual of c after projection onto the row space


class StudyError(Exception):
    pass


# ---------------------------------------------------------------- study file

def read_study(path):
    cp = configparser.ConfigParser(inline_comment_prefixes=(';', '#'),
                                   comment_prefixes=(';', '#'),
                                   interpolation=None)
    with open(path) as f:
        cp.read_file(f)
    base = os.path.dirname(os.path.abspath(path))

    def get(sec, key, default=None):
        if cp.has_section(sec) and cp.has_option(sec, key):
            v = cp.get(sec, key).strip()
            return v
        return default

    def rel(p):
        return p if os.path.isabs(p) else os.path.join(base, p)

    st = {}
    st['bids'] = rel(get('study', 'bids', 'data'))
    st['out'] = rel(get('study', 'out', 'results'))
    st['subjects'] = get('study', 'subjects', 'all') or 'all'
    m = get('study', 'mask', '')
    st['mask'] = rel(m) if m else None
    st['loc_task'] = get('localizer', 'task')
    if not st['loc_task']:
        raise StudyError('study: [localizer] task missing')
    st['contrast'] = get('localizer', 'contrast')
    st['split'] = get('localizer', 'split', 'odd-even') or 'odd-even'
    eff = get('localizer', 'effects', '')
    st['loc_effects'] = [e.strip() for e in eff.split(',') if e.strip()] or [st['contrast']]
    st['loc_column'] = get('localizer', 'condition_column', 'trial_type') or 'trial_type'
    st['parcels'] = rel(get('parcels', 'image'))
    nm = get('parcels', 'names', '')
    st['names'] = rel(nm) if nm else None
    st['resample'] = (get('parcels', 'resample', 'no') or 'no')
    if get('parcels', 'top_voxels'):
        st['select'] = ('top_voxels', int(get('parcels', 'top_voxels')))
    elif get('parcels', 'min_t'):
        st['select'] = ('min_t', float(get('parcels', 'min_t')))
    else:
        st['select'] = ('top_percent', Fraction(get('parcels', 'top_percent', '10') or '10'))
    # METHODS.md 4: ar1-adjusted (the default) | ar1 | none
    st['model'] = get('model', 'autocorrelation', 'ar1-adjusted') or 'ar1-adjusted'
    if st['model'] not in ('ar1-adjusted', 'ar1', 'none'):
        raise StudyError('study: autocorrelation %r' % st['model'])
    dc = get('model', 'drift_cutoff', '128') or '128'
    st['cutoff'] = None if dc == 'none' else float(dc)
    st['sref'] = float(get('model', 'volume_time', '0.5') or '0.5')
    sm = get('model', 'smoothing_fwhm', 'none') or 'none'
    st['fwhm'] = None if sm == 'none' or float(sm) == 0 else float(sm)
    st['confounds'] = (get('model', 'confounds', '') or '').split()
    st['conf_suffix'] = get('model', 'confounds_suffix', '_confounds.tsv') or '_confounds.tsv'
    st['skip'] = int(get('model', 'skip_volumes', '0') or '0')
    cf = get('model', 'censor_fd', 'none') or 'none'
    st['censor_fd'] = None if cf == 'none' else float(cf)
    d = get('study', 'derivatives', '')
    st['deriv'] = rel(d) if d else None
    st['space'] = get('study', 'space', None)
    st['desc'] = get('study', 'desc', 'preproc') or 'preproc'
    st['res'] = get('study', 'res', None)
    st['measures'] = []
    for sec in cp.sections():
        if sec.startswith('measure '):
            task = get(sec, 'task', sec[len('measure '):].strip())
            effs = [e.strip() for e in (get(sec, 'effects', '') or '').split(',') if e.strip()]
            # a measured task reads the localizer's condition column unless its section names one
            col = get(sec, 'condition_column', st['loc_column']) or st['loc_column']
            st['measures'].append({'task': task, 'effects': effs, 'column': col})
    return st


# ---------------------------------------------------------------- effects

_TOKEN = re.compile(r'\s*(?:("[^"]*")|([A-Za-z0-9_.]+)|([*+\-]))')


def parse_effect(expr):
    """Returns (table name, {condition: weight})."""
    toks = []
    pos = 0
    s = expr.strip()
    while pos < len(s):
        m = _TOKEN.match(s, pos)
        if not m or m.end() == pos:
            raise StudyError('bad effect expression: %s' % expr)
        pos = m.end()
        if m.group(1):
            toks.append(('name', m.group(1)[1:-1]))
        elif m.group(2):
            toks.append(('word', m.group(2)))
        else:
            toks.append(('op', m.group(3)))
    weights = {}
    i = 0
    sign = 1.0
    expect_term = True
    while i < len(toks):
        kind, v = toks[i]
        if kind == 'op' and v in '+-':
            if v == '-':
                sign = -sign
            i += 1
            continue
        coef = 1.0
        if kind == 'word' and i + 1 < len(toks) and toks[i + 1] == ('op', '*'):
            coef = float(v)
            i += 2
            kind, v = toks[i]
        if kind not in ('word', 'name'):
            raise StudyError('bad effect expression: %s' % expr)
        weights[v] = weights.get(v, 0.0) + sign * coef
        sign = 1.0
        i += 1
        expect_term = False
    if expect_term:
        raise StudyError('empty effect expression')
    # table name: the expression with spaces removed (outside quotes)
    name = ''.join(p if k % 2 else p.replace(' ', '').replace('\t', '')
                   for k, p in enumerate(re.split(r'("[^"]*")', s)))
    return name, weights


# ---------------------------------------------------------------- BIDS

def entities_of(fname):
    base = os.path.basename(fname)
    base = re.sub(r'_bold\.nii(\.gz)?$', '', base)
    ents = {}
    for part in base.split('_'):
        if '-' in part:
            k, v = part.split('-', 1)
            ents[k] = v
    return ents


def subjects_of(st):
    if st['subjects'] == 'all':
        subs = sorted(os.path.basename(p)[4:] for p in glob.glob(os.path.join(st['bids'], 'sub-*'))
                      if os.path.isdir(p))
    else:
        subs = [s[4:] if s.startswith('sub-') else s for s in st['subjects'].split()]
    return subs


DERIV_ENTITIES = ('space', 'res', 'den', 'desc')


def _session_key(ses):
    if ses is None:
        return (0, 0, '')
    if ses.isdigit():
        return (1, int(ses), ses)
    return (2, 0, ses)


def _inherited(root, sub, ses, ents, suffix):
    """The closest file root/.../*<suffix> whose entities all belong to the run (BIDS inheritance)."""
    dirs = []
    if ses:
        dirs += [os.path.join(root, 'sub-' + sub, 'ses-' + ses, 'func'), os.path.join(root, 'sub-' + sub, 'ses-' + ses)]
    else:
        dirs += [os.path.join(root, 'sub-' + sub, 'func')]
    dirs += [os.path.join(root, 'sub-' + sub), root]
    for d in dirs:
        best = None
        for f in sorted(glob.glob(os.path.join(d, '*' + suffix))):
            parts = os.path.basename(f)[:-len(suffix)].split('_')
            if not all('-' in p for p in parts):
                continue
            fe = dict(p.split('-', 1) for p in parts)
            if all(ents.get(k) == v for k, v in fe.items()):
                if best is None or len(fe) > best[0]:
                    best = (len(fe), f)
        if best:
            return best[1]
    return None


def find_runs(st, sub, task):
    """Runs of one task ordered by session, then run (METHODS.md 6, 11), with their table labels."""
    root = os.path.join(st['deriv'] or st['bids'], 'sub-' + sub)
    files = []
    for pat in ('func/*_bold.nii', 'func/*_bold.nii.gz', 'ses-*/func/*_bold.nii', 'ses-*/func/*_bold.nii.gz'):
        files += glob.glob(os.path.join(root, pat))
    runs = []
    for f in files:
        e = entities_of(f)
        if e.get('sub') != sub or e.get('task') != task:
            continue
        if st['deriv']:
            if e.get('desc') != st['desc'] or (st['space'] and e.get('space') != st['space']) or \
                    (st['res'] and e.get('res') != st['res']):
                continue
        idx = int(e['run']) if 'run' in e else None
        runs.append({'path': f, 'ents': e, 'index': idx, 'ses': e.get('ses')})
    runs.sort(key=lambda r: (_session_key(r['ses']), r['index'] is None,
                             r['index'] if r['index'] is not None else 0, os.path.basename(r['path'])))
    for r in runs:
        i = r['index']
        if r['ses'] is not None:
            r['label'] = '%s.%d' % (r['ses'], i) if i is not None else r['ses']
        else:
            r['label'] = str(i) if i is not None else '1'
        name = re.sub(r'_bold\.nii(\.gz)?$', '', os.path.basename(r['path']))
        raw_ents = {k: v for k, v in r['ents'].items() if k not in DERIV_ENTITIES}
        raw_name = '_'.join(p for p in name.split('_') if p.split('-', 1)[0] not in DERIV_ENTITIES)
        r['raw_ents'] = raw_ents
        if st['deriv']:
            d = os.path.dirname(r['path'])
            rawdir = os.path.join(st['bids'], 'sub-' + sub, *(['ses-' + r['ses']] if r['ses'] else []), 'func')
            r['raw_path'] = os.path.join(rawdir, raw_name + '_bold.nii.gz')
            r['deriv_json'] = os.path.join(d, name + '_bold.json')
            r['conf_path'] = os.path.join(d, raw_name + '_desc-confounds_timeseries.tsv')
        else:
            r['raw_path'] = r['path']
            r['deriv_json'] = None
            r['conf_path'] = re.sub(r'_bold\.nii(\.gz)?$', st['conf_suffix'], r['path'])
        own = os.path.join(os.path.dirname(r['raw_path']), raw_name + '_events.tsv')
        r['events_path'] = own if os.path.isfile(own) else \
            _inherited(st['bids'], sub, r['ses'], raw_ents, '_events.tsv')
    return runs


def sidecar_tr(st, run):
    """RepetitionTime by the BIDS inheritance rule (raw dataset; a derivative's own sidecar wins), or None."""
    if run.get('deriv_json') and os.path.isfile(run['deriv_json']):
        with open(run['deriv_json']) as f:
            m = json.load(f)
        if 'RepetitionTime' in m:
            return m['RepetitionTime']
    ents = run.get('raw_ents', run['ents'])
    d = os.path.dirname(run.get('raw_path', run['path']))
    dirs = []
    while True:
        dirs.append(d)
        if os.path.abspath(d) == os.path.abspath(st['bids']) or d in ('', '/'):
            break
        d = os.path.dirname(d)
    meta = {}
    for d in reversed(dirs):  # root first, closer ones override
        for js in sorted(glob.glob(os.path.join(d, '*_bold.json'))):
            je = entities_of(js.replace('_bold.json', '_bold.nii'))
            if all(ents.get(k) == v for k, v in je.items()):
                with open(js) as f:
                    meta.update(json.load(f))
    return meta.get('RepetitionTime')


def header_tr(img):
    h = img.header
    p = float(h['pixdim'][4])
    if not (p > 0):
        return None
    tu = int(h['xyzt_units']) & 0x38
    if tu == 16:
        p /= 1000.0
    elif tu == 24:
        p /= 1e6
    return p


def load_bold(path):
    img = nib.load(path)
    raw = np.asanyarray(img.dataobj.get_unscaled()).astype(np.float64)
    # nibabel blanks scl_slope/scl_inter in the loaded header; read the stored fields
    with nib.openers.ImageOpener(path) as f:
        h = img.header_class.from_fileobj(f)
    slope = float(h['scl_slope'])
    inter = float(h['scl_inter'])
    if slope != 0 and np.isfinite(slope):
        if not np.isfinite(inter):
            inter = 0.0
        raw = raw * slope + inter
    nt = raw.shape[3] if raw.ndim == 4 else 1
    data = raw.reshape(-1, nt, order='F')
    return img, data


def smooth_run(img, data, mask, fwhm):
    """METHODS.md 2b: per volume, normalised Gaussian convolution inside the support.

    S_k = voxels (of the mask) whose value in volume k is finite and > 0;
    y_s = G*(y 1_S) / G*(1_S) on S, NaN elsewhere, G the separable Gaussian
    with sigma_a = FWHM / (2 sqrt(2 ln 2)) / voxel size_a (pixdim, mm), zero
    outside the image and truncated at 4 sigma (scipy's gaussian_filter with
    mode constant and truncate 4 is that filter).
    """
    import scipy.ndimage
    shape = img.shape[:3]
    unit = img.header.get_xyzt_units()[0]
    to_mm = {'meter': 1000.0, 'micron': 0.001}.get(unit, 1.0)
    vox = [float(z) * to_mm for z in img.header.get_zooms()[:3]]
    sig = [fwhm / (2.0 * math.sqrt(2.0 * math.log(2.0))) / v for v in vox]
    out = np.empty_like(data)
    for k in range(data.shape[1]):
        y = data[:, k].reshape(shape, order='F')
        with np.errstate(invalid='ignore'):
            S = np.isfinite(y) & (y > 0)
        if mask is not None:
            S &= mask.reshape(shape, order='F')
        num = scipy.ndimage.gaussian_filter(np.where(S, y, 0.0), sig, mode='constant', cval=0.0,
                                            truncate=4.0)
        den = scipy.ndimage.gaussian_filter(S.astype(np.float64), sig, mode='constant', cval=0.0,
                                            truncate=4.0)
        with np.errstate(invalid='ignore', divide='ignore'):
            out[:, k] = np.where(S, num / den, np.nan).reshape(-1, order='F')
    return out


def read_tsv(path):
    with open(path, newline='') as f:
        lines = [l.rstrip('\r\n') for l in f]
    head = lines[0].split('\t')
    rows = [l.split('\t') for l in lines[1:] if l.strip() != '']
    return head, rows


def read_events(path, column):
    head, rows = read_tsv(path)
    io, idu, ic = head.index('onset'), head.index('duration'), head.index(column)
    ev = []
    for r in rows:
        on, du, tt = r[io].strip(), r[idu].strip(), r[ic].strip()
        if on == 'n/a' or tt == 'n/a' or tt == '':
            continue
        ev.append((float(on), float(du), tt))
    return ev


def read_confounds(path, names, T, skip=0, censor_fd=None):
    """Columns named or matched by shell-style patterns, rows after skip, plus one
    impulse per kept volume whose framewise_displacement exceeds censor_fd; n/a
    cells become the column mean over the kept rows, then every column is demeaned."""
    head, rows = read_tsv(path)
    if len(rows) != T:
        raise StudyError('%s: %d rows, wanted %d' % (path, len(rows), T))
    cols = []
    for n in names:
        if any(ch in n for ch in '*?['):
            cols += [c for c, h in enumerate(head) if fnmatch.fnmatchcase(h, n) and c not in cols]
        elif head.index(n) not in cols:
            cols.append(head.index(n))
    rows = rows[skip:]
    Tk = len(rows)
    parts = []
    for c in cols:
        col = np.array([np.nan if r[c].strip() in ('n/a', '') else float(r[c]) for r in rows])
        ok = np.isfinite(col)
        col[~ok] = col[ok].mean()
        parts.append(col - col.mean())
    if censor_fd is not None:
        f = head.index('framewise_displacement')
        for k, r in enumerate(rows):
            v = r[f].strip()
            if v not in ('n/a', '') and float(v) > censor_fd:
                imp = np.zeros(Tk)
                imp[k] = 1.0
                parts.append(imp - imp.mean())
    return np.column_stack(parts) if parts else np.zeros((Tk, 0))


# ---------------------------------------------------------------- design (section 2)

def hrf_kernel(dt=DT):
    M = int(round(KERNEL_SECONDS / dt))
    t = np.arange(M) * dt
    h = scipy.stats.gamma.pdf(t, 6) - scipy.stats.gamma.pdf(t, 16) / 6.0
    return h / (h.sum() * dt)


def dct_basis(T, TR, cutoff):
    if cutoff is None:
        return np.zeros((T, 0))
    Q = int(math.floor(2.0 * T * TR / cutoff))
    Q = min(Q, T - 1)
    if Q <= 0:
        return np.zeros((T, 0))
    return scipy.fft.dct(np.eye(T), type=2, norm='ortho', axis=0)[1:Q + 1].T


def regressor(events, T, TR, sref, dt=DT):
    nfine = int(math.ceil((T * TR + KERNEL_SECONDS) / dt)) + 1
    stim = np.zeros(nfine)
    for on, du, _ in events:
        if du == 0:
            j = int(math.floor(on / dt))
            if on >= 0 and j < nfine:
                stim[j] += 1.0 / dt
            continue
        a, b = max(on, 0.0), on + du
        if b <= 0:
            continue
        j0 = int(math.floor(a / dt))
        j1 = min(int(math.ceil(b / dt)), nfine)
        for j in range(j0, j1):
            ov = min(b, (j + 1) * dt) - max(a, j * dt)
            if ov > 0:
                stim[j] += ov / dt
    x = np.convolve(stim, hrf_kernel(dt))[:nfine] * dt
    tk = (np.arange(T) + sref) * TR
    return np.interp(tk / dt, np.arange(nfine), x)


def design(events, conditions, T, TR, st, confounds=None):
    cols = []
    for c in conditions:
        ev = [e for e in events if e[2] == c]
        cols.append(regressor(ev, T, TR, st['sref']) if ev else np.zeros(T))
    X = np.column_stack(cols) if cols else np.zeros((T, 0))
    parts = [X]
    if confounds is not None and confounds.shape[1]:
        parts.append(confounds)
    parts.append(dct_basis(T, TR, st['cutoff']))
    parts.append(np.ones((T, 1)))
    return np.hstack(parts)


# ---------------------------------------------------------------- fit (section 4)

def analyzable(data, mask):
    """Section 3: finite, varying, in the mask, mean > 0 and at least 10% of the run's
    reference intensity, the 98th percentile (numpy's default interpolation) of the
    means of the finite voxels with a positive mean inside the mask."""
    fin = np.all(np.isfinite(data), axis=1)
    with np.errstate(invalid='ignore'):
        mean = np.where(fin, data.mean(axis=1), np.nan)
        ok = fin & (mean > 0) & (data.max(axis=1) > data.min(axis=1))
    inside = np.ones(len(ok), bool) if mask is None else mask
    pos = mean[fin & (mean > 0) & inside]
    if pos.size:
        ok &= mean >= 0.10 * np.percentile(pos, 98)
    if mask is not None:
        ok &= mask
    return ok


def estimable(X, c):
    U, S, Vt = np.linalg.svd(X, full_matrices=False)
    r = int(np.sum(S > SVD_TOL * S[0])) if S.size and S[0] > 0 else 0
    Vr = Vt[:r]
    res = c - Vr.T @ (Vr @ c)
    return np.linalg.norm(res) <= ESTIMABLE_TOL * np.linalg.norm(c), r


RHO_GRID = np.array([-0.99 + 0.01 * i for i in range(199)])


def expected_ratio(X):
    """METHODS.md 4 (ar1-adjusted): f_i = tr(R D1 R V_i) / tr(R V_i) on the rho grid,
    R = I - X pinv(X), D1 ones on the first subdiagonal, V_i = (rho_i^|j-k|).
    Computed directly as elementwise sums with the T x T matrices (V symmetric)."""
    T = X.shape[0]
    R = np.eye(T) - X @ np.linalg.pinv(X, rcond=SVD_TOL)
    M = R @ np.eye(T, k=-1) @ R
    lag = np.abs(np.subtract.outer(np.arange(T), np.arange(T)))
    f = np.empty(RHO_GRID.size)
    for i, g in enumerate(RHO_GRID):
        V = g ** lag
        f[i] = np.sum(M * V) / np.sum(R * V)
    return f


def adjusted_rho(f, q, rss):
    """The paragraph's inversion: rho = f^-1(q) by linear interpolation on the grid."""
    if not (rss > 0) or not np.all(np.diff(f) > 0):
        return q
    if q <= f[0]:
        return -0.99
    if q >= f[-1]:
        return 0.99
    lo = int(np.searchsorted(f, q, side='right')) - 1   # f[lo] <= q < f[lo + 1]
    return RHO_GRID[lo] + 0.01 * (q - f[lo]) / (f[lo + 1] - f[lo])


def fit_run(X, Y, model, contrasts):
    """Y (n, T) scaled series of analyzable voxels; model 'none', 'ar1' or
    'ar1-adjusted' (False / True mean none / ar1); contrasts: list of full-length
    weight vectors.  Returns list of (estimable, effect (n,), var (n,)), df."""
    if model is False or model is True:
        model = 'ar1' if model else 'none'
    ar1 = model != 'none'
    n, T = Y.shape
    p = X.shape[1]
    U, S, Vt = np.linalg.svd(X, full_matrices=False)
    r = int(np.sum(S > SVD_TOL * S[0]))
    df = T - r
    Ur, Sr, Vr = U[:, :r], S[:r], Vt[:r]
    est = [estimable(X, c)[0] for c in contrasts]
    if not ar1:
        P = Y @ Ur                            # (n, r) projections
        B = P / Sr                            # coordinates: beta = Vr' B
        resid = Y - P @ Ur.T
        sigma2 = np.sum(resid ** 2, axis=1) / df
        out = []
        for c, e in zip(contrasts, est):
            g = (Vr @ c) / Sr
            eff = B @ (Vr @ c)
            var = sigma2 * np.sum(g ** 2)
            out.append((e, eff, var))
        return out, df
    # OLS residuals for rho
    Pinv = Vr.T @ (Ur.T / Sr[:, None])        # (p, T)
    beta = Y @ Pinv.T                         # (n, p)
    e = Y - beta @ X.T
    num = np.sum(e[:, 1:] * e[:, :-1], axis=1)
    den = np.sum(e ** 2, axis=1)
    with np.errstate(invalid='ignore', divide='ignore'):
        rho = np.where(den > 0, num / den, 0.0)
    if model == 'ar1-adjusted':
        f = expected_ratio(X)
        rho = np.array([adjusted_rho(f, q, d) for q, d in zip(rho, den)])
    rho = np.clip(rho, -0.99, 0.99)
    out_eff = [np.full(n, np.nan) for _ in contrasts]
    out_var = [np.full(n, np.nan) for _ in contrasts]
    for v in range(n):
        rv = rho[v]
        y = Y[v]
        yw = np.empty(T)
        yw[0] = y[0] * math.sqrt(1 - rv * rv)
        yw[1:] = y[1:] - rv * y[:-1]
        Xw = np.empty_like(X)
        Xw[0] = X[0] * math.sqrt(1 - rv * rv)
        Xw[1:] = X[1:] - rv * X[:-1]
        Uw, Sw, Vtw = np.linalg.svd(Xw, full_matrices=False)
        Uw, Sw, Vtw = Uw[:, :r], Sw[:r], Vtw[:r]
        coord = (Uw.T @ yw) / Sw
        fitted = Uw @ (coord * Sw)
        s2 = np.sum((yw - fitted) ** 2) / df
        for k, c in enumerate(contrasts):
            a = Vtw @ c
            out_eff[k][v] = np.sum(a * coord)
            out_var[k][v] = s2 * np.sum((a / Sw) ** 2)
    return [(e_, out_eff[k], out_var[k]) for k, e_ in enumerate(est)], df


# ---------------------------------------------------------------- per subject

def load_parcels(st, ref_img):
    pimg = nib.load(st['parcels'])
    lab = np.rint(np.asanyarray(pimg.dataobj).astype(np.float64)).astype(np.int64)
    lab = lab.reshape(lab.shape[:3])
    shape = ref_img.shape[:3]
    same = lab.shape == tuple(shape) and np.allclose(pimg.affine, ref_img.affine, atol=1e-3, rtol=0)
    if not same:
        if st['resample'] != 'nearest':
            raise StudyError('parcels grid differs from the data grid')
        A = np.linalg.inv(pimg.affine) @ ref_img.affine
        ii, jj, kk = np.meshgrid(np.arange(shape[0]), np.arange(shape[1]), np.arange(shape[2]), indexing='ij')
        pts = np.stack([ii, jj, kk, np.ones_like(ii)], axis=-1).reshape(-1, 4).T.astype(np.float64)
        q = np.floor(A @ pts + 0.5).astype(np.int64)[:3]
        inside = np.all((q >= 0) & (q < np.array(lab.shape)[:, None]), axis=0)
        vals = np.zeros(q.shape[1], dtype=np.int64)
        vals[inside] = lab[q[0, inside], q[1, inside], q[2, inside]]
        lab = vals.reshape(shape)
    names = {}
    if st['names']:
        head, rows = read_tsv(st['names'])
        ii, nn = head.index('index'), head.index('name')
        for r in rows:
            names[int(r[ii])] = r[nn]
    return lab.reshape(-1, order='F'), names


def load_task(st, sub, task, column, mask):
    """Loads and fits nothing yet: returns run records with data and design."""
    runs = find_runs(st, sub, task)
    conds = set()
    for r in runs:
        r['events'] = read_events(r['events_path'], column)
        conds.update(e[2] for e in r['events'])
    conds = sorted(conds, key=lambda s: s.encode())
    for r in runs:
        img, data = load_bold(r['path'])
        if st.get('fwhm'):
            data = smooth_run(img, data, mask, st['fwhm'])
        T = data.shape[1]
        skip = st['skip']
        trs = sidecar_tr(st, r)
        trh = header_tr(img)
        if trs is not None and trh is not None and abs(trs - trh) > 1e-3:
            raise StudyError('%s: TR %g in sidecar, %g in header' % (r['path'], trs, trh))
        TR = trs if trs is not None else trh
        if TR is None:
            raise StudyError('%s: no TR' % r['path'])
        conf = None
        if st['confounds'] or st['censor_fd'] is not None:
            conf = read_confounds(r['conf_path'], st['confounds'], T, skip, st['censor_fd'])
        # skip_volumes: the first volumes are dropped and event times move by skip x TR
        data = data[:, skip:]
        T -= skip
        ev = [(on - skip * float(TR), du, c) for on, du, c in r['events']]
        r['img'] = img
        r['X'] = design(ev, conds, T, float(TR), st, conf)
        r['ok'] = analyzable(data, mask)
        Y = data[r['ok']]
        r['Y'] = 100.0 * Y / Y.mean(axis=1, keepdims=True)
        r['T'] = T
    return runs, conds


def fit_task(st, runs, conds, effects):
    """Fits every run for the given effects (name -> weights); stores per-run
    voxel arrays of effect and var (NaN outside analyzable voxels)."""
    for r in runs:
        p = r['X'].shape[1]
        cvecs = []
        for name, w in effects:
            c = np.zeros(p)
            for cname, wt in w.items():
                if cname in conds:
                    c[conds.index(cname)] += wt
                else:
                    c[:] = np.nan
                    break
            cvecs.append(c)
        good = [not np.any(np.isnan(c)) for c in cvecs]
        res, df = fit_run(r['X'], r['Y'], st['model'], [c if g else np.zeros(p) for c, g in zip(cvecs, good)])
        V = r['ok'].size
        r['fx'] = {}
        for (name, _), g, (est, eff, var) in zip(effects, good, res):
            E = np.full(V, np.nan)
            Va = np.full(V, np.nan)
            E[r['ok']] = eff
            Va[r['ok']] = var
            r['fx'][name] = (bool(g and est), E, Va)
        r['df'] = df


def fixed(runs, name):
    """Section 5 per voxel over the runs where the effect is estimable and the voxel analyzable."""
    V = runs[0]['ok'].size
    sE = np.zeros(V)
    sV = np.zeros(V)
    cnt = np.zeros(V)
    for r in runs:
        est, E, Va = r['fx'][name]
        if not est:
            continue
        use = r['ok']
        sE[use] += E[use]
        sV[use] += Va[use]
        cnt[use] += 1
    with np.errstate(invalid='ignore', divide='ignore'):
        Em = np.where(cnt > 0, sE / cnt, np.nan)
        Vm = np.where(cnt > 0, sV / cnt ** 2, np.nan)
        t = Em / np.sqrt(Vm)
    return Em, t


def select(st, cand_idx, t):
    keep = np.isfinite(t[cand_idx])
    idx = cand_idx[keep]
    tv = t[idx]
    order = np.lexsort((idx, -tv))
    idx, tv = idx[order], tv[order]
    n = idx.size
    kind, val = st['select']
    if kind == 'top_percent':
        k = 0 if n == 0 else int(math.ceil(val * n / 100))
    elif kind == 'top_voxels':
        k = min(val, n)
    else:
        k = int(np.sum(tv > val))
    return np.sort(idx[:k])


def roi_value(runs, name, roi):
    if roi.size == 0:
        return float('nan')
    E, _ = fixed(runs, name)
    e = E[roi]
    e = e[np.isfinite(e)]
    return float(e.mean()) if e.size else float('nan')


def analyze_subject(st, sub, loc_eff, measures):
    mask = None
    if st['mask']:
        m = np.asanyarray(nib.load(st['mask']).dataobj)
        mask = m.reshape(-1, order='F') != 0
    runs, conds = load_task(st, sub, st['loc_task'], st['loc_column'], mask)
    if not runs:
        return []
    cname, cw = parse_effect(st['contrast'])
    effects = [(cname, cw)] + [e for e in loc_eff if e[0] != cname]
    fit_task(st, runs, conds, effects)
    labels, names = load_parcels(st, runs[0]['img'])
    parcels = sorted(int(v) for v in np.unique(labels) if v != 0)
    pname = {p: names.get(p, str(p)) for p in parcels}
    rows = []

    def mk(p, split, druns, mtask, mruns, eff, value, nvox):
        rows.append({'subject': 'sub-' + sub, 'parcel': pname[p], 'split': split,   # participant_id
                     'define_runs': druns if isinstance(druns, str) else '+'.join(r['label'] for r in druns),
                     'measure_task': mtask,
                     'measure_runs': mruns if isinstance(mruns, str) else '+'.join(r['label'] for r in mruns),
                     'effect': eff,
                     'value': value, 'n_voxels': nvox})

    # cross-validated splits
    if len(runs) >= 2:
        if st['split'] == 'leave-one-out':
            splits = [('leave-one-out:' + r['label'], [q for q in runs if q is not r], [r]) for r in runs]
            kind = 'leave-one-out'
        else:
            odd, even = runs[0::2], runs[1::2]
            splits = [('odd-even:A', odd, even), ('odd-even:B', even, odd)]
            kind = 'odd-even'
        per = {}
        for sname, druns, mruns in splits:
            _, t = fixed(druns, cname)
            okall = np.logical_and.reduce([r['ok'] for r in druns + mruns])
            for p in parcels:
                cand = np.flatnonzero((labels == p) & okall)
                roi = select(st, cand, t)
                for ename, _ in loc_eff:
                    v = roi_value(mruns, ename, roi)
                    mk(p, sname, druns, st['loc_task'], mruns, ename, v, int(roi.size))
                    per.setdefault((p, ename), []).append((v, roi.size))
        for p in parcels:
            for ename, _ in loc_eff:
                vs = per[(p, ename)]
                vals = [v for v, _ in vs]
                mv = float('nan') if any(math.isnan(v) for v in vals) else float(np.mean(vals))
                # a :mean row names what it averages: each split's runs, splits joined by '|'
                mk(p, kind + ':mean', '|'.join('+'.join(r['label'] for r in d) for _, d, _ in splits),
                   st['loc_task'], '|'.join('+'.join(r['label'] for r in m) for _, _, m in splits), ename, mv,
                   float(np.mean([n for _, n in vs])))
    # measured tasks
    _, tall = fixed(runs, cname)
    for ms in measures:
        mruns, mconds = load_task(st, sub, ms['task'], ms['column'], mask)
        if not mruns:
            continue
        fit_task(st, mruns, mconds, ms['effects'])
        okall = np.logical_and.reduce([r['ok'] for r in runs + mruns])
        for p in parcels:
            cand = np.flatnonzero((labels == p) & okall)
            roi = select(st, cand, tall)
            for ename, _ in ms['effects']:
                mk(p, 'all', runs, ms['task'], mruns, ename, roi_value(mruns, ename, roi), int(roi.size))
    return rows


def analyze(study_ini_path):
    st = read_study(study_ini_path)
    loc_eff = [parse_effect(e) for e in st['loc_effects']]
    measures = [{'task': m['task'], 'column': m['column'],
                 'effects': [parse_effect(e) for e in m['effects']]} for m in st['measures']]
    rows = []
    for sub in subjects_of(st):
        rows += analyze_subject(st, sub, loc_eff, measures)
    return rows


# ---------------------------------------------------------------- group (section 9)

def bh(p):
    p = np.asarray(p, dtype=float)
    m = p.size
    if m == 0:
        return p
    order = np.argsort(p, kind='mergesort')
    q = p[order] * m / np.arange(1, m + 1)
    q = np.minimum.accumulate(q[::-1])[::-1]
    out = np.empty(m)
    out[order] = np.minimum(q, 1.0)
    return out


def group(rows):
    kinds = ('odd-even:mean', 'leave-one-out:mean', 'all')
    groups = {}
    for r in rows:
        if r['split'] not in kinds:
            continue
        key = (r['parcel'], r['split'], r['measure_task'], r['effect'])
        groups.setdefault(key, [])
        v = r['value']
        if v is not None and np.isfinite(v):
            groups[key].append(float(v))
    out = []
    nan = float('nan')
    for key, vals in groups.items():
        x = np.array(vals)
        n = x.size
        g = dict(zip(('parcel', 'split', 'measure_task', 'effect'), key))
        g.update(n=n, mean=float(x.mean()) if n else nan, sd=nan, sem=nan, t=nan, df=nan, p=nan,
                 cohen_d=nan, q_fdr=nan)
        if n >= 2:
            sd = float(x.std(ddof=1))
            sem = sd / math.sqrt(n)
            t = g['mean'] / sem if sem > 0 else nan
            g.update(sd=sd, sem=sem, t=t, df=n - 1,
                     p=float(2 * scipy.stats.t.sf(abs(t), n - 1)) if np.isfinite(t) else nan,
                     cohen_d=g['mean'] / sd if sd > 0 else nan)
        out.append(g)
    fam = {}
    for g in out:
        if np.isfinite(g['p']):
            fam.setdefault((g['split'], g['measure_task'], g['effect']), []).append(g)
    for gs in fam.values():
        for g, q in zip(gs, bh([g['p'] for g in gs])):
            g['q_fdr'] = float(q)
    return out


if __name__ == '__main__':
    # srref.py STUDY.ini [group]: the reference table on stdout, for debugging by hand
    import csv
    import sys
    rows = analyze(sys.argv[1])
    if len(sys.argv) > 2 and sys.argv[2] == 'group':
        rows = group(rows)
    w = csv.writer(sys.stdout, lineterminator='\n')
    cols = list(rows[0].keys()) if rows else []
    w.writerow(cols)
    for r in rows:
        w.writerow(['' if isinstance(r[c], float) and math.isnan(r[c]) else
                    ('%.9g' % r[c] if isinstance(r[c], float) else r[c]) for c in cols])
