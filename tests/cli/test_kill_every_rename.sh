# test_kill_every_rename.sh - analyze killed (SIGKILL) at a rename, then rerun without the kill,
# must end with exactly the outputs of an uninterrupted run: every file byte for byte (times and
# process ids aside), no temporary file left, exit 0.
# The renames are counted on the reference run by tests/tools/renamekill_shim.c (LD_PRELOAD);
# kill N stops the process at the Nth rename, before it is done. At SPLITROI_TEST_LEVEL=full
# every rename is tried, and once more after the last one; otherwise a fixed subset: the first
# and the last, every rename of the group step, every subject's swap into place, and every
# fourth of the rest. A dead process's temporary files are removed by a rerun only once they
# are a minute old (src/pipeline/outlock.h), so the test ages them before each rerun.
. "$(dirname "$0")/lib.sh"
BUILD=${BUILD:-build}
SHIM=$(cd "$(dirname "$SPLITROI")" && pwd)/tests/tools/renamekill_shim.so
[ -f "$SHIM" ] || SHIM=$PWD/$BUILD/tests/tools/renamekill_shim.so
if [ ! -f "$SHIM" ]; then
	notok "no rename shim at $SHIM (make builds it: $BUILD/tests/tools/renamekill_shim.so)"
	exit 1
fi
# an ASan build refuses a preloaded library ahead of its runtime unless told not to check
export ASAN_OPTIONS=${ASAN_OPTIONS:+$ASAN_OPTIONS:}verify_asan_link_order=0
LEVEL=${SPLITROI_TEST_LEVEL:-full}

# two subjects, two runs per task, 50 volumes: every step of a real study, under a second
S=$TMP/sim
run "$SPLITROI" simulate --out "$S" --subjects 2 --volumes 50 --runs 2 --quiet
expect_status 0 "a small simulated study"
cd "$S" || exit 1
ANALYZE=("$SPLITROI" analyze study.ini --jobs 1 --threads 1 --quiet --no-wait)

# reference: uninterrupted, with the shim listing every rename
run env LD_PRELOAD="$SHIM" SR_RENAME_LOG="$TMP/renames.txt" timeout 300 "${ANALYZE[@]}"
expect_status 0 "the uninterrupted reference run"
total=$(wc -l <"$TMP/renames.txt")
if [ "$total" -ge 10 ]; then
	ok "the reference run makes $total renames"
else
	notok "the reference run makes $total renames (the shim sees too few)"
	exit 1
fi
mv results "$TMP/ref"

# compare.py REF GOT: every file and folder of REF is in GOT and none more, and every file has
# the same bytes, but for what legitimately changes from run to run: the seconds a subject took
# (run.json), the minute a page was written (report pages), and in tables.json the fingerprints
# of the subjects' run.json (which hold those seconds): each is checked against its own folder's
# run.json instead. Lock files hold a pid and a time: compared by name only. One process for a
# whole comparison keeps the test within its time.
PY=${PYTHON:-/usr/bin/python3}
cat >"$TMP/compare.py" <<'PYEOF'
import json, os, re, sys, zlib

def listing(top):
    out = set()
    for d, dirs, files in os.walk(top):
        for n in dirs + files:
            out.add(os.path.relpath(os.path.join(d, n), top))
    return out

def canon(top, rel):
    b = open(os.path.join(top, rel), "rb").read()
    name = os.path.basename(rel)
    if name == "run.json":
        return re.sub(rb'\n *"seconds": [^\n]*', b"", b)
    if name.endswith(".html"):
        return re.sub(rb'<b class="date">[^<]*</b>', b'<b class="date">-</b>', b)
    if rel == "tables.json":
        doc = json.loads(b)
        for label, fp in doc.get("subjects", {}).items():
            try:
                r = open(os.path.join(top, "sub-" + label, "run.json"), "rb").read()
                want = "crc32 %d %08x" % (len(r), zlib.crc32(r))
            except OSError:
                want = "no run.json"
            doc["subjects"][label] = "matches" if fp == want else "%s, run.json is %s" % (fp, want)
        return json.dumps(doc, sort_keys=True).encode()
    return b

