"""A short fixed-seed run of the input fuzzer (fuzz_inputs.py) on a simulated study: no crash, hang, unnamed file or leftover temp file.

Runs only at SPLITROI_TEST_LEVEL=full (about 40 iterations, under a minute).
"""
import os
import re
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
KINDS = [
    ('sanitizer', 'no sanitizer report'),
    ('signal', 'no run ended by a signal'),
    ('status', 'every exit status is 0, 1 or 2'),
    ('timeout', 'no run hangs (20 s limit)'),
    ('no-file', 'every exit-1 message names a file'),
    ('accepted', 'no surely-invalid input is accepted with exit 0'),
    ('usage', 'no broken input file is reported as bad usage (exit 2)'),
    ('tempfile', 'no temporary file is left in the output folder after a failure'),
]


def main():
    level = os.environ.get('SPLITROI_TEST_LEVEL', 'full')
    if level != 'full':
        print('skip - fuzz smoke runs only at SPLITROI_TEST_LEVEL=full (level is %s)' % level)
        return 0
    binary = os.environ.get('SPLITROI', os.path.join(HERE, '..', '..', 'build', 'splitroi'))
    with tempfile.TemporaryDirectory() as tmp:
        study = os.path.join(tmp, 'S')
        p = subprocess.run([binary, 'simulate', '--out', study, '--subjects', '2', '--grid',
                            'small', '--volumes', '50', '--quiet'], capture_output=True, text=True)
        if p.returncode != 0:
            print('not ok - simulate the seed study: %s' % p.stderr.strip()[:300])
            return 1
        p = subprocess.run([sys.executable, os.path.join(HERE, 'fuzz_inputs.py'), '--study',
                            os.path.join(study, 'study.ini'), '--bin', binary, '--seed', '7',
                            '--iterations', '40', '--budget', '55', '--timeout', '20'],
                           capture_output=True, text=True)
        flags = [l for l in p.stdout.splitlines() if l.startswith('FLAG ')]
        m = re.search(r'# (\d+) iterations, (\d+) executions', p.stdout)
        failed = 0
        if not m or p.returncode not in (0, 1) or p.stderr.strip():
            print('not ok - the fuzzer ran to the end: exit %d %s' % (p.returncode,
                                                                    p.stderr.strip()[-300:]))
            failed += 1
        else:
            print('ok - the fuzzer ran %s iterations, %s executions' % (m.group(1), m.group(2)))
        for kind, what in KINDS:
            mine = [l for l in flags if l.split()[1] == kind]
            if mine:
                print('not ok - %s: %s' % (what, mine[0][:400]))
                failed += 1
            else:
                print('ok - %s' % what)
    return 1 if failed else 0


if __name__ == '__main__':
    sys.exit(main())
