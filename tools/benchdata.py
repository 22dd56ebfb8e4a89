"""benchdata.py - writes an invented BOLD run (float32 .nii.gz), its events and a 6-column confounds TSV for tools/bench.sh.

usage: benchdata.py NX NY NZ T OUT_bold.nii.gz (fixed seed; a sphere of "brain" at 1000 with noise, a dim noisy background)
"""
import sys, numpy as np, nibabel as nib
nx, ny, nz, T = map(int, sys.argv[1:5]); out = sys.argv[5]; dtype = sys.argv[6] if len(sys.argv) > 6 else "float32"
rng = np.random.default_rng(1)
tr = 2.0
x, y, z = np.meshgrid(np.linspace(-1, 1, nx), np.linspace(-1, 1, ny), np.linspace(-1, 1, nz), indexing="ij")
brain = (x**2 + y**2 + z**2) < 0.8
base = np.where(brain, 1000.0, 20.0)
t = np.arange(T)
# blocks of two conditions: 20 s on, alternate, with rest
data = np.empty((nx, ny, nz, T), np.float32)
block = ((t * tr) // 20) % 4
sig = np.where(block == 1, 1.0, 0) + np.where(block == 3, 0.5, 0)
for k in range(T):
    data[..., k] = base * (1 + 0.01 * sig[k] * brain) + rng.standard_normal((nx, ny, nz)) * np.where(brain, 10, 5)
hdr = nib.Nifti1Header(); hdr.set_xyzt_units("mm", "sec")
img = nib.Nifti1Image(data, np.diag([3, 3, 3.5, 1]), hdr)
img.header["pixdim"][4] = tr
nib.save(img, out)
with open(out.replace("_bold.nii.gz", "_events.tsv"), "w") as f:
    f.write("onset\tduration\ttrial_type\n")
    for b in range(int(T * tr // 20)):
        if b % 4 == 1: f.write(f"{b*20}\t20\tmelody\n")
        if b % 4 == 3: f.write(f"{b*20}\t20\tscrambled\n")
with open(out.replace("_bold.nii.gz", "_confounds.tsv"), "w") as f:
    names = ["trans_x", "trans_y", "trans_z", "rot_x", "rot_y", "rot_z"]
    f.write("\t".join(names) + "\n")
    m = np.cumsum(rng.standard_normal((T, 6)) * 0.01, 0)
    for k in range(T): f.write("\t".join(f"{v:.6f}" for v in m[k]) + "\n")
