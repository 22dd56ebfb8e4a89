"""outtree.py - the files of an output folder, for tests that compare two runs of the same job.

files(d, varying): relative paths under d, sorted, without the lock files and
without the files named in varying (written with the time of the run or the
command line, so they differ between any two runs).
"""
import os


def files(d, varying):
    out = []
    for root, _, names in os.walk(d):
        for n in names:
            if n in varying or n.startswith(".lock"):
                continue
            out.append(os.path.relpath(os.path.join(root, n), d))
    return sorted(out)
