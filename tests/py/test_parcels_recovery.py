"""test_parcels_recovery.py - group-constrained parcels recover known regions from an invented study.

The study is made here with numpy and nibabel, independently of the C code:
6 subjects, 2 localizer runs each (task tones, melody vs scrambled blocks),
grid 18 x 18 x 10 with 3 mm voxels. Three true regions, balls of radius 3
voxels: A and B respond to melody in every subject (each subject's ball
shifted by at most 1 voxel along x, seeded), C only in 2 of the 6 subjects.
Expected, from the method (Fedorenko et al. 2010; Julian et al. 2012):
  - two parcels, one over A and one over B, C dropped by the 60% share rule
    (2/6 = 0.33 < 0.6) while its own overlap is well above the floor;
  - Dice(parcel, true ball) >= 0.5. Bound: smoothing at FWHM 6 mm has
    sigma = 6 / 2.3548 / 3 = 0.85 voxel; at the floor (1/6 of subjects) the
    edge of a flat-topped overlap moves out by about one sigma, so a ball of
    radius 3 comes back with radius <= ~3.85 and Dice >= 2*27 / (27 + 3.85^3)
    = 0.64; the +-1 voxel shifts of single subjects cost a little more, hence
    0.5.
  - --min-share 0.3 keeps C; --leave-one-out writes one set per subject with
    the group's labels and names.
"""
import csv
import os
import subprocess
import sys
import tempfile

import numpy as np
import tap
from tap import ok as report


SHAPE = (18, 18, 10)
TR, T = 2.0, 100
CENTRES = {"A": (4, 5, 5), "B": (13, 5, 5), "C": (9, 13, 5)}
RADIUS = 3


def ball(c):
    i, j, k = np.indices(SHAPE)
    return (i - c[0]) ** 2 + (j - c[1]) ** 2 + (k - c[2]) ** 2 <= RADIUS ** 2


def hrf_regressor(onsets, dur):
    """Boxcar convolved with a gamma-difference response; any smooth response will do."""
    import scipy.stats
    dt = 0.1
    t = np.arange(0, T * TR, dt)
    box = np.zeros_like(t)
    for o in onsets:
        box[(t >= o) & (t < o + dur)] = 1
    k = np.arange(0, 32, dt)
    h = scipy.stats.gamma.pdf(k, 6) - scipy.stats.gamma.pdf(k, 16) / 6
    x = np.convolve(box, h)[: len(t)] * dt
    return x[(np.arange(T) * TR / dt).astype(int)]


def make_study(root, rng):
    import nibabel as nib
    aff = np.diag([3.0, 3.0, 3.0, 1.0])
    aff[:3, 3] = [-27.0, -27.0, -15.0]
    data = os.path.join(root, "data")
    os.makedirs(data)
    with open(os.path.join(data, "dataset_description.json"), "w") as f:
        f.write('{"Name": "invented tones study", "BIDSVersion": "1.8.0"}\n')
    with open(os.path.join(data, "task-tones_bold.json"), "w") as f:
        f.write('{"TaskName": "tones", "RepetitionTime": 2.0}\n')
    mel = [10, 74, 138]
    scr = [42, 106, 170]
    xm, xs = hrf_regressor(mel, 16), hrf_regressor(scr, 16)
    for s in range(6):
        sub = "%02d" % (s + 1)
        func = os.path.join(data, "sub-" + sub, "func")
        os.makedirs(func)
        regions = []
        for name in ("A", "B"):
            c = CENTRES[name]
            regions.append(ball((c[0] + rng.integers(-1, 2), c[1], c[2])))
        if s < 2:
            regions.append(ball(CENTRES["C"]))
        active = np.zeros(SHAPE, bool)
        for r in regions:
            active |= r
        for run in (1, 2):
            y = 100 + rng.normal(0, 1, SHAPE + (T,))
            y[active] += 3.0 * xm + 0.5 * xs
            y[~active] += 0.5 * xm + 0.5 * xs
            img = nib.Nifti1Image(y.astype(np.float32), aff)
            img.header.set_xyzt_units("mm", "sec")
            img.header["pixdim"][4] = TR
            base = os.path.join(func, "sub-%s_task-tones_run-%02d" % (sub, run))
            nib.save(img, base + "_bold.nii.gz")
            with open(base + "_events.tsv", "w") as f:
                f.write("onset\tduration\ttrial_type\n")
                for o in sorted(mel + scr):
                    f.write("%g\t16\t%s\n" % (o, "melody" if o in mel else "scrambled"))
    # the study file must name an existing parcel image; the command makes the real ones
    nib.save(nib.Nifti1Image(np.ones(SHAPE, np.int16), aff), os.path.join(root, "whole.nii.gz"))
    with open(os.path.join(root, "study.ini"), "w") as f:
        f.write("[study]\nbids = data\nout = results\n\n[localizer]\ntask = tones\n"
                "contrast = melody - scrambled\n\n[parcels]\nimage = whole.nii.gz\n\n"
                "[model]\nautocorrelation = ar1\ndrift_cutoff = 128\n")


