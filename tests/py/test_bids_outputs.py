"""test_bids_outputs.py - the results folder as a BIDS Derivatives dataset, and tables R and pandas read right (issue 17).

A simulated two-group study (`simulate --groups 2`: even subjects are patients
whose effects are twice as large) is analyzed, then:
  - every file under sub-*/func parses with an entity parser written here from
    the BIDS specification's entity table (key-value pairs in the table's
    order, then suffix and extension; values letters and digits), and every
    map the analysis defines is found by its entities;
  - nibabel reads the t maps as NIFTI_INTENT_TTEST (3) with df = the sum of
    the define runs' df (run.json), the label images as NIFTI_INTENT_LABEL
    (1002) with a look-up table (index, name) beside them, and fit's effect
    maps say percent signal change;
  - pandas (default options) and Python's csv read every table with text
    subject labels (sub-01); responses.csv merges with participants.tsv on
    participant_id and keeps every row; each CSV has a JSON data dictionary;
  - `group --by group` gives per-level one-sample tests and a Welch t test
    equal to scipy.stats.ttest_ind(equal_var=False) to 1e-8 (relative);
  - R (when installed): read.csv + merge keep every row and t.test matches.
"""
import csv
import glob
import json
import math
import os
import re
import shutil
import subprocess
import sys
import tempfile

try:
    import nibabel as nib
    import numpy as np
    import pandas as pd
    from scipy import stats
except ImportError as exc:  # the python3 first on PATH may lack them
    print('skip - nibabel/numpy/pandas/scipy unavailable: %s' % exc)
    sys.exit(0)

HERE = os.path.dirname(os.path.abspath(__file__))
SPLITROI = os.environ.get('SPLITROI', os.path.join(HERE, '..', '..', 'build', 'splitroi'))
failed = 0

# The BIDS specification's entity table (Appendix "Entity table"), in its order.
ENTITIES = ['sub', 'ses', 'sample', 'task', 'tracksys', 'acq', 'nuc', 'voi', 'ce', 'trc', 'stain',
            'rec', 'dir', 'run', 'mod', 'echo', 'flip', 'inv', 'mt', 'part', 'proc', 'hemi', 'space',
            'split', 'recording', 'chunk', 'seg', 'res', 'den', 'label', 'desc']
LABEL = re.compile(r'^[A-Za-z0-9]+$')


def report(cond, name, detail=''):
    global failed
    if cond:
        print('ok - ' + name)
    else:
        failed += 1
        print('not ok - ' + name + (': ' + str(detail)[:400] if detail else ''))
    return cond


def parse_bids(name):
    """(entities dict, suffix, extension) of a BIDS file name, or None when it does not parse."""
    m = re.match(r'^([^.]+)(\..+)$', name)
    if not m:
        return None
    stem, ext = m.groups()
    parts = stem.split('_')
    suffix = parts[-1]
    if not LABEL.match(suffix):
        return None
    ents, last = {}, -1
    for p in parts[:-1]:
        if '-' not in p:
            return None
        k, v = p.split('-', 1)
        if k not in ENTITIES or not LABEL.match(v) or k in ents:
            return None
        rank = ENTITIES.index(k)
        if rank <= last:   # the specification's order
            return None
        last = rank
        ents[k] = v
    return ents, suffix, ext


def run(args, **kw):
    return subprocess.run([SPLITROI] + args, capture_output=True, text=True, **kw)


def main():
    tmp = tempfile.mkdtemp(prefix='sr_bidsout_')
    try:
        body(tmp)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def body(tmp):
    sim = os.path.join(tmp, 'sim')
    r = run(['simulate', '--out', sim, '--subjects', '6', '--volumes', '60', '--groups', '2', '--quiet'])
    if not report(r.returncode == 0, 'simulate --groups writes a two-group study', r.stderr):
        return
    ptsv = pd.read_csv(os.path.join(sim, 'data', 'participants.tsv'), sep='\t')
    report(list(ptsv.columns) == ['participant_id', 'group'] and
           list(ptsv.group) == ['control', 'patient'] * 3,
           'participants.tsv has a group column: odd subjects control, even patient')
    truth = pd.read_csv(os.path.join(sim, 'truth.csv'), dtype={'subject': str})
    t1 = truth[(truth.subject.str.endswith('1')) & (truth.effect == 'melody')].value.mean()
    t2 = truth[(truth.subject.str.endswith('2')) & (truth.effect == 'melody')].value.mean()
    report(t2 > 1.5 * t1, 'the patients\' true effects are larger (%.3g vs %.3g)' % (t2, t1))
    r = run(['analyze', os.path.join(sim, 'study.ini'), '--quiet', '--no-report'])
    if not report(r.returncode == 0, 'the study is analyzed', r.stderr):
        return
    out = os.path.join(sim, 'results')
    check_description(out, sim)
    check_maps(out)
    check_tables(out, sim)
    check_by(out)
    check_participants_absent(out, sim)
    check_fit(tmp, sim)
    check_r(out, sim)


