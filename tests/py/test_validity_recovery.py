# test_validity_recovery.py - validity of the whole chain: cross-validated fROI values from the real binary recover the simulator's truth, and beat the whole-parcel mean.
# One simulated study (16 subjects, seed 11), analyzed by `splitroi analyze`; its odd-even:mean rows
# (tones) and all rows (memory) are compared with truth.csv. The comparison needs care: truth.csv
# is the true effect averaged over the parcel's true top 10% (an oracle fROI), whereas a noisy
# selection admits a few voxels of lower true weight, so the estimate is unbiased only for the
# voxels it actually selected. The test therefore also rebuilds each voxel's true weight from a
# noise-free twin of the same study (same seed, --noise 0: region, amplitudes, events and
# confounds are drawn from their own streams, so only the noise changes) fitted by `splitroi fit`.
import math
import os
import sys
import tempfile

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import validity_lib as vl  # noqa: E402

try:
    import nibabel as nib
    import numpy as np
    from scipy import stats
except ImportError as exc:  # pragma: no cover
    print("skip - numpy/scipy/nibabel unavailable: %s" % exc)
    sys.exit(0)

NSUB, SEED = 16, 11
ACTIVE = ("left_auditory", "right_auditory", "frontal_pitch")
ROWS = [("tones", "odd-even:mean", e) for e in ("melody", "scrambled", "melody-scrambled")] + \
       [("memory", "all", e) for e in ("familiar", "novel", "familiar-novel")]


def img(path):
    return np.asarray(nib.load(path).dataobj)


