#!/usr/bin/python3
"""report_check.py - checks report pages against the CSVs and maps they show, computed here independently.

Usage: report_check.py OUT [fixture]. Prints ok/not ok lines. With "fixture",
also checks what the invented fixture was built to contain (a flagged run, an
empty fROI).
"""
import csv, glob, html.parser, json, math, os, re, sys
import numpy as np
import nibabel as nib

out = sys.argv[1]
fixture = 'fixture' in sys.argv[2:]
failed = 0


def check(cond, name):
    global failed
    print(('ok - ' if cond else 'not ok - ') + name)
    failed += not cond


class Page(html.parser.HTMLParser):
    """Collects tables (by id), links, image sources and script tags."""

    def __init__(self):
        super().__init__()
        self.tables, self.links, self.srcs, self.scripts, self.external = {}, [], [], 0, []
        self.cur, self.row, self.cell, self.flagrow = None, None, None, False

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        for k in ('src', 'href'):
            v = a.get(k)
            if v and re.match(r'\s*(https?:)?//', v):
                self.external.append(v)
        if tag == 'script':
            self.scripts += 1
        if tag == 'link' and 'stylesheet' in (a.get('rel') or ''):
            self.external.append('link rel=stylesheet')
        if tag == 'a' and a.get('href'):
            self.links.append(a['href'])
        if tag in ('img', 'image'):
            self.srcs.append(a.get('src') or a.get('href') or '')
        if tag == 'table':
            self.cur = a.get('id', 'table%d' % len(self.tables))
            self.tables[self.cur] = {'head': [], 'rows': [], 'flags': []}
        elif tag == 'tr' and self.cur:
            self.row = []
            self.flagrow = a.get('class') == 'flag'
        elif tag in ('td', 'th') and self.row is not None:
            self.cell = ''

    def handle_endtag(self, tag):
        if tag in ('td', 'th') and self.cell is not None:
            self.row.append(self.cell.strip())
            self.cell = None
        elif tag == 'tr' and self.row is not None:
            t = self.tables[self.cur]
            if not t['head']:
                t['head'] = self.row
            else:
                t['rows'].append(self.row)
                t['flags'].append(self.flagrow)
            self.row = None
        elif tag == 'table':
            self.cur = None

    def handle_data(self, d):
        if self.cell is not None:
            self.cell += d


def parse(path):
    p = Page()
    p.feed(open(path, encoding='utf-8').read())
    return p


def num(s):
    s = s.replace('\u2013', '').strip()
    if s == '':
        return math.nan
    return float(s)


def same(a, b, rel=6e-4):
    """Equal as displayed: %.4g keeps four significant digits."""
    if isinstance(a, str) or isinstance(b, str):
        return a == b
    if math.isnan(a) or math.isnan(b):
        return math.isnan(a) and math.isnan(b)
    return abs(a - b) <= rel * max(abs(a), abs(b), 1e-12)


def read_csv(path):
    with open(path, newline='') as f:
        return list(csv.DictReader(f))


def is_num(s):
    try:
        float(s)
        return True
    except ValueError:
        return False


def compare_table(tab, rows, cols, name):
    """The HTML table shows the CSV's rows in order; numbers to 4 significant digits."""
    if tab is None:
        check(False, name + ': table missing')
        return
    check(sorted(tab['head']) == sorted(cols), name + ': columns are those of the CSV (%s)' % tab['head'][:4])
    check(len(tab['rows']) == len(rows), name + ': %d rows, CSV has %d' % (len(tab['rows']), len(rows)))
    bad = []
    for i, (hr, cr) in enumerate(zip(tab['rows'], rows)):
        for c in cols:
            j = tab['head'].index(c) if c in tab['head'] else len(hr)
            v = cr[c]
            h = hr[j] if j < len(hr) else None
            ok = (h is not None) and (same(num(h), float(v)) if is_num(v) else (h == v or (v == '' and h in ('', '\u2013'))))
            if not ok:
                bad.append((i, c, h, v))
    check(not bad, name + ': every cell equals the CSV (%s)' % bad[:3])