def check_description(out, sim):
    dd = json.load(open(os.path.join(out, 'dataset_description.json')))
    report(dd.get('DatasetType') == 'derivative' and dd.get('BIDSVersion'),
           'dataset_description.json: DatasetType derivative, BIDSVersion')
    gen = dd.get('GeneratedBy') or [{}]
    report(gen[0].get('Name') == 'splitroi' and gen[0].get('Version') and
           'analyze' in gen[0].get('CommandLine', ''),
           'GeneratedBy names splitroi, its version and the command line', gen)
    urls = [s.get('URL', '') for s in dd.get('SourceDatasets', [])]
    report(urls == ['file://' + os.path.realpath(os.path.join(sim, 'data'))],
           'SourceDatasets names the raw dataset', urls)


def check_maps(out):
    index, bad = [], []
    for path in sorted(glob.glob(os.path.join(out, 'sub-*', 'func', '*'))):
        p = parse_bids(os.path.basename(path))
        if p is None:
            bad.append(os.path.basename(path))
        else:
            index.append((p, path))
    report(index and not bad, 'every file under sub-*/func parses as BIDS entities (%d files)' % len(index), bad[:3])

    def find(**want):
        suffix, ext = want.pop('suffix'), want.pop('ext', '.nii.gz')
        hits = [path for (ents, suf, e), path in index
                if suf == suffix and e == ext and all(ents.get(k) == v for k, v in want.items())
                and set(ents) == set(want)]
        return hits

    subjects = sorted(os.path.basename(d)[4:] for d in glob.glob(os.path.join(out, 'sub-*')))
    missing, wrong = [], []
    for s in subjects:
        rec = json.load(open(os.path.join(out, 'sub-' + s, 'run.json')))
        rdf = {run['run']: run['df'] for run in rec['inputs']['tones']}
        labels = sorted(rdf)
        halves = {'oddevenA': labels[0::2], 'oddevenB': labels[1::2], 'allmemory': labels}
        for desc, runs in halves.items():
            for suffix, ext in (('tstat', '.nii.gz'), ('tstat', '.json'), ('dseg', '.nii.gz'),
                                ('dseg', '.tsv'), ('dseg', '.json')):
                hits = find(sub=s, task='tones', desc=desc, suffix=suffix, ext=ext)
                if len(hits) != 1:
                    missing.append((s, desc, suffix, ext))
            t = find(sub=s, task='tones', desc=desc, suffix='tstat')
            lab = find(sub=s, task='tones', desc=desc, suffix='dseg')
            if not t or not lab:
                continue
            img = nib.load(t[0])
            side = json.load(open(t[0].replace('.nii.gz', '.json')))
            df = float(sum(rdf[r] for r in runs))
            if not (int(img.header['intent_code']) == 3 and float(img.header['intent_p1']) == df and
                    side.get('DegreesOfFreedom') == df and side.get('Split') and side.get('DefineRuns') ==
                    '+'.join(runs) and side.get('Contrast')):
                wrong.append(('t', s, desc, int(img.header['intent_code']), float(img.header['intent_p1']), df))
            li = nib.load(lab[0])
            lut = pd.read_csv(lab[0].replace('.nii.gz', '.tsv'), sep='\t')
            vals = set(np.unique(np.asanyarray(li.dataobj)).tolist()) - {0}
            if not (int(li.header['intent_code']) == 1002 and list(lut.columns) == ['index', 'name'] and
                    vals and vals <= set(lut['index'].tolist())):
                wrong.append(('dseg', s, desc, int(li.header['intent_code']), list(lut.columns), vals))
        ref = find(sub=s, task='tones', run='1', suffix='boldref')
        if len(ref) != 1:
            missing.append((s, 'boldref'))
    report(not missing, 'every map is found by its entities (t, label image, table, sidecars, boldref) for %d subjects'
           % len(subjects), missing[:4])
    report(not wrong, 't maps carry intent 3 with the define runs\' df (sidecar too); label images intent 1002 '
           'with an index/name table holding their labels', wrong[:3])
    names = pd.read_csv(os.path.join(out, '..', 'parcels.tsv'), sep='\t')
    lut = pd.read_csv(find(sub=subjects[0], task='tones', desc='oddevenA', suffix='dseg', ext='.tsv')[0], sep='\t')
    report(list(lut['name']) == list(names['name']) and list(lut['index']) == list(names['index']),
           'the look-up table lists every parcel by index and name')


