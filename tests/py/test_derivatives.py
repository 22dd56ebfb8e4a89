"""Preprocessed BIDS Derivatives in, raw layout equivalence, never two images of one run (issue 13).

A simulated study (`splitroi simulate`) is rearranged twice:
  R  the plain raw layout: raw BOLD, events and sidecars, a 29-column confounds
     file beside each run (n/a in the first row of the derivative and
     framewise-displacement columns), sub-01 in two sessions, a fixed mask;
  D  the same raw dataset with other raw BOLD (changed values, one not even a
     NIfTI file) plus derivatives/prep holding the real BOLD in two spaces
     (desc-preproc, a desc-smooth copy that must be ignored), brain masks and
     the confounds, analysed with derivatives/space and mask = auto.
Then (a) every table of D equals R's byte for byte, and R's values equal those
of the original simulated layout; (b) a second image of one run (res-2) is
exit 1 in check and analyze naming both files; (c) a space that is not there
is exit 1 listing the spaces present; (d) the raw BOLD is never read (it
differs, and one raw file is junk). Also: a subject folder whose label is not
alphanumeric is an error naming it.
"""
import csv
import glob
import json
import os
import shutil
import subprocess
import sys
import tempfile

import nibabel as nib
import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
SPLITROI = os.environ.get('SPLITROI', os.path.join(HERE, '..', '..', 'build', 'splitroi'))
SPACES = ('MNI152NLin2009cAsym', 'T1w')
failed = 0


def report(cond, name, detail=''):
    global failed
    if cond:
        print('ok - ' + name)
    else:
        failed += 1
        print('not ok - %s%s' % (name, (': ' + detail[:1500]) if detail else ''))
    return cond


def run(args, cwd=None):
    return subprocess.run([SPLITROI] + args, capture_output=True, text=True, cwd=cwd)


def new_name(sub, task, run):
    """sub-01 goes into two sessions: runs 1, 2 -> ses-1 run-1, run-2; 3, 4 -> ses-2 (memory: 1 -> ses-1, 2 -> ses-2)."""
    if sub != '01':
        return None, 'sub-%s_task-%s_run-%02d' % (sub, task, run)
    if task == 'tones':
        ses, r = (1, run) if run <= 2 else (2, run - 2)
    else:
        ses, r = run, 1
    return str(ses), 'sub-%s_ses-%d_task-%s_run-%d' % (sub, ses, task, r)


def wide_confounds(src, dst, rng):
    """The simulated motion columns first (same order), then 23 more, n/a first rows where pipelines leave them."""
    with open(src) as f:
        rows = [l.rstrip('\n').split('\t') for l in f if l.strip()]
    head, body = rows[0], rows[1:]
    T = len(body)
    cols = {h: [r[i] for r in body] for i, h in enumerate(head)}
    out = [(h, cols[h]) for h in head]
    for h in head:
        x = np.array([float(v) for v in cols[h]])
        d = np.diff(x, prepend=np.nan)
        out.append((h + '_derivative1', ['n/a' if not np.isfinite(v) else '%.6f' % v for v in d]))
    fd = np.abs(rng.standard_normal(T)) * 0.2
    out.append(('framewise_displacement', ['n/a'] + ['%.6f' % v for v in fd[1:]]))
    for k in range(6):
        out.append(('a_comp_cor_%02d' % k, ['%.6f' % v for v in rng.standard_normal(T)]))
    for k in range(3):
        out.append(('cosine%02d' % k, ['%.6f' % v for v in np.cos(np.pi * (k + 1) * (np.arange(T) + .5) / T)]))
    for h in ('csf', 'white_matter', 'global_signal'):
        out.append((h, ['%.4f' % v for v in 500 + rng.standard_normal(T)]))
    with open(dst, 'w') as f:
        f.write('\t'.join(h for h, _ in out) + '\n')
        for i in range(T):
            f.write('\t'.join(c[i] for _, c in out) + '\n')
    return len(out)


