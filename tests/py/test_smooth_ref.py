"""test_smooth_ref.py - Gaussian smoothing and spheres against scipy/numpy references.

Smoothing: the C code (tests/tools/smoothtool) against
scipy.ndimage.gaussian_filter(mode='constant', cval=0, truncate=4) with
sigma = FWHM / (2 sqrt(2 ln 2)) / voxel size per axis, the standard FWHM
relation of the normal density, on an anisotropic grid, to 1e-10.
Spheres: `splitroi parcels --spheres` against voxel counts and a
nearest-centre split computed here with numpy from the nibabel affine.
"""
import math
import os
import subprocess
import sys
import tempfile

import numpy as np
import scipy.ndimage
import tap
from tap import ok as report


def smooth_c(tool, x, sig):
    nx, ny, nz = x.shape
    raw = np.asfortranarray(x).tobytes(order="F")  # x fastest, as the C side reads it
    out = subprocess.run([tool, str(nx), str(ny), str(nz)] + ["%.17g" % s for s in sig],
                         input=raw, capture_output=True, check=True).stdout
    return np.frombuffer(out, dtype=np.float64).reshape((nx, ny, nz), order="F")


def test_smoothing(tool):
    rng = np.random.default_rng(20261202)
    voxel = (2.0, 3.0, 4.5)            # anisotropic, mm
    shape = (17, 13, 9)
    x = (rng.random(shape) < 0.2).astype(float) * rng.random(shape)
    for fwhm in (6.0, 10.0, 2.5):
        sig = [fwhm / (2 * math.sqrt(2 * math.log(2))) / v for v in voxel]
        c_sig = [float(subprocess.run([tool, "--sigma", repr(fwhm), repr(v)], capture_output=True,
                                      text=True, check=True).stdout) for v in voxel]
        report(max(abs(a - b) for a, b in zip(sig, c_sig)) < 1e-14,
               "fwhm %g: sigma per axis = FWHM / (2 sqrt(2 ln 2)) / voxel size" % fwhm)
        ref = scipy.ndimage.gaussian_filter(x, sigma=sig, mode="constant", cval=0.0, truncate=4.0)
        got = smooth_c(tool, x, sig)
        err = float(np.max(np.abs(got - ref)))
        report(err < 1e-10, "fwhm %g mm on 2 x 3 x 4.5 mm voxels matches scipy gaussian_filter "
               "(constant 0 boundary), max |diff| %.2e" % (fwhm, err))
    # one sharp voxel in the middle: the smoothed mass is 1 (nothing reaches the border)
    d = np.zeros((31, 31, 31))
    d[15, 15, 15] = 1
    got = smooth_c(tool, d, [2.0, 1.0, 0.5])
    report(abs(got.sum() - 1) < 1e-12, "a central impulse keeps unit mass")
    # sigma 0 on an axis leaves that axis alone
    got = smooth_c(tool, x, [0.0, 0.0, 0.0])
    report(np.array_equal(got, x), "sigma 0 leaves the field unchanged")


def support_c(tool, vols, sig, mask=None):
    nx, ny, nz = vols[0].shape
    raw = b"".join(np.asfortranarray(v).tobytes(order="F") for v in vols)
    if mask is not None:
        raw += np.asfortranarray(mask.astype(np.uint8)).tobytes(order="F")
    args = [tool, "--support", str(nx), str(ny), str(nz)] + ["%.17g" % s for s in sig]
    args += [str(len(vols)), "1" if mask is not None else "0"]
    out = subprocess.run(args, input=raw, capture_output=True, check=True).stdout
    a = np.frombuffer(out, dtype=np.float64)
    return [a[k * nx * ny * nz:(k + 1) * nx * ny * nz].reshape((nx, ny, nz), order="F")
            for k in range(len(vols))]


