#!/usr/bin/python3
"""report_fixture.py - builds a small invented results folder, as 'analyze' lays it out, for the report tests.

Usage: report_fixture.py OUT [--loo]. A fictional auditory study: localizer 'tones'
(melody vs scrambled), measured task 'memory' (familiar, novel); three subjects,
two parcels. Everything comes from a fixed seed.
"""
import csv, json, os, sys
import numpy as np
import nibabel as nib

out = sys.argv[1]
loo = '--loo' in sys.argv
rng = np.random.default_rng(20261202)
nx, ny, nz = 20, 24, 10
aff = np.diag([3.0, 3.0, 3.0, 1.0])
os.makedirs(out, exist_ok=True)
study_dir = os.path.join(out, 'study')
os.makedirs(study_dir, exist_ok=True)

# parcels: two boxes, labels 3 and 7 (not 1, 2: labels are indices, not positions)
parc = np.zeros((nx, ny, nz), np.int32)
parc[3:9, 5:14, 2:7] = 3
parc[11:17, 8:18, 3:8] = 7
nib.save(nib.Nifti1Image(parc, aff), os.path.join(study_dir, 'parcels.nii.gz'))
with open(os.path.join(study_dir, 'parcels.tsv'), 'w') as f:
    f.write('index\tname\n3\tleft auditory\n7\tright auditory\n')
study_text = """[study]
bids = data
out = results
[localizer]
task = tones
contrast = melody - scrambled
split = %s
effects = melody, scrambled, melody - scrambled
[parcels]
image = parcels.nii.gz
names = parcels.tsv   ; index, name
top_percent = 10
[model]
confounds = tx ty tz rx ry rz
motion = tx ty tz rx ry rz
motion_units = mm_rad
fd_threshold = 0.3
[measure memory]
task = memory
effects = familiar, novel, familiar - novel
""" % ('leave-one-out' if loo else 'odd-even')
with open(os.path.join(study_dir, 'study.ini'), 'w') as f:
    f.write(study_text)

xx, yy, zz = np.meshgrid(np.arange(nx), np.arange(ny), np.arange(nz), indexing='ij')
brain = np.exp(-(((xx - 10) / 8.0) ** 2 + ((yy - 12) / 10.0) ** 2 + ((zz - 5) / 5.0) ** 2))
subjects = ['01', '02', '03']
names = {3: 'left auditory', 7: 'right auditory'}
resp_cols = ['subject', 'parcel', 'split', 'split_kind', 'part', 'define_runs', 'measure_task',
             'measure_runs', 'effect', 'value', 'n_voxels', 'n_candidates']
