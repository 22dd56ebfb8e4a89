# test_sim_recovery.py - the simulator's truth is what an independent top-10% fROI analysis recovers.
# An independent least-squares analysis in numpy/scipy (not the project's C code): the two-gamma HRF
# (Friston et al. 1998, the common canonical form as in METHODS.md section 2), cosine drift,
# motion confounds, odd/even runs for selection and measurement, then the fROI mean compared
# with truth.csv. Also reads every file back with nibabel.
import csv
import math
import os
import subprocess
import sys
import tempfile
import tap
from tap import ok as check

try:
    import nibabel as nib
    import numpy as np
    from scipy import stats
except ImportError as exc:  # pragma: no cover
    print("skip - numpy/scipy/nibabel unavailable: %s" % exc)
    sys.exit(0)

BIN = os.environ.get("SPLITROI", "build/splitroi")


def hrf_kernel(dt=0.05):
    t = np.arange(int(round(32 / dt))) * dt
    h = stats.gamma.pdf(t, 6, scale=1) - stats.gamma.pdf(t, 16, scale=1) / 6
    return h / (h.sum() * dt)


def regressors(events, conds, T, tr, s=0.5, dt=0.05):
    n = int(math.ceil((T * tr + 32) / dt)) + 2
    h = hrf_kernel(dt)
    X = np.zeros((T, len(conds)))
    tk = (np.arange(T) + s) * tr / dt
    for ci, c in enumerate(conds):
        stim = np.zeros(n)
        for on, du, tt in events:
            if tt != c:
                continue
            j0 = int(math.floor(on / dt))
            j1 = int(math.floor((on + du) / dt))
            for j in range(j0, j1 + 1):
                lo, hi = max(on, j * dt), min(on + du, (j + 1) * dt)
                if hi > lo:
                    stim[j] += (hi - lo) / dt
        x = np.convolve(stim, h)[:n] * dt
        X[:, ci] = np.interp(tk, np.arange(n), x)
    return X


def read_tsv(path):
    with open(path) as f:
        return list(csv.DictReader(f, delimiter="\t"))


def fit_run(bold, events_path, conf_path, conds, tr):
    img = nib.load(bold)
    Y = np.asarray(img.dataobj, dtype=float)
    shape = Y.shape[:3]
    T = Y.shape[3]
    Y = Y.reshape(-1, T, order="F").T  # T x V, NIfTI order (x fastest)
    ev = [(float(r["onset"]), float(r["duration"]), r["trial_type"]) for r in read_tsv(events_path)]
    Xc = regressors(ev, conds, T, tr)
    conf = np.array([[float(v) for v in r.values()] for r in read_tsv(conf_path)])
    conf = conf - conf.mean(axis=0)
    Q = int(math.floor(2 * T * tr / 128))
    k = np.arange(T)
    C = np.column_stack([math.sqrt(2 / T) * np.cos(math.pi * q * (2 * k + 1) / (2 * T)) for q in range(1, Q + 1)])
    X = np.column_stack([Xc, conf, C, np.ones(T)])
    m = Y.mean(axis=0)
    sd = Y.std(axis=0)
    ok = (m > 0) & (sd > 0)
    Ys = np.zeros_like(Y)
    Ys[:, ok] = 100 * Y[:, ok] / m[ok]
    B, res, rank, _ = np.linalg.lstsq(X, Ys, rcond=None)
    df = T - rank
    r = Ys - X @ B
    s2 = (r ** 2).sum(axis=0) / df
    XtXi = np.linalg.pinv(X.T @ X)
    return B[: len(conds)], s2, XtXi[: len(conds), : len(conds)], ok, shape, img


