"""test_defer_dim.py - deferring the voxels dim in a run's first volume changes no output.

A fit gives the voxels that are dim in the run's first volume (below 5% of
its 98th percentile: half the intensity floor of METHODS.md section 3) no
sums against the design, the bulk of a fit's memory; the finish checks that
each stays far below the floor, and otherwise the run is read and fitted
again without deferral. SPLITROI_DEFER=0 (a test hook) fits every voxel.

Both must write the same maps, tables and warnings, byte for byte:
- `fit` on an invented run with a dim noisy background (deferral holds);
- the same run with 40 voxels dark in the first volume and bright after
  it (the finish finds them analyzable: the run is fitted again); its
  events file has an 'n/a' row, whose warning must be said once, not twice;
- `analyze` on two test studies whose zero background is replaced by dim
  noise, one run with voxels that wake after the first volume.
The comparison can fail: without the second fit the waking voxels would
have no effects (NaN) in the deferred maps.
"""
import filecmp
import glob
import gzip
import json
import os
import subprocess
import sys
import tempfile
import outtree
from tap import done, ok

SPLITROI = os.environ.get("SPLITROI", "build/splitroi")
HERE = os.path.dirname(os.path.abspath(__file__))

try:
    import nibabel as nib
    import numpy as np
except ImportError as exc:  # the python3 first on PATH may lack them
    print("skip - nibabel or numpy unavailable: %s" % exc)
    sys.exit(0)

VARYING = ("run.json", "tables.json", "dataset_description.json", "report.html", "fit.json")


def files(d):
    return outtree.files(d, VARYING)


def same_file(a, b):
    if a.endswith(".gz"):
        with gzip.open(a) as fa, gzip.open(b) as fb:
            return fa.read() == fb.read()
    return filecmp.cmp(a, b, shallow=False)


def run(args, out, defer):
    env = dict(os.environ)
    env.pop("SPLITROI_DEFER", None)
    if not defer:
        env["SPLITROI_DEFER"] = "0"
    p = subprocess.run([SPLITROI] + args + ["--out", out], capture_output=True, text=True, env=env)
    return p.returncode, sorted(p.stderr.replace(out, "OUT").splitlines()), p.stdout.replace(out, "OUT")


def compare(name, args, tmp, minfiles):
    a, b = os.path.join(tmp, name + "-defer"), os.path.join(tmp, name + "-plain")
    ra, ea, oa = run(args, a, True)
    rb, eb, ob = run(args, b, False)
    ok(ra == 0 and rb == 0, "%s: both exit 0 (%d, %d)%s" % (name, ra, rb, "" if ra == 0 else " " + " ".join(ea)))
    ok(ea == eb, "%s: the same warnings, each once" % name)
    ok(oa == ob, "%s: the same summary" % name)
    fa, fb = files(a), files(b)
    ok(fa == fb and len(fa) >= minfiles, "%s: the same %d files written" % (name, len(fa)))
    differ = [f for f in fa if f in fb and not same_file(os.path.join(a, f), os.path.join(b, f))]
    ok(not differ, "%s: every map and table byte-identical%s" %
       (name, (" (differ: %s)" % ", ".join(differ[:5])) if differ else ""))
    return a, b, ea


def invented_run(d, wake):
    """A 16x16x10x60 float32 run: a bright ball in dim noise; wake: 40 voxels 0 in volume 0, bright after."""
    rng = np.random.default_rng(5)
    shape, T, tr = (16, 16, 10), 60, 2.0
    x, y, z = np.meshgrid(*(np.linspace(-1, 1, n) for n in shape), indexing="ij")
    ball = x ** 2 + y ** 2 + z ** 2 < 0.6
    t = np.arange(T)
    on = ((t * tr) // 16) % 2 == 1
    data = np.where(ball[..., None], 1000.0 * (1 + 0.01 * on), 20.0) + \
        rng.standard_normal(shape + (T,)) * np.where(ball, 10.0, 5.0)[..., None]
    if wake:
        outside = np.argwhere(~ball)[:40]
        for i, j, k in outside:
            data[i, j, k, 0] = 0.0
            data[i, j, k, 1:] = 900.0 + rng.standard_normal(T - 1) * 10
    img = nib.Nifti1Image(data.astype(np.float32), np.diag([3.0, 3.0, 3.0, 1.0]))
    img.header.set_xyzt_units("mm", "sec")
    img.header["pixdim"][4] = tr
    bold = os.path.join(d, "sub-01_task-tones_run-1_bold.nii.gz")
    nib.save(img, bold)
    with open(bold.replace("_bold.nii.gz", "_events.tsv"), "w") as f:
        f.write("onset\tduration\ttrial_type\n")
        for b in range(int(T * tr // 16)):
            f.write("%d\t16\t%s\n" % (b * 16, "melody" if b % 2 else "scrambled"))
        f.write("100\t2\tn/a\n")
    return bold, ball, outside if wake else None


with tempfile.TemporaryDirectory() as tmp:
    for wake in (0, 1):
        d = os.path.join(tmp, "run%d" % wake)
        os.makedirs(d)
        bold, ball, woke = invented_run(d, wake)
        name = "fit, waking voxels" if wake else "fit, dim background"
        a, b, err = compare(name, ["fit", bold, "--effect", "melody - scrambled"], tmp, 6)
        ok(sum("n/a" in line for line in err) == 1, "%s: the events warning said once" % name)
        t = glob.glob(os.path.join(a, "*_desc-melodyMinusScrambled_tstat.nii.gz"))
        if ok(len(t) == 1, "%s: a t map" % name):
            tm = np.asarray(nib.load(t[0]).dataobj)
            ok(np.isfinite(tm[ball]).mean() > 0.99 and not np.isfinite(tm[~ball]).all(),
               "%s: t in the ball, none in most of the dim background" % name)
            if wake:
                ok(all(np.isfinite(tm[i, j, k]) for i, j, k in woke),
                   "%s: the 40 voxels dark in volume 0 have their t" % name)

    for preset in ("basic", "smooth"):
        d = os.path.join(tmp, preset)
        p = subprocess.run(["/usr/bin/python3", os.path.join(HERE, "make_study.py"), d, preset],
                           capture_output=True, text=True)
        if not ok(p.returncode == 0, "%s: make the study" % preset):
            print(p.stdout + p.stderr)
            continue
        rng = np.random.default_rng(9)
        runs = sorted(glob.glob(os.path.join(d, "data", "sub-*", "**", "*_bold.nii*"), recursive=True))
        changed = 0
        for i, f in enumerate(runs):
            img = nib.load(f)
            data = np.asarray(img.dataobj).astype(np.float32)
            zero = (data == 0).all(axis=3)
            data[zero] = 2.0 + rng.random((int(zero.sum()), data.shape[3])).astype(np.float32)
            if i == 1:  # a localizer or measured run whose first volume is dark at 5 voxels that are bright after
                for v in np.argwhere(~zero)[:5]:
                    data[tuple(v) + (0,)] = 0.5
            changed += int(zero.sum())
            out = nib.Nifti1Image(data, img.affine, img.header)
            out.set_data_dtype(np.float32)
            out.header["scl_slope"], out.header["scl_inter"] = 1.0, 0.0
            nib.save(out, f)
        ok(changed > 0, "%s: %d background voxels made dim noise" % (preset, changed))
        compare("analyze %s" % preset, ["analyze", os.path.join(d, "study.ini"), "--threads", "2"], tmp, 10)

done()