def read_tsv(path):
    with open(path) as f:
        return list(csv.DictReader(f, delimiter="\t"))


def dice(a, b):
    return 2.0 * np.sum(a & b) / (np.sum(a) + np.sum(b))


def main():
    import nibabel as nib
    splitroi = os.environ.get("SPLITROI", "build/splitroi")
    rng = np.random.default_rng(7)
    with tempfile.TemporaryDirectory() as tmp:
        make_study(tmp, rng)
        study = os.path.join(tmp, "study.ini")
        out = os.path.join(tmp, "parcels")
        r = subprocess.run([splitroi, "parcels", study, "--out", out, "--leave-one-out", "--quiet"],
                           capture_output=True, text=True)
        report(r.returncode == 0, "parcels from the invented study runs (%s)" % r.stderr.strip()[-300:])
        if r.returncode != 0:
            return 1
        lab = np.asanyarray(nib.load(os.path.join(out, "parcels.nii.gz")).dataobj)
        rows = read_tsv(os.path.join(out, "parcels.tsv"))
        report(len(rows) == 2, "two parcels survive (got %d)" % len(rows))
        for name in ("A", "B"):
            truth = ball(CENTRES[name])
            ids = [int(x) for x in np.unique(lab[truth]) if x]
            best = max(ids, key=lambda i: np.sum(lab[truth] == i)) if ids else 0
            d = dice(lab == best, truth) if best else 0.0
            report(d >= 0.5, "region %s recovered: Dice %.3f >= 0.5" % (name, d))
        c = ball(CENTRES["C"])
        report(not np.any(lab[c]), "region C (2 of 6 subjects) dropped by the 60% share rule")
        ov = np.asanyarray(nib.load(os.path.join(out, "overlap.nii.gz")).dataobj)
        report(abs(float(ov[CENTRES["C"]]) - 2 / 6) < 0.2,
               "C's unsmoothed overlap is about 2/6 (got %.3f)" % float(ov[CENTRES["C"]]))
        report(all(abs(float(row["subject_share"]) - 1) < 1e-9 for row in rows),
               "both kept parcels have every subject")
        # looser share keeps C
        out2 = os.path.join(tmp, "loose")
        r = subprocess.run([splitroi, "parcels", study, "--out", out2, "--min-share", "0.3", "--quiet"],
                           capture_output=True, text=True)
        lab2 = np.asanyarray(nib.load(os.path.join(out2, "parcels.nii.gz")).dataobj)
        rows2 = read_tsv(os.path.join(out2, "parcels.tsv"))
        shareC = [float(row["subject_share"]) for row in rows2
                  if int(row["index"]) in set(int(x) for x in np.unique(lab2[c]) if x)]
        # the two subjects with C, plus perhaps a chance voxel (p < 0.001) of another in its parcel
        report(r.returncode == 0 and len(rows2) == 3 and shareC and 2 / 6 - 1e-9 <= shareC[0] < 0.6,
               "--min-share 0.3 keeps C with subject_share in [2/6, 0.6) (rows %d, share %s)"
               % (len(rows2), shareC))
        # leave-one-out sets: same names for the same region
        ok = True
        for s in range(6):
            d = os.path.join(out, "without-sub-%02d" % (s + 1))
            lo = np.asanyarray(nib.load(os.path.join(d, "parcels.nii.gz")).dataobj)
            lrows = read_tsv(os.path.join(d, "parcels.tsv"))
            for row in rows:
                i = int(row["index"])
                ok &= any(lr["name"] == row["name"] and int(lr["index"]) == i for lr in lrows)
                ok &= dice(lo == i, lab == i) > 0.5
        report(ok, "leave-one-out parcels carry the group's index and name for the same region")
        # each set's overlap is the group's minus exactly one subject's binary map
        full_ov = np.asanyarray(nib.load(os.path.join(out, "overlap.nii.gz")).dataobj).astype(float)
        ok = True
        for s in range(6):
            d = os.path.join(out, "without-sub-%02d" % (s + 1))
            lo_ov = np.asanyarray(nib.load(os.path.join(d, "overlap.nii.gz")).dataobj).astype(float)
            diff = 6 * full_ov - 5 * lo_ov
            ok &= bool(np.all(np.isclose(diff, 0, atol=1e-5) | np.isclose(diff, 1, atol=1e-5)))
            ok &= bool(np.isclose(diff, 1, atol=1e-5).sum() > 20)
        report(ok, "without-sub-X overlap = (6 x group overlap - X's suprathreshold map) / 5")
    return 1 if tap.failures else 0


if __name__ == "__main__":
    sys.exit(main())
