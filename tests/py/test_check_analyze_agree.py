"""check and analyze agree on broken input: the fuzzer's mutations (fuzz_inputs.py), seeded, each fed to both.

For every mutated copy of a small simulated study, `check STUDY` and
`analyze STUDY --quiet --no-report` must give the same verdict: both accept
(exit 0), or both refuse (exit 1, or 2 for a usage error) naming the
mutated file, and the first error each prints names the same file (check
lists every problem, analyze stops a subject at its first: the first must
agree). The same for three hand-made breaks: a TR in milliseconds, a
confound value that is not a number, an event with a negative duration;
there the messages are the same text too. Plus `--subjects 01,01`: check
lists and checks sub-01 once (analyze already counted a repeated label
once), and an unknown label is the same usage error from both.
"""
import os
import random
import re
import shutil
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import fuzz_inputs  # noqa: E402

ITER = int(os.environ.get('SPLITROI_AGREE_ITER', '30'))
fails = 0


def ok(cond, what):
    global fails
    print(('ok - ' if cond else 'not ok - ') + what)
    fails += not cond


def run(binary, args):
    env = dict(os.environ, OPENBLAS_NUM_THREADS='1')
    try:
        p = subprocess.run([binary] + args, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                           timeout=60, env=env)
        return p.returncode, p.stdout.decode('utf-8', 'replace'), p.stderr.decode('utf-8', 'replace')
    except subprocess.TimeoutExpired:
        return 'timeout', '', ''


def first_error(cmd, err):
    """The first error line cmd printed (warnings skipped), without the command and the failed subject's prefix."""
    head = 'splitroi %s: ' % cmd
    for line in err.splitlines():
        if line.startswith(head) and not line.startswith(head + 'warning: '):
            return re.sub(r'^sub-[A-Za-z0-9]+ failed: ', '', line[len(head):])
    return ''


def named_file(msg):
    """The first file an error names: its first path-like word (a / in it, or a data file's extension)."""
    m = re.search(r'(/[^\s:]+|[^\s:/]+\.(?:nii\.gz|nii|tsv|json|ini))', msg)
    return m.group(1) if m else ''


def same_first_error(name, rc, err, rc2, err2, what, first=None):
    """Both refuse (exit 1) and their first errors name the same file first; with first, that file
    is called first and the two messages are the same text."""
    e1, e2 = first_error('check', err), first_error('analyze', err2)
    f1, f2 = named_file(e1), named_file(e2)
    good = rc == 1 and rc2 == 1 and f1 != '' and f1 == f2
    if first:
        good = good and os.path.basename(f1) == first and e1 == e2
    ok(good, 'the first errors name the same file%s: %s | check exit %s: %s | analyze exit %s: %s' %
       (' (%s)' % first if first else '', what, rc, e1[:200], rc2, e2[:200]))


def edit_cell(path, row, col, value):
    """Sets the cell of a TSV file at row (0 = header) and column col to value."""
    with open(path) as f:
        lines = f.read().split('\n')
    cells = lines[row].split('\t')
    cells[col] = value
    lines[row] = '\t'.join(cells)
    with open(path, 'w') as f:
        f.write('\n'.join(lines))


F = 'data/sub-02/func/sub-02_task-'
TR_MS = (F + 'tones_run-02_bold.json', lambda p: open(p, 'w').write('{"RepetitionTime": 2000}\n'))
CONF = (F + 'tones_run-01_desc-confounds_timeseries.tsv', lambda p: edit_cell(p, 5, 0, 'abc'))
DUR = (F + 'memory_run-01_events.tsv', lambda p: edit_cell(p, 2, 1, '-4'))
DUR1 = (F + 'tones_run-01_events.tsv', lambda p: edit_cell(p, 2, 1, '-4'))
# (what, breaks, the file the first error names): alone, then each after or before another break of
# the same subject, in an order where fitting subject by subject used to meet the other one first
HAND = [
    ('a TR in milliseconds in a run\'s sidecar', [TR_MS], TR_MS[0]),
    ('a confound value that is not a number', [CONF], CONF[0]),
    ('an event with a negative duration', [DUR], DUR[0]),
    ('a TR in milliseconds in run 2, a bad confound value in run 1', [TR_MS, CONF], CONF[0]),
    ('a bad confound value in the localizer, a negative duration in the measured task', [CONF, DUR], CONF[0]),
    ('a negative duration and a bad confound value in one run', [DUR1, CONF], CONF[0]),
]