study = os.path.join(out, 'report.html')
check(os.path.exists(study), 'report.html exists')
pages = [study] + sorted(glob.glob(os.path.join(out, 'sub-*', 'report.html')))
subs = sorted(os.path.basename(d)[4:] for d in glob.glob(os.path.join(out, 'sub-*')) if os.path.exists(os.path.join(d, 'run.json')))
check(len(pages) == 1 + len(subs) and subs, 'one page per subject (%d subjects)' % len(subs))
parsed = {}
for p in pages:
    pg = parse(p)
    parsed[p] = pg
    rel = os.path.relpath(p, out)
    check(not pg.external and pg.scripts == 0, '%s: self-contained (no external src/href, no scripts): %s' % (rel, pg.external[:2]))
    bad = [s[:40] for s in pg.srcs if not s.startswith('data:image/png;base64,')]
    check(not bad, '%s: every image is an embedded PNG data URI (%d images)' % (rel, len(pg.srcs)))
    import base64
    sig = all(base64.b64decode(s.split(',', 1)[1])[:8] == b'\x89PNG\r\n\x1a\n' for s in pg.srcs if s.startswith('data:'))
    check(sig, '%s: embedded images decode to PNG data' % rel)
    text = open(p, encoding='utf-8').read()
    check('@media print' in text, '%s: has a print style sheet' % rel)

st = parsed[study]
for s in subs:
    check('sub-%s/report.html' % s in st.links, 'study page links to sub-%s' % s)
for p in pages[1:]:
    check('../report.html' in parsed[p].links, '%s links back to the study page' % os.path.relpath(p, out))

# the group table, cell by cell
gpath = os.path.join(out, 'group.csv')
if os.path.exists(gpath):
    g = read_csv(gpath)
    with open(gpath, newline='') as f:
        gcols = next(csv.reader(f))
    compare_table(st.tables.get('group'), g, gcols, 'group table')
    gh = st.tables['group']['head'] if 'group' in st.tables else []
    check('q_fdr' in gh and gh.index('q_fdr') < 12, 'q_fdr is among the leading columns of the group table')
else:
    print('skip - no group.csv in %s' % out)

# chart values: mean and sem over subjects, computed here with numpy from responses.csv
resp = read_csv(os.path.join(out, 'responses.csv'))
summ = st.tables.get('summary')
check(summ is not None and summ['rows'], 'study page has the chart values table')
if summ:
    bad = []
    for r in summ['rows']:
        parcel, split, task, effect, n, mean, sem = r
        v = np.array([float(x['value']) for x in resp if x['parcel'] == parcel and x['split'] == split
                      and x['measure_task'] == task and x['effect'] == effect and x['value'] not in ('', 'n/a')])
        m = v.mean() if len(v) else math.nan
        se = v.std(ddof=1) / math.sqrt(len(v)) if len(v) > 1 else math.nan
        if int(n) != len(v) or not same(num(mean), m) or not same(num(sem), se):
            bad.append((parcel, split, effect, n, mean, sem, len(v), m, se))
    check(not bad, 'chart values equal numpy mean and sem (ddof 1) over subjects (%s)' % bad[:2])
    kinds = set(r[1] for r in summ['rows'])
    check(any(k.endswith(':mean') for k in kinds), 'cross-validated rows are charted (%s)' % sorted(kinds))
    cv = [x for x in resp if x['split'].endswith(':mean') or x['split'] == 'all']
    keys = set((x['parcel'], x['split'], x['measure_task'], x['effect']) for x in cv)
    check(len(keys) == len(summ['rows']), 'one chart value per parcel, split, task and effect (%d vs %d)' % (len(summ['rows']), len(keys)))

# Dice and sizes: recomputed from the fROI maps with nibabel
subt = st.tables.get('subjects')
check(subt is not None and subt['rows'], 'study page has the overlap table')
bad, flags_ok, recomputed = [], True, []
for r, flag in zip(subt['rows'] if subt else [], subt['flags'] if subt else []):
    sub = r[0][4:]
    d = os.path.join(out, 'sub-' + sub, 'func')
    halves = sorted(f for f in glob.glob(os.path.join(d, 'sub-%s_*_dseg.nii.gz' % sub)) if '_desc-all' not in os.path.basename(f))
    maps = [np.asarray(nib.load(f).dataobj) for f in halves]
    rj = json.load(open(os.path.join(out, 'sub-' + sub, 'run.json')))
    names_path = None
    m = re.search(r'^\s*names\s*=\s*([^\s;#]+)', rj['study_text'], re.M)
    idx = None
    if m:
        names_path = os.path.join(os.path.dirname(rj['study_file']), m.group(1))
        with open(names_path) as f:
            for row in csv.DictReader(f, delimiter='\t'):
                if row['name'] == r[1]:
                    idx = int(row['index'])
    if idx is None:
        idx = int(r[1])
    sizes = [int((mm == idx).sum()) for mm in maps]
    dices = []
    for i in range(len(maps)):
        for j in range(i + 1, len(maps)):
            a, b = maps[i] == idx, maps[j] == idx
            if a.sum() + b.sum():
                dices.append(2 * (a & b).sum() / (a.sum() + b.sum()))
    dice = float(np.mean(dices)) if dices else math.nan
    if len(maps) == 2:
        sa, sb = sizes
    else:
        sa = sb = float(np.mean(sizes))
    if not (same(num(r[2]), sa) and same(num(r[3]), sb) and abs(num(r[4]) - dice) <= 5e-4 if not math.isnan(dice) else math.isnan(num(r[4]))):
        bad.append((r, sa, sb, dice))
    recomputed.append((r, flag, sa, sb, dice))
