"""test_slim_results.py - slimmed per-run results give the same outputs as whole-grid results.

analyze keeps every run's fit until the subject's fROIs are measured. To
hold less memory, each run is slimmed as its fit ends: effects, variances,
means and the analyzable flags are kept only at the parcel voxels, plus the
localizers' selection contrasts on the whole grid (their t maps) and the
first run's means (the reference image). SPLITROI_SLIM=0 (a test hook)
keeps everything on the whole grid, as before the slimming.

For studies that reach every path that reads a run's results (odd-even with
ties and int16 data; leave-one-out with a one-run subject and an absent
condition; sessions with nearest-neighbour parcels, a mask and top voxels;
smoothing inside a mask with NaN samples), every table, map and label table
written by analyze, group and report's data must be byte-identical with and
without slimming. The comparison can fail: it covers the t maps (read from
the whole-grid copies), the responses (read from the slim arrays) and the
left-out warnings (read from the slim flags).
"""
import filecmp
import os
import shutil
import subprocess
import sys
import tempfile
import outtree
from tap import done, ok

SPLITROI = os.environ.get("SPLITROI", "build/splitroi")
HERE = os.path.dirname(os.path.abspath(__file__))

try:
    import nibabel  # noqa: F401  (make_study needs it)
except ImportError as exc:  # the python3 first on PATH may lack it
    print("skip - nibabel unavailable: %s" % exc)
    sys.exit(0)



# written with the time of the run or the command line: they differ between any two runs
VARYING = ("run.json", "tables.json", "dataset_description.json", "report.html")


def files(d):
    return outtree.files(d, VARYING)


def analyze(study, out, slim):
    env = dict(os.environ)
    env.pop("SPLITROI_SLIM", None)
    if not slim:
        env["SPLITROI_SLIM"] = "0"
    p = subprocess.run([SPLITROI, "analyze", study, "--out", out, "--threads", "2"],
                       capture_output=True, text=True, env=env)
    # the warnings (left-out parcels, empty fROIs) and the summary (voxels left out
    # per run) are outputs too; runs fitted in parallel say theirs in either order
    return p.returncode, sorted(p.stderr.replace(out, "OUT").splitlines()), p.stdout.replace(out, "OUT")


with tempfile.TemporaryDirectory() as tmp:
    for preset in ("basic", "edge", "sessions", "smooth"):
        d = os.path.join(tmp, preset)
        p = subprocess.run(["/usr/bin/python3", os.path.join(HERE, "make_study.py"), d, preset],
                           capture_output=True, text=True)
        if not ok(p.returncode == 0, "%s: make the study" % preset):
            print(p.stdout + p.stderr)
            continue
        study = os.path.join(d, "study.ini")
        a, b = os.path.join(tmp, preset + "-slim"), os.path.join(tmp, preset + "-whole")
        ra, ea, oa = analyze(study, a, True)
        rb, eb, ob = analyze(study, b, False)
        ok(ra == rb, "%s: same exit status (%d, %d)" % (preset, ra, rb))
        ok(ea == eb, "%s: same warnings with and without slimming" % preset)
        ok(oa == ob and "voxels left out per run" in oa, "%s: same summary, left-out voxels included" % preset)
        fa, fb = files(a), files(b)
        ok(fa == fb and len(fa) > 10, "%s: the same %d files written" % (preset, len(fa)))
        maps = [f for f in fa if f.endswith("_tstat.nii.gz")]
        ok(len(maps) >= 2, "%s: t maps among them (%d)" % (preset, len(maps)))
        differ = [f for f in fa if f in fb and
                  not filecmp.cmp(os.path.join(a, f), os.path.join(b, f), shallow=False)]
        ok(not differ, "%s: every table and map byte-identical%s" %
           (preset, (" (differ: %s)" % ", ".join(differ[:5])) if differ else ""))
        shutil.rmtree(a, ignore_errors=True)
        shutil.rmtree(b, ignore_errors=True)

done()
