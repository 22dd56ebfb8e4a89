"""test_reliability.py - reliability.csv and reliability_group.csv against scipy/numpy on the written maps.

The define t maps (func/sub-<l>_task-<t>_desc-<split>_tstat.nii.gz), the fROI images
(func/..._desc-<split>_dseg.nii.gz) and the parcels are read with nibabel; Pearson's r
comes from scipy.stats.pearsonr, Dice and counts from numpy, the group
medians from numpy.median. Agreement to 1e-9 (absolute; the table holds 9
significant digits).
"""
import csv
import glob
import itertools
import math
import os
import re
import subprocess
import sys
import tempfile
from tap import done, ok


try:
    import nibabel as nib
    import numpy as np
    from scipy import stats
except ImportError as exc:  # the python3 first on PATH may lack them
    print("skip - numpy/scipy/nibabel unavailable: %s" % exc)
    sys.exit(0)

SPLITROI = os.environ.get("SPLITROI", "build/splitroi")
TOL = 1e-9
THRESHOLD = 3.1


def run(*args):
    p = subprocess.run([SPLITROI] + list(args), capture_output=True, text=True)
    if p.returncode != 0:
        print(p.stdout + p.stderr)
    return p.returncode


def num(s):
    return float(s) if s != "" else math.nan


def same(a, b):
    if math.isnan(a) or math.isnan(b):
        return math.isnan(a) and math.isnan(b)
    return abs(a - b) <= TOL


def read_csv(path):
    with open(path, newline="") as f:
        return list(csv.DictReader(f))


def split_map(out, sd, split, suffix):
    """The map of a split by its entities: desc is the split's letters and digits (README, Outputs)."""
    desc = re.sub("[^A-Za-z0-9]", "", split.replace(".", "r"))
    hits = glob.glob(os.path.join(out, sd, "func", "%s_task-*_desc-%s_%s.nii.gz" % (sd, desc, suffix)))
    if len(hits) != 1:
        raise SystemExit("not ok - %s: %d maps for desc-%s_%s" % (sd, len(hits), desc, suffix))
    return hits[0]


