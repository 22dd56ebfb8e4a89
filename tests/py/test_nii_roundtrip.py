#!/usr/bin/env python3
"""test_nii_roundtrip.py - our NIfTI writer checked by nibabel, and nibabel's files read by our reader."""
import os
import subprocess
import sys
import tempfile
import tap
from tap import ok as check

try:
    import numpy as np
    import nibabel as nib
    from nibabel.quaternions import quat2mat, fillpositive
except ImportError as exc:  # pragma: no cover
    print("skip - nibabel/numpy unavailable (%s)" % exc)
    sys.exit(0)

BUILD = os.environ.get("BUILD", "build")
TOOL = os.path.join(BUILD, "tests", "tools", "niiwrite")


def run(*args):
    out = subprocess.run([TOOL] + list(args), check=True, capture_output=True, text=True)
    return out.stdout


# The tool's fixed grid and values (tests/tools/niiwrite.c), recomputed here.
NX, NY, NZ, NT = 7, 5, 4, 3


def expected_values(nt):
    i, j, k = np.meshgrid(np.arange(NX), np.arange(NY), np.arange(NZ), indexing="ij")
    vols = [np.sin(0.7 * i) * 100.0 + 3.0 * j - 0.5 * k * k + 11.0 * t for t in range(nt)]
    return np.stack(vols, axis=-1)


def expected_affine(line):
    """Affine from the printed quaternion, built with nibabel's quaternion code (NIfTI-1 qform method 2)."""
    w = line.split()
    b, c, d = float(w[1]), float(w[2]), float(w[3])
    off = np.array([float(w[5]), float(w[6]), float(w[7])])
    pix = np.array([float(w[9]), float(w[10]), float(w[11])])
    qfac = float(w[13])
    R = quat2mat(fillpositive(np.array([b, c, d])))
    A = np.eye(4)
    A[:3, :3] = R @ np.diag([pix[0], pix[1], pix[2] * qfac])
    A[:3, 3] = off
    return A, pix


def parse_dump(text):
    info = {}
    for line in text.splitlines():
        w = line.split()
        info[w[0]] = [float(x) for x in w[1:]]
    return info


if not os.access(TOOL, os.X_OK):
    print("not ok - test tool %s not built (make test builds it)" % TOOL)
    sys.exit(1)

tmp = tempfile.mkdtemp(prefix="sr_nii_py_")

# ---- our writer, nibabel reads ----
for kind in ("float", "int16", "labels", "series"):
    for ext in (".nii", ".nii.gz"):
        for form in ("sform", "qform"):
            path = os.path.join(tmp, "%s_%s%s" % (kind, form, ext))
            printed = run("write", kind, path, form)
            A, pix = expected_affine(printed.splitlines()[0])
            img = nib.load(path)
            hdr = img.header
            tag = "%s %s%s" % (kind, form, ext)
            nt = 1 if kind == "labels" else NT
            shape = (NX, NY, NZ) if nt == 1 else (NX, NY, NZ, NT)
            check(img.shape == shape, "%s: nibabel shape %s" % (tag, img.shape))
            want_dt = {"float": np.float32, "series": np.float32, "int16": np.int16,
                       "labels": np.int32}[kind]
            check(hdr.get_data_dtype() == want_dt, "%s: datatype %s" % (tag, hdr.get_data_dtype()))
            check(np.allclose(hdr["pixdim"][1:4], pix, atol=1e-6), "%s: pixdim[1:4]" % tag)
            if nt > 1:
                check(abs(float(hdr["pixdim"][4]) - 2.5) < 1e-6 and hdr.get_xyzt_units()[1] == "sec",
                      "%s: pixdim[4] = 2.5 s" % tag)
            # qform always written; sform only in the "sform" files (code 2 there)
            check(np.allclose(hdr.get_qform(), A, atol=1e-4), "%s: qform matches the quaternion" % tag)
            check(int(hdr["sform_code"]) == (2 if form == "sform" else 0), "%s: sform code" % tag)
            check(np.allclose(img.affine, A, atol=1e-4), "%s: nibabel best affine" % tag)
            check(np.allclose(hdr.get_best_affine(), A, atol=1e-4), "%s: get_best_affine" % tag)
            data = np.asanyarray(img.dataobj)
            if kind in ("float", "series"):
                want = expected_values(NT).astype(np.float32)
                check(np.array_equal(data.astype(np.float32), want), "%s: values" % tag)
            elif kind == "int16":
                slope, inter = img.dataobj.slope, img.dataobj.inter
                raw = np.asanyarray(img.dataobj.get_unscaled())
                want_raw = np.clip(np.round((expected_values(NT) - 10.0) / 0.25), -32768, 32767)
                check(slope == 0.25 and inter == 10.0, "%s: scl_slope/inter (%s, %s)" % (tag, slope, inter))
                check(np.array_equal(raw, want_raw.astype(np.int16)), "%s: stored int16" % tag)
                check(np.max(np.abs(img.get_fdata() - expected_values(NT))) <= 0.125 + 1e-9,
                      "%s: scaled values within slope/2" % tag)
            else:
                i, j, k = np.meshgrid(np.arange(NX), np.arange(NY), np.arange(NZ), indexing="ij")
                want = ((i + 2 * j + 3 * k) % 7) * 100000 - 1
                check(np.array_equal(data, want), "%s: labels" % tag)
                check(int(hdr["intent_code"]) == 1002, "%s: label intent" % tag)
            # our own reader agrees with nibabel's geometry
            dump = parse_dump(run("dump", path, path + ".f64"))
            ours = np.array(dump["affine"]).reshape(3, 4)
            check(np.allclose(ours, img.affine[:3], atol=1e-5), "%s: our affine = nibabel's" % tag)
            vals = np.fromfile(path + ".f64", dtype=np.float64)
            check(np.allclose(vals, img.get_fdata().ravel(order="F"), rtol=0, atol=1e-9),
                  "%s: our values = nibabel's" % tag)
            check(not [f for f in os.listdir(tmp) if ".tmp." in f], "%s: no temporary left" % tag)

