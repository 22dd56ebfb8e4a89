#!/usr/bin/env python3
"""make_seeds.py - writes the afl++ seed corpora of tests/fuzz/ (standard library only).

    python3 tests/fuzz/make_seeds.py [DIR]     (default: tests/fuzz/seeds)

Small valid files and edge cases for each harness: seeds/nii, seeds/events, seeds/study.
A name starting with ok- must be accepted by its harness, bad- refused (tests/cli/
test_fuzz_harnesses.sh checks both; for events, table- files are tables that are not
events files); the rest of the name says what it holds. The files
are committed; rerun this after changing it and commit the result. Same output every run
(gzip streams written with mtime 0).
"""
import gzip
import os
import struct
import sys

OUT = sys.argv[1] if len(sys.argv) > 1 else os.path.join(os.path.dirname(os.path.abspath(__file__)), "seeds")

# NIfTI-1 datatype codes and item sizes (the NIfTI-1 standard, nifti1.h)
DT = {"uint8": (2, 1, "B"), "int16": (4, 2, "h"), "int32": (8, 4, "i"), "float32": (16, 4, "f"),
      "float64": (64, 8, "d"), "int8": (256, 1, "b"), "uint16": (512, 2, "H")}


def n1_header(dims, dt, pixdim=(1, 2, 2, 2, 2), slope=0.0, inter=0.0, end="<", vox_offset=352):
    """A 348-byte NIfTI-1 header (field layout from the NIfTI-1 standard), magic n+1."""
    code, size, _ = DT[dt]
    dim = [len(dims)] + list(dims) + [1] * (7 - len(dims))
    pd = [1.0] + list(pixdim[1:1 + len(dims)]) + [0.0] * (7 - len(dims))
    h = struct.pack(end + "i10s18sihsB", 348, b"", b"", 0, 0, b"r", 0)
    h += struct.pack(end + "8h", *dim)
    h += struct.pack(end + "3f", 0, 0, 0)                      # intent_p1..3
    h += struct.pack(end + "3h", 0, code, size * 8)            # intent_code, datatype, bitpix
    h += struct.pack(end + "h", 0)                             # slice_start
    h += struct.pack(end + "8f", *pd)
    h += struct.pack(end + "3f", vox_offset, slope, inter)
    h += struct.pack(end + "hBB", 0, 0, 2 | 8)                 # slice_end, slice_code, xyzt_units mm + s
    h += struct.pack(end + "4f", 0, 0, 0, 0)                   # cal_max, cal_min, slice_duration, toffset
    h += struct.pack(end + "2i", 0, 0)                         # glmax, glmin
    h += struct.pack("80s24s", b"splitroi fuzz seed", b"")
    h += struct.pack(end + "2h", 1, 1)                         # qform_code, sform_code
    h += struct.pack(end + "6f", 0, 0, 0, -4, -6, -2)          # quatern_b..d, qoffset_x..z
    h += struct.pack(end + "4f", pixdim[1], 0, 0, -4)          # srow_x
    h += struct.pack(end + "4f", 0, pixdim[2], 0, -6)
    h += struct.pack(end + "4f", 0, 0, pixdim[3], -2)
    h += struct.pack("16s4s", b"", b"n+1\0")
    assert len(h) == 348, len(h)
    return h


def n2_header(dims, dt, pixdim=(1, 2, 2, 2, 2), end="<"):
    """A 540-byte NIfTI-2 header (field layout from the NIfTI-2 standard), magic n+2."""
    code, size, _ = DT[dt]
    dim = [len(dims)] + list(dims) + [1] * (7 - len(dims))
    pd = [1.0] + list(pixdim[1:1 + len(dims)]) + [0.0] * (7 - len(dims))
    h = struct.pack(end + "i8s", 540, b"n+2\0\r\n\x1a\n")
    h += struct.pack(end + "2h", code, size * 8)
    h += struct.pack(end + "8q", *dim)
    h += struct.pack(end + "3d", 0, 0, 0)                      # intent_p1..3
    h += struct.pack(end + "8d", *pd)
    h += struct.pack(end + "q3d", 544, 0, 0, 0)                # vox_offset, scl_slope, scl_inter, cal_max
    h += struct.pack(end + "3d", 0, 0, 0)                      # cal_min, slice_duration, toffset
    h += struct.pack(end + "2q", 0, 0)                         # slice_start, slice_end
    h += struct.pack("80s24s", b"splitroi fuzz seed", b"")
    h += struct.pack(end + "2i", 1, 1)                         # qform_code, sform_code
    h += struct.pack(end + "6d", 0, 0, 0, -4, -6, -2)
    h += struct.pack(end + "4d", pixdim[1], 0, 0, -4)
    h += struct.pack(end + "4d", 0, pixdim[2], 0, -6)
    h += struct.pack(end + "4d", 0, 0, pixdim[3], -2)
    h += struct.pack(end + "3i", 0, 2 | 8, 0)                  # slice_code, xyzt_units mm + s, intent_code
    h += struct.pack("16s1s15s", b"", b"", b"")                # intent_name, dim_info, unused
    assert len(h) == 540, len(h)
    return h