def support_ref(y, sig, mask=None):
    """METHODS.md 2b written with scipy: G*(y 1_S) / G*(1_S) on S, NaN elsewhere."""
    with np.errstate(invalid="ignore"):
        S = np.isfinite(y) & (y > 0)
    if mask is not None:
        S &= mask
    g = lambda f: scipy.ndimage.gaussian_filter(f, sigma=sig, mode="constant", cval=0.0, truncate=4.0)
    num = g(np.where(S, y, 0.0))
    den = g(S.astype(float))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(S, num / den, np.nan)


def test_support(tool):
    """Normalised convolution inside the support (METHODS.md 2b) against scipy, to 1e-12."""
    rng = np.random.default_rng(7)
    voxel = (2.0, 3.0, 4.5)
    shape = (19, 14, 11)
    fwhm = 5.0
    sig = [fwhm / (2 * math.sqrt(2 * math.log(2))) / v for v in voxel]
    base = 1000 + 50 * rng.standard_normal(shape)
    mask = np.zeros(shape, bool)
    mask[3:16, 2:12, 1:10] = True
    mask[8, 6, 5] = False                       # a hole inside the mask
    vols = []
    for k in range(6):
        y = base + 10 * rng.standard_normal(shape)
        if k >= 2:                              # volumes 0, 1: same support (denominator reused)
            y[rng.random(shape) < 0.05] = 0.0   # zero voxels are outside S
            y[rng.random(shape) < 0.03] = np.nan
            y[rng.random(shape) < 0.02] = -5.0  # negative voxels too
            y[0, 0, :] = np.inf
        vols.append(y)
    vols.append(vols[0].copy())                 # back to the first support
    for name, m in (("no mask", None), ("masked", mask)):
        got = support_c(tool, vols, sig, m)
        worst, same_nan = 0.0, True
        for y, g in zip(vols, got):
            ref = support_ref(y, sig, m)
            same_nan &= bool(np.array_equal(np.isnan(ref), np.isnan(g)))
            ok = ~np.isnan(ref)
            worst = max(worst, float(np.max(np.abs(g[ok] - ref[ok]) / np.abs(ref[ok]))))
        report(same_nan, "support smoothing (%s): NaN exactly outside the support" % name)
        report(worst < 1e-12, "support smoothing (%s), 2 x 3 x 4.5 mm voxels, zero/NaN/negative "
               "voxels, 7 volumes: matches scipy normalised convolution, max rel diff %.2e" % (name, worst))
    # 80 volumes in which only a few voxels leave or rejoin the support each time: the
    # denominator is then updated from the previous volume's, and computed afresh
    # every 65 volumes; both must still match scipy volume by volume
    vols, y = [], base.copy()
    for k in range(80):
        y = base + 10 * rng.standard_normal(shape)
        idx = rng.integers(0, y.size, 3)
        y.reshape(-1)[idx] = -1.0 if k % 2 else 0.0
        vols.append(y)
    got = support_c(tool, vols, sig, mask)
    worst, same_nan = 0.0, True
    for y, g in zip(vols, got):
        ref = support_ref(y, sig, mask)
        same_nan &= bool(np.array_equal(np.isnan(ref), np.isnan(g)))
        ok = ~np.isnan(ref)
        worst = max(worst, float(np.max(np.abs(g[ok] - ref[ok]) / np.abs(ref[ok]))))
    report(same_nan and worst < 1e-12, "support changing by a few voxels per volume over 80 "
           "volumes (updated denominator): matches scipy, max rel diff %.2e" % worst)
    # a constant field stays constant inside any support (the normalisation)
    y = np.full(shape, 123.0)
    y[rng.random(shape) < 0.3] = 0
    g = support_c(tool, [y], sig)[0]
    report(np.nanmax(np.abs(g - 123.0)) < 1e-10 and np.isnan(g[y == 0]).all(),
           "a constant field is unchanged on its support")


