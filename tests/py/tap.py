"""tap.py - the test scripts' result lines: ok(cond, name) prints "ok - name" or "not ok - name" and counts the failures; done() prints the count and exits 1 when any failed."""
import sys

failures = 0


def ok(cond, name):
    global failures
    if cond:
        print("ok - " + name)
    else:
        failures += 1
        print("not ok - " + name)
    return cond


def done():
    print("%d failure(s)" % failures)
    sys.exit(1 if failures else 0)
