# test_group_unit.sh - the combined and group tables are one unit with a completion record
# (OUT/tables.json): a rerun after a kill in the group step, or after a table was damaged,
# redoes the unit; a consistent unit is left alone.
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
analyzed_study basic
[ -s results/tables.json ] && ok "the tables' completion record is written" || notok "no results/tables.json"
for f in responses.csv group.csv group_subjects.csv responses_wide.csv responses_wide_columns.csv; do
	cp "results/$f" "$TMP/$f.ref"
done
# killed after group.csv: the other group tables were never written
rm -f results/group_subjects.csv results/responses_wide.csv results/responses_wide_columns.csv
run "$SPLITROI" analyze study.ini --quiet --no-report
expect_status 0 "group step killed: the rerun succeeds"
same=1
for f in responses.csv group.csv group_subjects.csv responses_wide.csv responses_wide_columns.csv; do
	cmp -s "results/$f" "$TMP/$f.ref" || { same=0; echo "# differs or missing: $f"; }
done
[ $same = 1 ] && ok "group step killed: the rerun redoes the group tables, byte-identical" || notok "group step killed: tables not repaired"
# a table edited in place with its time restored: the record does not match, so the unit is redone
t=$(stat -c %y results/group.csv)
sed -i '2d' results/group.csv
touch -d "$t" results/group.csv
run "$SPLITROI" analyze study.ini --quiet --no-report
cmp -s results/group.csv "$TMP/group.csv.ref" && ok "damaged group table: redone" || notok "damaged group table left as it was"
# consistent: left alone (times unchanged)
before=$(stat -c %Y.%y results/group.csv results/responses.csv)
run "$SPLITROI" analyze study.ini --no-report
expect_err "tables left as they are" "consistent tables: the rerun says so"
[ "$before" = "$(stat -c %Y.%y results/group.csv results/responses.csv)" ] && ok "consistent tables: not rewritten" || notok "consistent tables were rewritten"
ls -a results | grep -q '\.tmp' && notok "staging left behind: $(ls -a results | tr '\n' ' ')" || ok "no staging files left behind"
# the summary names the folder the tables were moved to, not the staging folder they were written in
run "$SPLITROI" analyze study.ini --no-report --force
expect_status 0 "a redo that prints its summary"
expect_out "^wrote $PWD/results/group\.csv, group_subjects\.csv" "the 'wrote' line names OUT/group.csv"
grep -q '\.tables\.tmp\.' "$TMP/out" && notok "the summary names the staging folder: $(grep -m1 tables.tmp "$TMP/out")" || ok "the summary does not name the staging folder"
