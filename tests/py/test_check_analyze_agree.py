"""check and analyze agree on broken input: the fuzzer's mutations (fuzz_inputs.py), seeded, each fed to both.

For every mutated copy of a small simulated study, `check STUDY` and
`analyze STUDY --quiet --no-report` must give the same verdict: both accept
(exit 0), or both refuse (exit 1, or 2 for a usage error) naming the same
mutated file. Plus `--subjects 01,01`: check lists and checks sub-01 once
(analyze already counted a repeated label once), and an unknown label is the
same usage error from both.
"""
import os
import random
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