def read_all_tables(out):
    return sorted(glob.glob(os.path.join(out, '*.csv')) + glob.glob(os.path.join(out, 'sub-*', '*.csv')))


def check_tables(out, sim):
    bad_pd, bad_csv, no_dict = [], [], []
    for path in read_all_tables(out):
        df = pd.read_csv(path)
        if 'subject' in df.columns:
            if not (df['subject'].dtype == object and all(str(v).startswith('sub-') for v in df['subject'])):
                bad_pd.append(os.path.relpath(path, out))
        with open(path, newline='') as f:
            rows = list(csv.DictReader(f))
        if rows and 'subject' in rows[0] and not all(re.match(r'^sub-[A-Za-z0-9]+$', r['subject']) for r in rows):
            bad_csv.append(os.path.relpath(path, out))
        jpath = path[:-4] + '.json'
        if not os.path.exists(jpath):
            no_dict.append(os.path.relpath(path, out))
            continue
        d = json.load(open(jpath))
        if set(d) != set(df.columns) or not all(d[c].get('Description') for c in d):
            no_dict.append(os.path.relpath(jpath, out))
    report(not bad_pd, 'pandas reads every table\'s subject column as text sub-<label>', bad_pd)
    report(not bad_csv, 'Python csv reads sub-<label> in every table', bad_csv)
    report(not no_dict, 'every CSV has a JSON dictionary describing each of its columns', no_dict)
    d = json.load(open(os.path.join(out, 'responses.json')))
    report(d['value'].get('Units') == 'percent signal change', 'responses.json: value in percent signal change')

    resp = pd.read_csv(os.path.join(out, 'responses.csv'))
    want = ['subject', 'localizer', 'parcel', 'split', 'split_kind', 'part', 'define_runs', 'measure_task',
            'measure_runs', 'effect', 'value', 'n_voxels', 'n_candidates']
    report(list(resp.columns) == want, 'responses.csv columns: split_kind and part right after split', list(resp.columns))
    kind = resp.split.str.split(':').str[0]
    part = resp.split.str.split(':').str[-1]
    report((resp.split_kind == kind).all() and (resp.part.astype(str) == part).all() and
           set(resp.split_kind) == {'odd-even', 'all'} and set(resp.part.astype(str)) == {'A', 'B', 'mean', 'all'},
           'split_kind and part restate split (odd-even/all; A, B, mean, all)')
    one = resp[resp.part.isin(['mean', 'all'])]
    report(not one.duplicated(['subject', 'parcel', 'measure_task', 'effect']).any() and
           len(one) == resp.subject.nunique() * resp.parcel.nunique() * 6,
           'the README filter part in (mean, all) leaves one row per subject, parcel, task and effect (%d)' % len(one))

    parts = pd.read_csv(os.path.join(sim, 'data', 'participants.tsv'), sep='\t')
    m = resp.merge(parts, left_on='subject', right_on='participant_id')
    report(len(m) == len(resp) and m.group.notna().all(),
           'pandas merges responses.csv with participants.tsv on participant_id: every row (%d of %d)'
           % (len(m), len(resp)))
    gs = pd.read_csv(os.path.join(out, 'group_subjects.csv'))
    wide = pd.read_csv(os.path.join(out, 'responses_wide.csv'))
    report(list(gs.columns[:4]) == ['subject', 'status', 'reason', 'group'] and
           list(gs.group) == list(parts.group), 'group_subjects.csv carries the participants columns', list(gs.columns))
    report(list(wide.columns[:2]) == ['subject', 'group'] and list(wide.group) == list(parts.group),
           'responses_wide.csv carries the participants columns after subject')