def data(dims, dt, end="<"):
    n = 1
    for d in dims:
        n *= d
    fmt = DT[dt][2]
    vals = [(i * 7) % 23 + 100 for i in range(n)]
    if fmt in "fd":
        vals = [v + 0.25 for v in vals]
    return struct.pack(end + fmt * n, *vals)


def gz(b):
    return gzip.compress(b, 9, mtime=0)


def write(sub, name, content):
    d = os.path.join(OUT, sub)
    os.makedirs(d, exist_ok=True)
    mode = "wb" if isinstance(content, bytes) else "w"
    with open(os.path.join(d, name), mode, newline="" if mode == "w" else None) as f:
        f.write(content)


def nii_seeds():
    d4 = (3, 2, 2, 3)
    plain = n1_header(d4, "float32") + b"\0" * 4 + data(d4, "float32")
    write("nii", "ok-4d-float32.nii", plain)
    write("nii", "ok-4d-float32.nii.gz", gz(plain))
    d3 = (3, 3, 2)
    write("nii", "ok-3d-int16-scaled.nii.gz", gz(n1_header(d3, "int16", slope=2.0, inter=1.0) + b"\0" * 4 +
                                                data(d3, "int16")))
    write("nii", "ok-3d-uint8-labels.nii", n1_header((4, 3, 2), "uint8") + b"\0" * 4 + data((4, 3, 2), "uint8"))
    write("nii", "ok-big-endian-int32.nii", n1_header(d3, "int32", end=">") + b"\0" * 4 + data(d3, "int32", ">"))
    d2 = (2, 2, 2, 2)
    write("nii", "ok-nifti2-float64.nii", n2_header(d2, "float64") + b"\0" * 4 + data(d2, "float64"))
    k = len(plain) // 2   # two gzip members, read as one stream
    write("nii", "ok-two-members.nii.gz", gz(plain[:k]) + gz(plain[k:]))
    write("nii", "bad-truncated.nii.gz", gz(plain)[:-9])
    write("nii", "bad-data-cut.nii", plain[:-20])
    # a header claiming 32767^3 int8 voxels in a few bytes (the 132-byte file)
    write("nii", "bad-huge-dims.nii.gz", gz(n1_header((32767, 32767, 32767), "int8") + b"\0" * 4))
    write("nii", "bad-magic.nii", plain[:344] + b"xy1\0" + plain[348:])
    bad_crc = bytearray(gz(plain))
    bad_crc[-6] ^= 0xFF
    write("nii", "bad-crc.nii.gz", bytes(bad_crc))


