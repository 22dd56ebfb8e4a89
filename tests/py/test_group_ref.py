"""test_group_ref.py - `splitroi group` against scipy.stats and statsmodels on random subject tables."""
import csv
import math
import os
import re
import shutil
import subprocess
import sys
import tempfile
import tap
from tap import ok


try:
    import numpy as np
    import pandas as pd
    from scipy import stats
    from statsmodels.stats.multitest import multipletests
except ImportError as exc:  # the python3 first on PATH may lack them
    print("skip - scipy/statsmodels/pandas unavailable: %s" % exc)
    sys.exit(0)

SPLITROI = os.environ.get("SPLITROI", "build/splitroi")
RTOL = 1e-6

HEADER = ["subject", "parcel", "split", "define_runs", "measure_task", "measure_runs",
          "effect", "value", "n_voxels"]
# Parcel names exercise quoting and the wide-name rule; "7" is an unnamed integer label.
PARCELS = ["L STG", "7", 'R-STG, "belt"', "pSTS.a", "sparse", "empty"]
LOC = ("tones", ["melody", "scrambled", "melody-scrambled"])
MEAS = ("memory", ["familiar", "novel", "familiar-novel"])


def close(a, b, rtol=RTOL, atol=1e-300):
    if a is None or b is None:
        return False
    if math.isnan(a) and math.isnan(b):
        return True
    return abs(a - b) <= rtol * max(abs(a), abs(b), atol)


def make_data(rng, subjects):
    """values[(parcel, split, task, effect)][subject] = float or None (empty cell)."""
    data = {}
    for p in PARCELS:
        for split, (task, effects) in (("odd-even:mean", LOC), ("all", MEAS)):
            for e in effects:
                col = {}
                shift = rng.normal(0.0, 1.0)
                for s in subjects:
                    v = float(rng.normal(shift, 1.0))
                    if p == "empty" or (p == "sparse" and s != subjects[0]):
                        v = None  # n = 0 and n = 1 rows
                    elif rng.random() < 0.1:
                        v = None  # scattered missing values
                    col[s] = v
                data[(p, split, task, e)] = col
    return data


def write_tables(out, subjects, data, rng):
    for s in subjects:
        d = os.path.join(out, "sub-" + s)
        os.makedirs(d, exist_ok=True)
        with open(os.path.join(d, "responses.csv"), "w", newline="") as f:
            w = csv.writer(f)
            w.writerow(HEADER)
            for (p, split, task, e), col in data.items():
                v = col[s]
                # per-split rows are in the table too but are not tested at the group level
                if split == "odd-even:mean":
                    for half in ("odd-even:A", "odd-even:B"):
                        w.writerow([s, p, half, "1+3", task, "2+4", e, repr(float(rng.normal())), 40])
                w.writerow([s, p, split, "1+2+3+4", task, "1+2+3+4" if split == "all" else "1+2",
                            e, "" if v is None else repr(v), 41 if v is not None else 0])


def run(args):
    return subprocess.run([SPLITROI, "group"] + args, capture_output=True, text=True)


def read_group(out):
    with open(os.path.join(out, "group.csv"), newline="") as f:
        return list(csv.DictReader(f))


def num(s):
    return float("nan") if s == "" else float(s)