def check_study(root, name):
    out = os.path.join(root, "results")
    lab = np.asarray(nib.load(os.path.join(root, "parcels.nii.gz")).dataobj).astype(np.int64)
    names = {}
    with open(os.path.join(root, "parcels.tsv")) as f:
        for row in csv.DictReader(f, delimiter="\t"):
            names[row["name"]] = int(row["index"])
    subs = sorted(d for d in os.listdir(out) if d.startswith("sub-"))
    bad_r = bad_d = bad_n = nmean = 0
    worst = 0.0
    per_key = {}
    for sd in subs:
        rows = read_csv(os.path.join(out, sd, "reliability.csv"))
        splits = [r["split"] for r in rows if not r["split"].endswith(":mean")]
        splits = list(dict.fromkeys(splits))
        tmaps = {s: np.asarray(nib.load(split_map(out, sd, s, "tstat")).dataobj, dtype=np.float64)
                 for s in splits}
        frois = {s: np.asarray(nib.load(split_map(out, sd, s, "dseg")).dataobj).astype(np.int64)
                 for s in splits}
        for r in rows:
            idx = names[r["parcel"]]
            inp = lab == idx
            if not r["split"].endswith(":mean"):
                t = tmaps[r["split"]]
                fin = inp & np.isfinite(t)
                if int(num(r["n_voxels"])) != int(fin.sum()) or \
                        int(num(r["n_above"])) != int((t[fin] > THRESHOLD).sum()) or \
                        int(num(r["froi_voxels"])) != int((frois[r["split"]] == idx).sum()):
                    bad_n += 1
                continue
            nmean += 1
            rs, ds = [], []
            for a, b in itertools.combinations(splits, 2):
                ta, tb = tmaps[a], tmaps[b]
                m = inp & np.isfinite(ta) & np.isfinite(tb)
                if m.sum() >= 3 and np.ptp(ta[m]) > 0 and np.ptp(tb[m]) > 0:
                    rs.append(stats.pearsonr(ta[m], tb[m])[0])
                fa, fb = frois[a] == idx, frois[b] == idx
                if fa.sum() + fb.sum() > 0:
                    ds.append(2.0 * (fa & fb).sum() / (fa.sum() + fb.sum()))
            want_r = float(np.mean(rs)) if rs else math.nan
            want_d = float(np.mean(ds)) if ds else math.nan
            got_r, got_d = num(r["t_correlation"]), num(r["dice"])
            if not same(got_r, want_r):
                bad_r += 1
            elif not math.isnan(want_r):
                worst = max(worst, abs(got_r - want_r))
            if not same(got_d, want_d):
                bad_d += 1
            if int(num(r["pairs"])) != len(splits) * (len(splits) - 1) // 2:
                bad_n += 1
            above = np.mean([(tmaps[s][inp & np.isfinite(tmaps[s])] > THRESHOLD).sum() for s in splits])
            if not same(num(r["n_above"]), float(above)):
                bad_n += 1
            key = (r["localizer"], r["parcel"], r["split"])
            per_key.setdefault(key, {"t_correlation": [], "dice": [], "n_above": []})
            for m in per_key[key]:
                if r[m] != "":
                    per_key[key][m].append(num(r[m]))
    ok(nmean > 0, "%s: the subjects' tables have :mean rows (%d)" % (name, nmean))
    ok(bad_r == 0, "%s: mean Pearson r over the pairs of splits equals scipy's to 1e-9 (%d off, worst %.2g)"
       % (name, bad_r, worst))
    ok(bad_d == 0, "%s: mean Dice over the pairs equals numpy's on the fROI images (%d off)" % (name, bad_d))
    ok(bad_n == 0, "%s: voxel counts, counts above t 3.1, fROI sizes and pair counts match (%d off)"
       % (name, bad_n))
    # the combined table holds every subject's rows, in label order
    comb = read_csv(os.path.join(out, "reliability.csv"))
    each = sum(len(read_csv(os.path.join(out, sd, "reliability.csv"))) for sd in subs)
    ok(len(comb) == each and comb[0]["subject"] == subs[0],
       "%s: combined reliability.csv has all %d subject rows" % (name, each))
    # the group summary: median, min, max per parcel
    grp = read_csv(os.path.join(out, "reliability_group.csv"))
    bad = 0
    for g in grp:
        v = per_key[(g["localizer"], g["parcel"], g["split"])][g["measure"]]
        if int(g["n"]) != len(v):
            bad += 1
        elif v and not (same(num(g["median"]), float(np.median(v))) and
                        same(num(g["min"]), min(v)) and same(num(g["max"]), max(v))):
            bad += 1
    ok(len(grp) == 3 * len(per_key) and bad == 0,
       "%s: reliability_group.csv medians and ranges equal numpy's (%d rows, %d off)" % (name, len(grp), bad))
    return per_key


with tempfile.TemporaryDirectory() as tmp:
    oe = os.path.join(tmp, "oe")
    ok(run("simulate", "--out", oe, "--subjects", "4", "--seed", "5", "--quiet") == 0, "simulate odd-even")
    ok(run("analyze", os.path.join(oe, "study.ini"), "--quiet") == 0, "analyze odd-even")
    keys = check_study(oe, "odd-even")
    # the responsive parcels' halves agree far more than the never-responding one's
    r_resp = [np.median(v["t_correlation"]) for k, v in keys.items() if k[1] != "occipital_control"]
    r_null = [np.median(v["t_correlation"]) for k, v in keys.items() if k[1] == "occipital_control"]
    ok(min(r_resp) > 0.3 and abs(r_null[0]) < 0.3,
       "responsive parcels' median r %s > 0.3; the null parcel's %.3f near 0"
       % (", ".join("%.3f" % x for x in r_resp), r_null[0]))
    lo = os.path.join(tmp, "loo")
    ok(run("simulate", "--out", lo, "--subjects", "3", "--seed", "6", "--scenario", "numbers",
           "--runs", "4", "--quiet") == 0, "simulate leave-one-out (numbers, 4 runs)")
    with open(os.path.join(lo, "study.ini")) as f:
        text = f.read()
    ok("split = odd-even" in text, "the numbers study splits odd-even; made leave-one-out here")
    with open(os.path.join(lo, "study.ini"), "w") as f:
        f.write(text.replace("split = odd-even", "split = leave-one-out"))
    ok(run("analyze", os.path.join(lo, "study.ini"), "--quiet") == 0, "analyze leave-one-out")
    keys = check_study(lo, "leave-one-out")
    ok(keys and all(k[2] == "leave-one-out:mean" for k in keys),
       "leave-one-out summary rows are leave-one-out:mean (4 folds, 6 pairs each)")

done()
