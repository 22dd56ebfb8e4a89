"""End-to-end check of `splitroi analyze` against the independent Python reference (srref) on generated edge-case studies, row by row."""
import csv
import glob
import math
import os
import shutil
import subprocess
import sys
import tempfile

import pandas as pd

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import make_study  # noqa: E402
import srref  # noqa: E402

SPLITROI = os.environ.get('SPLITROI', os.path.join(HERE, '..', '..', 'build', 'splitroi'))
REL = 1e-6
ABS = 1e-9          # floor for values that are essentially zero
KEY = ('subject', 'parcel', 'split', 'measure_task', 'effect')
COLUMNS = ('subject', 'parcel', 'split', 'define_runs', 'measure_task', 'measure_runs', 'effect',
           'value', 'n_voxels')
failed = 0


def report(cond, name, detail=''):
    global failed
    if cond:
        print('ok - ' + name)
    else:
        failed += 1
        print('not ok - %s%s' % (name, (': ' + detail) if detail else ''))
    return cond


def run(args):
    return subprocess.run([SPLITROI] + args, capture_output=True, text=True)


def num(s):
    return float('nan') if s == '' else float(s)


def compare_rows(tag, got, ref):
    gk = {tuple(r[k] for k in KEY): r for r in got}
    rk = {tuple(str(r[k]) for k in KEY): r for r in ref}
    report(len(gk) == len(got), '%s: keys unique in responses.csv' % tag, '%d rows, %d keys' % (len(got), len(gk)))
    missing = sorted(set(rk) - set(gk))
    extra = sorted(set(gk) - set(rk))
    report(not missing and not extra, '%s: same rows as the reference (%d)' % (tag, len(rk)),
           'missing %d e.g. %s; extra %d e.g. %s' % (len(missing), missing[:3], len(extra), extra[:3]))
    common = sorted(set(rk) & set(gk))
    bad_runs = [(k, gk[k]['define_runs'], gk[k]['measure_runs'], rk[k]['define_runs'], rk[k]['measure_runs'])
                for k in common if (gk[k]['define_runs'], gk[k]['measure_runs']) !=
                (rk[k]['define_runs'], rk[k]['measure_runs'])]
    report(not bad_runs, '%s: define_runs and measure_runs equal' % tag,
           '%d differ, first %s' % (len(bad_runs), bad_runs[:1]))
    worst_n = None
    nbad = 0
    for k in common:
        try:
            g = float(gk[k]['n_voxels'])
        except ValueError:
            g = float('nan')
        w = float(rk[k]['n_voxels'])
        if not g == w:
            nbad += 1
            worst_n = worst_n or (k, gk[k]['n_voxels'], w)
    report(nbad == 0, '%s: n_voxels exact' % tag, '%d differ, first %s' % (nbad, worst_n))
    worst = (0.0, None)
    nbad = 0
    for k in common:
        try:
            g = num(gk[k]['value'])
        except ValueError:
            g = float('inf')
        w = float(rk[k]['value'])
        if math.isnan(w) or math.isnan(g):
            # missing values are empty fields (METHODS.md section 10), never "nan"
            bad = gk[k]['value'] != '' if math.isnan(w) else True
            err = float('inf') if bad else 0.0
        else:
            err = abs(g - w) / max(abs(w), ABS / REL)
            bad = err > REL
        nbad += bad
        if err > worst[0]:
            worst = (err, (k, gk[k]['value'], w))
    report(nbad == 0, '%s: values within %g relative (worst %.2g)' % (tag, REL, worst[0]),
           '%d differ, worst %s' % (nbad, worst[1]))


def compare_group(tag, path, ref_rows):
    if not os.path.exists(path):
        report(False, '%s: group.csv written' % tag)
        return
    got = list(csv.DictReader(open(path, newline='')))
    ref = srref.group(ref_rows)
    gk = {(r['parcel'], r['split'], r['measure_task'], r['effect']): r for r in got}
    rk = {(str(r['parcel']), r['split'], r['measure_task'], r['effect']): r for r in ref}
    report(set(gk) == set(rk), '%s: group.csv has the reference rows (%d)' % (tag, len(rk)),
           'missing %s extra %s' % (sorted(set(rk) - set(gk))[:3], sorted(set(gk) - set(rk))[:3]))
    worst = (0.0, None)
    nbad = 0
    for k in set(gk) & set(rk):
        for col in ('n', 'mean', 'sd', 'sem', 't', 'df', 'p', 'cohen_d', 'q_fdr'):
            w = float(rk[k][col])
            try:
                g = num(gk[k].get(col, 'x'))
            except ValueError:
                g = float('inf')
            if math.isnan(w) or math.isnan(g):
                err = float('inf') if (gk[k].get(col) != '' if math.isnan(w) else True) else 0.0
            else:
                err = abs(g - w) / max(abs(w), ABS / REL)
            if err > REL:
                nbad += 1
            if err > worst[0]:
                worst = (err, (k, col, gk[k].get(col), w))
    report(nbad == 0, '%s: group statistics within %g relative (worst %.2g)' % (tag, REL, worst[0]),
           '%d differ, worst %s' % (nbad, worst[1]))