def check_by(out):
    r = run(['group', out, '--by', 'group', '--quiet'])
    if not report(r.returncode == 0, 'group --by group runs', r.stderr):
        return
    by = pd.read_csv(os.path.join(out, 'group_by_group.csv'))
    resp = pd.read_csv(os.path.join(out, 'responses.csv'))
    parts = pd.read_csv(os.path.join(out, '..', 'data', 'participants.tsv'), sep='\t')
    resp = resp.merge(parts, left_on='subject', right_on='participant_id')
    worst_t = worst_p = worst_df = worst_one = 0.0
    nwelch = 0
    for _, row in by.iterrows():
        sel = resp[(resp.parcel == row.parcel) & (resp.split == row.split) &
                   (resp.measure_task == row.measure_task) & (resp.effect == row.effect)]
        a = sel[sel.group == 'control'].value.to_numpy()
        b = sel[sel.group == 'patient'].value.to_numpy()
        if row.test == 'welch':
            nwelch += 1
            ref = stats.ttest_ind(a, b, equal_var=False)
            va, vb = a.var(ddof=1) / len(a), b.var(ddof=1) / len(b)
            dfw = (va + vb) ** 2 / (va ** 2 / (len(a) - 1) + vb ** 2 / (len(b) - 1))
            worst_t = max(worst_t, abs(row.t - ref.statistic) / abs(ref.statistic))
            worst_p = max(worst_p, abs(row.p - ref.pvalue) / ref.pvalue)
            worst_df = max(worst_df, abs(row.df - dfw) / dfw)
        else:
            x = a if row.level == 'control' else b
            ref = stats.ttest_1samp(x, 0.0)
            worst_one = max(worst_one, abs(row.t - ref.statistic) / abs(ref.statistic))
    ncells = len(pd.read_csv(os.path.join(out, 'group.csv')))
    report(nwelch == ncells and set(by.level) == {'control', 'patient', 'control - patient'},
           'group_by_group.csv: two levels and a Welch row for each of the %d group rows' % ncells)
    report(worst_t < 1e-8 and worst_p < 1e-8,
           'Welch t and p equal scipy.stats.ttest_ind(equal_var=False) (worst relative %.2g, %.2g)' % (worst_t, worst_p))
    report(worst_df < 1e-8, 'Welch df equals the Welch-Satterthwaite formula (worst relative %.2g)' % worst_df)
    report(worst_one < 1e-8, 'per-level t equals scipy.stats.ttest_1samp (worst relative %.2g)' % worst_one)
    mel = by[(by.test == 'welch') & (by.split == 'odd-even:mean') & (by.effect == 'melody') &
             (by.parcel == 'left_auditory')]
    report(len(mel) == 1 and mel['mean'].iloc[0] < 0 and mel.p.iloc[0] < 0.05,
           'the patients\' larger effect shows as a negative control - patient difference (p %.3g)'
           % (mel.p.iloc[0] if len(mel) else float('nan')))
    r = run(['group', out, '--by', 'handedness', '--quiet'])
    report(r.returncode == 1 and 'handedness' in r.stderr, 'group --by a column participants.tsv lacks is an error naming it',
           r.stderr)


def check_participants_absent(out, sim):
    ptsv = os.path.join(sim, 'data', 'participants.tsv')
    keep = open(ptsv).read()
    try:
        with open(ptsv, 'w') as f:
            f.write(''.join(l for l in keep.splitlines(True) if not l.startswith('sub-03')))
        r = run(['group', out, '--quiet'])
        gs = pd.read_csv(os.path.join(out, 'group_subjects.csv'))
        report(r.returncode == 0 and 'sub-03' in r.stderr and 'warning' in r.stderr and
               gs.group.isna().tolist() == [s == 'sub-03' for s in gs.subject],
               'a subject missing from participants.tsv: a warning and empty cells', r.stderr)
        os.remove(ptsv)
        r = run(['group', out, '--quiet'])
        gs = pd.read_csv(os.path.join(out, 'group_subjects.csv'))
        report(r.returncode == 0 and 'participants.tsv' in r.stderr and list(gs.columns) == ['subject', 'status', 'reason'],
               'no participants.tsv: a warning naming it, no participant columns', r.stderr)
    finally:
        with open(ptsv, 'w') as f:
            f.write(keep)
    run(['group', out, '--quiet'])


