"""Generates small invented BIDS test studies (auditory localizer `tones`, task `memory`) with the edge cases the end-to-end checks need.

Usage: make_study.py OUTDIR PRESET   (presets: see PRESETS; writes OUTDIR/study.ini)
From Python: make_study(outdir, **options) -> path of the study file.
Every random draw comes from numpy's default_rng(seed).
"""
import json
import math
import os
import sys

import nibabel as nib
import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import srref  # noqa: E402  (only for the haemodynamic regressors of the simulated signal)

DEFAULTS = dict(
    seed=1, shape=(10, 10, 8), T=80, TR=2.0, subjects=('01', '02'), loc_runs=4, mem_runs=2,
    mem_T=None, mem_TR=None, split='odd-even', select='top_percent = 10', autocorrelation=None,
    drift_cutoff='128', volume_time=None, confounds=False, ties=False, empty_parcel=True,
    one_run_subject=None, absent_condition=None, int16_subjects=(), no_sidecar_subjects=(),
    inherit_subjects=(), sessions=False, resample=False, mask=False, impulses=False,
    condition_column=None, loc_effects='melody, scrambled, melody - scrambled',
    mem_effects='familiar, novel, familiar - novel', measure=True, names=True, gz=True, signal=True,
    skip_volumes=0, censor_fd=None, confound_patterns=False,
    smoothing=None, nan_voxels=False, dim_voxels=0)

PRESETS = {
    # odd-even with ties, an empty parcel, confounds with n/a, int16 storage, a measured task
    'basic': dict(seed=11, confounds=True, ties=True, int16_subjects=('02',)),
    # leave-one-out (ar1-adjusted named explicitly), one localizer run, an absent condition, TR from header (ms) and inherited sidecar
    'edge': dict(seed=12, subjects=('01', '02', '03'), split='leave-one-out', loc_runs=3, autocorrelation='ar1-adjusted',
                 select='top_percent = 12.5', one_run_subject='03', absent_condition=('02', 1),
                 no_sidecar_subjects=('01',), inherit_subjects=('02',), impulses=True,
                 volume_time='0', drift_cutoff='100', mem_T=100, mem_TR=1.5, gz=False),
    # sessions, runs without index, nearest-neighbour parcels, a mask, another condition column, OLS
    'sessions': dict(seed=13, sessions=True, resample=True, mask=True, condition_column='stim',
                     select='top_voxels = 7', autocorrelation='none', int16_subjects=('01',),
                     ties=True),
    # six runs, min_t, no drift basis, weighted effects, three subjects for the group table,
    # the plain AR(1) (the other presets use the default ar1-adjusted, sessions OLS)
    'mint': dict(seed=14, subjects=('01', '02', '03'), loc_runs=6, select='min_t = 2.5', autocorrelation='ar1',
                 drift_cutoff='none', loc_effects='melody, 0.5*melody + 0.5*scrambled, melody - scrambled',
                 mem_effects='familiar - novel, 2*novel', measure=True, empty_parcel=False,
                 dim_voxels=12),
    # initial volumes dropped, volumes censored by framewise displacement, confounds by pattern
    'scrub': dict(seed=15, confounds=True, skip_volumes=3, censor_fd=0.6, confound_patterns=True,
                  impulses=True),
    # smoothing (METHODS.md 2b) inside a mask, with zero background, NaN samples and int16 storage
    'smooth': dict(seed=15, smoothing='5', mask=True, confounds=True, int16_subjects=('02',),
                   nan_voxels=True),
}


def _affine(vox=3.0, origin=(-15.0, -15.0, -12.0)):
    A = np.diag([vox, vox, vox, 1.0])
    A[:3, 3] = origin
    return A


def _save(data, path, TR, int16=False, tr_in_header=True, tr_ms=False):
    A = _affine()
    img = nib.Nifti1Image(data.astype(np.float32), A)
    if int16:
        # nibabel picks scl_slope/scl_inter for the int16 range; readers must apply them
        img.set_data_dtype(np.int16)
    img.header.set_qform(A, code=1)
    img.header.set_sform(A, code=1)
    if data.ndim == 4:
        if tr_in_header:
            img.header['pixdim'][4] = TR * 1000.0 if tr_ms else TR
            img.header.set_xyzt_units('mm', 'msec' if tr_ms else 'sec')
        else:
            img.header['pixdim'][4] = 0.0
            img.header.set_xyzt_units('mm', 'sec')
    nib.save(img, path)


