"""test_timecourse_store.py - the kept parcel series stored as float32 or as doubles give the same time courses.

The fit keeps the parcel voxels' series for the FIR time courses; it stores
them as float32 only when every value is exactly a float32 (float32 or
<= 16-bit integer data with no scaling, no smoothing), else as doubles.
SPLITROI_SERIES_STORE=double / =float forces one storage (a test hook).

1. float32 study: the default (float32 storage) and forced doubles write
   byte-identical time course tables and responses.csv.
2. int16 with scl_slope, and float32 smoothed: the default (doubles) and
   forced doubles are byte-identical; forcing float32 there rounds the
   values, and at least one time course value changes - so the comparison
   in 1 is able to see a storage that is not exact.
"""
import filecmp
import glob
import os
import subprocess
import sys
import tempfile
from tap import done, ok

SPLITROI = os.environ.get("SPLITROI", "build/splitroi")



def run(args, store=None):
    env = dict(os.environ)
    env.pop("SPLITROI_SERIES_STORE", None)
    if store:
        env["SPLITROI_SERIES_STORE"] = store
    p = subprocess.run([SPLITROI] + args, capture_output=True, text=True, env=env)
    if p.returncode != 0:
        print(p.stdout + p.stderr)
    return p.returncode


def outputs(d):
    """The tables that depend on the kept series (and the responses, which must not move)."""
    names = sorted(glob.glob(os.path.join(d, "**", "timecourses*.csv"), recursive=True))
    names += sorted(glob.glob(os.path.join(d, "**", "responses.csv"), recursive=True))
    return [os.path.relpath(n, d) for n in names]


def same(a, b):
    fa, fb = outputs(a), outputs(b)
    if not fa or fa != fb:
        return False
    return all(filecmp.cmp(os.path.join(a, f), os.path.join(b, f), shallow=False) for f in fa)


def analyze(study, out, store):
    return run(["analyze", study, "--out", out, "--threads", "1"], store) == 0


with tempfile.TemporaryDirectory() as tmp:
    f = os.path.join(tmp, "f")
    i = os.path.join(tmp, "i")
    s = os.path.join(tmp, "s")
    ok(run(["simulate", "--out", f, "--subjects", "2", "--seed", "4", "--volumes", "80", "--quiet"]) == 0,
       "simulate float32 study")
    ok(run(["simulate", "--out", i, "--subjects", "2", "--seed", "4", "--volumes", "80", "--int16",
            "--quiet"]) == 0, "simulate int16 study with scl_slope")
    ok(run(["simulate", "--out", s, "--subjects", "2", "--seed", "4", "--volumes", "80", "--quiet"]) == 0,
       "simulate float32 study to smooth")
    ini = os.path.join(s, "study.ini")
    with open(ini) as fh:
        text = fh.read()
    with open(ini, "w") as fh:
        fh.write(text.replace("[model]\n", "[model]\nsmoothing_fwhm = 5\n", 1))

    for name, st in (("float32", f), ("int16 with slope", i), ("smoothed", s)):
        ini = os.path.join(st, "study.ini")
        outs = {}
        for store in (None, "double", "float"):
            o = os.path.join(tmp, "%s-%s" % (os.path.basename(st), store or "auto"))
            ok(analyze(ini, o, store), "%s: analyze, storage %s" % (name, store or "default"))
            outs[store] = o
        ok(len(outputs(outs[None])) >= 3, "%s: time course tables written" % name)
        ok(same(outs[None], outs["double"]),
           "%s: default storage and forced doubles give byte-identical time courses" % name)
        if st == f:
            ok(same(outs[None], outs["float"]), "float32: forced float32 is the default")
        else:
            ok(not same(outs["double"], outs["float"]),
               "%s: float32 storage would change the time courses (doubles are needed)" % name)

done()
