#!/usr/bin/python3
"""calibrate.py - false-positive shares of the first-level t maps on simulated null data.

For every noise process, run length T and design, null series (noise plus slow
drift, no signal) go through the project's own streamed GLM (tests/tools/glmtool,
the code `analyze`, `fit` and `parcels` use) with each noise model: none (OLS),
ar1 and ar1-adjusted (METHODS.md 4). The share of voxels with |t| beyond the
two-sided critical value of t(df) is counted at alpha 0.05, 0.01 and 0.001.
Every voxel is an independent series and carries one contrast, so the count is
binomial(n voxels, alpha) when the model is calibrated.

  make calibrate                      the full table (minutes; not part of make check)
  tools/calibrate.py --quick          the subset that tests/py/test_noise_calibration.py asserts
  tools/calibrate.py --markdown       the table as README.md shows it

Noise (unit variance; the drift is added on top, in noise standard deviations):
  ar1 RHO      x_k = RHO x_(k-1) + e_k, stationary start
  ar2          x_k = 0.5 x_(k-1) + 0.2 x_(k-2) + e_k, stationary start
  1/f          spectral synthesis: power proportional to 1/f from 1/(8 T TR) to
               the Nyquist frequency, the first T samples of a series 8 T long
Drift: a linear trend and the two slowest cosines of the run, amplitudes N(0, 1),
N(0, 1.5), N(0, 0.8) per voxel (the cosines as `simulate` draws them); the
design's cosine basis (cutoff 128 s) models the cosines, not exactly the trend.
Designs (TR 2 s, contrast A - B): block (16 s of A, 16 s rest, 16 s of B, 16 s
rest, repeated) and event (1 s events, A or B at random, onsets 3 to 7 s apart).

Research column (not in the C code, not a default): `ar2-adjusted`, AR(2) with
the bias adjustment of METHODS.md 4 carried to two lags: the residual lag-1 and
lag-2 ratios q_j = e'L_j e / e'e (L_j ones on the j-th subdiagonal) are mapped
back through the table of their expectations tr(R L_j R V) / tr(R V) under AR(2)
noise with autocorrelations (r1, r2) on a grid over the stationary region
(step 0.025; linear interpolation over the grid's triangulation, the nearest
grid point outside it); Yule-Walker gives (phi1, phi2), and the exact AR(2)
transform whitens y and X before the refit (df T - rank as for AR(1)).
"""
import argparse
import math
import os
import subprocess
import sys
import tempfile
import time

import numpy as np
import scipy.interpolate
import scipy.signal
import scipy.stats

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "tests", "py"))
import srref  # noqa: E402  (the design of METHODS.md 2, written independently of the C code)

TR = 2.0
ALPHAS = (0.05, 0.01, 0.001)
MODELS = {"none": 0, "ar1": 1, "ar1-adjusted": 2}
NOISES = ["ar1 0", "ar1 0.2", "ar1 0.4", "ar1 0.6", "ar2", "1/f"]
TS = (100, 200, 600)
DESIGNS = ("block", "event")
# the cells tests/py/test_noise_calibration.py asserts (make check): a few seconds
QUICK = [("ar1 0", 200, "block"), ("ar1 0.2", 200, "event"), ("ar1 0.6", 600, "block")]


# ---------------------------------------------------------------- noise and data

