#!/usr/bin/env bash
# fuzz.sh - afl++ on the readers' harnesses (tests/fuzz/fuzz_*.c), what `make fuzz` runs.
#
#   FUZZ_SECONDS=900 bash tools/fuzz.sh [nii] [events] [study]     (default: all three)
#
# Builds the library and the harnesses with afl++'s compiler under AddressSanitizer
# (AFL_USE_ASAN=1) in build-fuzz/, runs one afl-fuzz per harness at the same time for
# FUZZ_SECONDS of wall time each (afl-fuzz -V), seeds from tests/fuzz/seeds/<harness>/,
# findings in build-fuzz/out/<harness>/default/{crashes,hangs}/. Ends with a table of
# executions, corpus size, crashes and hangs per harness (from fuzzer_stats); exits 1 when
# any harness found a crash or a hang. Not part of make check.
# FUZZ_TIMEOUT (ms, default 5000) is the time one execution may take before it counts as a
# hang; the readers' documented limits let a small gzip file inflate to a few hundred MB.
set -u
cd "$(dirname "$0")/.." || exit 1
SECONDS_EACH=${FUZZ_SECONDS:-900}
TIMEOUT=${FUZZ_TIMEOUT:-5000}
B=build-fuzz
harnesses=${*:-nii events study}

if ! command -v afl-fuzz >/dev/null 2>&1; then
	if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then
		echo "fuzz: installing afl++ (apt-get install -y afl++)"
		DEBIAN_FRONTEND=noninteractive apt-get install -y afl++ >/dev/null || {
			echo "fuzz: apt-get install -y afl++ failed" >&2
			exit 1
		}
	else
		echo "fuzz: afl++ is not installed; as root: apt-get install -y afl++" >&2
		exit 1
	fi
fi
AFLCC=
for c in afl-clang-fast afl-gcc-fast afl-cc; do
	if command -v "$c" >/dev/null 2>&1 && echo 'int main(void){return 0;}' |
		"$c" -x c -o /tmp/splitroi-fuzz-cc-$$ - >/dev/null 2>&1; then
		AFLCC=$c
		break
	fi
done
rm -f /tmp/splitroi-fuzz-cc-$$
if [ -z "$AFLCC" ]; then
	echo "fuzz: none of afl-clang-fast, afl-gcc-fast, afl-cc compiles a program here" >&2
	exit 1
fi

bins=()
for h in $harnesses; do
	[ -f "tests/fuzz/fuzz_$h.c" ] || { echo "fuzz: no harness tests/fuzz/fuzz_$h.c" >&2; exit 1; }
	[ -d "tests/fuzz/seeds/$h" ] || { echo "fuzz: no seeds in tests/fuzz/seeds/$h" >&2; exit 1; }
	bins+=("$B/tests/fuzz/fuzz_$h")
done
echo "fuzz: building with $AFLCC under ASan in $B/"
AFL_USE_ASAN=1 AFL_QUIET=1 make --no-print-directory -j2 BUILD=$B CC="$AFLCC" OPT="-O1 -g -fno-omit-frame-pointer" \
	SAN= "${bins[@]}" >"$B.log" 2>&1 || {
	tail -20 "$B.log" >&2
	echo "fuzz: the build failed (log: $B.log)" >&2
	exit 1
}
mv "$B.log" "$B/build.log"

export AFL_SKIP_CPUFREQ=1 AFL_I_DONT_CARE_ABOUT_MISSING_CRASHES=1 AFL_NO_UI=1 AFL_NO_AFFINITY=1

pids=()
for h in $harnesses; do
	out=$B/out/$h
	rm -rf "$out"
	mkdir -p "$out"
	echo "fuzz: $h for ${SECONDS_EACH}s (log: $out/afl.log)"
	afl-fuzz -i "tests/fuzz/seeds/$h" -o "$out" -V "$SECONDS_EACH" -m none -t "$TIMEOUT" \
		-- "$B/tests/fuzz/fuzz_$h" @@ >"$out/afl.log" 2>&1 &
	pids+=($!)
done
for p in "${pids[@]}"; do wait "$p"; done

stat_of() { # file key
	sed -n "s/^$2 *: *//p" "$1" | head -1
}
bad=0
printf '\n%-8s %12s %10s %8s %8s %8s %9s\n' harness executions "execs/s" corpus crashes hangs "wall (s)"
for h in $harnesses; do
	f=$B/out/$h/default/fuzzer_stats
	if [ ! -f "$f" ]; then
		printf '%-8s did not run: see %s\n' "$h" "$B/out/$h/afl.log"
		tail -5 "$B/out/$h/afl.log" | sed 's/^/    /'
		bad=1
		continue
	fi
	crashes=$(stat_of "$f" saved_crashes)
	[ -n "$crashes" ] || crashes=$(stat_of "$f" unique_crashes)
	hangs=$(stat_of "$f" saved_hangs)
	[ -n "$hangs" ] || hangs=$(stat_of "$f" unique_hangs)
	start=$(stat_of "$f" start_time)
	last=$(stat_of "$f" last_update)
	printf '%-8s %12s %10s %8s %8s %8s %9s\n' "$h" "$(stat_of "$f" execs_done)" "$(stat_of "$f" execs_per_sec)" \
		"$(stat_of "$f" corpus_count)" "$crashes" "$hangs" "$((last - start))"
	[ "${crashes:-1}" = 0 ] && [ "${hangs:-1}" = 0 ] || bad=1
done
echo "(under AddressSanitizer, built with $AFLCC; findings in $B/out/<harness>/default/crashes and hangs)"
exit $bad