def write_study(path, extra_study, bids='data'):
    with open(path, 'w') as f:
        f.write('[study]\nbids = %s\nout = results\n%s\n' % (bids, extra_study))
        f.write('[localizer]\ntask = tones\ncontrast = melody - scrambled\nsplit = odd-even\n'
                'effects = melody, scrambled, melody - scrambled\n\n')
        f.write('[parcels]\nimage = ../sim/parcels.nii.gz\nnames = ../sim/parcels.tsv\ntop_percent = 10\n\n')
        f.write('[model]\nconfounds = motion_t? motion_r?\n')
        if 'derivatives' not in extra_study:
            f.write('confounds_suffix = _desc-confounds_timeseries.tsv\n')
        f.write('\n[measure memory]\ntask = memory\neffects = familiar, novel, familiar - novel\n')


def read_csv(path):
    with open(path, newline='') as f:
        return list(csv.DictReader(f))


def main():
    if run(['help', 'analyze']).returncode != 0:
        print('not ok - splitroi help analyze failed: the binary is missing or has no working analyze')
        return 1
    tmp = tempfile.mkdtemp(prefix='srderiv_')
    rng = np.random.default_rng(13)
    try:
        sim = os.path.join(tmp, 'sim')
        p = run(['simulate', '--out', sim, '--subjects', '3', '--volumes', '60', '--seed', '5', '--quiet'])
        if not report(p.returncode == 0, 'simulated study made', p.stderr):
            return 1
        R, D = os.path.join(tmp, 'R'), os.path.join(tmp, 'D')
        rdata, ddata = os.path.join(R, 'data'), os.path.join(D, 'data')
        prep = os.path.join(ddata, 'derivatives', 'prep')
        for top in glob.glob(os.path.join(sim, 'data', '*.json')) + glob.glob(os.path.join(sim, 'data', '*.tsv')):
            for d in (rdata, ddata):
                os.makedirs(d, exist_ok=True)
                shutil.copy(top, d)
        os.makedirs(prep)
        with open(os.path.join(prep, 'dataset_description.json'), 'w') as f:
            json.dump({'Name': 'invented preprocessing', 'BIDSVersion': '1.8.0', 'DatasetType': 'derivative',
                       'GeneratedBy': [{'Name': 'test_derivatives.py'}]}, f)
        mask = None
        ncols = 0
        junk_done = False
        for bold in sorted(glob.glob(os.path.join(sim, 'data', 'sub-*', 'func', '*_bold.nii.gz'))):
            b = os.path.basename(bold)
            sub = b.split('_')[0][4:]
            task = b.split('task-')[1].split('_')[0]
            rn = int(b.split('run-')[1].split('_')[0])
            stem = bold[:-len('_bold.nii.gz')]
            ses, name = new_name(sub, task, rn)
            rel = os.path.join('sub-' + sub, *(['ses-' + ses] if ses else []), 'func')
            for d in (os.path.join(rdata, rel), os.path.join(ddata, rel), os.path.join(prep, rel)):
                os.makedirs(d, exist_ok=True)
            img = nib.load(bold)
            if mask is None:
                m = np.ones(img.shape[:3], np.uint8)
                m[:3, :, :] = 0           # a slab outside the mask: auto must find the same voxels
                mask = nib.Nifti1Image(m, img.affine, img.header)
                mask.header.set_data_dtype(np.uint8)
                nib.save(mask, os.path.join(R, 'mask.nii.gz'))
            # R: the run as simulated
            shutil.copy(bold, os.path.join(rdata, rel, name + '_bold.nii.gz'))
            for dd in (rdata, ddata):
                shutil.copy(stem + '_events.tsv', os.path.join(dd, rel, name + '_events.tsv'))
            ncols = wide_confounds(stem + '_desc-confounds_timeseries.tsv',
                                   os.path.join(rdata, rel, name + '_desc-confounds_timeseries.tsv'), rng)
            shutil.copy(os.path.join(rdata, rel, name + '_desc-confounds_timeseries.tsv'),
                        os.path.join(prep, rel, name + '_desc-confounds_timeseries.tsv'))
            # D raw: other values (read by mistake they would change every table); one is junk
            if not junk_done:
                with open(os.path.join(ddata, rel, name + '_bold.nii.gz'), 'wb') as f:
                    f.write(b'not a NIfTI image')
                junk_done = True
            else:
                data = np.asanyarray(img.dataobj) * 1.5 + 7
                nib.save(nib.Nifti1Image(data.astype(np.float32), img.affine, img.header),
                         os.path.join(ddata, rel, name + '_bold.nii.gz'))
            # D derivatives: the real run in the first space, other values in the second, a smoothed copy
            for sp in SPACES:
                out = os.path.join(prep, rel, '%s_space-%s_desc-preproc_bold.nii.gz' % (name, sp))
                if sp == SPACES[0]:
                    shutil.copy(bold, out)
                else:
                    data = np.asanyarray(img.dataobj)[::-1] * 0.9
                    nib.save(nib.Nifti1Image(data.astype(np.float32), img.affine, img.header), out)
                smooth = np.asanyarray(img.dataobj) + rng.standard_normal(img.shape).astype(np.float32)
                nib.save(nib.Nifti1Image(smooth.astype(np.float32), img.affine, img.header),
                         os.path.join(prep, rel, '%s_space-%s_desc-smooth_bold.nii.gz' % (name, sp)))
                nib.save(mask, os.path.join(prep, rel, '%s_space-%s_desc-brain_mask.nii.gz' % (name, sp)))
        report(ncols >= 25, 'confounds files hold %d columns' % ncols)
        write_study(os.path.join(R, 'study.ini'), 'mask = mask.nii.gz')
        write_study(os.path.join(D, 'study.ini'),
                    'derivatives = data/derivatives/prep\nspace = %s\nmask = auto' % SPACES[0])

        # check on D: spaces, expanded confounds, n/a counts, masks; no problem, the raw BOLD unread
        p = run(['check', 'study.ini'], cwd=D)
        report(p.returncode == 0, 'check D: no problems (the junk raw BOLD is not read)', p.stdout[-800:] + p.stderr)
        report('spaces found: MNI152NLin2009cAsym, T1w' in p.stdout, 'check lists the spaces found', p.stdout[:1500])
        report('confounds (6 columns): motion_tx motion_ty motion_tz motion_rx motion_ry motion_rz' in p.stdout,
               'check shows the columns the patterns expand to', p.stdout[:3000])
        report('run 1.1:' in p.stdout and 'run 2.2:' in p.stdout, 'check labels sub-01 runs by session.run')
        report('mask sub-01: ' in p.stdout and 'desc-brain_mask' in p.stdout, 'check shows the auto mask')
        report('not marked' not in p.stderr and 'DatasetType' not in p.stderr, 'no DatasetType warning for a derivative')
        p = run(['check', 'study.ini', '--headers-only'], cwd=R)
        report(p.returncode == 0, 'check R: no problems', p.stderr)

        # (a) + (d): analyze both; every table equal
        pr = run(['analyze', 'study.ini', '--quiet'], cwd=R)
        pd = run(['analyze', 'study.ini', '--quiet'], cwd=D)
        report(pr.returncode == 0, 'analyze R exits 0', pr.stderr[-1500:])
        report(pd.returncode == 0, 'analyze D exits 0', pd.stderr[-1500:])
        tables = sorted(os.path.relpath(t, os.path.join(R, 'results'))
                        for t in glob.glob(os.path.join(R, 'results', '*.csv')) +
                        glob.glob(os.path.join(R, 'results', 'sub-*', 'responses.csv')))
        report(len(tables) >= 5, 'R wrote %d tables' % len(tables))
        diff = []
        for t in tables:
            a, b = os.path.join(R, 'results', t), os.path.join(D, 'results', t)
            if not os.path.exists(b) or open(a, 'rb').read() != open(b, 'rb').read():
                diff.append(t)
        report(not diff, '(a, d) every table of the derivatives layout equals the raw layout byte for byte '
               '(%d tables)' % len(tables), 'differ: %s' % diff)
        rows = read_csv(os.path.join(D, 'results', 'sub-01', 'responses.csv'))
        odd = [r for r in rows if r['split'] == 'odd-even:A' and r['measure_task'] == 'tones']
        report(odd and odd[0]['define_runs'] == '1.1+2.1' and odd[0]['measure_runs'] == '1.2+2.2',
               'sub-01 odd-even splits order session, then run (define 1.1+2.1)',
               odd[0]['define_runs'] + ' / ' + odd[0]['measure_runs'] if odd else 'no rows')
        with open(os.path.join(D, 'results', 'sub-02', 'run.json')) as f:
            rec = f.read()
        report('derivatives/prep' in rec and 'space-MNI152NLin2009cAsym_desc-preproc_bold' in rec,
               'run.json names the derivative BOLD')
        # the values equal those of the simulated layout itself (one session, runs 1..4)
        shutil.copy(os.path.join(R, 'mask.nii.gz'), os.path.join(sim, 'mask.nii.gz'))
        with open(os.path.join(sim, 'study.ini')) as f:
            ini = f.read().replace('subjects = all', 'subjects = all\nmask = mask.nii.gz')
        with open(os.path.join(sim, 'study.ini'), 'w') as f:
            f.write(ini)
        ps = run(['analyze', 'study.ini', '--quiet', '--no-report'], cwd=sim)
        if report(ps.returncode == 0, 'analyze of the simulated layout exits 0', ps.stderr[-800:]):
            key = ('subject', 'parcel', 'split', 'measure_task', 'effect')
            a = {tuple(r[k] for k in key): (r['value'], r['n_voxels'])
                 for r in read_csv(os.path.join(sim, 'results', 'responses.csv'))}
            b = {tuple(r[k] for k in key): (r['value'], r['n_voxels'])
                 for r in read_csv(os.path.join(D, 'results', 'responses.csv'))}
            report(a == b and len(a) > 50, 'values and fROI sizes equal those of the one-session layout to the last digit '
                   '(%d rows)' % len(a), str(sorted(set(a.items()) ^ set(b.items()))[:4]))

        # (b) a second image of one run left after the filters
        func = os.path.join(prep, 'sub-02', 'func')
        first = os.path.join(func, 'sub-02_task-tones_run-02_space-%s_desc-preproc_bold.nii.gz' % SPACES[0])
        second = os.path.join(func, 'sub-02_task-tones_run-02_space-%s_res-2_desc-preproc_bold.nii.gz' % SPACES[0])
        shutil.copy(first, second)
        for cmd in (['check', 'study.ini', '--headers-only'], ['analyze', 'study.ini', '--quiet', '--force']):
            p = run(cmd, cwd=D)
            report(p.returncode == 1 and os.path.basename(first) in p.stderr and os.path.basename(second) in p.stderr
                   and 'entity res' in p.stderr,
                   '(b) %s: two images of one run is exit 1 naming both and the entity (%d)' % (cmd[0], p.returncode),
                   p.stderr[-1500:])
        os.remove(second)

        # (c) a space that is not there
        with open(os.path.join(D, 'study.ini')) as f:
            ini = f.read()
        with open(os.path.join(D, 'wrong.ini'), 'w') as f:
            f.write(ini.replace('space = ' + SPACES[0], 'space = MNI152NLin6Asym').replace('out = results', 'out = wrong'))
        with open(os.path.join(D, 'nospace.ini'), 'w') as f:
            f.write(ini.replace('space = ' + SPACES[0] + '\n', '').replace('out = results', 'out = nospace'))
        for cmd in (['check', 'wrong.ini', '--headers-only'], ['analyze', 'wrong.ini', '--quiet']):
            p = run(cmd, cwd=D)
            report(p.returncode == 1 and 'MNI152NLin6Asym' in p.stderr and
                   'spaces present: MNI152NLin2009cAsym, T1w' in p.stderr,
                   '(c) %s: a missing space is exit 1 listing the spaces present' % cmd[0], p.stderr[-1200:])
        with open(os.path.join(D, 'cos.ini'), 'w') as f:
            f.write(ini.replace('confounds = motion_t? motion_r?', 'confounds = motion_t? *_derivative1 cosine*'))
        p = run(['check', 'cos.ini', '--headers-only'], cwd=D)
        report(p.returncode == 0 and 'confounds (12 columns): motion_tx motion_ty motion_tz motion_tx_derivative1' in p.stdout
               and 'cosine02' in p.stdout, 'patterns expand in file order, each column once', p.stdout[:1500])
        report('n/a replaced by the column mean: motion_tx_derivative1 (1), motion_ty_derivative1 (1)' in p.stdout,
               'check counts the n/a cells replaced per column', p.stdout[:2000])
        report("confound column 'cosine00' is a cosine drift basis" in p.stderr,
               'a cosine confound next to the model\'s own drift is warned', p.stderr[-800:])
        p = run(['check', 'nospace.ini', '--headers-only'], cwd=D)
        report(p.returncode == 1 and 'several spaces (MNI152NLin2009cAsym, T1w)' in p.stderr,
               'runs in two spaces and no space key: exit 1 naming both', p.stderr[-800:])

        # a derivatives dataset not marked as one: warned
        with open(os.path.join(prep, 'dataset_description.json'), 'w') as f:
            json.dump({'Name': 'unmarked', 'BIDSVersion': '1.8.0'}, f)
        p = run(['check', 'study.ini', '--headers-only'], cwd=D)
        report(p.returncode == 0 and 'DatasetType' in p.stderr, 'a derivatives dataset without DatasetType is warned',
               p.stderr[-800:])

        # issue 14 item 9: NaN voxels and events wholly before 0 s are counted and reported
        b3 = os.path.join(rdata, 'sub-03', 'func', 'sub-03_task-tones_run-01_bold.nii.gz')
        img = nib.load(b3)
        data = np.asanyarray(img.dataobj).astype(np.float32)
        data[10, 10, 10, 5] = np.nan
        data[11, 10, 10, 7] = np.inf
        nib.save(nib.Nifti1Image(data, img.affine, img.header), b3)
        ev3 = b3.replace('_bold.nii.gz', '_events.tsv')
        with open(ev3) as f:
            evl = f.read().splitlines()
        evl.insert(1, '\t'.join(['-30', '2'] + evl[1].split('\t')[2:]))
        with open(ev3, 'w') as f:
            f.write('\n'.join(evl) + '\n')
        p = run(['analyze', 'study.ini', '--quiet', '--subjects', '03', '--no-group', '--no-report'], cwd=R)
        with open(os.path.join(R, 'results', 'sub-03', 'run.json')) as f:
            rec = f.read().replace(' ', '')
        report(p.returncode == 0 and '2 voxels hold NaN or infinite values' in p.stderr and
               '"nonfinite_voxels":2' in rec, 'NaN and inf voxels are counted, warned and recorded', p.stderr[-600:])
        report('1 event lies wholly before 0 s' in p.stderr and '"events_before_start":1' in rec,
               'an event wholly before 0 s is counted, warned and recorded')

        # parcels in a template space with raw runs: a warning that does not offer resampling
        par = nib.load(os.path.join(sim, 'parcels.nii.gz'))
        tpl = nib.Nifti1Image(np.asanyarray(par.dataobj), par.affine, par.header)
        tpl.header.set_sform(par.affine, 4)
        nib.save(tpl, os.path.join(R, 'tpl.nii.gz'))
        with open(os.path.join(R, 'study.ini')) as f:
            ini = f.read()
        with open(os.path.join(R, 'tpl.ini'), 'w') as f:
            f.write(ini.replace('image = ../sim/parcels.nii.gz', 'image = tpl.nii.gz'))
        p = run(['check', 'tpl.ini', '--headers-only'], cwd=R)
        report(p.returncode == 0 and 'template space but the runs are raw data' in p.stderr and
               'resample = nearest' not in p.stderr, 'template-space parcels on raw runs are warned about',
               p.stderr[-600:])

        # issue 14 item 6: a subject label with a space is an error naming the folder
        os.makedirs(os.path.join(rdata, 'sub-a b', 'func'))
        for cmd in (['check', 'study.ini', '--headers-only'], ['analyze', 'study.ini', '--quiet']):
            p = run(cmd, cwd=R)
            report(p.returncode == 1 and 'sub-a b' in p.stderr and 'not a BIDS label' in p.stderr,
                   '%s: a subject folder whose label is not alphanumeric is exit 1 naming it' % cmd[0],
                   p.stderr[-800:])
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return 1 if failed else 0


if __name__ == '__main__':
    sys.exit(main())