def noise(kind, T, n, rng):
    """n independent series of T samples, unit variance, as columns (T x n)."""
    if kind.startswith("ar1"):
        rho = float(kind.split()[1])
        e = rng.standard_normal((T, n))
        zi = rng.standard_normal((1, n)) * rho / math.sqrt(1 - rho * rho)   # rho x_(-1), stationary
        x = scipy.signal.lfilter([1.0], [1.0, -rho], e, axis=0, zi=zi)[0]
        return x * math.sqrt(1 - rho * rho)
    if kind == "ar2":
        a1, a2, burn = 0.5, 0.2, 400          # 0.2 + 0.5 ... the slowest root is 0.76: 0.76^400 ~ 1e-48
        e = rng.standard_normal((T + burn, n))
        x = scipy.signal.lfilter([1.0], [1.0, -a1, -a2], e, axis=0)[burn:]
        r1 = a1 / (1 - a2)
        var = 1.0 / (1 - a1 * r1 - a2 * (a1 * r1 + a2))   # gamma_0 / sigma_e^2 (Yule-Walker)
        return x / math.sqrt(var)
    if kind == "1/f":
        N = 8 * T
        f = np.fft.rfftfreq(N, d=TR)
        amp = np.zeros_like(f)
        amp[1:] = 1.0 / np.sqrt(f[1:])
        z = rng.standard_normal((f.size, n)) + 1j * rng.standard_normal((f.size, n))
        x = np.fft.irfft(z * amp[:, None], n=N, axis=0)[:T]
        # the variance of the process: 2 sum amp^2 / N^2 per unit complex variance 2, Parseval
        w = np.full(f.size, 2.0)
        w[0] = 1.0
        if N % 2 == 0:
            w[-1] = 1.0
        var = np.sum(w * amp ** 2) * 2.0 / N ** 2
        return x / math.sqrt(var)
    raise ValueError(kind)


def drift(T, n, rng):
    k = np.arange(T)
    lin = (2.0 * k - (T - 1)) / (T - 1)
    c1 = np.cos(np.pi * (2 * k + 1) / (2 * T))
    c2 = np.cos(np.pi * 2 * (2 * k + 1) / (2 * T))
    a = rng.standard_normal((3, n)) * np.array([[1.0], [1.5], [0.8]])
    return np.outer(lin, a[0]) + np.outer(c1, a[1]) + np.outer(c2, a[2])


