# validity_lib.py - shared helpers of the simulator validity tests (test_validity_*.py): run the real binary, read its tables.
import csv
import os
import subprocess
import sys
import time

BIN = os.environ.get("SPLITROI", "build/splitroi")
JOBS = "2"  # the CI machine has two cores


class Checker:
    """Prints ok/not ok lines, counts failures, and reports the elapsed time at the end."""

    def __init__(self, name):
        self.name = name
        self.failed = 0
        self.start = time.time()

    def check(self, cond, what):
        print(("ok - " if cond else "not ok - ") + what)
        if not cond:
            self.failed += 1
        return cond

    def finish(self):
        print("# %s took %.1f s" % (self.name, time.time() - self.start))
        sys.exit(1 if self.failed else 0)


def skip_unless_full(name):
    """The validity tests take minutes: only the full test level runs them (the sanitizer run uses quick)."""
    level = os.environ.get("SPLITROI_TEST_LEVEL", "full")
    if level != "full":
        print("skip - %s runs only at SPLITROI_TEST_LEVEL=full (level is %s)" % (name, level))
        sys.exit(0)


def run(args, what, ck):
    """Runs the binary; a failure is a 'not ok' naming the command and its last error lines."""
    r = subprocess.run([BIN] + args, capture_output=True, text=True)
    if r.returncode != 0:
        ck.check(False, "%s (exit %d: %s)" % (what, r.returncode, r.stderr.strip()[-300:]))
        return False
    return True


def simulate(out, ck, *extra):
    return run(["simulate", "--out", out, "--quiet"] + [str(x) for x in extra], "simulate %s" % " ".join(map(str, extra)), ck)


def analyze(study, ck):
    return run(["analyze", study, "--jobs", JOBS], "analyze %s" % study, ck)


def group(results, ck):
    return run(["group", results], "group %s" % results, ck)


def read_csv(path):
    """Rows of a CSV, or of a TSV when the name ends in .tsv."""
    with open(path, newline="") as f:
        return list(csv.DictReader(f, delimiter="\t" if path.endswith(".tsv") else ","))


def write_study(src, dst, replace=None, drop_sections=()):
    """Copies a study file, replacing 'key = value' lines (replace: {key: value}) and dropping whole [sections]."""
    replace = replace or {}
    out, keep = [], True
    with open(src) as f:
        for line in f:
            s = line.strip()
            if s.startswith("["):
                keep = s.strip("[]").strip() not in drop_sections
            if not keep:
                continue
            key = s.split("=", 1)[0].strip() if "=" in s and not s.startswith(";") else None
            if key in replace:
                line = "%s = %s\n" % (key, replace[key])
            out.append(line)
    with open(dst, "w") as f:
        f.writelines(out)