def check_rows(rows, data, subjects, label):
    """Every number of group.csv against scipy, q against statsmodels per family."""
    by_key = {(r["parcel"], r["split"], r["measure_task"], r["effect"]): r for r in rows}
    ok(len(by_key) == len(rows), label + ": one row per parcel, split, task and effect")
    bad = []
    fam_p = {}
    n_checked = 0
    for key, col in data.items():
        r = by_key.get(key)
        if r is None:
            bad.append("missing row %s" % (key,))
            continue
        x = np.array([col[s] for s in subjects if col.get(s) is not None], dtype=float)
        n = len(x)
        if int(r["n"]) != n:
            bad.append("%s n %s vs %d" % (key, r["n"], n))
            continue
        if n == 0:
            if r["mean"] != "":
                bad.append("%s n = 0 mean not empty" % (key,))
        else:
            if not close(num(r["mean"]), float(np.mean(x)), 1e-8, 1e-12):
                bad.append("%s mean" % (key,))
        if n < 2:
            for c in ("sd", "sem", "t", "df", "p", "cohen_d", "q_fdr"):
                if r[c] != "":
                    bad.append("%s n = %d: %s is '%s', wanted empty" % (key, n, c, r[c]))
            continue
        res = stats.ttest_1samp(x, 0.0)
        sd = float(np.std(x, ddof=1))
        want = {"sd": sd, "sem": sd / math.sqrt(n), "t": float(res.statistic), "df": n - 1.0,
                "p": float(res.pvalue), "cohen_d": float(np.mean(x)) / sd}
        for c, v in want.items():
            if not close(num(r[c]), v):
                bad.append("%s %s %s vs %r" % (key, c, r[c], v))
        n_checked += 1
        fam_p.setdefault((key[1], key[2], key[3]), []).append((key, float(res.pvalue)))
    for fam, items in fam_p.items():
        q = multipletests([p for _, p in items], method="fdr_bh")[1]
        for (key, _), qq in zip(items, q):
            if not close(num(by_key[key]["q_fdr"]), float(qq)):
                bad.append("%s q_fdr %s vs %r" % (key, by_key[key]["q_fdr"], qq))
    ok(not bad, "%s: %d rows with n >= 2 match ttest_1samp and fdr_bh to 1e-6 %s"
       % (label, n_checked, "; ".join(bad[:5])))
    return by_key