def events(design, T, rng):
    if design == "block":
        ev = []
        for b in range(int(T * TR // 16) + 1):
            if b % 4 == 0:
                ev.append((b * 16.0, 16.0, "A"))
            elif b % 4 == 2:
                ev.append((b * 16.0, 16.0, "B"))
        return [e for e in ev if e[0] < T * TR]
    ev, t = [], 2.0 + rng.uniform(0, 2)
    while t < T * TR - 10:
        ev.append((round(t, 2), 1.0, "A" if rng.random() < 0.5 else "B"))
        t += rng.uniform(3.0, 7.0)
    return ev


def design_matrix(design, T, rng):
    X = srref.design(events(design, T, rng), ["A", "B"], T, TR, {"sref": 0.5, "cutoff": 128.0})
    c = np.zeros(X.shape[1])
    c[0], c[1] = 1.0, -1.0
    return X, c


# ---------------------------------------------------------------- the project's GLM

def glmtool_t(tool, X, c, Y, models, tmp, threads):
    """t and df of contrast c for each model, through glmtool (the C streamed fit)."""
    T, p = X.shape
    nv = Y.shape[1]
    px, py, pc, po = (os.path.join(tmp, s) for s in ("X", "Y", "C", "out"))
    np.asfortranarray(X).T.astype("<f8").tofile(px)
    np.ascontiguousarray(Y).astype("<f8").tofile(py)
    c.astype("<f8").tofile(pc)
    out = {}
    for m in models:
        subprocess.run([tool, px, py, pc, str(T), str(p), str(nv), "1", str(MODELS[m]), str(threads), po],
                       check=True)
        o = np.fromfile(po, "<f8")
        df = int(o[0])
        base = 3 + 3 * nv
        ok = o[3:3 + nv] > 0
        eff, var = o[base:base + nv], o[base + nv:base + 2 * nv]
        t = np.where(ok, eff / np.sqrt(var), np.nan)
        out[m] = (t, df)
    return out


# ---------------------------------------------------------------- research: AR(2), bias-adjusted

def ar2_transform(phi1, phi2, T):
    """The exact AR(2) whitening matrix (unit innovation variance), for the self-check."""
    W = np.zeros((T, T))
    W[0, 0] = math.sqrt((1 + phi2) * ((1 - phi2) ** 2 - phi1 ** 2) / (1 - phi2))
    s1 = math.sqrt(1 - phi2 ** 2)
    W[1, 1], W[1, 0] = s1, -s1 * phi1 / (1 - phi2)
    for k in range(2, T):
        W[k, k], W[k, k - 1], W[k, k - 2] = 1.0, -phi1, -phi2
    return W


def ar2_self_check():
    """W' W = V^-1 for the AR(2) covariance V (Yule-Walker autocovariances): the transform is exact."""
    phi1, phi2, T = 0.5, 0.2, 12
    r = np.zeros(T)
    r[0], r[1] = 1.0, phi1 / (1 - phi2)
    for k in range(2, T):
        r[k] = phi1 * r[k - 1] + phi2 * r[k - 2]
    g0 = 1.0 / (1 - phi1 * r[1] - phi2 * r[2])
    V = g0 * np.array([[r[abs(i - j)] for j in range(T)] for i in range(T)])
    W = ar2_transform(phi1, phi2, T)
    err = np.max(np.abs(W.T @ W @ V - np.eye(T)))
    if err > 1e-10:
        raise SystemExit("calibrate: the AR(2) transform is not exact (%.2e)" % err)


def diag_sums(M):
    """d[k] = sum of M_ij over |i - j| = k."""
    T = M.shape[0]
    return np.array([np.trace(M)] + [np.trace(M, k) + np.trace(M, -k) for k in range(1, T)])


def ar2_autocorr(r1, r2, T):
    """Autocorrelations 0..T-1 of the AR(2) process with lag-1 and lag-2 autocorrelations r1, r2."""
    phi1 = r1 * (1 - r2) / (1 - r1 * r1)
    phi2 = (r2 - r1 * r1) / (1 - r1 * r1)
    r = np.empty(T)
    r[0], r[1] = 1.0, r1
    for k in range(2, T):
        r[k] = phi1 * r[k - 1] + phi2 * r[k - 2]
    return r


def ar2_adjusted_t(X, c, Y, chunk=500):
    """t of contrast c under the bias-adjusted AR(2) model (see the module text); df = T - rank."""
    T = X.shape[0]
    U, S, Vt = np.linalg.svd(X, full_matrices=False)
    r = int(np.sum(S > srref.SVD_TOL * S[0]))
    U, S, Vt = U[:, :r], S[:r], Vt[:r]
    cq = (Vt @ c) / S                      # c'beta = cq' delta, delta the coefficients on U
    R = np.eye(T) - U @ U.T
    dR = diag_sums(R)
    d1 = diag_sums(R @ np.eye(T, k=-1) @ R)
    d2 = diag_sums(R @ np.eye(T, k=-2) @ R)
    # the table: true (r1, r2) on a grid inside the stationary region -> expected residual ratios
    grid, fs = [], []
    for r1 in np.arange(-0.9, 0.951, 0.025):
        for r2 in np.arange(2 * r1 * r1 - 1 + 0.02, 0.951, 0.025):
            rr = ar2_autocorr(r1, r2, T)
            den = dR @ rr
            grid.append((r1, r2))
            fs.append((d1 @ rr / den, d2 @ rr / den))
    grid, fs = np.array(grid), np.array(fs)
    E = R @ Y
    ee = np.sum(E * E, 0)
    q = np.column_stack([np.sum(E[1:] * E[:-1], 0) / ee, np.sum(E[2:] * E[:-2], 0) / ee])
    inv = scipy.interpolate.LinearNDInterpolator(fs, grid)(q)
    out = ~np.all(np.isfinite(inv), 1)
    if np.any(out):
        inv[out] = scipy.interpolate.NearestNDInterpolator(fs, grid)(q[out])
    r1, r2 = inv[:, 0], inv[:, 1]
    phi1 = r1 * (1 - r2) / (1 - r1 * r1)
    phi2 = (r2 - r1 * r1) / (1 - r1 * r1)
    # into the stationary triangle, a little inside its edges
    phi2 = np.clip(phi2, -0.98, 0.98)
    lim = 0.98 * (1 - phi2)
    phi1 = np.clip(phi1, -lim, lim)
    t = np.empty(Y.shape[1])
    df = T - r
    for v0 in range(0, Y.shape[1], chunk):
        a1, a2 = phi1[v0:v0 + chunk], phi2[v0:v0 + chunk]
        y = Y[:, v0:v0 + chunk].T                               # (n, T)
        s0 = np.sqrt((1 + a2) * ((1 - a2) ** 2 - a1 ** 2) / (1 - a2))
        s1 = np.sqrt(1 - a2 ** 2)
        g = a1 / (1 - a2)

        def whiten(z):                                          # z (n, T[, r]) -> whitened rows
            ex = (slice(None),) + (None,) * (z.ndim - 1)
            w = np.empty_like(z)
            w[:, 0] = s0[ex[:z.ndim - 1]] * z[:, 0]
            w[:, 1] = s1[ex[:z.ndim - 1]] * (z[:, 1] - g[ex[:z.ndim - 1]] * z[:, 0])
            w[:, 2:] = z[:, 2:] - a1[ex] * z[:, 1:-1] - a2[ex] * z[:, :-2]
            return w

        yw = whiten(y)
        Uw = whiten(np.broadcast_to(U, (y.shape[0],) + U.shape).copy())
        G = np.matmul(Uw.transpose(0, 2, 1), Uw)
        h = np.matmul(Uw.transpose(0, 2, 1), yw[:, :, None])[:, :, 0]
        d = np.linalg.solve(G, h[:, :, None])[:, :, 0]
        rss = np.sum(yw * yw, 1) - np.sum(h * d, 1)
        gc = np.linalg.solve(G, np.broadcast_to(cq, h.shape)[:, :, None])[:, :, 0]
        t[v0:v0 + chunk] = (d @ cq) / np.sqrt(rss / df * np.sum(gc * cq, 1))
    return t, df


# ---------------------------------------------------------------- counting

def interval(k, n, level=0.95):
    """Clopper-Pearson interval for a binomial share k / n (from memory: beta quantiles)."""
    lo = scipy.stats.beta.ppf((1 - level) / 2, k, n - k + 1) if k > 0 else 0.0
    hi = scipy.stats.beta.ppf(1 - (1 - level) / 2, k + 1, n - k) if k < n else 1.0
    return lo, hi


def nominal_range(n, alpha, level=0.999):
    """The shares k / n inside the central `level` of binomial(n, alpha): what a calibrated model shows."""
    lo = scipy.stats.binom.ppf((1 - level) / 2, n, alpha)
    hi = scipy.stats.binom.isf((1 - level) / 2, n, alpha)
    return lo / n, hi / n


def shares(t, df):
    ok = np.isfinite(t)
    n = int(ok.sum())
    out = {}
    for a in ALPHAS:
        crit = scipy.stats.t.isf(a / 2, df)
        out[a] = (int(np.sum(np.abs(t[ok]) > crit)), n)
    return out


def known_rho_t(X, c, Y, rho):
    """t of contrast c by GLS with the true rho (the exact Prais-Winsten transform): a check of the
    simulated data and the counting, since this t follows t(df) exactly under AR(1) noise."""
    W = ar2_transform(rho, 0.0, X.shape[0])
    Xw, Yw = W @ X, W @ Y
    b = np.linalg.lstsq(Xw, Yw, rcond=None)[0]
    res = Yw - Xw @ b
    df = X.shape[0] - np.linalg.matrix_rank(X)
    v = c @ np.linalg.pinv(Xw.T @ Xw) @ c
    return (c @ b) / np.sqrt(np.sum(res * res, 0) / df * v), df


def run_cell(tool, kind, T, design, nvox, models, research, tmp, threads):
    # one seed per cell, from its name: cells are reproducible and independent
    seed = int.from_bytes(("%s|%d|%s" % (kind, T, design)).encode(), "little") % (2 ** 61 - 1)
    rng = np.random.default_rng(seed)
    X, c = design_matrix(design, T, rng)
    Y = 1000.0 + 10.0 * (noise(kind, T, nvox, rng) + drift(T, nvox, rng))
    res = {}
    for m, (t, df) in glmtool_t(tool, X, c, Y, models, tmp, threads).items():
        res[m] = shares(t, df)
    if research:
        # the scaling to percent of the mean (METHODS.md 3) does not change t; the research fit skips it
        t, df = ar2_adjusted_t(X, c, Y)
        res["ar2-adjusted"] = shares(t, df)
    if kind.startswith("ar1"):
        res["true-rho"] = shares(*known_rho_t(X, c, Y, float(kind.split()[1])))
    return res


def fmt_share(k, n):
    return "%.2f" % (100.0 * k / n)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--glmtool", default=os.path.join(os.environ.get("BUILD", "build"), "tests", "tools", "glmtool"))
    ap.add_argument("--voxels", type=int, default=20000)
    ap.add_argument("--quick", action="store_true", help="only the cells make check asserts")
    ap.add_argument("--research", action="store_true", help="also the bias-adjusted AR(2) (Python, slow)")
    ap.add_argument("--markdown", action="store_true", help="print the table as README.md holds it")
    ap.add_argument("--threads", type=int, default=2)
    ap.add_argument("--assert", dest="check", action="store_true",
                    help="exit 1 unless ar1-adjusted is inside the 99.9%% binomial range at 0.05 and 0.01 under AR(1) noise")
    o = ap.parse_args(argv)
    if not os.access(o.glmtool, os.X_OK):
        print("calibrate: no %s (make %s)" % (o.glmtool, o.glmtool), file=sys.stderr)
        return 2
    ar2_self_check()
    cells = QUICK if o.quick else [(k, T, d) for k in NOISES for T in TS for d in DESIGNS]
    models = list(MODELS)
    failures = []
    rows = []
    start = time.time()
    with tempfile.TemporaryDirectory() as tmp:
        for kind, T, design in cells:
            # the research model on the noise AR(1) does not describe, and on AR(1) rho 0.4 for comparison
            research = o.research and kind in ("ar2", "1/f", "ar1 0.4")
            res = run_cell(o.glmtool, kind, T, design, o.voxels, models, research, tmp, o.threads)
            rows.append((kind, T, design, res))
            if kind.startswith("ar1"):
                for a in (0.05, 0.01):
                    for m in ("ar1-adjusted", "true-rho"):
                        k, n = res[m][a]
                        lo, hi = nominal_range(n, a)
                        if not (lo <= k / n <= hi):
                            failures.append("%s T %d %s: %s %.3f%% at alpha %g, outside [%.3f%%, %.3f%%]"
                                            % (kind, T, design, m, 100.0 * k / n, a, 100 * lo, 100 * hi))
            line = "%-8s T %3d %-5s" % (kind, T, design)
            for m in res:
                line += "  %s %s" % (m, "/".join(fmt_share(*res[m][a]) for a in ALPHAS))
            print(line, flush=True, file=sys.stderr if o.markdown else sys.stdout)
    n = o.voxels
    if o.markdown:
        print("False-positive share (%%) of %d independent null voxels per cell, at alpha 0.05 / 0.01 / 0.001;"
              % n)
        print("a calibrated model falls inside %s / %s / %s (the central 99.9%% of binomial(%d, alpha))."
              % tuple(["%.2f-%.2f" % tuple(100 * x for x in nominal_range(n, a)) for a in ALPHAS] + [n]))
        print()
        hdr = "| noise | T | design | none | ar1 | ar1-adjusted |"
        if o.research:
            hdr += " ar2-adjusted (research) |"
        print(hdr)
        print("|" + "---|" * (hdr.count("|") - 1))
        for kind, T, design, res in rows:
            line = "| %s | %d | %s |" % (kind, T, design)
            for m in list(MODELS) + (["ar2-adjusted"] if o.research else []):
                line += " %s |" % (" / ".join(fmt_share(*res[m][a]) for a in ALPHAS) if m in res else "")
            print(line)
    else:
        for a in ALPHAS:
            lo, hi = nominal_range(n, a)
            print("# nominal %g: a calibrated model lies in [%.3f%%, %.3f%%] (99.9%% of binomial(%d, %g))"
                  % (a, 100 * lo, 100 * hi, n, a))
        print("# %d cells in %.0f s" % (len(cells), time.time() - start))
    for f in failures:
        print("calibrate: " + f, file=sys.stderr)
    return 1 if (o.check and failures) else 0


if __name__ == "__main__":
    sys.exit(main())
