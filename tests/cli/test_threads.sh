# test_threads.sh - analyze with --jobs 2 --threads 2 under helgrind on a tiny study: no data
# race in splitroi's code or in the libraries it calls (skipped when valgrind is missing).
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
HERE=$(cd "$(dirname "$0")" && pwd)
if ! command -v valgrind >/dev/null 2>&1; then
	echo "skip - valgrind is not installed"
	exit 0
fi
if ldd "$SPLITROI" 2>/dev/null | grep -q 'libasan'; then
	echo "skip - the binary is built with AddressSanitizer, which cannot run under valgrind"
	exit 0
fi
"$PY" "$HERE/mkstudy.py" "$TMP/s" >/dev/null || { notok "mkstudy.py failed"; exit 1; }
cd "$TMP/s" || exit 1
OPENBLAS_NUM_THREADS=1 valgrind --tool=helgrind --log-file="$TMP/hg.log" \
	"$SPLITROI" analyze study.ini --jobs 2 --threads 2 --quiet --no-report --no-group >"$TMP/out" 2>"$TMP/err"
rc=$?
expect_status 0 "analyze --jobs 2 --threads 2 runs under helgrind"
# Known benign reports inside libraries, not in the way splitroi calls them: jansson's
# lazily set hash seed (guarded by atomic builtins that helgrind does not model),
# LAPACKE's lazily read NaN-check flag (every thread stores the same value), and
# glibc's reuse of a finished thread's cached stack in pthread_create (get_cached_stack
# clears it under glibc's own stack-cache lock, which helgrind does not see; from memory,
# a known helgrind false report, seen here about once in twelve runs).
"$PY" - "$TMP/hg.log" <<'PYEOF' && ok "no data race outside the two known library-internal ones" || notok "helgrind reports data races (see above)"
import re, sys
text = open(sys.argv[1]).read()
blocks = re.split(r'==\d+== -{10,}', text)
bad = []
for b in blocks:
    if 'Possible data race' not in b:
        continue
    frames = re.findall(r'(?:at|by) 0x[0-9A-F]+: (.*)', b)
    top = frames[0] if frames else ''
    if 'libjansson' in top or 'LAPACKE_get_nancheck' in top:
        continue
    if any('get_cached_stack' in f or 'allocate_stack' in f for f in frames[:3]):
        continue
    bad.append(b.strip()[:1500])
for b in bad[:3]:
    print(b, file=sys.stderr)
sys.exit(1 if bad else 0)
PYEOF