# the overlap rule: one fixed rule for the whole table (an empty half, or no shared
# voxel: Dice 0), so the same Dice gets the same verdict in every row
verdict = {}
for r, flag, sa, sb, dice in recomputed:
    want_flag = math.isnan(dice) or sa == 0 or sb == 0 or dice == 0
    if want_flag != flag or (want_flag and 'outlier' not in r[7]):
        flags_ok = False
    verdict.setdefault(r[4], set()).add(flag and 'overlap' in r[7])
check(not bad, 'sizes and Dice equal those recomputed from the fROI maps with nibabel (%s)' % bad[:2])
check(flags_ok, 'overlap outliers (an empty half, or Dice 0) are marked, and only they')
check(all(len(v) == 1 for v in verdict.values()), 'equal Dice values get equal verdicts (%s)' %
      [k for k, v in verdict.items() if len(v) > 1][:3])
rule = re.search(r'id="overlap-rule">(.*?)</p>', open(study, encoding='utf-8').read(), re.S)
readme = os.path.join(os.path.dirname(os.path.abspath(__file__)), '..', '..', 'README.md')
if rule and os.path.exists(readme):
    words = re.sub(r'<[^>]+>', '', rule.group(1)).replace('Overlap flag:', '').strip()
    check(words in ' '.join(open(readme).read().split()), 'README states the page\'s overlap rule word for word')
else:
    check(rule is not None, 'the study page states its overlap rule')

# subject pages: responses table vs the subject's CSV; FD vs numpy
for s in subs:
    p = os.path.join(out, 'sub-' + s, 'report.html')
    pg = parsed[p]
    rows = read_csv(os.path.join(out, 'sub-' + s, 'responses.csv'))
    with open(os.path.join(out, 'sub-' + s, 'responses.csv'), newline='') as f:
        cols = next(csv.reader(f))
    compare_table(pg.tables.get('responses'), rows, cols, 'sub-%s responses' % s)
    rj = json.load(open(os.path.join(out, 'sub-' + s, 'run.json')))
    m = re.search(r'^\s*motion\s*=\s*([^;#\n]+)', rj['study_text'], re.M)
    thr = re.search(r'^\s*fd_threshold\s*=\s*([0-9.]+)', rj['study_text'], re.M)
    thr = float(thr.group(1)) if thr else 0.5
    if not m:
        check('motion' not in pg.tables, 'sub-%s: no motion table without motion columns' % s)
        continue
    mcols = m.group(1).split()
    deg = re.search(r'^\s*motion_units\s*=\s*mm_deg', rj['study_text'], re.M) is not None
    mt = pg.tables.get('motion')
    runs = [x for t in rj['inputs'].values() for x in t if x.get('confounds')]
    check(mt is not None and len(mt['rows']) == len(runs), 'sub-%s: one motion row per run with confounds' % s)
    bad = []
    for row, flag, run in zip(mt['rows'] if mt else [], mt['flags'] if mt else [], runs):
        with open(run['confounds']) as f:
            c = list(csv.DictReader(f, delimiter='\t'))
        mp = np.array([[float(x[k]) for k in mcols] for x in c])
        if deg:
            mp[:, 3:] = np.deg2rad(mp[:, 3:])
        d = np.abs(np.diff(mp, axis=0))
        # Power et al. 2012: translations in mm plus rotations as arc length on a 50 mm sphere
        fd = np.concatenate([[0.0], d[:, :3].sum(1) + 50.0 * d[:, 3:].sum(1)])
        if not (abs(num(row[3]) - fd.mean()) <= 6e-4 and abs(num(row[4]) - fd.max()) <= 6e-4
                and int(row[5]) == int((fd > thr).sum()) and flag == (fd.mean() > thr)):
            bad.append((row, fd.mean(), fd.max()))
    check(not bad, 'sub-%s: mean and max FD, counts and flags equal numpy from the confounds (%s)' % (s, bad[:1]))

if fixture:
    flagged = [r for r, f in zip(subt['rows'], subt['flags']) if f]
    check(any(r[0] == 'sub-03' and r[1] == 'right auditory' for r in flagged), 'fixture: the empty half of sub-03 is an outlier')
    check(any('motion' in r[7] for r in subt['rows'] if r[0] == 'sub-02'), 'fixture: sub-02 has a motion flag')
sys.exit(1 if failed else 0)
