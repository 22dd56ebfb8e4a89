# test_validity_circularity.py - no selection bias: on a null study the cross-validated localizer contrast is centred on 0, while a circular estimate is not.
# A null study (`splitroi simulate --null`, 40 subjects, seed 21: no effect anywhere) is analyzed by
# `splitroi analyze`. Its odd-even:mean melody-scrambled rows select voxels on half of the runs and
# measure on the other half, so their mean over subjects must be 0 within noise. The circular
# estimate, computed only here, selects and measures on the same runs: the mean melody-scrambled
# effect of the define runs (per-run effect maps from `splitroi fit`) inside the same fROIs. Choosing
# the voxels with the largest t on noise and then measuring that noise gives a positive value: the
# selection bias ("double dipping") described by Kriegeskorte et al. 2009, Nature Neuroscience
# 12:535-540.
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
    print("skip - numpy/nibabel unavailable: %s" % exc)
    sys.exit(0)

NSUB, SEED, VOLUMES = 40, 21, 80
EFF = "melody-scrambled"
EFF_DESC = "melodyMinusScrambled"   # its desc entity in fit's file names
SPLITS = {"A": ((1, 3), (2, 4)), "B": ((2, 4), (1, 3))}  # odd-even: define runs, measure runs


def img(path):
    return np.asarray(nib.load(path).dataobj).astype(float)


def main():
    vl.skip_unless_full("test_validity_circularity")
    ck = vl.Checker("test_validity_circularity")
    out = os.path.join(tempfile.mkdtemp(), "null")
    # 80 volumes of 2 s keep the simulator's two drift cosines inside the model's 128 s basis
    # (floor(2 * 80 * 2 / 128) = 2 cosines)
    if not vl.simulate(out, ck, "--subjects", NSUB, "--seed", SEED, "--null", "--volumes", VOLUMES):
        ck.finish()
    study = os.path.join(out, "study_tones.ini")
    vl.write_study(os.path.join(out, "study.ini"), study, drop_sections=("measure memory",))
    if not vl.analyze(study, ck):
        ck.finish()
    rows = vl.read_csv(os.path.join(out, "results", "responses.csv"))
    val = {(r["subject"], r["parcel"], r["split"], r["effect"]): float(r["value"]) for r in rows}
    names = {int(r["index"]): r["name"] for r in vl.read_csv(os.path.join(out, "parcels.tsv"))}
    subs = sorted({r["subject"] for r in rows})
    ck.check(len(subs) == NSUB, "analyze measured all %d subjects" % NSUB)

    cv, circ, agree = [], [], []
    for s in subs:
        lab = s[4:]   # s is the participant_id, sub-<label>
        odir = os.path.join(out, "fit-" + lab)
        # the study's own model keys (AR(1), drift cutoff, confounds) and effects, every run
        if not vl.run(["fit", "--study", study, "--subject", lab, "--task", "tones", "--out", odir,
                       "--threads", vl.JOBS],
                      "fit %s" % s, ck):
            ck.finish()
        eff = {k: img(os.path.join(odir, "%s_task-tones_run-%02d_desc-%s_effect.nii.gz" % (s, k, EFF_DESC)))
               for k in range(1, 5)}
        for h, (drun, mrun) in SPLITS.items():
            froi = img(os.path.join(out, "results", s, "func", "%s_task-tones_desc-oddeven%s_dseg.nii.gz" % (s, h)))
            for pi, p in names.items():
                m = froi == pi
                c = np.mean([eff[k][m].mean() for k in drun])  # selected and measured on the same runs
                x = np.mean([eff[k][m].mean() for k in mrun])  # measured on the other runs
                circ.append((s, p, h, c))
                agree.append(abs(x - val[(s, p, "odd-even:" + h, EFF)]))
        for p in names.values():
            cv.append((s, val[(s, p, "odd-even:mean", EFF)]))
    # the per-run fit reproduces analyze's own cross-validated value (same GLM, float32 maps)
    ck.check(max(agree) < 1e-4, "per-run effects inside the fROI reproduce analyze's odd-even:A/B values (max diff %.2g)" % max(agree))

    # Units: one value per subject (mean over the 4 parcels and, for the circular one, both halves);
    # subjects are independent, so SE = sd across subjects / sqrt(n).
    def per_subject(pairs):
        return np.array([np.mean([v for k, v in pairs if k == s]) for s in subs])
    cvs = per_subject(cv)
    cis = per_subject([(s, c) for s, _, _, c in circ])
    se_cv = cvs.std(ddof=1) / math.sqrt(NSUB)
    se_ci = cis.std(ddof=1) / math.sqrt(NSUB)
    # Under the null the mean of n = 40 independent subject values over its SE is Student-t with 39
    # df; |t| < 2.5 holds with probability 98.4%.
    ck.check(abs(cvs.mean()) < 2.5 * se_cv,
             "cross-validated melody-scrambled on null data centred on 0: mean %+.4f, SE %.4f, t = %+.2f (|t| < 2.5)"
             % (cvs.mean(), se_cv, cvs.mean() / se_cv))
    # The circular estimate must be positive by more than 5 SE (a one-sided t_39 beyond 5 has
    # probability below 1e-5 if there were no bias); the expected bias is large: the mean of the top
    # 10% of roughly normal t values sits near 1.75 sd of the voxel effects.
    ck.check(cis.mean() > 5 * se_ci,
             "circular estimate (select and measure on the define runs) biased upwards: mean %+.4f, SE %.4f, t = %+.1f (> 5)"
             % (cis.mean(), se_ci, cis.mean() / se_ci))
    ck.check(cis.mean() > 10 * abs(cvs.mean()) and cis.mean() > 5 * se_cv,
             "the circular bias (%.3f) dwarfs any cross-validated offset (%.4f)" % (cis.mean(), cvs.mean()))
    # also per parcel: every parcel's cross-validated mean within 2.5 SE of 0 and circular > 5 SE
    # (4 parcels: the chance that one of 4 independent t_39 exceeds 2.5 is about 6%, so this uses
    # the Bonferroni bound for 4 checks at a 5% family rate, t_39 quantile 1 - 0.05/8 = 2.61)
    tp = stats.t.ppf(1 - 0.05 / 8, NSUB - 1)
    for p in names.values():
        x = np.array([val[(s, p, "odd-even:mean", EFF)] for s in subs])
        y = np.array([np.mean([c for s2, p2, _, c in circ if s2 == s and p2 == p]) for s in subs])
        sx, sy = x.std(ddof=1) / math.sqrt(NSUB), y.std(ddof=1) / math.sqrt(NSUB)
        ck.check(abs(x.mean()) < tp * sx and y.mean() > 5 * sy,
                 "%s: cross-validated %+.4f (t %+.2f), circular %+.4f (t %+.1f)"
                 % (p, x.mean(), x.mean() / sx, y.mean(), y.mean() / sy))
    ck.finish()


if __name__ == "__main__":
    main()
