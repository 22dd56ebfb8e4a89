# test_fuzz_harnesses.sh - the afl++ harnesses (tests/fuzz/fuzz_*.c, built by make test with the
# normal compiler) run on every seed of their corpus without a crash or a failed check, accept
# the ok- seeds and refuse the bad- seeds, so that they do not rot between `make fuzz` runs.
. "$(dirname "$0")/lib.sh"
BUILD=${BUILD:-build}
HERE=$(cd "$(dirname "$0")/../.." && pwd)
B=$(cd "$(dirname "$SPLITROI")" && pwd)/tests/fuzz
PY=${PYTHON:-/usr/bin/python3}
for h in nii events study; do
	bin=$B/fuzz_$h
	seeds=$HERE/tests/fuzz/seeds/$h
	if [ ! -x "$bin" ]; then
		notok "harness $h not built ($bin; make test builds it)"
		continue
	fi
	n=0 bad=0
	for f in "$seeds"/*; do
		[ -f "$f" ] || continue
		n=$((n + 1))
		name=$(basename "$f")
		{ "$bin" "$f" >"$TMP/out" 2>"$TMP/err"; rc=$?; } 2>/dev/null
		first=$(head -1 "$TMP/out")
		if [ "$rc" -ne 0 ]; then
			notok "$h harness on $name: exit $rc: $(head -c 300 "$TMP/err")"
			bad=1
		elif [[ "$name" == ok-* && "$first" != accepted* ]]; then
			notok "$h harness refuses the valid seed $name: $first"
			bad=1
		elif [[ "$name" == bad-* && "$first" != refused* ]]; then
			notok "$h harness accepts the broken seed $name: $first"
			bad=1
		fi
	done
	if [ "$bad" = 0 ] && [ "$n" -ge 5 ]; then
		ok "$h harness: all $n seeds read, the ok- ones accepted and the bad- ones refused"
	elif [ "$n" -lt 5 ]; then
		notok "$h harness: only $n seeds in $seeds"
	fi
done
# a missing file: refused with a message naming it (a message without the name would abort)
run "$B/fuzz_events" "$TMP/none.tsv"
expect_status 0 "a missing file is a refusal, not a finding"
expect_out "^refused: cannot open $TMP/none.tsv" "the refusal names the file"
# the committed seeds are what make_seeds.py writes
if "$PY" "$HERE/tests/fuzz/make_seeds.py" "$TMP/seeds" && diff -r "$TMP/seeds" "$HERE/tests/fuzz/seeds" >"$TMP/diff"; then
	ok "the committed seeds are those tests/fuzz/make_seeds.py writes"
else
	notok "the committed seeds differ from tests/fuzz/make_seeds.py's: $(head -c 300 "$TMP/diff")"
fi