def check_fit(tmp, sim):
    func = os.path.join(sim, 'data', 'sub-01', 'func')
    runs = sorted(glob.glob(os.path.join(func, 'sub-01_task-tones_run-*_bold.nii.gz')))[:2]
    fo = os.path.join(tmp, 'fit')
    r = run(['fit'] + runs + ['--effect', 'melody - scrambled', '--out', fo, '--quiet'])
    if not report(r.returncode == 0, 'fit runs on two runs', r.stderr):
        return
    meta = json.load(open(os.path.join(fo, 'fit.json')))
    maps = [f for f in os.listdir(fo) if f.endswith('.nii.gz')]
    parsed = {f: parse_bids(f) for f in maps}
    report(all(parsed.values()), 'every fit map name parses as BIDS entities (%d)' % len(maps),
           [f for f, p in parsed.items() if not p][:3])
    comb_t = [f for f, p in parsed.items() if p and p[0] == {'sub': '01', 'task': 'tones', 'desc': 'melodyMinusScrambled'}
              and p[1] == 'tstat']
    comb_e = [f for f, p in parsed.items() if p and p[0] == {'sub': '01', 'task': 'tones', 'desc': 'melodyMinusScrambled'}
              and p[1] == 'effect']
    run1 = [f for f, p in parsed.items() if p and p[0].get('run') == '01' and p[0].get('desc') == 'melody'
            and p[1] == 'tstat']
    report(len(comb_t) == 1 and len(comb_e) == 1 and len(run1) == 1,
           'fit: the effect is the desc entity (melodyMinusScrambled), combined maps without run-')
    if comb_t and comb_e and run1:
        ht = nib.load(os.path.join(fo, comb_t[0])).header
        he = nib.load(os.path.join(fo, comb_e[0])).header
        h1 = nib.load(os.path.join(fo, run1[0])).header
        report(int(ht['intent_code']) == 3 and float(ht['intent_p1']) == meta['combined_df'] and
               int(h1['intent_code']) == 3 and float(h1['intent_p1']) == meta['runs'][0]['df'],
               'fit t maps: intent 3, df the run\'s or the fixed-effects sum (%g)' % float(ht['intent_p1']))
        report(b'percent signal change' in he['descrip'].tobytes() and int(he['intent_code']) == 0,
               'fit effect maps say percent signal change in descrip')
        side = json.load(open(os.path.join(fo, comb_e[0].replace('.nii.gz', '.json'))))
        report(side.get('Effect') == 'melody-scrambled' and side.get('Units') == 'percent signal change',
               'fit sidecars name the effect and its units')


def check_r(out, sim):
    rs = shutil.which('Rscript')
    if not rs:
        print('skip - R is not installed (apt-get install r-base-core): no R client test')
        return
    grp = pd.read_csv(os.path.join(out, 'group.csv'))
    row = grp[(grp.split == 'odd-even:mean') & (grp.parcel == 'left_auditory') & (grp.effect == 'melody')].iloc[0]
    script = r'''
r <- read.csv(file.path(commandArgs(TRUE)[1], "responses.csv"))
p <- read.delim(commandArgs(TRUE)[2])
m <- merge(r, p, by.x = "subject", by.y = "participant_id")
x <- m[m$split == "odd-even:mean" & m$parcel == "left_auditory" & m$effect == "melody", "value"]
tt <- t.test(x)
cat(nrow(r), nrow(m), is.character(r$subject), sprintf("%.17g", tt$statistic), sprintf("%.17g", tt$p.value), "\n")
'''
    sp = os.path.join(out, '..', 'check.R')
    with open(sp, 'w') as f:
        f.write(script)
    r = subprocess.run([rs, '--vanilla', sp, out, os.path.join(sim, 'data', 'participants.tsv')],
                       capture_output=True, text=True)
    f = r.stdout.split()
    if not report(r.returncode == 0 and len(f) == 5, 'R reads and merges the tables', r.stderr):
        return
    report(f[0] == f[1] and f[2] == 'TRUE', 'R: read.csv keeps subject as text and merge keeps every row (%s of %s)'
           % (f[1], f[0]))
    report(abs(float(f[3]) - row.t) <= 1e-8 * abs(row.t) and abs(float(f[4]) - row.p) <= 1e-8 * row.p + 1e-300,
           'R t.test equals group.csv (t %s vs %s)' % (f[3], row.t))


if __name__ == '__main__':
    main()
    sys.exit(1 if failed else 0)
