"""test_series_spill.py - kept series spilled to a temporary file give the same results as in memory.

analyze keeps the parcel voxels' series of every run for the FIR time
courses; they go to an unlinked temporary file in $TMPDIR (io/rowfile.h)
and are read back a volume at a time, so that they do not stay in the
process's memory. SPLITROI_SERIES_SPILL=0 (a test hook) keeps them in memory.

1. float32 and int16-with-slope studies: spilled (default) and in-memory
   runs write byte-identical time course tables, responses and maps;
2. a $TMPDIR that does not exist: the series stay in memory, the same
   tables, exit 0;
3. nothing is left in $TMPDIR after a run (the file is unlinked at once);
4. a $TMPDIR where no write may exceed a few KiB (a full disk, simulated by
   a file size limit): analyze stops with exit 1 and a message naming the
   folder and TMPDIR, and writes no subject table.
"""
import filecmp
import os
import resource
import signal
import subprocess
import sys
import tempfile
from tap import done, ok

SPLITROI = os.environ.get("SPLITROI", "build/splitroi")



def run(args, spill=True, tmpdir=None, fsize=None):
    env = dict(os.environ)
    env.pop("SPLITROI_SERIES_SPILL", None)
    if not spill:
        env["SPLITROI_SERIES_SPILL"] = "0"
    if tmpdir:
        env["TMPDIR"] = tmpdir

    def limit():
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
        resource.setrlimit(resource.RLIMIT_FSIZE, (fsize, fsize))

    p = subprocess.run([SPLITROI] + args, capture_output=True, text=True, env=env,
                       preexec_fn=limit if fsize else None)
    return p.returncode, p.stdout + p.stderr


def outputs(d):
    out = []
    for root, _, names in os.walk(d):
        for n in names:
            if n.endswith((".csv", ".tsv", ".nii.gz")):
                out.append(os.path.relpath(os.path.join(root, n), d))
    return sorted(out)


def same(a, b):
    fa, fb = outputs(a), outputs(b)
    if not fa or fa != fb:
        return False
    return all(filecmp.cmp(os.path.join(a, f), os.path.join(b, f), shallow=False) for f in fa)


with tempfile.TemporaryDirectory() as tmp:
    scratch = os.path.join(tmp, "scratch")
    os.mkdir(scratch)
    for name, extra in (("float32", []), ("int16 with slope", ["--int16"])):
        st = os.path.join(tmp, name.split()[0])
        rc, _ = run(["simulate", "--out", st, "--subjects", "2", "--seed", "6", "--volumes", "80",
                     "--quiet"] + extra)
        ok(rc == 0, "%s: simulate" % name)
        ini = os.path.join(st, "study.ini")
        a, b, c = (os.path.join(tmp, "%s-%s" % (name.split()[0], k)) for k in ("spill", "memory", "notmp"))
        ra, _ = run(["analyze", ini, "--out", a, "--quiet", "--threads", "2"], tmpdir=scratch)
        rb, _ = run(["analyze", ini, "--out", b, "--quiet", "--threads", "2"], spill=False)
        ok(ra == 0 and rb == 0, "%s: analyze spilled and in memory" % name)
        ok(any("timecourses" in f for f in outputs(a)), "%s: time course tables written" % name)
        ok(same(a, b), "%s: spilled and in-memory series give byte-identical tables and maps" % name)
        ok(os.listdir(scratch) == [], "%s: nothing left in TMPDIR" % name)
        rc, _ = run(["analyze", ini, "--out", c, "--quiet"], tmpdir=os.path.join(tmp, "no-such-folder"))
        ok(rc == 0 and same(a, c), "%s: a TMPDIR that does not exist keeps the series in memory, same tables" % name)

    # a full disk under TMPDIR: only the spill writes that much before the first table
    ini = os.path.join(tmp, "float32", "study.ini")
    full = os.path.join(tmp, "full")
    rc, text = run(["analyze", ini, "--out", full, "--quiet"], tmpdir=scratch, fsize=8192)
    ok(rc == 1, "full TMPDIR: analyze fails (exit %d)" % rc)
    ok(scratch in text and "TMPDIR" in text and "kept series" in text,
       "full TMPDIR: the message names the folder and TMPDIR: %s" % text.strip().splitlines()[-1:])
    ok(not any(f.endswith("responses.csv") for f in outputs(full)) if os.path.isdir(full) else True,
       "full TMPDIR: no subject table written")

done()