all_rows = []
# the desc entity of each split's maps (README "Outputs")
tokens = ['leaveoneout1', 'leaveoneout2', 'leaveoneout3'] if loo else ['oddevenA', 'oddevenB']
for si, sub in enumerate(subjects):
    d = os.path.join(out, 'sub-' + sub)
    os.makedirs(os.path.join(d, 'func'), exist_ok=True)
    os.makedirs(os.path.join(d, 'design'), exist_ok=True)
    mean = (1000 * brain + rng.normal(0, 20, brain.shape)).astype(np.float32)
    nib.save(nib.Nifti1Image(mean, aff), os.path.join(d, 'func', 'sub-%s_task-tones_run-1_boldref.nii.gz' % sub))
    for ti, tok in enumerate(tokens + ['allmemory']):
        t = (6 * np.exp(-(((xx - 6) / 2.5) ** 2 + ((yy - 9) / 3.0) ** 2 + ((zz - 4) / 2.0) ** 2))
             + 5 * np.exp(-(((xx - 14) / 2.5) ** 2 + ((yy - 13) / 3.0) ** 2 + ((zz - 5) / 2.0) ** 2))
             + rng.normal(0, 1.0, brain.shape)).astype(np.float32)
        fr = np.zeros((nx, ny, nz), np.int32)
        for lab in (3, 7):
            inside = parc == lab
            # subject 03, second half: an empty fROI in parcel 7 (an outlier the report must flag)
            if sub == '03' and lab == 7 and ti == 1:
                continue
            thr = np.quantile(t[inside], 0.9)
            fr[inside & (t >= thr)] = lab
        stem = os.path.join(d, 'func', 'sub-%s_task-tones_desc-%s_' % (sub, tok))
        if not tok.startswith('all'):
            nib.save(nib.Nifti1Image(t, aff), stem + 'tstat.nii.gz')
        nib.save(nib.Nifti1Image(fr, aff), stem + 'dseg.nii.gz')
    inputs = {}
    for task, nruns in (('tones', 3 if loo else 2), ('memory', 1)):
        inputs[task] = []
        for r in range(1, nruns + 1):
            nt = 60
            conf = os.path.join(d, 'conf_%s_%d.tsv' % (task, r))
            mp = np.cumsum(rng.normal(0, [0.05, 0.05, 0.05, 0.0008, 0.0008, 0.0008], (nt, 6)), axis=0)
            if sub == '02' and task == 'tones' and r == 1:
                mp += np.cumsum(rng.normal(0, [0.4, 0.4, 0.4, 0.004, 0.004, 0.004], (nt, 6)), axis=0)
            with open(conf, 'w') as f:
                f.write('tx\tty\ttz\trx\try\trz\n')
                for row in mp:
                    f.write('\t'.join('%.6f' % v for v in row) + '\n')
            with open(os.path.join(d, 'design', 'task-%s_run-%d.csv' % (task, r)), 'w') as f:
                conds = ['melody', 'scrambled'] if task == 'tones' else ['familiar', 'novel']
                cols = conds + ['cos_1', 'cos_2', 'tx', 'ty', 'tz', 'rx', 'ry', 'rz', 'baseline']
                f.write(','.join(cols) + '\n')
                for i in range(nt):
                    blk = (i // 10) % 4
                    vals = [float(blk == 1), float(blk == 3), np.cos(np.pi * (i + .5) / nt), np.cos(2 * np.pi * (i + .5) / nt)]
                    vals += list(mp[i]) + [1.0]
                    f.write(','.join('%.6g' % v for v in vals) + '\n')
            inputs[task].append({'bold': '/data/sub-%s_task-%s_run-%d_bold.nii.gz' % (sub, task, r), 'bytes': 1,
                                 'dims': [nx, ny, nz, nt], 'tr': 2.0, 'events': 'x', 'confounds': conf,
                                 'run': str(r), 'rank': 11, 'df': nt - 11})
    with open(os.path.join(d, 'run.json'), 'w') as f:
        json.dump({'subject': sub, 'study_file': os.path.join(os.path.abspath(study_dir), 'study.ini'),
                   'study_text': study_text, 'inputs': inputs,
                   'parcels': os.path.join(os.path.abspath(study_dir), 'parcels.nii.gz'), 'seconds': 1.5}, f)
    rows = []
    kind = 'leave-one-out' if loo else 'odd-even'
    for lab in (3, 7):
        for eff, base in (('melody', 1.2), ('scrambled', 0.5), ('melody-scrambled', 0.7)):
            for sp in ([kind + ':A', kind + ':B'] if not loo else [kind + ':%d' % k for k in (1, 2, 3)]) + [kind + ':mean']:
                rows.append(['sub-' + sub, names[lab], sp, kind, sp.split(':')[1], '1', 'tones', '2', eff,
                             '%.6f' % (base + rng.normal(0, .3)), '27', '270'])
        for eff, base in (('familiar', .9), ('novel', .6), ('familiar-novel', .3)):
            rows.append(['sub-' + sub, names[lab], 'all', 'all', 'all', '1 2', 'memory', '1', eff,
                         '%.6f' % (base + rng.normal(0, .3)), '27', '270'])
    # one empty value (a subject without that estimate)
    if sub == '03':
        rows[0][resp_cols.index('value')] = ''
    with open(os.path.join(d, 'responses.csv'), 'w', newline='') as f:
        w = csv.writer(f, lineterminator='\n')
        w.writerow(resp_cols)
        w.writerows(rows)
    all_rows += rows
with open(os.path.join(out, 'responses.csv'), 'w', newline='') as f:
    w = csv.writer(f, lineterminator='\n')
    w.writerow(resp_cols)
    w.writerows(all_rows)
with open(os.path.join(out, 'group.csv'), 'w', newline='') as f:
    w = csv.writer(f, lineterminator='\n')
    w.writerow(['parcel', 'split', 'measure_task', 'effect', 'n', 'mean', 'sd', 'sem', 't', 'df', 'p', 'cohen_d', 'q_fdr'])
    for i, (p, e) in enumerate([('left auditory', 'melody'), ('right auditory', 'novel')]):
        w.writerow([p, 'odd-even:mean' if i == 0 else 'all', 'tones' if i == 0 else 'memory', e, 3,
                    '%.6f' % (1.1 + i), '0.3', '0.173205', '6.35085', 2, '0.0239', '3.6667', '0.0478'])
