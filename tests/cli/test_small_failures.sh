# test_small_failures.sh - the small failures a hostile review found: a huge effect factor
# passes check, stale temporary files of dead processes stay, the report of a study where
# every subject failed, "write failed" without a reason, a TSV with 100k columns is slow.
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
HERE=$(cd "$(dirname "$0")/.." && pwd)
"$PY" "$HERE/py/make_study.py" "$TMP/s" basic >/dev/null || { notok "make_study.py failed"; exit 1; }
cd "$TMP/s" || exit 1
sed 's/effects = melody, scrambled, melody - scrambled/effects = melody, 1e308*melody - scrambled/' study.ini >huge.ini
run "$SPLITROI" check huge.ini
expect_status 1 "effect factor 1e308: check fails"
expect_err "huge.ini.*1e308.*beyond" "effect factor 1e308: check names the study file and the factor"

run "$SPLITROI" analyze study.ini --quiet --no-report
expect_status 0 "the study runs"
dead=999999
while kill -0 $dead 2>/dev/null; do dead=$((dead - 1)); done
touch results/.responses.csv.tmp.$dead.0 results/sub-01/.report.html.tmp.$dead.3
mkdir -p results/.sub-01.tmp.$dead/maps
touch -d '2 hours ago' results/.responses.csv.tmp.$dead.0 results/sub-01/.report.html.tmp.$dead.3 results/.sub-01.tmp.$dead
touch results/.group.csv.tmp.$$.0    # a live process's (this shell's) temporary file stays
run "$SPLITROI" analyze study.ini --quiet --no-report --force
left=$(ls -a results results/sub-01 | grep "tmp\.$dead")
[ -z "$left" ] && ok "stale temporary files and staging folders of a dead process are removed" || notok "stale files left: $left"
[ -e results/.group.csv.tmp.$$.0 ] && ok "a live process's temporary file is left alone" || notok "a live process's temporary file was removed"
rm -f results/.group.csv.tmp.$$.0

# "write failed" says why (a file size limit stands in for a full disk)
( trap '' XFSZ; ulimit -f 2; "$SPLITROI" report results ) >"$TMP/out" 2>"$TMP/err"
rc=$?
expect_status 1 "a report that cannot be written fails"
expect_err "(write failed|cannot).*: File too large" "a failed write gives the reason"

# every subject fails: the report still runs cleanly (no qsort on a null array)
for f in data/sub-0*/func/*tones_run-01_events.tsv; do printf 'onset\tduration\n1\n' >"$f"; done
run "$SPLITROI" analyze study.ini --quiet --force
expect_status 1 "every subject fails: exit 1"
grep -q "runtime error" "$TMP/err" && notok "every subject fails: undefined behaviour: $(grep 'runtime error' "$TMP/err" | head -1)" || ok "every subject fails: no undefined behaviour in the report"

# a TSV with 100000 columns is read in linear time
"$PY" - "$TMP/wide.tsv" <<'PYEOF'
import sys
n = 100000
with open(sys.argv[1], 'w') as f:
    f.write('onset\tduration\ttrial_type\t' + '\t'.join('c%d' % i for i in range(n)) + '\n')
    f.write('1\t1\tmelody\t' + '\t'.join('0' for i in range(n)) + '\n')
PYEOF
cp data/sub-01/func/sub-01_task-tones_run-02_events.tsv "$TMP/keep.tsv"
cp "$TMP/wide.tsv" data/sub-01/func/sub-01_task-tones_run-02_events.tsv
start=$(date +%s.%N)
run "$SPLITROI" check study.ini
secs=$("$PY" -c "import sys; print('%.2f' % (float(sys.argv[2]) - float(sys.argv[1])))" "$start" "$(date +%s.%N)")
"$PY" -c "import sys; sys.exit(0 if float(sys.argv[1]) < 3 else 1)" "$secs" && ok "a TSV with 100000 columns is read quickly ($secs s)" || notok "a TSV with 100000 columns took $secs s"
