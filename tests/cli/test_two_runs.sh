# test_two_runs.sh - two analyses on one output folder: the second waits for the locks the
# first holds (and says who holds them), or stops with --no-wait; tables end up complete.
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
HERE=$(cd "$(dirname "$0")/.." && pwd)
"$PY" "$HERE/py/make_study.py" "$TMP/s" basic >/dev/null || { notok "make_study.py failed"; exit 1; }
cd "$TMP/s" || exit 1
# hold sub-02's lock from outside (a stand-in for another analyze): an fcntl lock held by a
# helper process that says who it is, as splitroi does
hold() { # name seconds
	"$PY" - "$1" "$2" <<'PYEOF' &
import fcntl, os, sys, time
os.makedirs('results', exist_ok=True)
fd = os.open('results/.lock.' + sys.argv[1], os.O_RDWR | os.O_CREAT, 0o666)
fcntl.lockf(fd, fcntl.LOCK_EX)
os.ftruncate(fd, 0); os.write(fd, b'pid %d on host testhost since now\n' % os.getpid())
open('results/.held', 'w').close()
time.sleep(float(sys.argv[2]))
PYEOF
	holder=$!
	for _ in $(seq 100); do [ -e results/.held ] && break; sleep 0.05; done
	rm -f results/.held
}
hold sub-02 30
run "$SPLITROI" analyze study.ini --quiet --no-report --no-wait
expect_status 1 "lock held: --no-wait stops"
expect_err "sub-02 failed: .*\.lock\.sub-02: held by pid $holder on host testhost" "lock held: --no-wait says who holds the lock"
[ -s results/sub-01/run.json ] && ok "lock held: the other subject is analyzed" || notok "lock held: the other subject was not analyzed"
kill "$holder"; wait "$holder" 2>/dev/null
hold sub-02 1.5
run "$SPLITROI" analyze study.ini --quiet --no-report
expect_status 0 "lock held: without --no-wait the second process waits, then finishes"
expect_err "sub-02: waiting for pid $holder on host testhost" "lock held: the waiting process says who holds the lock"
"$PY" - results <<'PYEOF' && ok "lock held: the tables are complete after the wait" || notok "lock held: incomplete tables after the wait"
import csv, sys
subs = {r['subject'] for r in csv.DictReader(open(sys.argv[1] + '/responses.csv'))}
assert subs == {'sub-01', 'sub-02'}, subs
assert 'incomplete' not in open(sys.argv[1] + '/group.csv').read()
PYEOF
wait "$holder" 2>/dev/null
# two real analyses at once with --force: both succeed and the tables agree
rm -rf results
"$SPLITROI" analyze study.ini --quiet --no-report --force >"$TMP/o1" 2>"$TMP/e1" & p1=$!
"$SPLITROI" analyze study.ini --quiet --no-report --force >"$TMP/o2" 2>"$TMP/e2" & p2=$!
wait $p1; r1=$?; wait $p2; r2=$?
[ $r1 = 0 ] && [ $r2 = 0 ] && ok "two analyses at once: both succeed" || notok "two analyses at once: exits $r1 $r2: $(cat "$TMP/e1" "$TMP/e2" | grep -v warning | head -5)"
"$PY" - results <<'PYEOF' && ok "two analyses at once: complete and consistent tables" || notok "two analyses at once: tables incomplete or inconsistent"
import csv, sys
d = sys.argv[1]
subs = {r['subject'] for r in csv.DictReader(open(d + '/responses.csv'))}
used = {r['subject'] for r in csv.DictReader(open(d + '/group_subjects.csv')) if r['status'] == 'used'}
assert subs == used == {'sub-01', 'sub-02'}, (subs, used)
PYEOF
