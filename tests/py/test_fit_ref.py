"""test_fit_ref.py - `splitroi fit` end to end: maps against statsmodels, int16+scl_slope vs float, errors."""
import json
import os
import subprocess
import sys
import tempfile

import nibabel as nib
import numpy as np
import scipy.linalg
import statsmodels.api as sm

SPLITROI = os.environ.get("SPLITROI", "build/splitroi")
failed = 0


def report(ok, name):
    global failed
    print(("ok - " if ok else "not ok - ") + name)
    if not ok:
        failed += 1


def relerr(a, b, floor):
    a, b = np.asarray(a, float), np.asarray(b, float)
    both_nan = np.isnan(a) & np.isnan(b)
    d = np.abs(a - b) / np.maximum(np.maximum(np.abs(a), np.abs(b)), floor)
    d[both_nan] = 0
    return float(np.nanmax(np.where(np.isnan(d), np.inf, d)))


def make_run(d, name, seed, T=80, tr=2.0, shape=(6, 5, 4)):
    """An invented `tones` run: blocks of melody and scrambled, AR(1) noise, two confounds."""
    rng = np.random.default_rng(seed)
    t = (np.arange(T) + 0.5) * tr
    mel = (((t // 16) % 4) == 1).astype(float)
    scr = (((t // 16) % 4) == 3).astype(float)
    nv = int(np.prod(shape))
    noise = np.zeros((T, nv))
    e = rng.standard_normal((T, nv))
    for k in range(T):
        noise[k] = e[k] + (0.3 * noise[k - 1] if k else 0)
    base = 500 + 300 * rng.random(nv)
    Y = base * (1 + 0.02 * np.outer(mel, rng.random(nv)) + 0.01 * np.outer(scr, rng.random(nv))) + 5 * noise
    Y[:, 0] = 0.0                 # background: not analyzable
    Y[7, 1] = np.nan              # one missing sample: not analyzable
    data = Y.T.reshape(shape[::-1] + (T,)).transpose(2, 1, 0, 3)  # x fastest
    bold = os.path.join(d, f"{name}_bold.nii.gz")
    with open(os.path.join(d, f"{name}_events.tsv"), "w") as f:
        f.write("onset\tduration\ttrial_type\n")
        for b in range(int(T * tr // 16)):
            if b % 4 == 1:
                f.write(f"{b * 16}\t16\tmelody\n")
            if b % 4 == 3:
                f.write(f"{b * 16}\t16\tscrambled\n")
    conf = np.cumsum(rng.standard_normal((T, 2)) * 0.1, 0)
    with open(os.path.join(d, f"{name}_confounds.tsv"), "w") as f:
        f.write("trans_x\tnoise_col\trot_z\n")
        for k in range(T):
            f.write(f"{conf[k, 0]:.6f}\t{rng.random():.3f}\t{conf[k, 1]:.6f}\n")
    return bold, data


def save(path, data, tr, dtype=np.float64, slope=None, inter=0.0):
    hdr = nib.Nifti1Header()
    hdr.set_xyzt_units("mm", "sec")
    if slope is None:
        img = nib.Nifti1Image(data.astype(dtype), np.diag([2.5, 2.5, 3.0, 1]), hdr)
        img.set_data_dtype(dtype)
    else:
        raw = np.round((np.nan_to_num(data) - inter) / slope).astype(np.int16)
        img = nib.Nifti1Image(raw, np.diag([2.5, 2.5, 3.0, 1]), hdr)
        img.header.set_data_dtype(np.int16)
        img.header.set_slope_inter(slope, inter)
    img.header["pixdim"][4] = tr
    nib.save(img, path)
    # the values as stored (nibabel applies scl_slope/scl_inter)
    return np.asarray(nib.load(path).dataobj, dtype=np.float64)


def fit(args):
    return subprocess.run([SPLITROI, "fit"] + args, capture_output=True, text=True)


def expected_ratio_table(X):
    """METHODS.md 4, ar1-adjusted, by brute force: f_i = tr(R D1 R V_i) / tr(R V_i)
    for rho_i = -0.99 + 0.01 i, R = I - X pinv(X), D1 ones on the first subdiagonal."""
    T = X.shape[0]
    R = np.eye(T) - X @ np.linalg.pinv(X)
    D1 = np.eye(T, k=-1)
    grid = -0.99 + 0.01 * np.arange(199)
    f = np.array([np.trace(R @ D1 @ R @ scipy.linalg.toeplitz(g ** np.arange(T))) /
                  np.trace(R @ scipy.linalg.toeplitz(g ** np.arange(T))) for g in grid])
    assert np.all(np.diff(f) > 0)
    return grid, f


def reference(data, X, C, model="ar1-adjusted"):
    """METHODS.md 3-4 per voxel with statsmodels: percent scaling, rho from OLS residuals
    (ar1) or that ratio mapped through the inverse of the expected-ratio table (ar1-adjusted,
    linear between grid points), GLS."""
    nx, ny, nz, T = data.shape
    if model == "ar1-adjusted":
        grid, f = expected_ratio_table(X)
    Y = data.transpose(2, 1, 0, 3).reshape(-1, T).T
    out_e = np.full((C.shape[0], Y.shape[1]), np.nan)
    out_t = np.full_like(out_e, np.nan)
    for v in range(Y.shape[1]):
        y = Y[:, v]
        if not np.all(np.isfinite(y)) or y.mean() <= 0 or y.std() == 0:
            continue
        y = 100 * y / y.mean()
        r = sm.OLS(y, X).fit().resid
        rho = np.sum(r[1:] * r[:-1]) / np.sum(r * r)
        if model == "ar1-adjusted":
            rho = np.interp(rho, f, grid)   # clamps to the ends of the grid as the text says
        rho = np.clip(rho, -0.99, 0.99)
        g = sm.GLS(y, X, sigma=scipy.linalg.toeplitz(rho ** np.arange(T))).fit()
        for c in range(C.shape[0]):
            tt = g.t_test(C[c])
            out_e[c, v] = float(np.squeeze(tt.effect))
            out_t[c, v] = float(np.squeeze(tt.tvalue))
    return out_e, out_t


# The desc entity fit gives each effect (README "Fitting runs without a study file").
DESC = {"melody": "melody", "scrambled": "scrambled", "melody-scrambled": "melodyMinusScrambled"}


def mapname(base, lab, kind):
    """fit's map name: the run's entities (the combination: those all runs share), desc-<effect>, effect or tstat."""
    return f"{base}_desc-{DESC[lab]}_{'tstat' if kind == 't' else 'effect'}.nii.gz"


def load_map(path):
    a = np.asarray(nib.load(path).dataobj, dtype=np.float64)
    return a.transpose(2, 1, 0).reshape(-1)


with tempfile.TemporaryDirectory() as d:
    runs = []
    for i, seed in ((1, 11), (2, 12)):
        bold, data = make_run(d, f"sub-01_task-tones_run-{i}", seed)
        runs.append((bold, save(bold, data, 2.0)))
    conf = [r[0].replace("_bold.nii.gz", "_confounds.tsv") for r in runs]
    out = os.path.join(d, "out")
    p = fit([runs[0][0], runs[1][0], "--out", out, "--confounds", ",".join(conf),
             "--confound-columns", "trans_x rot_z", "--effect", "melody - scrambled", "--threads", "2"])
    report(p.returncode == 0, f"fit of two float64 runs succeeds ({p.stderr.strip()[:200]})")
    meta = json.load(open(os.path.join(out, "fit.json")))
    report(meta["conditions"] == ["melody", "scrambled"] and meta["effects"][2] == "melody-scrambled",
           "fit.json lists sorted conditions and the effect")
    report(meta["options"]["autocorrelation"] == "ar1-adjusted", "the default model is ar1-adjusted, and fit.json says so")
    outp = os.path.join(d, "out_plain")
    p = fit([runs[0][0], "--out", outp, "--confounds", conf[0], "--confound-columns", "trans_x rot_z",
             "--effect", "melody - scrambled", "--autocorrelation", "ar1", "--quiet"])
    report(p.returncode == 0 and json.load(open(os.path.join(outp, "fit.json")))["options"]["autocorrelation"] == "ar1",
           "--model ar1 (the plain AR(1)) stays selectable")
    tol = 2e-6  # maps are float32
    per_run = []
    for i, (bold, data) in enumerate(runs):
        base = os.path.basename(bold).replace("_bold.nii.gz", "")
        X = np.loadtxt(os.path.join(out, f"{base}_design.csv"), delimiter=",", skiprows=1)
        hdr = open(os.path.join(out, f"{base}_design.csv")).readline().strip().split(",")
        report(hdr[:4] == ["melody", "scrambled", "trans_x", "rot_z"] and hdr[-1] == "baseline",
               f"design CSV columns named (run {i + 1})")
        report(meta["runs"][i]["df"] == 80 - X.shape[1] and meta["runs"][i]["rank"] == X.shape[1],
               f"fit.json rank and df (run {i + 1})")
        C = np.zeros((3, X.shape[1]))
        C[0, 0] = C[2, 0] = 1
        C[1, 1] = 1
        C[2, 1] = -1
        re, rt = reference(data, X, C)
        ok = True
        for c, lab in enumerate(["melody", "scrambled", "melody-scrambled"]):
            me = load_map(os.path.join(out, mapname(base, lab, "effect")))
            mt = load_map(os.path.join(out, mapname(base, lab, "t")))
            ok &= relerr(me, re[c], 1e-3) < tol and relerr(mt, rt[c], 1e-3) < tol
        report(ok, f"run {i + 1} effect and t maps equal statsmodels GLS (bias-adjusted AR(1)) to float32 precision")
        if i == 0:
            pe, pt = reference(data, X, C, model="ar1")
            ok = True
            for c, lab in enumerate(["melody", "scrambled", "melody-scrambled"]):
                mt = load_map(os.path.join(outp, mapname(base, lab, "t")))
                ok &= relerr(mt, pt[c], 1e-3) < tol
            report(ok and relerr(pt[2], rt[2], 1e-3) > 1e-3,
                   "--model ar1 t maps equal statsmodels GLS with rho from OLS residuals (and differ from the default)")
        report(np.isnan(me[0]) and np.isnan(me[1]) and np.isfinite(me[2]), "background and NaN voxels give NaN")
        per_run.append((re, rt))
    # fixed effects (METHODS.md section 5): var = (effect / t)^2
    ok = True
    for c, lab in enumerate(["melody", "scrambled", "melody-scrambled"]):
        E = (per_run[0][0][c] + per_run[1][0][c]) / 2
        V = ((per_run[0][0][c] / per_run[0][1][c]) ** 2 + (per_run[1][0][c] / per_run[1][1][c]) ** 2) / 4
        ok &= relerr(load_map(os.path.join(out, mapname("sub-01_task-tones", lab, "effect"))), E, 1e-3) < tol
        ok &= relerr(load_map(os.path.join(out, mapname("sub-01_task-tones", lab, "t"))), E / np.sqrt(V), 1e-3) < tol
    report(ok, "combined maps equal the fixed-effects mean and t computed from the reference")
    report(meta["combined_df"] == meta["runs"][0]["df"] + meta["runs"][1]["df"], "combined df is the sum")

    # int16 + scl_slope against the float64 run holding the same values
    bold, data = make_run(d, "sub-02_task-tones_run-1", 21)
    scaled = save(bold, data, 2.0, slope=0.125, inter=3.0)
    fl = os.path.join(d, "float", "sub-02_task-tones_run-1_bold.nii.gz")
    os.makedirs(os.path.dirname(fl))
    save(fl, scaled, 2.0)
    for ext in ("_events.tsv",):
        src = bold.replace("_bold.nii.gz", ext)
        open(fl.replace("_bold.nii.gz", ext), "w").write(open(src).read())
    o1, o2 = os.path.join(d, "o_int"), os.path.join(d, "o_float")
    p1 = fit([bold, "--out", o1, "--quiet"])
    p2 = fit([fl, "--out", o2, "--quiet"])
    report(p1.returncode == 0 and p2.returncode == 0, "int16 and float runs fit")
    m1 = load_map(os.path.join(o1, mapname("sub-02_task-tones_run-1", "melody", "t")))
    m2 = load_map(os.path.join(o2, mapname("sub-02_task-tones_run-1", "melody", "t")))
    report(relerr(m1, m2, 1e-3) < 1e-6 and np.sum(np.isfinite(m1)) > 50,
           "int16 with scl_slope 0.125, scl_inter 3 gives the maps of the equivalent float run")

    # threads do not change the maps
    o3 = os.path.join(d, "o_t1")
    fit([bold, "--out", o3, "--quiet", "--threads", "1"])
    a = open(os.path.join(o1, mapname("sub-02_task-tones_run-1", "melody", "effect")), "rb").read()
    b = open(os.path.join(o3, mapname("sub-02_task-tones_run-1", "melody", "effect")), "rb").read()
    report(nib.load(os.path.join(o3, mapname("sub-02_task-tones_run-1", "melody", "effect"))).get_fdata().tobytes() ==
           nib.load(os.path.join(o1, mapname("sub-02_task-tones_run-1", "melody", "effect"))).get_fdata().tobytes(),
           "maps identical for 1 and the default number of threads")

    # errors name what is wrong, and leave no fit.json behind
    eo = os.path.join(d, "o_err")
    p = fit([runs[0][0], "--out", eo, "--effect", "melody - violin"])
    report(p.returncode != 0 and "violin" in p.stderr and "melody" in p.stderr,
           f"an effect naming an unknown condition is an error listing the known ones ({p.stderr.strip()[:120]})")
    p = fit([runs[0][0], "--out", eo, "--confounds", conf[0], "--confound-columns", "trans_x framewise"])
    report(p.returncode == 1 and "framewise" in p.stderr and conf[0] in p.stderr,
           "a missing confound column is an error naming file and column")
    short = os.path.join(d, "short_confounds.tsv")
    open(short, "w").write("".join(open(conf[0]).readlines()[:50]))
    p = fit([runs[0][0], "--out", eo, "--confounds", short, "--confound-columns", "trans_x"])
    report(p.returncode == 1 and short in p.stderr and "80" in p.stderr,
           "a confounds file with the wrong row count is an error naming file and counts")
    ev = os.path.join(d, "bad_events.tsv")
    open(ev, "w").write("onset\tduration\ttrial_type\n10\t5\tmelody\n400\t5\tmelody\n20\t5\tscrambled\n")
    p = fit([runs[0][0], "--out", os.path.join(d, "o_late"), "--events", ev, "--quiet"])
    report(p.returncode == 0 and "line 3" in p.stderr and "after the end" in p.stderr,
           "an event past the end of the run is a warning naming file and line")
    p = fit([runs[0][0], "--out", eo, "--autocorrelation", "wls"])
    report(p.returncode == 2 and "--autocorrelation" in p.stderr, "a bad --autocorrelation is a usage error")
    # the old option and the old word name the new ones (the study file's words)
    p = fit([runs[0][0], "--out", eo, "--model", "ar1"])
    report(p.returncode == 2 and "'--model' is now '--autocorrelation'" in p.stderr,
           "the old --model option names --autocorrelation")
    p = fit([runs[0][0], "--out", eo, "--autocorrelation", "ols"])
    report(p.returncode == 2 and "'none'" in p.stderr, "the old word ols names none")
    p = fit([runs[0][0], "--out", eo, "--slice-reference", "0.5"])
    report(p.returncode == 2 and "'--volume-time'" in p.stderr, "the old --slice-reference names --volume-time")
    report(not os.path.exists(os.path.join(eo, "fit.json")), "failed fits write no fit.json")
    p = fit([runs[0][0], "--out", os.path.join(d, "o_tr"), "--tr", "2.5", "--quiet"])
    report(p.returncode == 0, "--tr overrides the header")

    # a truncated compressed run: an error naming the file, no outputs
    cut = os.path.join(d, "cut", "sub-03_task-tones_run-1_bold.nii.gz")
    os.makedirs(os.path.dirname(cut))
    blob = open(runs[0][0], "rb").read()
    open(cut, "wb").write(blob[: len(blob) * 2 // 3])
    open(cut.replace("_bold.nii.gz", "_events.tsv"), "w").write(open(runs[0][0].replace("_bold.nii.gz", "_events.tsv")).read())
    oc = os.path.join(d, "o_cut")
    p = fit([cut, "--out", oc, "--quiet"])
    report(p.returncode == 1 and "sub-03_task-tones_run-1_bold.nii.gz" in p.stderr,
           f"a truncated run is an error naming the file ({p.stderr.strip()[:150]})")
    report(not os.path.exists(oc) or not os.listdir(oc), "a failed run leaves no maps")

    # a condition absent from one run: warning, not estimable there, combined from the other run
    ev2 = os.path.join(d, "melody_only_events.tsv")
    open(ev2, "w").write("onset\tduration\ttrial_type\n32\t16\tmelody\n96\t16\tmelody\n")
    ev1 = runs[0][0].replace("_bold.nii.gz", "_events.tsv")
    om = os.path.join(d, "o_missing")
    p = fit([runs[0][0], runs[1][0], "--out", om, "--events", f"{ev1},{ev2}", "--effect", "melody - scrambled"])
    meta = json.load(open(os.path.join(om, "fit.json"))) if p.returncode == 0 else {"runs": [{}, {"estimable": {}}]}
    report(p.returncode == 0 and "'scrambled' has no event" in p.stderr and
           meta["runs"][1]["estimable"].get("scrambled") is False and
           meta["runs"][1]["estimable"].get("melody") is True,
           "a condition with no event in a run warns and is not estimable there")
    one = load_map(os.path.join(om, mapname("sub-01_task-tones_run-1", "scrambled", "effect")))
    comb = load_map(os.path.join(om, mapname("sub-01_task-tones", "scrambled", "effect")))
    nanrun = load_map(os.path.join(om, mapname("sub-01_task-tones_run-2", "melody-scrambled", "t")))
    report(np.array_equal(one, comb, equal_nan=True) and np.all(np.isnan(nanrun)),
           "the combined map of a condition missing in one run is the other run's; its contrast is NaN there")

    # --study finds the same runs and settings as the explicit command line
    root = os.path.join(d, "study")
    func = os.path.join(root, "data", "sub-01", "func")
    os.makedirs(func)
    open(os.path.join(root, "data", "dataset_description.json"), "w").write('{"Name": "tones", "BIDSVersion": "1.8.0"}')
    bolds = []
    for i, seed in ((1, 31), (2, 32)):
        b, dd = make_run(func, f"sub-01_task-tones_run-{i}", seed)
        save(b, dd, 2.0)
        json.dump({"RepetitionTime": 2.0}, open(b.replace(".nii.gz", ".json"), "w"))
        bolds.append(b)
    nib.save(nib.Nifti1Image(np.ones((6, 5, 4), np.int16), np.diag([2.5, 2.5, 3.0, 1])), os.path.join(root, "parcels.nii.gz"))
    open(os.path.join(root, "study.ini"), "w").write(
        "[study]\nbids = data\nout = results\n\n[localizer]\ntask = tones\ncontrast = melody - scrambled\n\n"
        "[parcels]\nimage = parcels.nii.gz\n\n[model]\nautocorrelation = none\ndrift_cutoff = 100\n"
        "confounds = trans_x rot_z\n")
    os1, os2 = os.path.join(d, "o_study"), os.path.join(d, "o_explicit")
    p = fit(["--study", os.path.join(root, "study.ini"), "--subject", "01", "--out", os1, "--quiet"])
    report(p.returncode == 0, f"fit --study succeeds ({p.stderr.strip()[:200]})")
    p = fit(bolds + ["--out", os2, "--quiet", "--autocorrelation", "none", "--drift-cutoff", "100", "--effect", "melody - scrambled",
                     "--confounds", ",".join(b.replace("_bold.nii.gz", "_confounds.tsv") for b in bolds),
                     "--confound-columns", "trans_x rot_z"])
    same = p.returncode == 0
    for f in (mapname("sub-01_task-tones", "melody-scrambled", "t"), mapname("sub-01_task-tones_run-2", "melody", "effect")):
        same = same and os.path.exists(os.path.join(os1, f)) and np.array_equal(
            load_map(os.path.join(os1, f)), load_map(os.path.join(os2, f)), equal_nan=True)
    report(same, "fit --study gives the maps of the explicit command (runs, confounds, OLS, drift cutoff, effects)")
    p = fit(["--study", os.path.join(root, "study.ini"), "--subject", "07", "--out", os1])
    report(p.returncode == 1 and "07" in p.stderr, "a subject without runs is an error naming it")

sys.exit(1 if failed else 0)
