#!/usr/bin/python3
"""report_partial.py - the report of a partial run (some subjects not analyzed), read as a reviewer would.

Usage: report_partial.py OUT BIDS CHROMIUM TMP VERSION. Checks the pages' DOM
against the CSVs, the events files and the images (nibabel), then renders
them in headless Chromium and checks the screenshots (shot_check.py): the
banner naming the missing subjects, one y-range per chart family, orientation
letters on every slice, the design matrices drawn as traces. A copy of the
results with the images re-stored left-posterior (LPS) checks that the
letters follow the affine. Prints ok/not ok lines; the screenshots stay in TMP.
"""
import csv, datetime, glob, os, re, shutil, subprocess, sys
import numpy as np
import nibabel as nib

out, bids, chromium, tmp, version = sys.argv[1:6]
out, bids, tmp = (os.path.abspath(x) for x in (out, bids, tmp))
here = os.path.dirname(os.path.abspath(__file__))
failed = 0


def check(cond, name):
    global failed
    print(('ok - ' if cond else 'not ok - ') + name)
    failed += not cond


def rows(path):
    with open(path, newline='') as f:
        return list(csv.DictReader(f, delimiter='\t' if path.endswith('.tsv') else ','))


def text(s):
    return re.sub(r'\s+', ' ', re.sub(r'<[^>]+>', '', s)).strip()


