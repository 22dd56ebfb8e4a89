#!/usr/bin/env bash
# Runs every test (unit binaries, tests/cli/*.sh, tests/py/test_*.py) and counts
# the "ok" / "not ok" lines they print. A test that exits non-zero without
# reporting a failure counts as one failure. Last line: "N passed, N failed".
# Usage: tests/run.sh [unit|cli|py]...   (default: all three)
# SPLITROI_TESTS="glm nii" runs only the tests whose file name contains one of
# the words (`make check T=glm` sets it): test_glm, test_glm_ref.py, ...
set -u
BUILD=${BUILD:-build}
PYTHON=${PYTHON:-/usr/bin/python3}
export SPLITROI="$PWD/$BUILD/splitroi" PYTHON BUILD
export SPLITROI_TEST_LEVEL=${SPLITROI_TEST_LEVEL:-full}
kinds=${*:-unit cli py}
passed=0 failed=0 skipped=0 ran=0
failures=()
log=$(mktemp)
trap 'rm -f "$log"' EXIT

wanted() { # file name: is it among SPLITROI_TESTS (all when that is empty)?
	local w
	[ -z "${SPLITROI_TESTS:-}" ] && return 0
	for w in ${SPLITROI_TESTS//,/ }; do
		case $1 in *"$w"*) return 0 ;; esac
	done
	return 1
}

run_one() { # name, command...
	local name=$1 rc
	shift
	wanted "$name" || return 0
	ran=$((ran + 1))
	local start=$(date +%s)
	"$@" >"$log" 2>&1
	rc=$?
	local p f s
	p=$(grep -c '^ok ' "$log")
	f=$(grep -c '^not ok ' "$log")
	s=$(grep -c '^skip ' "$log")
	if [ "$rc" -ne 0 ] && [ "$f" -eq 0 ]; then
		f=1
		echo "not ok - $name exited with status $rc" >>"$log"
	fi
	passed=$((passed + p)) failed=$((failed + f)) skipped=$((skipped + s))
	printf '%-40s %4d passed %3d failed %3d skipped  %3ds\n' "$name" "$p" "$f" "$s" $(($(date +%s) - start))
	if [ "$f" -gt 0 ]; then
		grep -E '^not ok ' "$log" | head -20 | sed 's/^/    /'
		failures+=("$name")
		if [ -n "${SPLITROI_TEST_VERBOSE:-}" ]; then tail -40 "$log" | sed 's/^/    | /'; fi
	fi
}

for kind in $kinds; do
	case $kind in
	unit)
		for t in "$BUILD"/tests/test_*; do
			[ -x "$t" ] || continue
			if [ -n "${SPLITROI_VALGRIND:-}" ]; then
				run_one "valgrind $(basename "$t")" valgrind -q --error-exitcode=99 --leak-check=full "$t"
			else
				run_one "$(basename "$t")" "$t"
			fi
		done ;;
	cli)
		for t in tests/cli/test_*.sh; do
			[ -f "$t" ] || continue
			run_one "$(basename "$t")" bash "$t"
		done ;;
	py)
		for t in tests/py/test_*.py; do
			[ -f "$t" ] || continue
			run_one "$(basename "$t")" "$PYTHON" "$t"
		done ;;
	esac
done
if [ "$ran" -eq 0 ] && [ -n "${SPLITROI_TESTS:-}" ]; then
	echo "not ok - no test file matches \"$SPLITROI_TESTS\" (T=)"
	failed=$((failed + 1))
fi
if [ ${#failures[@]} -gt 0 ]; then
	echo "failing: ${failures[*]}"
fi
[ -n "${SPLITROI_COUNTS:-}" ] && echo "$passed $failed $skipped" >"$SPLITROI_COUNTS"
if [ "$skipped" -gt 0 ]; then
	echo "$passed passed, $failed failed, $skipped skipped"
else
	echo "$passed passed, $failed failed"
fi
[ "$failed" -eq 0 ]
