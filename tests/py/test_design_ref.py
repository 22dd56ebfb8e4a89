"""test_design_ref.py - whole design matrices from the C code against an independent numpy/scipy construction.

The reference follows METHODS.md section 2 on its own: kernel from
scipy.stats.gamma.pdf, drift from scipy.fft.dct (orthonormal DCT-II), the
fine-grid stimulus coded per bin (not per event), impulse bins from exact
decimal arithmetic (fractions.Fraction), np.convolve and np.interp.
The C side is driven through $BUILD/tests/tools/designtool.
"""
import math
import os
import subprocess
import sys
from fractions import Fraction

import numpy as np
import scipy.fft
import scipy.stats
import tap
from tap import ok as report

DT = Fraction(1, 20)
TOL = 1e-9


def reference(spec):
    """The design matrix of METHODS.md section 2, built without the C code."""
    T, tr, s = spec["T"], float(spec["tr"]), float(spec.get("volume_time", "0.5"))
    ncond = spec["ncond"]
    dt = float(DT)
    # Kernel: g(t;6,1) - g(t;16,1)/6 sampled on 0..32 s, unit area (Friston et al. 1998 form).
    M = int(round(32 / dt))
    tk = np.arange(M) * dt
    h = scipy.stats.gamma.pdf(tk, 6) - scipy.stats.gamma.pdf(tk, 16) / 6
    h /= h.sum() * dt
    # A grid a little longer than the C one (run + kernel + 10 s): results must not depend on it.
    J = int(math.ceil((T * tr + 42) / dt))
    tau = np.arange(J) * dt
    cols = []
    for c in range(ncond):
        stim = np.zeros(J)
        for cond, onset_txt, dur_txt in spec["events"]:
            if cond != c:
                continue
            onset, dur = float(onset_txt), float(dur_txt)
            if Fraction(dur_txt) == 0:
                if Fraction(onset_txt) < 0:
                    continue
                j = math.floor(Fraction(onset_txt) / DT)
                if j < J:
                    stim[j] += 1 / dt
            else:
                a, b = max(onset, 0.0), onset + dur
                stim += np.clip(np.minimum(b, tau + dt) - np.maximum(a, tau), 0, None) / dt
        x = np.convolve(stim, h)[:J] * dt
        cols.append(np.interp((np.arange(T) + s) * tr, tau, x))
    for conf in spec.get("confounds", []):
        v = np.array([np.nan if c == "n/a" else float(c) for c in conf])
        v = np.where(np.isnan(v), np.nanmean(v), v)
        cols.append(v - v.mean())
    cutoff = spec.get("cutoff", "128")
    if cutoff != "none":
        Q = math.floor(2 * T * Fraction(spec["tr"]) / Fraction(cutoff))
        Q = min(Q, T - 1)
        D = scipy.fft.dct(np.eye(T), type=2, norm="ortho", axis=0)[1:Q + 1].T
        cols.extend(D.T)
    cols.append(np.ones(T))
    return np.column_stack(cols)


def spec_text(spec):
    lines = ["T %d" % spec["T"], "tr " + spec["tr"], "ncond %d" % spec["ncond"]]
    if "volume_time" in spec:
        lines.append("volume_time " + spec["volume_time"])
    if "cutoff" in spec:
        lines.append("cutoff " + spec["cutoff"])
    for cond, onset, dur in spec["events"]:
        lines.append("event %d %s %s" % (cond, onset, dur))
    for conf in spec.get("confounds", []):
        lines.append("confound " + " ".join(conf))
    return "\n".join(lines) + "\n"


def run_tool(tool, spec):
    return subprocess.run([tool], input=spec_text(spec), capture_output=True, text=True)


def c_design(tool, spec):
    r = run_tool(tool, spec)
    if r.returncode != 0:
        raise RuntimeError(r.stderr.strip())
    return np.loadtxt(r.stdout.splitlines(), delimiter=",", ndmin=2)


def compare(tool, name, spec):
    try:
        X = c_design(tool, spec)
    except RuntimeError as err:
        report(False, "%s: designtool failed: %s" % (name, err))
        return None
    R = reference(spec)
    if X.shape != R.shape:
        report(False, "%s: shape %s vs reference %s" % (name, X.shape, R.shape))
        return None
    diff = np.max(np.abs(X - R))
    report(diff <= TOL, "%s: C design = numpy/scipy reference (%d x %d, max |diff| %.2g)"
           % (name, X.shape[0], X.shape[1], diff))
    return X