def hand_cases(binary, tmp, base):
    """The breaks of HAND: check and analyze refuse, their first errors the same message about the same file."""
    for desc, breaks, first in HAND:
        case = os.path.join(tmp, 'hand')
        shutil.rmtree(case, ignore_errors=True)
        shutil.copytree(base, case, ignore=shutil.ignore_patterns('results'))
        for rel, make in breaks:
            make(os.path.join(case, rel))
        cs = os.path.join(case, 'study.ini')
        rc, _, err = run(binary, ['check', cs])
        rc2, _, err2 = run(binary, ['analyze', cs, '--quiet', '--no-report', '--out', os.path.join(case, 'o')])
        name = os.path.basename(first)
        same_first_error(name, rc, err, rc2, err2, desc, first=name)


def main():
    binary = os.environ.get('SPLITROI', os.path.join(HERE, '..', '..', 'build', 'splitroi'))
    try:
        import nibabel, numpy  # noqa: F401
    except ImportError:
        print('skip - the agreement test needs nibabel and numpy (fuzz_inputs.py mutates images)')
        return 0
    with tempfile.TemporaryDirectory() as tmp:
        base = os.path.join(tmp, 'base')
        rc, _, err = run(binary, ['simulate', '--out', base, '--subjects', '2', '--grid', 'small',
                                  '--volumes', '50', '--quiet'])
        if rc != 0:
            ok(False, 'simulate the seed study: ' + err)
            return 1
        study = os.path.join(base, 'study.ini')

        # --subjects with a repeat: one subject, checked once, by both
        rc, out, err = run(binary, ['check', study, '--subjects', '01,01', '--headers-only'])
        ok(rc == 0, 'check --subjects 01,01 accepts the valid study (%s)' % err.strip()[:200])
        ok('subjects (1): 01\n' in out, 'check --subjects 01,01 lists sub-01 once')
        ok(out.count('\nsub-01\n') == 1, 'check --subjects 01,01 checks sub-01 once')
        o = os.path.join(tmp, 'o-dup')
        rc2, out2, err2 = run(binary, ['analyze', study, '--subjects', '01,sub-01', '--no-report',
                                       '--no-group', '--out', o])
        ok(rc2 == 0 and '1 analyzed now' in out2, 'analyze --subjects 01,sub-01 analyzes sub-01 once')
        rc, _, err = run(binary, ['check', study, '--subjects', '01,09'])
        rc2, _, err2 = run(binary, ['analyze', study, '--subjects', '01,09', '--out', o])
        msg = "subject '09' is not in the study"
        ok(rc == 2 and rc2 == 2 and msg in err and msg in err2,
           'an unknown --subjects label is the same usage error from check and analyze')

        hand_cases(binary, tmp, base)

        rng = random.Random(15)
        n = 0
        while n < ITER:
            case = os.path.join(tmp, 'case')
            shutil.rmtree(case, ignore_errors=True)
            shutil.copytree(base, case, ignore=shutil.ignore_patterns('results'))
            kind, path = fuzz_inputs.pick_target(rng, case)
            try:
                mut = fuzz_inputs.apply(rng, kind, path)
            except Exception as ex:  # a mutation that does not apply is not a case
                print('# mutation of %s skipped: %s' % (path, ex))
                continue
            n += 1
            cs = os.path.join(case, 'study.ini')
            out = os.path.join(tmp, 'out')
            shutil.rmtree(out, ignore_errors=True)
            rc, _, err = run(binary, ['check', cs])
            rc2, _, err2 = run(binary, ['analyze', cs, '--quiet', '--no-report', '--out', out])
            name = os.path.basename(mut.path)
            what = '%s (%s): check exit %s, analyze exit %s' % (name, mut.desc[:80], rc, rc2)
            if rc == 0 and rc2 == 0:
                ok(True, 'both accept ' + what)
            elif rc != 0 and rc == rc2:
                if rc == 1:
                    same_first_error(name, rc, err, rc2, err2, what)
                ok(name in err and name in err2, 'both refuse naming the file: ' + what +
                   ('' if name in err and name in err2 else
                    ' | check: %s | analyze: %s' % (err.strip()[-200:], err2.strip()[-200:])))
            else:
                ok(False, 'same verdict: ' + what + ' | check: %s | analyze: %s' %
                   (err.strip()[-200:], err2.strip()[-200:]))
    print('# %d mutations' % ITER)
    return 1 if fails else 0


if __name__ == '__main__':
    sys.exit(main())
