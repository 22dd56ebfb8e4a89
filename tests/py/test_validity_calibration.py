# test_validity_calibration.py - on null studies the group one-sample test per parcel rejects at its nominal 5%, and its p values are uniform.
# 20 null studies (`splitroi simulate --null`, seeds 301..320, 8 subjects, 2 localizer runs of 64
# volumes) analyzed by `splitroi analyze` and `splitroi group`; p is read from group.csv.
# Which rows count: per study and parcel, melody and scrambled (tones, odd-even:mean) and familiar
# and novel (memory, all). The contrast rows are differences of these and are left out. Rows within
# a study are correlated: the four effects of a parcel are read from the same fROI of the same
# subjects, and each pair of conditions comes from one GLM whose regressors overlap. Parcels of a
# study are nearly independent (different voxels, independent voxel noise; the shared drift and
# motion leak are in the model), and studies are independent (different seeds).
import math
import os
import sys
import tempfile
from concurrent.futures import ThreadPoolExecutor

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import validity_lib as vl  # noqa: E402

try:
    import numpy as np
    from scipy import stats
except ImportError as exc:  # pragma: no cover
    print("skip - numpy/scipy unavailable: %s" % exc)
    sys.exit(0)

NSTUDY, NSUB, VOLUMES, SEED0 = 20, 8, 64, 301
ROWS = [("odd-even:mean", "tones", "melody"), ("odd-even:mean", "tones", "scrambled"),
        ("all", "memory", "familiar"), ("all", "memory", "novel")]


def one_study(args):
    """Simulates, analyzes and groups one null study; returns its group.csv rows or None."""
    root, seed, ck = args
    out = os.path.join(root, "null-%d" % seed)
    ok = (vl.run(["simulate", "--out", out, "--quiet", "--null", "--seed", str(seed), "--subjects", str(NSUB),
                  "--volumes", str(VOLUMES), "--runs", "2"], "simulate seed %d" % seed, ck)
          and vl.run(["analyze", os.path.join(out, "study.ini"), "--jobs", "1"], "analyze seed %d" % seed, ck)
          and vl.run(["group", os.path.join(out, "results")], "group seed %d" % seed, ck))
    return vl.read_csv(os.path.join(out, "results", "group.csv")) if ok else None


def binom_interval(n, p, level):
    """Central interval [lo, hi] of Binomial(n, p) holding at least `level` of its mass."""
    a = (1 - level) / 2
    return int(stats.binom.ppf(a, n, p)), int(stats.binom.isf(a, n, p))


def main():
    vl.skip_unless_full("test_validity_calibration")
    ck = vl.Checker("test_validity_calibration")
    root = tempfile.mkdtemp()
    # two studies at a time, one analysis job each: the two cores stay busy through the serial parts
    with ThreadPoolExecutor(max_workers=2) as pool:
        results = list(pool.map(one_study, [(root, SEED0 + i, ck) for i in range(NSTUDY)]))
    if any(r is None for r in results):
        ck.finish()
    p = {}  # (study, parcel, effect) -> p
    for i, rows in enumerate(results):
        for r in rows:
            if (r["split"], r["measure_task"], r["effect"]) in ROWS and r["test"] == "one-sample":
                p[(i, r["parcel"], r["effect"])] = float(r["p"])
    parcels = sorted({k[1] for k in p})
    n = len(p)
    ck.check(n == NSTUDY * len(parcels) * len(ROWS) and len(parcels) == 4,
             "group.csv has every row: %d studies x %d parcels x %d effects = %d" % (NSTUDY, len(parcels), len(ROWS), n))
    pv = np.array(list(p.values()))
    k = int((pv < 0.05).sum())

    # (1) The rows treated as independent: n = 320. If the test is calibrated, the number of
    # p < 0.05 is Binomial(320, 0.05) (mean 16) under independence; its central 99.9% interval is
    # computed below. Correlation between rows of one fROI widens the count's spread by the design
    # effect 1 + (m - 1) rho (m = 4 rows per cluster, rho the correlation of the rejection
    # indicators); rho is taken as the largest correlation of the |z| equivalents of p between two effects
    # of a parcel, measured here over the 80 (study, parcel) clusters, so the interval is taken for
    # an effective n = 320 / (1 + 3 rho) and scaled back to 320 rows.
    t = {key: stats.norm.isf(v / 2) for key, v in p.items()}  # |z| equivalent of each two-sided p
    units = [(i, q) for i in range(NSTUDY) for q in parcels]
    mat = np.array([[t[(i, q, e)] for (_, _, e) in ROWS] for i, q in units])
    cor = np.corrcoef(mat.T)
    rho = max(0.0, max(abs(cor[a, b]) for a in range(len(ROWS)) for b in range(a + 1, len(ROWS))))
    neff = n / (1 + (len(ROWS) - 1) * rho)
    lo, hi = binom_interval(int(round(neff)), 0.05, 0.999)
    scale = n / round(neff)
    ck.check(lo * scale <= k <= hi * scale,
             "rejection rate at 5%%: %d of %d rows (%.1f%%) within the 99.9%% Binomial interval [%.1f, %.1f] "
             "(effective n %.0f for row correlation %.2f)" % (k, n, 100.0 * k / n, lo * scale, hi * scale, neff, rho))
    # (2) The strictly independent subset: one row per (study, parcel), melody only (n = 80);
    # Binomial(80, 0.05) 99.9% interval.
    pm = np.array([p[(i, q, "melody")] for i, q in units])
    km = int((pm < 0.05).sum())
    lo, hi = binom_interval(len(pm), 0.05, 0.999)
    ck.check(lo <= km <= hi, "melody rows alone: %d of %d reject (99.9%% Binomial(%d, 0.05) interval [%d, %d])"
             % (km, len(pm), len(pm), lo, hi))
    # (3) Calibration at every level, not only 5%: under the null, p is uniform on (0, 1).
    # Kolmogorov-Smirnov on each effect's 80 independent p values; 4 tests, so each at 0.001 / 4
    # keeps the family-wise false-failure rate at 0.1%.
    for _, _, e in ROWS:
        x = np.array([p[(i, q, e)] for i, q in units])
        ks = stats.kstest(x, "uniform")
        ck.check(ks.pvalue > 0.001 / len(ROWS),
                 "%s: p values uniform (KS D = %.3f, p = %.3f, n = %d)" % (e, ks.statistic, ks.pvalue, len(x)))
    # (4) The null parcel of a study with true effects elsewhere (occipital_control, which the demo
    # shows) is exactly a null study's: no effect is ever placed in it, the noise, drift and motion
    # of each voxel come from the same seeded streams, and the GLM fits each voxel alone. So its
    # rows are the ones whose calibration was just checked (a demo row at p < 0.05 there is chance).
    same = []
    for null in ("--null", None):
        out = os.path.join(root, "twin-%s" % ("null" if null else "active"))
        args = ["simulate", "--out", out, "--quiet", "--seed", "7", "--subjects", "3", "--volumes", str(VOLUMES),
                "--runs", "2"] + ([null] if null else [])
        if not (vl.run(args, "simulate twin", ck) and vl.run(["analyze", os.path.join(out, "study.ini"), "--jobs", vl.JOBS],
                                                            "analyze twin", ck)):
            ck.finish()
        same.append([r for r in vl.read_csv(os.path.join(out, "results", "responses.csv"))
                     if r["parcel"] == "occipital_control"])
    ck.check(len(same[0]) > 0 and same[0] == same[1],
             "the null parcel's %d rows are identical in a null study and in one with true effects" % len(same[0]))
    ck.finish()


if __name__ == "__main__":
    main()