# ---- nibabel writes, our reader reads ----
rng = np.random.default_rng(20261202)
aff = np.array([[-2.0, 0.1, 0.0, 90.0], [0.05, 2.2, 0.3, -126.0], [0.0, -0.2, 2.8, -72.0], [0, 0, 0, 1]])


def compare(path, img, tag, tr):
    dump = parse_dump(run("dump", path, path + ".f64"))
    shape = img.shape + (1,) * (4 - len(img.shape))
    check(dump["dims"] == [float(s) for s in shape], "%s: dims %s" % (tag, dump["dims"]))
    check(abs(dump["tr"][0] - tr) < 1e-9, "%s: TR %g s (want %g)" % (tag, dump["tr"][0], tr))
    ours = np.array(dump["affine"]).reshape(3, 4)
    check(np.allclose(ours, nib.load(path).affine[:3], atol=1e-5), "%s: affine" % tag)
    vals = np.fromfile(path + ".f64", dtype=np.float64)
    want = nib.load(path).get_fdata(dtype=np.float64).reshape(-1, order="F")
    check(vals.shape == want.shape and np.allclose(vals, want, rtol=1e-12, atol=0),
          "%s: values (max diff %g)" % (tag, np.max(np.abs(vals - want)) if vals.shape == want.shape else -1))
    s = float(np.sum(want))
    check(abs(dump["sum"][0] - s) <= 1e-9 * max(1.0, abs(s)), "%s: sum" % tag)
    return dump


for ext in (".nii", ".nii.gz"):
    # int16 with scl_slope/scl_inter, TR in ms
    raw = rng.integers(-3000, 3000, size=(6, 5, 4, 7)).astype(np.int16)
    img = nib.Nifti1Image(raw, aff)
    img.header.set_data_dtype(np.int16)
    img.header.set_slope_inter(0.5, 3.0)
    img.header.set_xyzt_units("mm", "msec")
    img.header["pixdim"][4] = 1500.0
    p = os.path.join(tmp, "nib_int16" + ext)
    nib.save(img, p)
    d = compare(p, img, "nibabel int16 slope" + ext, 1.5)
    check(d["slope"] == [0.5] and d["inter"] == [3.0], "nibabel int16%s: slope/inter read" % ext)
    # float64, 3-D (nibabel leaves pixdim[4] = 1 there: not a TR), big-endian header and data
    f64 = rng.normal(100, 15, size=(5, 6, 3))
    hdr = nib.Nifti1Header(endianness=">")
    img = nib.Nifti1Image(f64, aff, header=hdr)
    img.header.set_data_dtype(np.float64)
    p = os.path.join(tmp, "nib_f64_be" + ext)
    nib.save(img, p)
    d = compare(p, img, "nibabel float64 big-endian" + ext, 0.0)
    check(d["datatype"] == [64.0], "nibabel float64%s: datatype 64" % ext)
    # NIfTI-2, float32 4-D, TR in seconds
    f32 = rng.normal(0, 1, size=(4, 3, 5, 6)).astype(np.float32)
    img = nib.Nifti2Image(f32, aff)
    img.header.set_xyzt_units("mm", "sec")
    img.header["pixdim"][4] = 2.0
    p = os.path.join(tmp, "nib_n2" + ext)
    nib.save(img, p)
    d = compare(p, img, "nibabel NIfTI-2" + ext, 2.0)
    check(d["version"] == [2.0], "nibabel NIfTI-2%s: version 2" % ext)
    # uint8 with a qform only, voxel size in micrometres
    u8 = rng.integers(0, 256, size=(3, 4, 5)).astype(np.uint8)
    img = nib.Nifti1Image(u8, None)
    img.header.set_qform(aff, code=1)
    img.header.set_sform(None, code=0)
    img.header.set_xyzt_units("micron", "sec")
    p = os.path.join(tmp, "nib_u8_micron" + ext)
    nib.save(img, p)
    d = parse_dump(run("dump", p, p + ".f64"))
    zooms = np.array(nib.load(p).header.get_zooms()[:3])
    check(np.allclose(d["voxel"], zooms / 1000.0, rtol=1e-6),
          "nibabel uint8 micron%s: voxel size converted to mm (%s)" % (ext, d["voxel"]))
    check(np.array_equal(np.fromfile(p + ".f64"), u8.reshape(-1, order="F").astype(float)),
          "nibabel uint8 micron%s: values" % ext)

sys.exit(1 if tap.failures else 0)
