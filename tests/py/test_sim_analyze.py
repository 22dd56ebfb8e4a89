# test_sim_analyze.py - end to end: `splitroi analyze` on simulated data recovers truth.csv.
# The simulator's truth (top-10% mean weight times the true effect) is what a correct fROI analysis
# should find; this runs the project's own analyze on a fresh simulated study and compares.
import csv
import os
import subprocess
import sys
import tempfile

BIN = os.environ.get("SPLITROI", "build/splitroi")
failed = 0


def check(cond, name):
    global failed
    print(("ok - " if cond else "not ok - ") + name)
    if not cond:
        failed += 1


def main():
    if subprocess.run([BIN, "help", "analyze"], capture_output=True).returncode != 0:
        check(False, "splitroi help analyze works (a binary without analyze is broken)")
        return
    out = os.path.join(tempfile.mkdtemp(), "sim")
    r = subprocess.run([BIN, "simulate", "--out", out, "--subjects", "4", "--seed", "3", "--quiet"],
                       capture_output=True, text=True)
    check(r.returncode == 0, "simulate" + (" (%s)" % r.stderr.strip()[:200] if r.returncode else ""))
    r = subprocess.run([BIN, "analyze", os.path.join(out, "study.ini")], capture_output=True, text=True)
    check(r.returncode == 0, "analyze the simulated study" + (" (%s)" % r.stderr.strip()[-300:] if r.returncode else ""))
    path = os.path.join(out, "results", "responses.csv")
    if r.returncode or not os.path.exists(path):
        return
    truth = {}
    with open(os.path.join(out, "truth.csv"), newline="") as f:
        for row in csv.DictReader(f):
            truth[(row["subject"], row["parcel"], row["task"], row["effect"])] = float(row["value"])
    d, null, matched = [], [], 0
    with open(path, newline="") as f:
        for row in csv.DictReader(f):
            if row["split"] not in ("odd-even:mean", "all") or row["value"] == "":
                continue
            key = (row["subject"], row["parcel"], row["measure_task"], row["effect"])
            if key not in truth:
                continue
            matched += 1
            (null if row["parcel"] == "occipital_control" else d).append(float(row["value"]) - truth[key])
    check(matched == len(truth), "every truth row has an analyzed value (%d of %d)" % (matched, len(truth)))
    if not d:
        return
    mean = sum(d) / len(d)
    print("# analyze vs truth: mean error %.3f, max |error| %.3f over %d rows; null parcel mean %.3f"
          % (mean, max(abs(x) for x in d), len(d), sum(null) / max(1, len(null))))
    # selection noise admits a few weaker voxels, so estimates sit slightly low (about 2-3%)
    check(-0.08 < mean < 0.03, "analyze recovers the true effects on average (%.3f)" % mean)
    check(max(abs(x) for x in d) < 0.5, "every subject's estimate within 0.5 of the truth")
    check(abs(sum(null) / len(null)) < 0.06, "the null parcel measures about zero")


main()
sys.exit(1 if failed else 0)