def test_spheres(splitroi):
    import nibabel as nib
    with tempfile.TemporaryDirectory() as tmp:
        # grid 20 x 18 x 14, 2.5 x 2 x 3 mm voxels, offset origin
        aff = np.diag([2.5, 2.0, 3.0, 1.0])
        aff[:3, 3] = [-20.0, -15.0, -12.0]
        grid = os.path.join(tmp, "grid.nii.gz")
        nib.save(nib.Nifti1Image(np.zeros((20, 18, 14), np.float32), aff), grid)
        centres = [("left_a", -5.0, 0.0, 3.0), ("right_b", 3.0, 1.0, 3.0), ("far_c", 20.0, 15.0, 15.0)]
        coords = os.path.join(tmp, "coords.tsv")
        with open(coords, "w") as f:
            f.write("name\tx\ty\tz\n")
            for c in centres:
                f.write("%s\t%g\t%g\t%g\n" % c)
        radius = 6.0
        out = os.path.join(tmp, "out")
        r = subprocess.run([splitroi, "parcels", "--spheres", coords, "--grid", grid, "--radius",
                            str(radius), "--out", out, "--quiet"], capture_output=True, text=True)
        report(r.returncode == 0, "parcels --spheres runs (%s)" % r.stderr.strip())
        if r.returncode != 0:
            return
        lab = np.asanyarray(nib.load(os.path.join(out, "parcels.nii.gz")).dataobj)
        ijk = np.indices((20, 18, 14)).reshape(3, -1)
        xyz = (aff[:3, :3] @ ijk + aff[:3, 3:4]).T
        C = np.array([c[1:] for c in centres])
        d = np.linalg.norm(xyz[:, None, :] - C[None, :, :], axis=2)
        inside = d <= radius
        # nearest centre; np.argmin picks the lower row on ties, as the C side documents
        want = np.where(inside.any(axis=1), np.argmin(np.where(inside, d, np.inf), axis=1) + 1, 0)
        want = want.reshape((20, 18, 14))  # np.indices order: i slowest
        report(np.array_equal(lab, want), "sphere labels equal the numpy nearest-centre split")
        whole = inside.sum(axis=0)
        report(whole[0] > (want == 1).sum() and whole[1] > (want == 2).sum(),
               "the two overlapping spheres share voxels, split between them")
        import csv
        with open(os.path.join(out, "parcels.tsv")) as f:
            rows = list(csv.DictReader(f, delimiter="\t"))
        report([row["name"] for row in rows] == [c[0] for c in centres], "names in row order")
        report(all(int(rows[k]["size_voxels"]) == int((want == k + 1).sum()) for k in range(3)),
               "size_voxels = voxel counts (%s)" % ", ".join(row["size_voxels"] for row in rows))
        report(all(abs(float(rows[k]["size_mm3"]) - 15.0 * int((want == k + 1).sum())) < 1e-6
                   for k in range(3)), "size_mm3 = voxels x 15 mm3")
        com = xyz[want.reshape(-1) == 1].mean(axis=0)
        got = [float(rows[0]["com_" + a]) for a in "xyz"]
        report(max(abs(a - b) for a, b in zip(com, got)) < 1e-6, "centre of mass of sphere 1 in world mm")
        # an overlapping pair at equal distance from a voxel: the lower row wins
        with open(coords, "w") as f:
            f.write("name\tx\ty\tz\none\t0\t0\t0\ntwo\t5\t0\t0\n")
        r = subprocess.run([splitroi, "parcels", "--spheres", coords, "--grid", grid, "--radius",
                            "4", "--out", out, "--quiet"], capture_output=True, text=True)
        lab = np.asanyarray(nib.load(os.path.join(out, "parcels.nii.gz")).dataobj)
        # voxel i = 9 is at x = 2.5: 2.5 mm from both centres
        report(r.returncode == 0 and lab[9, 7, 4] == 1, "equal distance: the lower row takes the voxel")


def main():
    build = os.environ.get("BUILD", "build")
    tool = os.path.join(build, "tests", "tools", "smoothtool")
    if not os.access(tool, os.X_OK):
        report(False, "smoothtool not built at %s (make test builds it)" % tool)
    else:
        test_smoothing(tool)
        test_support(tool)
    splitroi = os.environ.get("SPLITROI", os.path.join(build, "splitroi"))
    test_spheres(splitroi)
    return 1 if tap.failures else 0


if __name__ == "__main__":
    sys.exit(main())
