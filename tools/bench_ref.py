"""bench_ref.py - a vectorised numpy + nibabel OLS + AR(1) fit of one run, the yardstick of tools/bench.sh.

usage: bench_ref.py RUN_bold.nii.gz EVENTS.tsv CONFOUNDS.tsv TR OUT.npy

Written as a careful Python user would: the whole run loaded by nibabel,
the design (two-gamma HRF on a 0.05 s grid, the named confounds, a cosine
drift basis with a 128 s cutoff, a constant) built with numpy and scipy, OLS
for every voxel at once, the residual lag-one rho of every voxel, rho binned
to steps of 0.01, and per bin one Prais-Winsten whitened refit of all its
voxels (whitening as a lag-one difference, not a T x T product). Saves the t of the first condition minus the second (for a sanity
check against splitroi's map), prints nothing.
"""
import csv
import sys

import nibabel as nib
import numpy as np
import scipy.stats


def design(events, conds, T, tr, conf):
    dt = 0.05
    n = int(np.ceil((T * tr + 32) / dt))
    tt = np.arange(int(round(32 / dt))) * dt
    h = scipy.stats.gamma.pdf(tt, 6) - scipy.stats.gamma.pdf(tt, 16) / 6
    h /= h.sum() * dt
    frame = (np.arange(T) + 0.5) * tr / dt
    cols = []
    for c in conds:
        s = np.zeros(n)
        for on, du, cc in events:
            if cc == c:
                s[int(on / dt + 1e-9):int((on + du) / dt + 1e-9)] = 1
        x = np.convolve(s, h)[:n] * dt
        cols.append(np.interp(frame, np.arange(n), x))
    Q = min(int(2 * T * tr / 128 + 1e-9), T - 1)
    k = np.arange(T)
    drift = [np.sqrt(2 / T) * np.cos(np.pi * q * (2 * k + 1) / (2 * T)) for q in range(1, Q + 1)]
    X = np.column_stack(cols + [conf - conf.mean(0)] + drift + [np.ones(T)])
    return X


def main():
    bold, evf, cff, tr, out = sys.argv[1], sys.argv[2], sys.argv[3], float(sys.argv[4]), sys.argv[5]
    img = nib.load(bold)
    data = np.asarray(img.dataobj, dtype=np.float32)
    T = data.shape[3]
    Y = data.reshape(-1, T).T.astype(np.float64)          # T x V
    with open(evf) as f:
        ev = [(float(r["onset"]), float(r["duration"]), r["trial_type"]) for r in csv.DictReader(f, delimiter="\t")]
    conds = sorted({e[2] for e in ev})
    with open(cff) as f:
        conf = np.array([[float(v) for v in r.values()] for r in csv.DictReader(f, delimiter="\t")])
    X = design(ev, conds, T, tr, conf)
    m = Y.mean(0)
    ok = np.isfinite(Y).all(0) & (m > 0) & (Y.std(0) > 0)
    Y = 100 * Y[:, ok] / m[ok]
    c = np.zeros(X.shape[1])
    c[0], c[1] = 1, -1
    beta = np.linalg.pinv(X) @ Y
    e = Y - X @ beta
    rho = np.clip((e[1:] * e[:-1]).sum(0) / (e * e).sum(0), -0.99, 0.99)
    rb = np.round(rho, 2)
    t = np.empty(Y.shape[1])
    df = T - np.linalg.matrix_rank(X)
    for r in np.unique(rb):
        idx = np.flatnonzero(rb == r)
        Xw, Yw = X.copy(), Y[:, idx]
        Xw[1:] -= r * X[:-1]
        Xw[0] *= np.sqrt(1 - r * r)
        Yw[1:] -= r * Y[:-1, idx]          # Y[:, idx] is a copy: whiten it in place
        Yw[0] *= np.sqrt(1 - r * r)
        pw = np.linalg.pinv(Xw)
        b = pw @ Yw
        res = Yw - Xw @ b
        s2 = (res * res).sum(0) / df
        v = c @ pw @ pw.T @ c
        t[idx] = (c @ b) / np.sqrt(s2 * v)
    full = np.full(ok.size, np.nan)
    full[ok] = t
    np.save(out, full.reshape(data.shape[:3]))


if __name__ == "__main__":
    main()