def main():
    rng = np.random.default_rng(20261202)
    tmp = tempfile.mkdtemp(prefix="group_ref_")
    try:
        subjects = ["%02d" % i for i in range(1, 10)]
        out = os.path.join(tmp, "out")
        data = make_data(rng, subjects)
        write_tables(out, subjects, data, rng)

        res = run([out, "--paired", "familiar:novel"])
        ok(res.returncode == 0, "group runs (exit %d; %s)" % (res.returncode, res.stderr[:300]))
        rows = read_group(out)
        by_key = check_rows(rows, data, subjects, "nine subjects")

        # Row order: parcels as first seen, then split, task, effect as first seen.
        order = [(r["parcel"], r["split"], r["measure_task"], r["effect"]) for r in rows
                 if r["test"] == "one-sample"]
        ok(order == list(data.keys()), "rows in first-seen parcel, split, task, effect order")
        ok(all(r["split"] in ("odd-even:mean", "all") for r in rows),
           "only the cross-validated :mean and the all rows are tested")

        # n = 1 and n = 0 rows, as raw text: empty, not 0 and not "nan".
        one = by_key[("sparse", "all", "memory", "novel")]
        ok(one["n"] == "1" and one["mean"] != "" and all(one[c] == "" for c in ("sd", "t", "p", "q_fdr")),
           "n = 1 row has the mean and empty sd, t, p, q")
        zero = by_key[("empty", "odd-even:mean", "tones", "melody")]
        ok(zero["n"] == "0" and all(zero[c] == "" for c in ("mean", "sd", "sem", "t", "df", "p", "cohen_d", "q_fdr")),
           "n = 0 row has every statistic empty")
        ok("nan" not in open(os.path.join(out, "group.csv")).read().lower(), "no 'nan' text in group.csv")

        # Paired rows against scipy.stats.ttest_rel on the subjects with both values.
        bad = []
        npaired = 0
        fam = []
        for p in PARCELS:
            a = data[(p, "all", "memory", "familiar")]
            b = data[(p, "all", "memory", "novel")]
            both = [s for s in subjects if a[s] is not None and b[s] is not None]
            r = by_key.get((p, "all", "memory", "familiar vs novel"))
            if r is None or r["test"] != "paired":
                bad.append("no paired row for %s" % p)
                continue
            if int(r["n"]) != len(both):
                bad.append("%s paired n %s vs %d" % (p, r["n"], len(both)))
                continue
            if len(both) < 2:
                continue
            res = stats.ttest_rel([a[s] for s in both], [b[s] for s in both])
            if not (close(num(r["t"]), float(res.statistic)) and close(num(r["p"]), float(res.pvalue))):
                bad.append("%s paired t %s p %s vs %r %r" % (p, r["t"], r["p"], res.statistic, res.pvalue))
            fam.append((r, float(res.pvalue)))
            npaired += 1
        q = multipletests([pv for _, pv in fam], method="fdr_bh")[1]
        for (r, _), qq in zip(fam, q):
            if not close(num(r["q_fdr"]), float(qq)):
                bad.append("paired q %s vs %r" % (r["q_fdr"], qq))
        ok(npaired >= 4 and not bad, "--paired familiar:novel matches ttest_rel and fdr_bh (%d rows) %s"
           % (npaired, "; ".join(bad[:3])))

        # pandas reads both tables; numeric columns come out as numbers.
        g = pd.read_csv(os.path.join(out, "group.csv"))
        ok(len(g) == len(rows) and all(g[c].dtype.kind == "f" for c in ("mean", "sd", "t", "p", "q_fdr")),
           "pandas reads group.csv with numeric columns")
        wide = pd.read_csv(os.path.join(out, "responses_wide.csv"), dtype={"subject": str})
        cols = pd.read_csv(os.path.join(out, "responses_wide_columns.csv"))
        ok(list(wide["subject"]) == ["sub-" + s for s in subjects], "wide table: one row per subject (participant_id) in label order")
        ok(all(re.fullmatch(r"[A-Za-z][A-Za-z0-9_.]*", c) for c in wide.columns) and
           len(set(wide.columns)) == len(wide.columns),
           "wide column names are letters, digits, '_' and '.', unique, starting with a letter")
        ok("X7.tones.melody_minus_scrambled" in wide.columns and "L_STG.memory.familiar" in wide.columns and
           "R_minus_STG_belt.tones.melody" in wide.columns and "pSTS_a.memory.novel" in wide.columns,
           "wide names follow the documented rule (X7..., _minus_, spaces and quotes to _)")
        bad = []
        for _, c in cols.iterrows():
            col = data[(c["parcel"], c["split"], c["measure_task"], c["effect"])]
            for i, s in enumerate(subjects):
                v = wide[c["column"]].iloc[i]
                if col[s] is None:
                    if not math.isnan(v):
                        bad.append("%s %s should be empty" % (c["column"], s))
                elif not close(float(v), col[s], 1e-8):
                    bad.append("%s %s" % (c["column"], s))
        ok(len(cols) == len(data) and not bad,
           "every wide cell equals the subject's value (%d columns) %s" % (len(cols), "; ".join(bad[:3])))
        with open(os.path.join(out, "responses_wide.csv"), newline="") as f:
            lines = list(csv.reader(f))
        ok(len(lines) == len(subjects) + 1 and all(len(l) == len(lines[0]) for l in lines),
           "csv module reads a rectangular wide table")

        # The summary marks exactly the rows with q < alpha.
        for alpha in (0.05, 0.3):
            res = run([out, "--alpha", str(alpha)])
            marked = [l for l in res.stdout.splitlines() if l.rstrip().endswith("<- q<%g" % alpha)]
            want = sum(1 for r in read_group(out) if r["q_fdr"] != "" and float(r["q_fdr"]) < alpha)
            ok(res.returncode == 0 and len(marked) == want,
               "summary marks %d rows with q < %g (wanted %d)" % (len(marked), alpha, want))
        ok("<- q<0.3: false discovery rate below 0.3" in res.stdout, "summary has a legend line for the marker")
        res = run([out, "--quiet"])
        ok(res.returncode == 0 and res.stdout == "", "--quiet prints nothing on stdout")

        # Exclusions and a subset.
        excl = os.path.join(tmp, "exclude.tsv")
        with open(excl, "w") as f:
            f.write("subject\treason\nsub-02\tmoved more than 3 mm\n")
        res = run([out, "--exclude", excl])
        kept = [s for s in subjects if s != "02"]
        ok(res.returncode == 0 and "02 (moved more than 3 mm)" in res.stdout,
           "summary names the excluded subject and reason")
        check_rows(read_group(out), data, kept, "subject 02 excluded")
        with open(os.path.join(out, "group_subjects.csv"), newline="") as f:
            st = {r["subject"]: r for r in csv.DictReader(f)}
        ok(st["sub-02"]["status"] == "excluded" and st["sub-02"]["reason"] == "moved more than 3 mm" and
           st["sub-01"]["status"] == "used", "group_subjects.csv lists the exclusion with its reason")
        res = run([out, "--subjects", "sub-01,03 05"])
        ok(res.returncode == 0, "--subjects subset runs")
        check_rows(read_group(out), data, ["01", "03", "05"], "subset 01 03 05")

        # A subject folder without a table: left out, rows marked incomplete, exit 0.
        os.makedirs(os.path.join(out, "sub-10"))
        res = run([out])
        rows = read_group(out)
        ok(res.returncode == 0 and "INCOMPLETE" in res.stdout and "missing" in res.stderr,
           "a missing table is reported and the run still succeeds")
        ok(all("incomplete" in r["note"] for r in rows), "every group row carries the incomplete marker")
        check_rows(rows, data, subjects, "with sub-10 missing")
        with open(os.path.join(out, "group_subjects.csv"), newline="") as f:
            st = {r["subject"]: r for r in csv.DictReader(f)}
        ok(st["sub-10"]["status"] == "missing", "group_subjects.csv lists sub-10 as missing")
        shutil.rmtree(os.path.join(out, "sub-10"))
        res = run([out])
        ok(all("incomplete" not in r["note"] for r in read_group(out)), "complete again without sub-10")

        # The far tail: 31 subjects whose values give t = 10 exactly, df = 30.
        far = os.path.join(tmp, "far")
        z = rng.normal(size=31)
        z = (z - z.mean()) / z.std(ddof=1)
        x = z + 10.0 / math.sqrt(31.0)
        labels = ["s%02d" % i for i in range(31)]
        for s, v in zip(labels, x):
            d = os.path.join(far, "sub-" + s)
            os.makedirs(d)
            with open(os.path.join(d, "responses.csv"), "w", newline="") as f:
                w = csv.writer(f)
                w.writerow(HEADER)
                w.writerow([s, "A1", "all", "1+2", "memory", "1+2", "familiar", repr(float(v)), 12])
        res = run([far, "--quiet"])
        r = read_group(far)[0]
        ref = float(stats.t.sf(10.0, 30) * 2)
        ok(res.returncode == 0 and close(float(r["t"]), 10.0, 1e-9) and close(float(r["p"]), ref),
           "far tail: p(t = 10, df = 30) = %s vs scipy t.sf*2 %r" % (r.get("p"), ref))
        ok(close(float(r["p"]), float(stats.ttest_1samp(x, 0).pvalue)), "far tail p matches ttest_1samp")

        # One task under two split kinds: the wide names and the summary say which split.
        both = os.path.join(tmp, "both")
        for s in ("01", "02", "03"):
            d = os.path.join(both, "sub-" + s)
            os.makedirs(d)
            with open(os.path.join(d, "responses.csv"), "w", newline="") as f:
                w = csv.writer(f)
                w.writerow(HEADER)
                for split in ("odd-even:mean", "leave-one-out:mean"):
                    w.writerow([s, "A1", split, "1+2+3+4", "tones", "1+2+3+4", "melody",
                                repr(float(rng.normal())), 12])
        res = run([both])
        wide = pd.read_csv(os.path.join(both, "responses_wide.csv"))
        ok(res.returncode == 0 and list(wide.columns) == ["subject", "A1.tones.melody.oddeven", "A1.tones.melody.loo"],
           "a task under two split kinds gets .oddeven / .loo wide names (%s)" % list(wide.columns))
        ok(re.search(r"^parcel\s+split\s+task", res.stdout, re.M) is not None,
           "the summary shows the split column when a task has two split kinds")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return 1 if tap.failures else 0


if __name__ == "__main__":
    sys.exit(main())