def _parcels(shape, empty_parcel):
    nx, ny, nz = shape
    lab = np.zeros(shape, dtype=np.int16)
    lab[:nx // 2, :ny // 2, :nz // 2] = 1
    lab[nx // 2:, :ny // 2, :nz // 2] = 2
    lab[:, ny // 2:, :nz // 2] = 3
    if empty_parcel:
        lab[:nx // 2, :, nz - 1] = 4
    return lab


def _loc_events(rng, run, impulses, T, TR):
    ev = []
    shift = 0.37 * run
    t = 6.0 + shift
    k = 0
    while t + 16 < T * TR:
        cond = 'melody' if k % 2 == 0 else 'scrambled'
        if impulses:
            for j in range(4):
                on = round(t + j * 3.3 + rng.uniform(0, 0.5), 3)
                if abs(on / 0.05 - round(on / 0.05)) < 1e-6:
                    on += 0.013     # keep impulses off bin edges, where floor(onset/dt) rounds either way
                ev.append((on, 0.0, cond))
        else:
            ev.append((round(t, 3), 16.0, cond))
        t += 24.0
        k += 1
    return ev


def _mem_events(rng, T, TR):
    ev = []
    t = 4.0
    while t + 4 < T * TR:
        ev.append((round(t, 3), 3.0, 'familiar' if rng.uniform() < 0.5 else 'novel'))
        t += rng.uniform(6.0, 10.0)
    # events that start before the first volume and run past the end (clipped by the method)
    ev.append((-1.5, 3.0, 'novel'))
    ev.append((round(T * TR - 1.0, 3), 5.0, 'familiar'))
    return ev


def _write_events(path, ev, column):
    with open(path, 'w') as f:
        if column:
            f.write('onset\tduration\ttrial_type\t%s\tresponse_time\n' % column)
        else:
            f.write('onset\tduration\ttrial_type\tresponse_time\n')
        for i, (on, du, c) in enumerate(ev):
            rt = 'n/a' if i % 3 == 0 else '%.3f' % (0.5 + 0.01 * i)
            if column:
                f.write('%g\t%g\tbutton%d\t%s\t%s\n' % (on, du, i % 2, c, rt))
            else:
                f.write('%g\t%g\t%s\t%s\n' % (on, du, c, rt))
        # a row without a condition is skipped by the method
        f.write('%g\t1\tn/a\t%s\n' % (ev[0][0] + 0.5, 'n/a') if not column else
                '%g\t1\tbutton0\tn/a\tn/a\n' % (ev[0][0] + 0.5))


def _simulate(rng, ev_by_cond, amp, base, T, TR, conf):
    """amp: dict cond -> (V,) percent signal change; base (V,) baseline."""
    V = base.size
    sig = np.zeros((V, T))
    for c, ev in ev_by_cond.items():
        if not ev or c not in amp:
            continue
        x = srref.regressor(ev, T, TR, 0.5)
        sig += np.outer(amp[c], x)
    noise = np.zeros((V, T))
    e = rng.standard_normal((V, T))
    noise[:, 0] = e[:, 0]
    for k in range(1, T):
        noise[:, k] = 0.3 * noise[:, k - 1] + e[:, k]
    drift = np.outer(rng.uniform(-1, 1, V), np.linspace(-1, 1, T))
    y = base[:, None] * (1 + (sig + 0.8 * noise + drift) / 100.0)
    if conf is not None:
        y += np.outer(rng.uniform(-3, 3, V), np.nan_to_num(conf[:, 0]))
    return y


def make_study(outdir, **opts):
    o = dict(DEFAULTS)
    o.update(opts)
    rng = np.random.default_rng(o['seed'])
    shape = tuple(o['shape'])
    nx, ny, nz = shape
    V = nx * ny * nz
    T, TR = o['T'], o['TR']
    mT, mTR = o['mem_T'] or T, o['mem_TR'] or TR
    bids = os.path.join(outdir, 'data')
    os.makedirs(bids, exist_ok=True)
    with open(os.path.join(bids, 'dataset_description.json'), 'w') as f:
        json.dump({'Name': 'invented auditory test study', 'BIDSVersion': '1.8.0'}, f)
    lab = _parcels(shape, o['empty_parcel'])
    labf = lab.reshape(-1, order='F')
    brain = np.ones(V, bool)
    if o['empty_parcel']:
        brain &= np.repeat(np.arange(nz), nx * ny) != nz - 1   # top slice is zero background
    ext = '.nii.gz' if o['gz'] else '.nii'
    for sub in o['subjects']:
        if sub in o['inherit_subjects']:
            # subject-level sidecars without run entities: inherited by every run of the task
            os.makedirs(os.path.join(bids, 'sub-' + sub), exist_ok=True)
            for task, tr in (('tones', TR), ('memory', mTR)):
                with open(os.path.join(bids, 'sub-' + sub, 'sub-%s_task-%s_bold.json' % (sub, task)), 'w') as f:
                    json.dump({'RepetitionTime': tr, 'TaskName': task}, f)
        # voxel response profile: a selective core in parcel 1, weak selectivity in parcel 2
        base = 800 + 400 * rng.uniform(size=V)
        sel = np.zeros(V)
        p1 = np.flatnonzero(labf == 1)
        p2 = np.flatnonzero(labf == 2)
        sel[rng.choice(p1, size=p1.size // 5, replace=False)] = 1.5
        sel[rng.choice(p2, size=p2.size // 3, replace=False)] = 0.4
        if not o['signal']:
            sel[:] = 0.0                # pure noise: any response found is circularity
        dup_src = p1[7]
        if o['ties']:
            sel[dup_src] = 5.0          # the copied voxel has the top t, so its 15 copies straddle k
        amp_loc = {'melody': 0.4 + sel + 0.2 * rng.standard_normal(V) * o['signal'], 'scrambled': 0.4 + 0.1 * sel}
        amp_mem = {'familiar': 0.2 + 0.8 * sel, 'novel': 0.2 + 0.3 * sel}
        nloc = 1 if o['one_run_subject'] == sub else o['loc_runs']
        runs = [('tones', r + 1) for r in range(nloc)] + [('memory', r + 1) for r in range(o['mem_runs'] if o['measure'] else 0)]
        dup_dst = [v for v in p1 if v != dup_src][:14]   # 15 tied voxels, k = 10: the tie decides
        for task, ri in runs:
            if o['sessions']:
                # tones runs 1,2 in ses-1 and 3,4 in ses-2; one memory run per session, no run index
                if task == 'tones':
                    ses = '1' if ri <= (nloc + 1) // 2 else '2'
                    ent = 'sub-%s_ses-%s_task-%s_run-%d' % (sub, ses, task, ri)
                else:
                    ses = str(ri)
                    ent = 'sub-%s_ses-%s_task-%s' % (sub, ses, task)
                d = os.path.join(bids, 'sub-' + sub, 'ses-' + ses, 'func')
            else:
                ent = 'sub-%s_task-%s_run-%02d' % (sub, task, ri)
                d = os.path.join(bids, 'sub-' + sub, 'func')
            os.makedirs(d, exist_ok=True)
            tT, tTR = (T, TR) if task == 'tones' else (mT, mTR)
            if task == 'tones':
                ev = _loc_events(rng, ri, o['impulses'], tT, tTR)
                if o['absent_condition'] == (sub, ri):
                    ev = [e for e in ev if e[2] != 'scrambled']
                amp = amp_loc
            else:
                ev = _mem_events(rng, tT, tTR)
                amp = amp_mem
            conf = None
            if o['confounds']:
                conf = np.column_stack([np.cumsum(rng.standard_normal(tT)) * 0.1,
                                        rng.standard_normal(tT) * 0.05])
                conf[0, :] = np.nan
                conf[5, 1] = np.nan
            by = {}
            for e in ev:
                by.setdefault(e[2], []).append(e)
            y = _simulate(rng, by, amp, base, tT, tTR, conf)
            y[~brain] = 0.0
            if o['nan_voxels'] and task == 'tones' and ri == 2 and sub not in o['int16_subjects']:
                y[rng.choice(np.flatnonzero(brain), size=6, replace=False), 3 + ri] = np.nan
            if o['dim_voxels']:
                # dim voxels (section 3's intensity floor): the first of parcel 1 with a mean of
                # 0.01 and a strong response (it would top the fROI), then parcel 2 voxels with
                # means from 40 to 160 around the floor of about 10% of the 98th percentile
                y[p1[0]] = y[p1[0]] - y[p1[0]].mean() + 0.01 + 30.0 * srref.regressor(
                    by.get(list(by)[0], []), tT, tTR, 0.5)
                for i, w in enumerate(p2[:o['dim_voxels']]):
                    y[w] = y[w] * (40.0 + 120.0 * i / max(1, o['dim_voxels'] - 1)) / y[w].mean()
            if o['ties'] and task == 'tones' and ri % 2 == 1 and sub == o['subjects'][0]:
                y[dup_dst] = y[dup_src]     # exact ties in the define t of split A
            data = y.reshape(shape + (tT,), order='F')
            no_sc = sub in o['no_sidecar_subjects']
            inh = sub in o['inherit_subjects']
            _save(data, os.path.join(d, ent + '_bold' + ext), tTR, int16=sub in o['int16_subjects'],
                  tr_in_header=not inh, tr_ms=no_sc)
            if not no_sc and not inh:
                with open(os.path.join(d, ent + '_bold.json'), 'w') as f:
                    json.dump({'RepetitionTime': tTR, 'TaskName': task}, f)
            _write_events(os.path.join(d, ent + '_events.tsv'), ev, o['condition_column'])
            if conf is not None:
                # framewise displacement: n/a in the first row (no previous volume), a few spikes
                fd = np.abs(rng.standard_normal(tT)) * 0.2
                fd[rng.choice(tT, size=4, replace=False)] = 0.9
                with open(os.path.join(d, ent + '_confounds.tsv'), 'w') as f:
                    f.write('motion_x\tmotion_y\tunused\tframewise_displacement\n')
                    for k in range(tT):
                        f.write('\t'.join('n/a' if not np.isfinite(v) else '%.6f' % v for v in conf[k])
                                + '\t%d\t%s\n' % (k, 'n/a' if k == 0 else '%.6f' % fd[k]))
    # parcels (optionally on a finer grid for nearest-neighbour resampling), names, mask
    A = _affine()
    if o['resample']:
        fine = np.repeat(np.repeat(np.repeat(lab, 2, 0), 2, 1), 2, 2)
        Af = _affine(1.5, tuple(_affine()[:3, 3] - 0.3))
        img = nib.Nifti1Image(fine, Af)
        img.header.set_qform(Af, 1)
        img.header.set_sform(Af, 1)
    else:
        img = nib.Nifti1Image(lab, A)
        img.header.set_qform(A, 1)
        img.header.set_sform(A, 1)
    nib.save(img, os.path.join(outdir, 'parcels.nii.gz'))
    if o['names']:
        with open(os.path.join(outdir, 'parcels.tsv'), 'w') as f:
            f.write('index\tname\n1\tleft_core\n2\tright_core\n4\ttop_slab\n')   # parcel 3 unnamed
    if o['mask']:
        m = np.ones(shape, np.uint8)
        m[nx // 2:nx // 2 + 2, :2, :2] = 0
        mi = nib.Nifti1Image(m, A)
        mi.header.set_qform(A, 1)
        mi.header.set_sform(A, 1)
        nib.save(mi, os.path.join(outdir, 'mask.nii.gz'))
    ini = os.path.join(outdir, 'study.ini')
    with open(ini, 'w') as f:
        f.write('; invented auditory test study (tests/py/make_study.py, seed %d)\n' % o['seed'])
        f.write('[study]\nbids = data\nout = results\nsubjects = all\n')
        if o['mask']:
            f.write('mask = mask.nii.gz   ; brain mask\n')
        f.write('\n[localizer]\ntask = tones\ncontrast = melody - scrambled\n')
        f.write('split = %s\neffects = %s\n' % (o['split'], o['loc_effects']))
        if o['condition_column']:
            f.write('condition_column = %s\n' % o['condition_column'])
        f.write('\n[parcels]\nimage = parcels.nii.gz\n')
        if o['names']:
            f.write('names = parcels.tsv\n')
        f.write('%s\n' % o['select'])
        if o['resample']:
            f.write('resample = nearest\n')
        if o['autocorrelation'] is None:   # the default, ar1-adjusted (METHODS.md 4)
            f.write('\n[model]\ndrift_cutoff = %s\n' % o['drift_cutoff'])
        else:
            f.write('\n[model]\nautocorrelation = %s   # ar1-adjusted, ar1 or none\ndrift_cutoff = %s\n'
                    % (o['autocorrelation'], o['drift_cutoff']))
        if o['smoothing'] is not None:
            f.write('smoothing_fwhm = %s   ; mm\n' % o['smoothing'])
        if o['volume_time'] is not None:
            f.write('volume_time = %s\n' % o['volume_time'])
        if o['confounds']:
            f.write('confounds = %s\n' % ('motion_*' if o['confound_patterns'] else 'motion_x motion_y'))
        if o['skip_volumes']:
            f.write('skip_volumes = %d\n' % o['skip_volumes'])
        if o['censor_fd'] is not None:
            f.write('censor_fd = %g\n' % o['censor_fd'])
        if o['measure']:
            f.write('\n[measure memory]\ntask = memory\neffects = %s\n' % o['mem_effects'])
    return ini


if __name__ == '__main__':
    if len(sys.argv) != 3 or sys.argv[2] not in PRESETS:
        sys.exit('usage: make_study.py OUTDIR PRESET (%s)' % ', '.join(PRESETS))
    print(make_study(sys.argv[1], **PRESETS[sys.argv[2]]))