def events_seeds():
    write("events", "ok-basic_events.tsv",
          "onset\tduration\ttrial_type\n0\t12\tmelody\n16\t12\tscrambled\n32\t12\tmelody\n48\t12\tscrambled\n")
    write("events", "ok-bom-crlf_events.tsv",
          "\ufeffonset\tduration\ttrial_type\tresponse_time\r\n0.5\t2\tfamiliar\t0.8\r\n4\t2\tnovel\tn/a\r\n")
    write("events", "ok-quoted-na_events.tsv",
          'onset\tduration\ttrial_type\n\n"1"\t0\t"loud tone#2"\nn/a\t1\tnovel\n3\t1.5\tn/a\n'
          '7\t0\t"two\nlines"\n-2\t1\tfamiliar\n')
    write("events", "ok-cr-lines_events.tsv", "onset\tduration\ttrial_type\r0\t1\tmelody\r5\t1\t\"nov\rel\"\r9\t1\tx\r")
    write("events", "ok-other-column_events.tsv",
          "onset\tduration\ttrial_type\tstimulus\n0\t4\ta\tmelody\n10\t4\tb\tscrambled\n20 \t 4\tc\tmelody\t\t\n")
    write("events", "table-confounds.tsv",
          "motion_tx\tmotion_ty\tframewise_displacement\n0\t0.01\tn/a\n1e-3\t-0.02\t0.1\n0.5\t0\t0.25\n")
    write("events", "table-names.csv", "index,name\n1,left_auditory\n2,\"right, auditory\"\n")
    write("events", "bad-negative-duration_events.tsv", "onset\tduration\ttrial_type\n0\t-1\tmelody\n")
    write("events", "bad-not-a-number_events.tsv", "onset\tduration\ttrial_type\n0x10\t1\tmelody\n1e999\t1\tnovel\n")
    write("events", "bad-no-onset_events.tsv", "start\tduration\ttrial_type\n0\t1\tmelody\n")
    write("events", "bad-duplicate-column_events.tsv", "onset\tduration\tonset\n0\t1\t2\n")
    write("events", "bad-open-quote_events.tsv", 'onset\tduration\ttrial_type\n0\t1\t"melody\n')


STUDY_FULL = """; an invented auditory study
# hash comments too
[study]
bids = data                 ; BIDS dataset root
out = results               # where results go
subjects = sub-01 02, 07
mask = mask.nii.gz

[localizer]
task = tones
contrast = melody - scrambled
split = leave-one-out
effects = melody, scrambled,
    melody - scrambled, "loud tone#2" - melody, 0.5*melody + 0.5*scrambled
condition_column = trial_type

[parcels]
image = parcels.nii.gz
names = parcels.tsv
top_percent = 12.5
resample = nearest

[model]
autocorrelation = ar1
drift_cutoff = 100
volume_time = 0.5
smoothing_fwhm = 4
confounds = csf white_matter motion_*
confounds_suffix = _desc-confounds_timeseries.tsv
motion = trans_x trans_y trans_z rot_x rot_y rot_z
motion_units = mm_deg
fd_threshold = 0.9
skip_volumes = 2
censor_fd = 0.5

[measure memory]
  task = memory
effects = familiar, novel, familiar - novel
"""


def study_seeds():
    write("study", "ok-full.ini", STUDY_FULL)
    write("study", "ok-minimal.ini", "[study]\nbids = data\nout = results\n[localizer]\ntask = tones\n"
          "contrast = melody - scrambled\n[parcels]\nimage = parcels.nii.gz\n")
    write("study", "ok-derivatives.ini", "[study]\nbids = data\nderivatives = data\nspace = MNI152NLin2009cAsym\n"
          "res = 2\nout = results\nmask = auto\n[localizer]\ntask = tones\ncontrast = melody - scrambled\n"
          "split = odd-even\n[parcels]\nimage = parcels.nii.gz\ntop_voxels = 50\n[model]\nautocorrelation = none\n"
          "drift_cutoff = none\n")
    write("study", "bad-unknown-key.ini", "[study]\nbids = data\nout = results\nsubject = 01\n[localizer]\n"
          "task = tones\ncontrast = melody - scrambled\n[parcels]\nimage = parcels.nii.gz\n"
          "[model]\nslice_reference = 0.5\n[modle]\nx = 1\n")
    write("study", "bad-values.ini", "[study]\nbids = nowhere\nout = results\n[localizer]\ntask = tones\n"
          "contrast = melody - - scrambled\nsplit = halves\n[parcels]\nimage = parcels.nii.gz\ntop_percent = 0\n"
          "min_t = 3\n[model]\ndrift_cutoff = -5\nfd_threshold = abc\nsmoothing_fwhm = 1e308\n[measure x]\n")
    write("study", "bad-syntax.ini", "[study\nbids = data\n\"unclosed = \"x\nbids = data\n  continued\n")


if __name__ == "__main__":
    nii_seeds()
    events_seeds()
    study_seeds()
