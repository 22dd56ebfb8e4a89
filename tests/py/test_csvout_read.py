"""test_csvout_read.py - our CSV writer and TSV reader against Python's csv module and pandas.

Write direction: a seeded random table (text with commas, quotes, tabs,
newlines, CR, non-ASCII; reals over 60 decades; integers; NaN, inf, missing)
goes through csvout (via $BUILD/tests/tools/csvtool); Python's csv module and
pandas.read_csv must read back every text cell exactly, every real as the
string Python's own '%.9g' formatting gives (METHODS.md section 10), and
missing values as empty fields.

Read direction: Python's csv.writer makes a tab-separated file with a UTF-8
byte-order mark, CRLF line ends and quoted multi-line cells; table_read must
see the same cells, and the file line of each row as counted by Python.
"""
import csv
import io
import json
import math
import os
import random
import subprocess
import sys
import tempfile
import tap
from tap import ok as report

try:
    import pandas as pd
except ImportError:  # pragma: no cover
    pd = None


TOOL = os.path.join(os.environ.get("BUILD", "build"), "tests", "tools", "csvtool")
PIECES = ["a", "b", "melody", "scrambled", ",", '"', "\t", "\n", "\r\n", " ", "\u00e9", "\u03bc", "x y", "''"]


def rand_text(rng, allow_edge_space=True):
    s = "".join(rng.choice(PIECES) for _ in range(rng.randint(0, 6)))
    if not allow_edge_space:
        s = s.strip(" \t")
        if s == "":
            s = "k"
    return s


def write_direction(tmp, rng):
    header = ["subject", "text", "value", "count", "note"]
    rows, expect = [], []
    for i in range(300):
        text = rand_text(rng)
        kind = rng.random()
        if kind < 0.1:
            val, want_val = {"num": rng.choice(["nan", "inf", "-inf"])}, ""
        elif kind < 0.15:
            val, want_val = None, ""
        else:
            v = rng.choice([-1, 1]) * 10 ** rng.uniform(-30, 30)
            if kind < 0.2:
                v = float(rng.randint(-1000, 1000))
            val, want_val = v, "%.9g" % v
            if want_val == "-0":
                want_val = "0"
        count = rng.randint(-10**12, 10**12)
        note = "" if rng.random() < 0.3 else rand_text(rng)
        rows.append(["%02d" % (i % 17), text, val, count, note])
        expect.append(["%02d" % (i % 17), text, want_val, str(count), note])
    spec = os.path.join(tmp, "spec.json")
    out = os.path.join(tmp, "out", "table.csv")
    with open(spec, "w", encoding="utf-8") as f:
        json.dump({"header": header, "rows": rows}, f)
    r = subprocess.run([TOOL, "write", spec, out], capture_output=True, text=True)
    report(r.returncode == 0, "csvtool wrote the table (%s)" % r.stderr.strip())
    if r.returncode != 0:
        return
    with open(out, newline="", encoding="utf-8") as f:
        got = list(csv.reader(f, strict=True))
    report(got[0] == header, "csv module: header")
    report(len(got) == len(expect) + 1, "csv module: %d rows (%d)" % (len(expect), len(got) - 1))
    bad = [i for i, (g, w) in enumerate(zip(got[1:], expect)) if g != w]
    report(not bad, "csv module: every cell as written (first bad row %s)" % (bad[:1] and (got[bad[0] + 1], expect[bad[0]])))
    rel = 0.0
    for g, w in zip(got[1:], rows):
        if isinstance(w[2], float) and g[2]:
            rel = max(rel, abs(float(g[2]) - w[2]) / abs(w[2]))
    report(rel <= 5e-9, "9 significant digits: max relative error %.3g <= 5e-9" % rel)

    if pd is None:
        print("skip - pandas not available")
        return
    df = pd.read_csv(out, dtype={"subject": str, "text": str, "note": str}, keep_default_na=False,
                     na_values={"value": [""]}, float_precision="round_trip")
    report(df.shape == (len(expect), len(header)), "pandas: shape %s" % (df.shape,))
    report(list(df["text"]) == [w[1] for w in expect], "pandas: text cells with quotes and line breaks")
    report(list(df["count"]) == [int(w[3]) for w in expect], "pandas: integers")
    ok = True
    for g, w in zip(df["value"], expect):
        if w[2] == "":
            ok = ok and math.isnan(g)
        else:
            ok = ok and g == float(w[2])
    report(ok, "pandas: reals equal to their 9-digit text, missing as NaN")


def read_direction(tmp, rng):
    header = ["onset", "duration", "trial_type", "comment"]
    buf = io.StringIO()
    w = csv.writer(buf, delimiter="\t", lineterminator="\r\n")
    w.writerow(header)
    rows, lines = [], []
    for i in range(200):
        row = ["%g" % (i * 2.5), "n/a" if i % 11 == 0 else "2", rng.choice(["melody", "scrambled"]),
               rand_text(rng, allow_edge_space=False)]
        if i % 13 == 0:
            buf.write("\r\n")  # a blank line
        lines.append(buf.getvalue().count("\n") + 1)
        w.writerow(row)
        rows.append(row)
    path = os.path.join(tmp, "sub-01_task-tones_events.tsv")
    with open(path, "w", encoding="utf-8-sig", newline="") as f:
        f.write(buf.getvalue())
    r = subprocess.run([TOOL, "read", path], capture_output=True, text=True)
    report(r.returncode == 0, "csvtool read the TSV (%s)" % r.stderr.strip())
    if r.returncode != 0:
        return
    got = json.loads(r.stdout)
    report(got["header"] == header, "table_read: header without the byte-order mark")
    report(got["rows"] == rows, "table_read: cells as Python's csv module wrote them")
    report(got["lines"] == lines, "table_read: file line of every row as Python counts it")


def main():
    if not os.path.exists(TOOL):
        print("not ok - %s not built (make test builds it)" % TOOL)
        return 1
    rng = random.Random(20261201)
    with tempfile.TemporaryDirectory() as tmp:
        write_direction(tmp, rng)
        read_direction(tmp, rng)
    return 1 if tap.failures else 0


if __name__ == "__main__":
    sys.exit(main())