def main():
    tmp = tempfile.mkdtemp()
    out = os.path.join(tmp, "sim")
    nsub = 3
    r = subprocess.run([BIN, "simulate", "--out", out, "--subjects", str(nsub), "--seed", "7", "--quiet"] + os.environ.get("SIMARGS", "").split(),
                       capture_output=True, text=True)
    check(r.returncode == 0, "simulate ran" + (" (%s)" % r.stderr.strip()[:200] if r.returncode else ""))
    if r.returncode:
        return
    data = os.path.join(out, "data")
    par = nib.load(os.path.join(out, "parcels.nii.gz"))
    labels = np.asarray(par.dataobj).reshape(-1, order="F")
    names = {int(r["index"]): r["name"] for r in read_tsv(os.path.join(out, "parcels.tsv"))}
    truth = {}
    with open(os.path.join(out, "truth.csv")) as f:
        for row in csv.DictReader(f):
            truth[(row["subject"], row["parcel"], row["task"], row["effect"])] = float(row["value"])
    diffs = []
    mdiffs = []
    nulls = []
    for s in range(1, nsub + 1):
        sub = "sub-%02d" % s
        fdir = os.path.join(data, sub, "func")
        fits = []
        for run in range(1, 5):
            base = os.path.join(fdir, "%s_task-tones_run-%02d" % (sub, run))
            fits.append(fit_run(base + "_bold.nii.gz", base + "_events.tsv",
                                base + "_desc-confounds_timeseries.tsv", ["melody", "scrambled"], 2.0))
            check(np.allclose(fits[-1][5].affine, par.affine), "%s run %d on the parcels' grid" % (sub, run))
        for split, (dr, mr) in {"A": ((0, 2), (1, 3)), "B": ((1, 3), (0, 2))}.items():
            # define: fixed-effects t of melody - scrambled on the define runs
            c = np.array([1.0, -1.0])
            E = np.mean([c @ fits[i][0] for i in dr], axis=0)
            V = np.sum([fits[i][1] * (c @ fits[i][2] @ c) for i in dr], axis=0) / len(dr) ** 2
            t = np.where(V > 0, E / np.sqrt(np.where(V > 0, V, 1)), -np.inf)
            ok = np.all([f[3] for f in fits], axis=0)
            for p, pname in names.items():
                cand = np.where((labels == p) & ok)[0]
                k = int(math.ceil(10 * len(cand) / 100))
                order = cand[np.lexsort((cand, -t[cand]))][:k]
                for eff, w in (("melody", [1, 0]), ("scrambled", [0, 1]), ("melody-scrambled", [1, -1])):
                    est = np.mean([np.array(w) @ fits[i][0] for i in mr], axis=0)[order].mean()
                    tv = truth[(sub, pname, "tones", eff)]
                    if pname == "occipital_control":
                        nulls.append(est)
                    else:
                        diffs.append(est - tv)
                        if os.environ.get('SIMDEBUG'): print('# %s %s %s est %.3f truth %.3f' % (sub, pname, eff, est, tv))
        # the measured task: fROIs from all four localizer runs, measured on both memory runs
        mfits = []
        for run in range(1, 3):
            base = os.path.join(fdir, "%s_task-memory_run-%02d" % (sub, run))
            mfits.append(fit_run(base + "_bold.nii.gz", base + "_events.tsv",
                                 base + "_desc-confounds_timeseries.tsv", ["familiar", "novel"], 2.0))
        c = np.array([1.0, -1.0])
        E = np.mean([c @ f[0] for f in fits], axis=0)
        V = np.sum([f[1] * (c @ f[2] @ c) for f in fits], axis=0) / len(fits) ** 2
        t = np.where(V > 0, E / np.sqrt(np.where(V > 0, V, 1)), -np.inf)
        ok = np.all([f[3] for f in fits + mfits], axis=0)
        for p, pname in names.items():
            cand = np.where((labels == p) & ok)[0]
            k = int(math.ceil(10 * len(cand) / 100))
            order = cand[np.lexsort((cand, -t[cand]))][:k]
            for eff, w in (("familiar", [1, 0]), ("novel", [0, 1]), ("familiar-novel", [1, -1])):
                est = np.mean([np.array(w) @ f[0] for f in mfits], axis=0)[order].mean()
                tv = truth[(sub, pname, "memory", eff)]
                (nulls if pname == "occipital_control" else mdiffs).append(est if pname == "occipital_control" else est - tv)
    mdiffs = np.array(mdiffs)
    print("# memory recovery: mean error %.3f, sd %.3f, max |error| %.3f (n=%d)"
          % (mdiffs.mean(), mdiffs.std(), np.abs(mdiffs).max(), len(mdiffs)))
    check(abs(mdiffs.mean()) < 0.08, "measured-task fROI estimates recover truth.csv on average (bias %.3f)" % mdiffs.mean())
    check(np.abs(mdiffs).max() < 0.5, "every measured-task estimate within 0.5 of truth (max %.3f)" % np.abs(mdiffs).max())
    diffs = np.array(diffs)
    nulls = np.array(nulls)
    print("# recovery: mean error %.3f, sd %.3f, max |error| %.3f (n=%d); null parcel mean %.3f sd %.3f"
          % (diffs.mean(), diffs.std(), np.abs(diffs).max(), len(diffs), nulls.mean(), nulls.std()))
    # a few tenths of a percent per subject and split at the default noise; the average is unbiased
    check(abs(diffs.mean()) < 0.08, "fROI estimates recover truth.csv on average (bias %.3f)" % diffs.mean())
    check(np.abs(diffs).max() < 0.4, "every fROI estimate within 0.4 of truth (max %.3f)" % np.abs(diffs).max())
    # the null parcel: selection on independent runs leaves no bias
    check(abs(nulls.mean()) < 0.15, "null parcel measures about zero (%.3f)" % nulls.mean())


main()
sys.exit(1 if tap.failures else 0)