def snapshot(out):
    files = sorted(glob.glob(os.path.join(out, 'sub-*', 'responses.csv'))) + [os.path.join(out, 'responses.csv')]
    return {f: (open(f, 'rb').read(), os.stat(f).st_mtime_ns) for f in files if os.path.exists(f)}


def check_study(tmp, preset):
    d = os.path.join(tmp, preset)
    ini = make_study.make_study(d, **make_study.PRESETS[preset])
    out = os.path.join(d, 'results')
    p = run(['analyze', ini, '--quiet', '--jobs', '1'])
    if not report(p.returncode == 0, '%s: analyze --jobs 1 exits 0' % preset,
                  'exit %d, stderr %s' % (p.returncode, p.stderr[-600:])):
        return
    path = os.path.join(out, 'responses.csv')
    if not report(os.path.exists(path), '%s: responses.csv written' % preset):
        return
    with open(path, newline='') as f:
        got = list(csv.DictReader(f))
        hdr = got[0].keys() if got else []
    report(all(c in hdr for c in COLUMNS), '%s: responses.csv has the section 10 columns' % preset,
           'header %s' % list(hdr))
    pdf = pd.read_csv(path, dtype=str, keep_default_na=False)
    report(len(pdf) == len(got) and list(pdf.columns) == list(hdr),
           '%s: pandas and csv read the same table (%d rows)' % (preset, len(got)))
    ref = srref.analyze(ini)
    compare_rows(preset, got, ref)
    # the per-subject tables hold exactly that subject's rows
    per = []
    for sp in sorted(glob.glob(os.path.join(out, 'sub-*', 'responses.csv'))):
        sub = os.path.basename(os.path.dirname(sp))   # the participant_id, as the tables hold it
        rows = list(csv.DictReader(open(sp, newline='')))
        per.append(all(r['subject'] == sub for r in rows) and
                   len(rows) == sum(1 for r in got if r['subject'] == sub))
    report(per and all(per), '%s: sub-*/responses.csv hold each subject\'s rows' % preset)
    compare_group(preset, os.path.join(out, 'group.csv'), ref)
    first = snapshot(out)
    # a second run finds everything up to date and rewrites nothing
    p = run(['analyze', ini, '--quiet', '--jobs', '1'])
    again = snapshot(out)
    report(p.returncode == 0 and again == first,
           '%s: a second run skips (tables and mtimes unchanged)' % preset,
           'exit %d, changed %s' % (p.returncode, [f for f in first if again.get(f) != first[f]][:3]))
    # two jobs give byte-identical tables
    shutil.rmtree(out)
    p = run(['analyze', ini, '--quiet', '--jobs', '2'])
    two = snapshot(out)
    same = p.returncode == 0 and {f: v[0] for f, v in two.items()} == {f: v[0] for f, v in first.items()}
    report(same, '%s: --jobs 2 gives byte-identical responses.csv' % preset,
           'exit %d, stderr %s' % (p.returncode, p.stderr[-300:]))


def main():
    try:
        p = run(['help', 'analyze'])
        ok = p.returncode == 0
    except OSError:
        ok = False
    if not ok:  # a binary without analyze is broken, not a reason to skip the main reference test
        print('not ok - splitroi help analyze failed: the binary has no working analyze')
        return 1
    tmp = tempfile.mkdtemp(prefix='srref_')
    try:
        for preset in make_study.PRESETS:
            try:
                check_study(tmp, preset)
            except Exception as e:  # a crash of the reference or the reader is a failure, not a skip
                report(False, '%s: comparison ran' % preset, '%s: %s' % (type(e).__name__, e))
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return 1 if failed else 0


if __name__ == '__main__':
    sys.exit(main())