ref, got = sys.argv[1], sys.argv[2]
a, b = listing(ref), listing(got)
bad = 0
for rel in sorted(a - b):
    print("# missing: %s" % rel); bad = 1
for rel in sorted(b - a):
    print("# not in the reference: %s" % rel); bad = 1
for rel in sorted(a & b):
    if os.path.isdir(os.path.join(ref, rel)) or os.path.basename(rel).startswith(".lock."):
        continue
    if canon(ref, rel) != canon(got, rel):
        print("# content differs: %s" % rel); bad = 1
sys.exit(bad)
PYEOF
nref=$(cd "$TMP/ref" && find . -mindepth 1 | wc -l)
# the comparer itself must see a difference: one changed byte in a copy of the reference
cp -r "$TMP/ref" "$TMP/ref2"
printf 'x' >>"$TMP/ref2/group.csv"
if "$PY" "$TMP/compare.py" "$TMP/ref" "$TMP/ref2" >/dev/null; then
	notok "the comparison misses one byte added to group.csv"
else
	ok "the comparison sees one byte added to group.csv"
fi
cp "$TMP/ref/group.csv" "$TMP/ref2/group.csv"
"$PY" "$TMP/compare.py" "$TMP/ref" "$TMP/ref2" && ok "the comparison passes a copy of the reference" ||
	notok "the comparison fails a copy of the reference"
rm -rf "$TMP/ref2"

# which kills: all at full; otherwise first, last, group step, subject swaps, every fourth
picks=()
for n in $(seq 1 "$total"); do
	line=$(sed -n "${n}p" "$TMP/renames.txt")
	to=${line##*$'\t'}
	if [ "$LEVEL" = full ] || [ "$n" = 1 ] || [ "$n" = "$total" ] || [ $((n % 4)) = 0 ] ||
		[[ "$line" == *"/.tables.tmp."* || "$to" == */tables.json ]] ||
		[[ "$to" =~ /results/sub-[A-Za-z0-9]+$ ]]; then
		picks+=("$n")
	fi
done
whens=()
for n in "${picks[@]}"; do whens+=("$n:before"); done
[ "$LEVEL" = full ] && whens+=("$total:after")
echo "# level $LEVEL: ${#whens[@]} kills of $total renames"

failed=0 tried=0
for w in "${whens[@]}"; do
	n=${w%%:*} when=${w##*:}
	what=$(sed -n "${n}p" "$TMP/renames.txt" | cut -f3)
	what=${what#"$S/"}
	rm -rf results
	# (the shell's own "Killed" line goes to a log, not into the test's output)
	{ run env LD_PRELOAD="$SHIM" SR_KILL_RENAME="$n" SR_KILL_WHEN="$when" timeout 300 "${ANALYZE[@]}"; } 2>>"$TMP/shell.log"
	if [ "$rc" -ne 137 ]; then
		notok "kill $when rename $n ($what): the run was not killed (exit $rc)"
		failed=$((failed + 1))
		continue
	fi
	# a rerun removes a dead process's temporary files once they are a minute old
	# (outlock_clean_stale); the kill was just now, so they are made older
	find results -name '.*.tmp.*' -exec touch -h -d '2 minutes ago' {} +
	run timeout 300 "${ANALYZE[@]}"
	tried=$((tried + 1))
	if [ "$rc" -ne 0 ]; then
		notok "kill $when rename $n ($what): the rerun exits $rc: $(head -c 300 "$TMP/err")"
		failed=$((failed + 1))
		continue
	fi
	left=$(find results -name '.*.tmp.*' | head -5)
	if [ -n "$left" ]; then
		notok "kill $when rename $n ($what): temporary files left after the rerun: $left"
		failed=$((failed + 1))
		continue
	fi
	if ! "$PY" "$TMP/compare.py" "$TMP/ref" results; then
		notok "kill $when rename $n ($what): the rerun's outputs differ from the uninterrupted run"
		failed=$((failed + 1))
	fi
done
if [ "$failed" = 0 ] && [ "$tried" = "${#whens[@]}" ]; then
	ok "killed at $tried of $total renames ($LEVEL): every rerun exits 0, leaves no temporary file and matches the uninterrupted run's $nref files and folders"
fi
