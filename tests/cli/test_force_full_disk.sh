# test_force_full_disk.sh - a --force redo that cannot write (a full disk, simulated by a file
# size limit) keeps the earlier complete outputs of every subject, and the combined and group
# tables never disagree.
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
analyzed_study basic
mkdir -p "$TMP/before"
cp -r results/. "$TMP/before/"
# every write of more than 4 KiB fails with EFBIG, as on a full disk (SIGXFSZ ignored)
( trap '' XFSZ; ulimit -f 4; "$SPLITROI" analyze study.ini --force --quiet --no-report ) >"$TMP/out" 2>"$TMP/err"
rc=$?
expect_status 1 "full disk: the --force redo fails"
same=1
for f in sub-01/responses.csv sub-01/run.json sub-02/responses.csv sub-02/run.json; do
	cmp -s "results/$f" "$TMP/before/$f" || { same=0; echo "# changed or lost: $f"; }
done
[ $same = 1 ] && ok "full disk: the earlier complete outputs of each subject stay in place" || notok "full disk: the redo lost complete outputs"
"$PY" - results <<'PYEOF' && ok "full disk: the combined table and the group tables agree" || notok "full disk: combined and group tables disagree"
import csv, sys
d = sys.argv[1]
subs = {r['subject'] for r in csv.DictReader(open(d + '/responses.csv'))}
used = {r['subject'] for r in csv.DictReader(open(d + '/group_subjects.csv')) if r['status'] == 'used'}
assert subs == used, (subs, used)
n = {r['n'] for r in csv.DictReader(open(d + '/group.csv')) if r['parcel'] == 'left_core'}
assert n == {str(len(subs))}, (n, subs)
PYEOF
ls -a results results/sub-01 | grep -q 'tmp' && notok "full disk: staging or temporary files left: $(ls -a results results/sub-01 | grep tmp)" || ok "full disk: nothing temporary left behind"
run "$SPLITROI" analyze study.ini --quiet --no-report
expect_status 0 "full disk: a rerun with space succeeds"
cmp -s results/responses.csv "$TMP/before/responses.csv" && ok "full disk: the rerun's tables equal the first run's" || notok "full disk: the rerun's tables differ"
