# lib.sh - helpers for the command-line tests: sourced, prints TAP-like lines.
# Each test script: `. "$(dirname "$0")/lib.sh"`, then expect_* calls.
set -u
: "${SPLITROI:?SPLITROI must name the binary}"
TMP=$(mktemp -d)
trap 'rm -rf "$TMP"' EXIT
ok() { echo "ok - $*"; }
notok() { echo "not ok - $*"; }
# run CMD...: runs it, keeps status in $rc, stdout in $TMP/out, stderr in $TMP/err
run() { "$@" >"$TMP/out" 2>"$TMP/err"; rc=$?; }
# expect_status N NAME
expect_status() {
	if [ "$rc" -eq "$1" ]; then ok "$2 (exit $rc)"; else notok "$2: exit $rc, wanted $1; stderr: $(head -c 400 "$TMP/err")"; fi
}
# expect_err REGEX NAME: stderr matches the extended regex
expect_err() {
	if grep -Eq -- "$1" "$TMP/err"; then ok "$2"; else notok "$2: stderr lacks /$1/: $(head -c 400 "$TMP/err")"; fi
}
expect_out() {
	if grep -Eq -- "$1" "$TMP/out"; then ok "$2"; else notok "$2: stdout lacks /$1/: $(head -c 400 "$TMP/out")"; fi
}
# analyzed_study PRESET: a tests/py/make_study.py study in $TMP/s, analyzed (no report); cds there
analyzed_study() {
	"${PYTHON:-/usr/bin/python3}" "$(dirname "${BASH_SOURCE[0]}")/../py/make_study.py" "$TMP/s" "$1" >/dev/null ||
		{ notok "make_study.py failed"; exit 1; }
	cd "$TMP/s" || exit 1
	run "$SPLITROI" analyze study.ini --quiet --no-report
	expect_status 0 "the study runs"
}