def main():
    build = os.environ.get("BUILD", "build")
    tool = os.path.join(build, "tests", "tools", "designtool")
    if not os.access(tool, os.X_OK):
        report(False, "designtool not built at %s (make test builds it)" % tool)
        return 1

    rng = np.random.default_rng(20261202)
    T = 120
    conf_na = [["%.6f" % v for v in rng.normal(size=T)],
               ["%.4f" % v if i % 7 else "n/a" for i, v in enumerate(rng.normal(size=T))],
               ["n/a"] + ["%.3f" % (0.01 * i) for i in range(1, T)]]
    cases = [
        ("blocks with fractional onsets", dict(
            T=120, tr="2", ncond=2, events=[
                (0, "10.37", "12.5"), (1, "40.013", "7.77"), (0, "80.0251", "15.333"),
                (1, "150.49", "0.01"), (0, "200.123", "3.3")])),
        ("impulses (decimal onsets on bin edges)", dict(
            T=150, tr="1.5", volume_time="0", ncond=1, events=[
                (0, "0", "0"), (0, "0.15", "0"), (0, "3.15", "0"), (0, "7.0", "0"),
                (0, "12.345", "0"), (0, "100.35", "0"), (0, "100.35", "0")])),
        ("overlapping events of one condition", dict(
            T=100, tr="2", ncond=1, events=[
                (0, "20", "10"), (0, "25", "10"), (0, "27.5", "0"), (0, "60.01", "20")])),
        ("events starting before 0 s", dict(
            T=80, tr="2", ncond=2, events=[
                (0, "-3.3", "8"), (1, "-1", "0.5"), (1, "-0.025", "0"), (1, "30", "4")])),
        ("events past the end", dict(
            T=80, tr="2", volume_time="1", ncond=2, events=[
                (0, "10", "5"), (0, "165", "10"), (1, "159.3", "30"), (1, "1000", "0")])),
        ("slice reference 0", dict(
            T=90, tr="2.5", volume_time="0", ncond=2, events=[
                (0, "12.5", "10"), (1, "40.7", "0"), (0, "100.01", "20")])),
        ("slice reference 0.5, TR 0.72", dict(
            T=300, tr="0.72", volume_time="0.5", ncond=2, events=[
                (0, "12.5", "10"), (1, "40.7", "2.25"), (0, "100.01", "20")])),
        ("confounds with n/a", dict(
            T=T, tr="2", ncond=1, events=[(0, "10", "20"), (0, "100", "20")],
            confounds=conf_na)),
        ("drift boundary T=256 TR=2 cutoff 128 (8 cosines)", dict(
            T=256, tr="2", ncond=1, cutoff="128", events=[(0, "30", "16")])),
        ("no drift (cutoff none)", dict(
            T=60, tr="2", ncond=1, cutoff="none", events=[(0, "30", "16")])),
        ("TR 0.8, cutoff 100", dict(
            T=400, tr="0.8", ncond=3, cutoff="100", events=[
                (c, "%.3f" % o, "%.2f" % d) for c, o, d in
                zip([0, 1, 2] * 10, np.linspace(3.1, 300.7, 30), [0, 2.5, 12.34] * 10)])),
    ]
    for seed in range(3):
        r = np.random.default_rng(seed)
        n = 40
        evs = [(int(r.integers(0, 3)), "%.3f" % r.uniform(-5, 330),
                "%.3f" % (0 if r.random() < 0.3 else r.uniform(0.01, 25))) for _ in range(n)]
        cases.append(("random design seed %d" % seed, dict(
            T=160, tr="2", volume_time="%.2f" % r.uniform(0, 1), ncond=3, events=evs)))

    for name, spec in cases:
        X = compare(tool, name, spec)
        if X is not None and name.startswith("drift boundary"):
            report(X.shape[1] == 1 + 8 + 1, "T=256, TR=2, cutoff 128 has 8 cosine columns (REFERENCES.md)")
            D = scipy.fft.dct(np.eye(256), type=2, norm="ortho", axis=0)[1:9].T
            dd = np.max(np.abs(X[:, 1:9] - D)) if X.shape[1] == 10 else np.inf
            report(dd <= 1e-12, "cosine block = scipy.fft.dct orthonormal DCT-II to 1e-12 (%.2g)" % dd)
            G = X[:, 1:9].T @ X[:, 1:9]
            report(np.max(np.abs(G - np.eye(8))) <= 1e-12, "cosine block C'C = I to 1e-12")

    # The kernel itself: an impulse at 0 s read every 0.05 s from 0 s is the scaled kernel.
    X = c_design(tool, dict(T=640, tr="0.05", volume_time="0", ncond=1, cutoff="none",
                            events=[(0, "0", "0")]))
    tk = np.arange(640) * 0.05
    g = scipy.stats.gamma.pdf(tk, 6) - scipy.stats.gamma.pdf(tk, 16) / 6
    scaled = g / (g.sum() * 0.05)
    dk = np.max(np.abs(X[:, 0] - scaled))
    report(dk <= 1e-12, "impulse response = scipy.stats.gamma two-gamma kernel, unit area (%.2g)" % dk)
    report(np.argmax(X[:, 0]) == 100, "impulse response peaks at 5.00 s on the 0.05 s grid")

    # Fact of the trade (Huettel & McCarthy 2000): a brief event peaks 5-6 s after onset.
    X = c_design(tool, dict(T=400, tr="0.1", volume_time="0", ncond=1, cutoff="none",
                            events=[(0, "5", "1")]))
    lag = np.argmax(X[:, 0]) * 0.1 - 5
    report(5 <= lag <= 6, "1 s event peaks %.1f s after onset (5-6 s expected)" % lag)

    # Errors: a confound column with no numeric cell names the column; bad sizes fail.
    r = run_tool(tool, dict(T=3, tr="2", ncond=0, events=[],
                            confounds=[["1", "2", "3"], ["n/a", "n/a", "n/a"]]))
    report(r.returncode == 1 and "column 2" in r.stderr,
           "all-n/a confound column rejected, column named: %s" % r.stderr.strip())
    r = run_tool(tool, dict(T=10, tr="2", volume_time="1.5", ncond=0, events=[]))
    report(r.returncode == 1 and "slice reference" in r.stderr,
           "slice reference 1.5 rejected: %s" % r.stderr.strip())
    r = run_tool(tool, dict(T=10, tr="2", ncond=1, events=[(0, "1", "-2")]))
    report(r.returncode == 1 and "duration" in r.stderr,
           "negative duration rejected: %s" % r.stderr.strip())
    return 1 if tap.failures else 0


if __name__ == "__main__":
    sys.exit(main())