def main():
    vl.skip_unless_full("test_validity_recovery")
    ck = vl.Checker("test_validity_recovery")
    tmp = tempfile.mkdtemp()
    noisy, clean = os.path.join(tmp, "noisy"), os.path.join(tmp, "clean")
    if not (vl.simulate(noisy, ck, "--subjects", NSUB, "--seed", SEED)
            and vl.simulate(clean, ck, "--subjects", NSUB, "--seed", SEED, "--noise", 0)):
        ck.finish()
    study = os.path.join(noisy, "study.ini")
    # the whole-parcel average: the same analysis with a selection that keeps every candidate voxel
    pstudy = os.path.join(noisy, "study_parcel.ini")
    vl.write_study(study, pstudy, {"top_percent": "100", "out": "results_parcel"})
    if not (vl.analyze(study, ck) and vl.analyze(pstudy, ck)):
        ck.finish()
    truth_rows = vl.read_csv(os.path.join(noisy, "truth.csv"))
    ck.check(truth_rows == vl.read_csv(os.path.join(clean, "truth.csv")),
             "the noise-free twin has the same truth.csv (same regions and amplitudes)")
    truth = {(r["subject"], r["parcel"], r["task"], r["effect"]): r for r in truth_rows}

    def values(path):
        return {(r["subject"], r["parcel"], r["measure_task"], r["split"], r["effect"]): float(r["value"])
                for r in vl.read_csv(path)}
    froi = values(os.path.join(noisy, "results", "responses.csv"))
    whole = values(os.path.join(noisy, "results_parcel", "responses.csv"))
    labels = img(os.path.join(noisy, "parcels.nii.gz"))
    names = {int(r["index"]): r["name"] for r in vl.read_csv(os.path.join(noisy, "parcels.tsv"))}
    pidx = {v: k for k, v in names.items()}

    # true weight of every voxel: the noise-free melody effect map of one run (OLS; with no noise
    # the GLM is exact, drift and motion leak being in the model) over the parcel's peak melody value
    subs = sorted({r["subject"] for r in truth_rows})
    weight = {}
    for s in subs:
        fdir = os.path.join(clean, "data", s, "func")   # s is the participant_id, sub-<label>
        base = os.path.join(fdir, "%s_task-tones_run-01" % s)
        odir = os.path.join(tmp, "fit-" + s)
        if not vl.run(["fit", base + "_bold.nii.gz", "--out", odir, "--autocorrelation", "none", "--threads", vl.JOBS,
                       "--confounds", base + "_desc-confounds_timeseries.tsv",
                       "--confound-columns", "motion_tx,motion_ty,motion_tz,motion_rx,motion_ry,motion_rz"],
                      "noise-free fit of %s" % s, ck):
            ck.finish()
        mel = img(os.path.join(odir, "%s_task-tones_run-01_desc-melody_effect.nii.gz" % s)).astype(float)
        w = np.zeros_like(mel)
        for p in ACTIVE:
            peak = float(truth[(s, p, "tones", "melody")]["peak_value"])
            m = labels == pidx[p]
            w[m] = mel[m] / peak
        weight[s] = w
    allw = np.concatenate([weight[s][np.isin(labels, [pidx[p] for p in ACTIVE])] for s in subs])
    ck.check(allw.min() > -1e-4 and allw.max() < 1 + 1e-4 and np.isclose(allw.max(), 1, atol=1e-4),
             "noise-free weights lie in [0, 1] with a plateau at 1 (min %.2g, max %.6f)" % (allw.min(), allw.max()))

    def selected_weight(s, p, task):
        pi = pidx[p]
        if task == "tones":  # odd-even:mean averages the A and B fROIs' values
            return np.mean([weight[s][img(os.path.join(noisy, "results", s, "func",
                                                       "%s_task-tones_desc-oddeven%s_dseg.nii.gz" % (s, h))) == pi].mean()
                            for h in "AB"])
        return weight[s][img(os.path.join(noisy, "results", s, "func",
                                          "%s_task-tones_desc-allmemory_dseg.nii.gz" % s)) == pi].mean()

    nchecks = len(ACTIVE) * len(ROWS)
    # Threshold for the unbiasedness checks: the mean error over n subjects divided by its standard
    # error (sd of the per-subject errors across subjects / sqrt(n)) is Student-t with n-1 df if
    # the estimate is unbiased; with m = 18 checks and a family-wise false-failure rate of 1% the
    # Bonferroni bound is the t_{n-1} quantile 1 - 0.01 / (2 m): 4.36 SE for n = 16.
    tcrit = stats.t.ppf(1 - 0.01 / (2 * nchecks), NSUB - 1)
    mae_f, mae_w, dil = [], [], []
    for p in ACTIVE:
        for task, split, eff in ROWS:
            est = np.array([froi[(s, p, task, split, eff)] for s in subs])
            tv = np.array([float(truth[(s, p, task, eff)]["value"]) for s in subs])
            peak = np.array([float(truth[(s, p, task, eff)]["peak_value"]) for s in subs])
            sel = np.array([peak[i] * selected_weight(s, p, task) for i, s in enumerate(subs)])
            err = est - sel
            se = err.std(ddof=1) / math.sqrt(NSUB)
            ck.check(abs(err.mean()) < tcrit * se,
                     "%s %s %s: estimate unbiased for the selected voxels' truth (mean error %+.4f, "
                     "|error| < %.2f SE = %.4f; SE = sd across subjects / sqrt(%d))"
                     % (p, task, eff, err.mean(), tcrit, tcrit * se, NSUB))
            # against truth.csv itself (no noise-free twin needed): the estimate may fall short of it
            # (towards 0) by the selection dilution, allowed up to 5% of the true value (see below),
            # plus the same tcrit standard errors of noise; beyond it only by noise
            e2 = est - tv
            se2 = e2.std(ddof=1) / math.sqrt(NSUB)
            d = (sel - tv).mean()
            short = -math.copysign(1.0, tv.mean()) * e2.mean()
            lo, hi = -tcrit * se2, 0.05 * abs(tv.mean()) + tcrit * se2
            ck.check(lo < short < hi,
                     "%s %s %s: mean error vs truth.csv %+.4f; shortfall towards 0 %+.4f in (%+.4f, %+.4f) = "
                     "(-%.2f SE, 5%% of truth + %.2f SE)" % (p, task, eff, e2.mean(), short, lo, hi, tcrit, tcrit))
            mae_f.append(np.abs(e2).mean())
            mae_w.append(np.abs(np.array([whole[(s, p, task, split, eff)] for s in subs]) - tv).mean())
            if abs(tv.mean()) > 0.3:
                dil.append(d / tv.mean())
    # truth.csv promises what a correct top-10% analysis recovers "within noise"; the simulate
    # engineer measured 2.7% low (localizer) and 1% low (measured task) over 32 subjects. Allow up
    # to 5% of the true value: more would make truth.csv misleading as a target.
    ck.check(max(abs(x) for x in dil) < 0.05,
             "selection dilution below 5%% of truth.csv for every effect (largest %.1f%%)" % (100 * max(abs(x) for x in dil)))
    # The whole-parcel mean is diluted: the active region (a plateau of about a third of the parcel
    # with a falling edge) covers only part of the parcel, and its centre moves from subject to
    # subject, so averaging every voxel mixes in many of weight near 0; the fROI picks the
    # subject's own active voxels. Pooled over the 18 rows the fROI's mean absolute error must be
    # smaller, and it must be smaller in every single row.
    # (the factor one half is a margin: the expected gap is several-fold)
    ck.check(np.mean(mae_f) < 0.5 * np.mean(mae_w),
             "fROI recovers the truth better than the whole parcel: mean absolute error %.4f vs %.4f"
             % (np.mean(mae_f), np.mean(mae_w)))
    ck.check(all(f < w for f, w in zip(mae_f, mae_w)),
             "fROI beats the whole-parcel mean in every one of the %d rows" % len(mae_f))
    ck.finish()


if __name__ == "__main__":
    main()
