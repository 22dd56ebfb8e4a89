# mkstudy.py - writes a tiny invented BIDS study (tones localizer, memory task) for the check tests.
# Usage: python3 mkstudy.py DIR. Also writes DIR/expected.txt: parcel voxel counts and the mask
# count computed here with numpy, independently of splitroi.
import json
import os
import sys

import nibabel as nib
import numpy as np

root = sys.argv[1]
rng = np.random.default_rng(7)
shape = (6, 5, 4)
affine = np.diag([3.0, 3.0, 3.0, 1.0])
affine[:3, 3] = [-9.0, -6.0, -3.0]
T, TR = 20, 2.0


def bold(path, nt=T, tr=TR):
    data = (100 + rng.normal(0, 1, shape + (nt,))).astype(np.float32)
    img = nib.Nifti1Image(data, affine)
    img.header.set_xyzt_units("mm", "sec")
    img.header["pixdim"][4] = tr
    nib.save(img, path)


def events(path, rows):
    with open(path, "w") as f:
        f.write("onset\tduration\ttrial_type\n")
        for r in rows:
            f.write("%s\t%s\t%s\n" % r)


data = os.path.join(root, "data")
os.makedirs(data, exist_ok=True)
with open(os.path.join(data, "dataset_description.json"), "w") as f:
    json.dump({"Name": "invented auditory study", "BIDSVersion": "1.8.0"}, f)
with open(os.path.join(data, "task-tones_bold.json"), "w") as f:
    json.dump({"RepetitionTime": TR, "TaskName": "tones"}, f)
for sub in ("01", "02"):
    func = os.path.join(data, "sub-" + sub, "func")
    os.makedirs(func, exist_ok=True)
    for run in (1, 2, 3, 4):
        stem = os.path.join(func, "sub-%s_task-tones_run-%d_" % (sub, run))
        bold(stem + "bold.nii.gz")
        rows = []
        for k in range(4):
            rows.append((4 + 8 * k, 2, "melody"))
            rows.append((8 + 8 * k, 2, "scrambled"))
        events(stem + "events.tsv", rows)
    for run in (1, 2):
        stem = os.path.join(func, "sub-%s_task-memory_run-%d_" % (sub, run))
        bold(stem + "bold.nii.gz")
        events(stem + "events.tsv", [(2, 3, "familiar"), (10, 3, "novel"), (20, 3, "familiar")])
        with open(stem + "bold.json", "w") as f:
            json.dump({"RepetitionTime": TR}, f)

labels = np.zeros(shape, dtype=np.int16)
labels[0:3, :, :] = 1
labels[3:6, 0:2, :] = 2
labels[5, 4, 3] = 3
img = nib.Nifti1Image(labels, affine)
img.header.set_xyzt_units("mm")
nib.save(img, os.path.join(root, "parcels.nii.gz"))
with open(os.path.join(root, "parcels.tsv"), "w") as f:
    f.write("index\tname\n1\tleft_auditory\n2\tright_auditory\n3\tcorner\n")
mask = np.ones(shape, dtype=np.uint8)
mask[:, :, 3] = 0
img = nib.Nifti1Image(mask, affine)
nib.save(img, os.path.join(root, "mask.nii.gz"))

with open(os.path.join(root, "study.ini"), "w") as f:
    f.write("""; invented auditory study for the check tests
[study]
bids = data
out = results
mask = mask.nii.gz

[localizer]
task = tones
contrast = melody - scrambled
split = odd-even

[parcels]
image = parcels.nii.gz
names = parcels.tsv
top_percent = 10   # default anyway

[model]
drift_cutoff = 128

[measure memory]
task = memory
effects = familiar, novel, familiar - novel
""")

with open(os.path.join(root, "expected.txt"), "w") as f:
    for lab, name in ((1, "left_auditory"), (2, "right_auditory"), (3, "corner")):
        f.write("parcel %d %s %d\n" % (lab, name, int((labels == lab).sum())))
    f.write("mask %d\n" % int((mask != 0).sum()))