def shot(page, png, size='1200,1400'):
    subprocess.run(['timeout', '120', chromium, '--headless', '--no-sandbox', '--disable-gpu',
                    '--disable-background-networking', '--disable-component-update', '--disable-sync',
                    '--no-first-run', '--disable-quic', '--user-data-dir=' + os.path.join(tmp, 'chr-p'),
                    '--screenshot=' + png, '--window-size=' + size, 'file://' + page],
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return os.path.exists(png) and os.path.getsize(png) > 0


def shot_check(png, *boxes):
    r = subprocess.run([sys.executable, os.path.join(here, 'shot_check.py'), png] + [str(x) for x in boxes],
                       capture_output=True, text=True)
    sys.stdout.write(r.stdout)
    return r.returncode == 0


study = open(os.path.join(out, 'report.html'), encoding='utf-8').read()
done = sorted(os.path.basename(d)[4:] for d in glob.glob(os.path.join(out, 'sub-*', 'run.json')) for d in [os.path.dirname(d)])
every = sorted(os.path.basename(d)[4:] for d in glob.glob(os.path.join(bids, 'sub-*')))
missing = [s for s in every if s not in done]
check(len(done) == 3 and len(every) == 8, 'a partial run: %d of %d subjects analyzed' % (len(done), len(every)))

# 1. the banner: first thing in <main>, naming exactly the missing subjects
m = re.search(r'<main>\s*<div class="banner" id="incomplete"[^>]*>(.*?)</div>', study, re.S)
check(m is not None, 'the study page opens with the incomplete-group banner')
named = re.findall(r'<b class="sub">sub-([^<]+)</b>', m.group(1)) if m else []
check(named == missing, 'the banner names the missing subjects %s (got %s)' % (missing, named))
check(m is not None and '%d of %d subjects' % (len(missing), len(every)) in text(m.group(1)),
      'the banner counts them (%s)' % (text(m.group(1))[:60] if m else ''))
gh = re.search(r'<table id="group"><thead><tr>(.*?)</tr>', study, re.S)
gcols = re.findall(r'<th>(.*?)</th>', gh.group(1)) if gh else []
check('note' in gcols and gcols.index('note') < 6, 'the group table shows its note column among the first (%s)' % gcols[:6])
check(re.search(r'<div class="wide" id="group-box">\s*<table id="group">', study) is not None,
      'the group table sits in its own scrolling box')

# 2. one y-range per chart family, covering every value charted in it (numpy from responses.csv)
resp = rows(os.path.join(out, 'responses.csv'))
fams = re.findall(r'<div class="family" data-task="([^"]+)">(.*?)</div>', study, re.S)
check(len(fams) >= 2, 'the study page has chart families (%d)' % len(fams))
for task, body in fams:
    ranges = [tuple(map(float, r.split())) for r in re.findall(r'<desc class="yrange">([^<]+)</desc>', body)]
    measured = 'memory' == task
    vals = np.array([float(r['value']) for r in resp if r['measure_task'] == task and r['value'] not in ('', 'n/a')
                     and (r['split'] == 'all' if measured else r['split'].endswith(':mean'))])
    check(len(ranges) == 4 and len(set(ranges)) == 1, 'task %s: %d charts share one y-range %s' % (task, len(ranges), sorted(set(ranges))))
    if ranges and len(vals):
        check(ranges[0][0] <= vals.min() and ranges[0][1] >= vals.max(),
              'task %s: the range %s holds every value (%.3g..%.3g)' % (task, ranges[0], vals.min(), vals.max()))
nums = re.findall(r'<text[^>]*>([^<]*)</text>', study)
expo = [t for t in nums if re.search(r'\d[eE][-+]?\d', t)]
check(nums and not expo, 'no chart number in exponent notation (%s)' % expo[:3])

# 3. every page names the study file, splitroi's version and today's date (UTC)
today = datetime.datetime.now(datetime.timezone.utc).strftime('%Y-%m-%d')
for p in [os.path.join(out, 'report.html')] + [os.path.join(out, 'sub-%s' % s, 'report.html') for s in done]:
    f = re.search(r'<footer class="made">(.*?)</footer>', open(p, encoding='utf-8').read(), re.S)
    ft = text(f.group(1)) if f else ''
    check('study.ini' in ft and version in ft and today in ft, '%s: footer names study file, version %s and %s (%s)' %
          (os.path.relpath(p, out), version, today, ft[:90]))

# 4. a subject page: labels as written, :mean run lists, orientation letters, design traces
s1 = done[0]
sp = os.path.join(out, 'sub-' + s1, 'report.html')
sub = open(sp, encoding='utf-8').read()
tab = re.search(r'<table id="responses">(.*?)</table>', sub, re.S).group(1)
head = re.findall(r'<th>(.*?)</th>', tab)
cells = [re.findall(r'<td[^>]*>(.*?)</td>', r) for r in re.findall(r'<tr>(.*?)</tr>', tab)[1:]]
check(cells and all(c[head.index('subject')] == 'sub-' + s1 for c in cells), 'the subject page shows subject sub-%s as written in its table' % s1)
srows = rows(os.path.join(out, 'sub-' + s1, 'responses.csv'))
bad = []
for r in srows:
    if not r['split'].endswith(':mean'):
        continue
    kind = r['split'][:-5]
    parts = [q for q in srows if q['split'].startswith(kind + ':') and q['split'] != r['split']
             and q['parcel'] == r['parcel'] and q['effect'] == r['effect']]
    want = ('|'.join(q['define_runs'] for q in parts), '|'.join(q['measure_runs'] for q in parts))
    if (r['define_runs'], r['measure_runs']) != want or set(want[0].split('|')[0].split('+')) & set(want[1].split('|')[0].split('+')):
        bad.append((r['define_runs'], r['measure_runs'], want))
check(not bad and any(r['split'].endswith(':mean') for r in srows),
      ':mean rows list the runs of each split they average, defining and measuring runs apart (%s)' % bad[:1])
check(any('|' in c[head.index('define_runs')] for c in cells), 'the report shows those run lists')

aff = nib.load(glob.glob(os.path.join(out, 'sub-' + s1, 'func', '*_boldref.nii.gz'))[0]).affine
opp = {'R': 'L', 'L': 'R', 'A': 'P', 'P': 'A', 'S': 'I', 'I': 'S'}


def letters_ok(page_text, affine, name):
    codes = nib.aff2axcodes(affine)   # nibabel: the direction each voxel axis points to (+)
    want = (codes[1], opp[codes[0]], codes[0], opp[codes[1]])   # top, left, right, bottom
    sl = re.findall(r'<div class="slice">(.*?)</div>', page_text, re.S)
    got = [tuple(re.findall(r'<span class="o ([tlrb])">(.)</span>', x)) for x in sl]
    okay = sl and all([g[1] for g in x] == list(want) and [g[0] for g in x] == list('tlrb') for x in got)
    check(okay, '%s: all %d slices carry the letters top/left/right/bottom = %s (nibabel %s)' % (name, len(sl), want, codes))
    o = re.search(r'<p class="note" id="orientation">(.*?)</p>', page_text, re.S)
    side = 'left' if codes[0] == 'R' else 'right'
    conv = 'neurological' if codes[0] == 'R' else 'radiological'
    check(o is not None and "left is shown on the %s (%s convention)" % (side, conv) in text(o.group(1)),
          '%s: one sentence names the convention (%s)' % (name, text(o.group(1))[-110:] if o else ''))


letters_ok(sub, aff, 'sub-%s' % s1)
check(sub.count('parcel outline dashed') > 0, 'captions mention the parcel outline when it is drawn')

rj = open(os.path.join(out, 'sub-' + s1, 'run.json')).read()
conf = re.search(r'^\s*confounds\s*=\s*([^;#\\\n]+)', re.search(r'"study_text":\s*"(.*?)"', rj, re.S).group(1).replace('\\n', '\n'), re.M)
conf = conf.group(1).split() if conf else []
figs = re.findall(r'<figure class="design"><figcaption><b>([^<]+)</b>.*?(<svg.*?</svg>)', sub, re.S)
dfiles = sorted(glob.glob(os.path.join(out, 'sub-' + s1, 'design', '*.csv')))
check(len(figs) == len(dfiles) and figs, 'one design figure per design matrix (%d, %d files)' % (len(figs), len(dfiles)))
check(all('<image' not in svg for _, svg in figs), 'no design figure is a raster image')
bad = []
for name, svg in figs:
    with open(os.path.join(out, 'sub-' + s1, 'design', name + '.csv'), newline='') as f:
        cols = next(csv.reader(f))
    got = re.findall(r'<g class="trace" data-kind="([a-z]+)" data-column="([^"]+)">(.*?)</g>', svg, re.S)
    # kinds by name, understood here on their own: the intercept, cosine drifts, listed confounds
    want = ['baseline' if c == 'baseline' else 'drifts' if re.fullmatch(r'cos_\d+', c)
            else 'confounds' if c in conf else 'conditions' for c in cols]
    if [g[1] for g in got] != cols or [g[0] for g in got] != want:
        bad.append((name, 'columns/kinds', [g[:2] for g in got][:3]))
    if '<polyline' not in svg or svg.count('<polyline') != len(cols) or 'time (s)' not in svg:
        bad.append((name, 'traces', svg.count('<polyline')))
    task, run = re.fullmatch(r'task-(.+)_run-(.+)', name).groups()
    ev = rows(sorted(glob.glob(os.path.join(bids, 'sub-' + s1, 'func', 'sub-%s_task-%s_run-*%s_events.tsv' % (s1, task, run))))[0])
    for kind, col, body in got:
        if kind == 'conditions' and body.count('class="ev"') != sum(e['trial_type'] == col for e in ev):
            bad.append((name, col, body.count('class="ev"')))
    heads = re.findall(r'<text class="kind"[^>]*>([a-z]+)</text>', svg)
    if heads != [k for i, k in enumerate(want) if i == 0 or want[i - 1] != k]:
        bad.append((name, 'headings', heads))
check(not bad, 'design traces: one per column in order, kinds, a mark per event, a heading per kind (%s)' % bad[:2])

# 5. the same pages in Chromium
css = re.search(r'<style>.*?</style>', sub, re.S).group(0)
design_only = os.path.join(tmp, 'design_only.html')
with open(design_only, 'w', encoding='utf-8') as f:   # the design section alone, so it starts at the top
    f.write('<!DOCTYPE html><html><head><meta charset="utf-8">%s</head><body><main>%s</main></body></html>' %
            (css, sub[sub.index('<h2 id="design">'):sub.index('<h2 id="motion-h">')]))
for page, png in ((os.path.join(out, 'report.html'), 'partial_study.png'), (sp, 'partial_sub.png'),
                  (design_only, 'partial_design.png')):
    check(shot(page, os.path.join(tmp, png)), 'chromium renders %s' % os.path.relpath(page, tmp))
if os.path.exists(os.path.join(tmp, 'partial_study.png')):
    # shot_check.py's PNG decoder (the part before its command-line code)
    src = open(os.path.join(here, 'shot_check.py')).read().split('\nimg = decode')[0]
    ns = {}
    exec(compile(src, 'shot_check.py', 'exec'), ns)
    img = ns['decode'](os.path.join(tmp, 'partial_study.png'))
    # the banner's border is the page's warning red (#9b1c1c): it must be in the first screen, above the charts
    red = np.all(np.abs(img[:, :, :3] - np.array([0x9b, 0x1c, 0x1c])) < 30, axis=2)
    ys = np.nonzero(red.sum(1) > 300)[0]
    check(len(ys) and ys.min() < 250, 'the banner is drawn at the top of the study page (red border rows from y=%s)' %
          (ys.min() if len(ys) else None))
    di = ns['decode'](os.path.join(tmp, 'partial_design.png'))
    # the tints of the four kinds appear in the design figure: conditions, confounds, drifts, baseline
    tints = {'conditions': (0xf6, 0xeb, 0xe3), 'confounds': (0xe8, 0xed, 0xf2), 'drifts': (0xee, 0xf0, 0xe2)}
    seen = {k: int(np.all(np.abs(di[:, :, :3] - np.array(v)) < 3, axis=2).sum()) for k, v in tints.items()}
    check(all(v > 2000 for v in seen.values()), 'the design figure shows the kinds\' tinted bands (%s)' % seen)
ok = shot_check(os.path.join(tmp, 'partial_sub.png'), 'subject page, first fROI slices with letters', 40, 700, 560, 960)
ok = shot_check(os.path.join(tmp, 'partial_design.png'), 'design figure, condition traces', 200, 60, 800, 160,
                '!right of the design figure', 1000, 60, 1190, 400) and ok
check(ok, 'the screenshots hold drawings where expected')

# 6. the images re-stored left-posterior: the letters follow the affine; no parcel outline, no caption for it
lps = os.path.join(tmp, 'lps')
shutil.rmtree(lps, ignore_errors=True)
shutil.copytree(out, lps)
flip = np.diag([-1.0, -1.0, 1.0, 1.0])
for f in glob.glob(os.path.join(lps, 'sub-*', 'func', '*.nii.gz')):
    im = nib.load(f)
    nx, ny = im.shape[:2]
    # the same voxels stored in reverse along i and j: world positions unchanged, axes now point L and P
    a2 = im.affine @ np.array([[-1, 0, 0, nx - 1], [0, -1, 0, ny - 1], [0, 0, 1, 0], [0, 0, 0, 1.0]])
    nib.save(nib.Nifti1Image(np.asarray(im.dataobj)[::-1, ::-1], a2), f)
r = subprocess.run([os.environ.get('SPLITROI', 'splitroi'), 'report', '--quiet', lps], capture_output=True, text=True)
lsub = open(os.path.join(lps, 'sub-' + s1, 'report.html'), encoding='utf-8').read()
letters_ok(lsub, nib.load(glob.glob(os.path.join(lps, 'sub-' + s1, 'func', '*_boldref.nii.gz'))[0]).affine, 'LPS copy')
check('parcel outline' not in re.sub(r'no parcel outline', '', lsub),
      'LPS copy (parcels now on another grid): no caption mentions a parcel outline')
sys.exit(1 if failed else 0)
