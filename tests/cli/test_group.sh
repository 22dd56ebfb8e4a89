# test_group.sh - `splitroi group`: usage and input errors, exit codes, nothing half-written.
. "$(dirname "$0")/lib.sh"

H='subject,parcel,split,define_runs,measure_task,measure_runs,effect,value,n_voxels'
# table LABEL VALUE...: writes $TMP/res/sub-LABEL/responses.csv with one memory row per value
table() {
	local lab=$1 v i=1
	shift
	mkdir -p "$TMP/res/sub-$lab"
	{
		echo "$H"
		for v in "$@"; do
			echo "$lab,A$i,all,1+2,memory,1+2,familiar,$v,10"
			i=$((i + 1))
		done
	} >"$TMP/res/sub-$lab/responses.csv"
}

run "$SPLITROI" group
expect_status 2 "no arguments is a usage error"
run "$SPLITROI" help group
expect_status 0 "help group succeeds"
expect_out "usage: splitroi group OUT" "help shows the usage line"

run "$SPLITROI" group "$TMP/nowhere"
expect_status 1 "a missing OUT folder is bad input"
expect_err "nowhere: no such folder" "the missing folder is named"
touch "$TMP/afile"
run "$SPLITROI" group "$TMP/afile"
expect_status 1 "OUT that is a file is bad input"
expect_err "afile: not a folder" "says it is not a folder"
mkdir -p "$TMP/empty"
run "$SPLITROI" group "$TMP/empty"
expect_status 1 "OUT without sub- folders is bad input"
expect_err "no sub-<label> folders" "says no subject folders were found"
mkdir -p "$TMP/empty/sub-01"
run "$SPLITROI" group "$TMP/empty"
expect_status 1 "no readable table at all is bad input"
expect_err "no subject's responses.csv" "says no table could be read"

table 01 0.5 1.0
table 02 0.7 1.2
table 03 0.2 0.9
run "$SPLITROI" group "$TMP/res" --quiet
expect_status 0 "three good tables"
[ -s "$TMP/res/group.csv" ] && ok "group.csv written" || notok "group.csv written"
cp "$TMP/res/group.csv" "$TMP/group.before"

run "$SPLITROI" group "$TMP/res" --alpha 1.5
expect_status 2 "--alpha out of range is a usage error"
expect_err "alpha" "the option is named"
run "$SPLITROI" group "$TMP/res" --alpha 0
expect_status 2 "--alpha 0 is a usage error"
run "$SPLITROI" group "$TMP/res" --paired familiar
expect_status 2 "--paired without a colon is a usage error"
expect_err "EFFECT:EFFECT" "says what --paired wants"
run "$SPLITROI" group "$TMP/res" --paired familiar:familiar
expect_status 2 "--paired of an effect with itself is a usage error"
run "$SPLITROI" group "$TMP/res" --paired familar:novel
expect_status 1 "--paired naming an effect no table has is bad input"
expect_err "no effect 'familar'.*did you mean 'familiar'" "suggests the near effect"
run "$SPLITROI" group "$TMP/res" --alhpa 0.1
expect_status 2 "unknown option exits 2"
expect_err "did you mean '--alpha'" "suggests the near option"
run "$SPLITROI" group "$TMP/res" "$TMP/res"
expect_status 2 "two positional arguments is a usage error"

printf 'who\twhy\n01\tx\n' >"$TMP/excl.tsv"
run "$SPLITROI" group "$TMP/res" --exclude "$TMP/excl.tsv"
expect_status 1 "an exclusion list without a subject column is bad input"
expect_err "excl.tsv: no column 'subject'" "names the file and the column"
run "$SPLITROI" group "$TMP/res" --exclude "$TMP/none.tsv"
expect_status 1 "a missing exclusion list is bad input"
expect_err "none.tsv" "names the missing exclusion list"

# A non-numeric value: file, line and column named; exit 1; the old group.csv untouched.
table 02 0.7 abc
run "$SPLITROI" group "$TMP/res"
expect_status 1 "a non-numeric value is bad input"
expect_err "sub-02/responses.csv: line 3, column 8 \(value\): 'abc' is not a number" \
	"the message names file, line and column"
cmp -s "$TMP/res/group.csv" "$TMP/group.before" && ok "a failed run leaves group.csv as it was" \
	|| notok "a failed run leaves group.csv as it was"
ls "$TMP/res" | grep -q -v -E '^(sub-0[123]|(group|group_subjects|responses_wide|responses_wide_columns)\.(csv|json))$' \
	&& notok "no temporary files left: $(ls "$TMP/res")" || ok "no temporary files left behind"

table 02 0.7 1.2
sed -i 's/^02,A2/03,A2/' "$TMP/res/sub-02/responses.csv"
run "$SPLITROI" group "$TMP/res"
expect_status 1 "a row of another subject is bad input"
expect_err "sub-02/responses.csv: line 3, column 1 \(subject\): '03'" "names the line of the foreign row"

table 02 0.7 1.2
echo "02,A1,all,1+2,memory,1+2,familiar,0.3,10" >>"$TMP/res/sub-02/responses.csv"
run "$SPLITROI" group "$TMP/res"
expect_status 1 "a repeated row is bad input"
expect_err "sub-02/responses.csv: line 4: a second row for parcel 'A1'" "names the repeated row's line"

table 02 0.7 1.2
sed -i 's/,value,/,val,/' "$TMP/res/sub-02/responses.csv"
run "$SPLITROI" group "$TMP/res"
expect_status 1 "a table without a value column is bad input"
expect_err "sub-02/responses.csv: no column 'value'" "names the missing column"

# A missing table: the rest is still written, marked incomplete, exit 0.
rm "$TMP/res/sub-02/responses.csv"
run "$SPLITROI" group "$TMP/res"
expect_status 0 "a missing table does not stop the group step"
expect_err "sub-02/responses.csv: no such file" "the missing table is named"
expect_out "INCOMPLETE, 1 missing: 02" "the summary says the group is incomplete"
grep -q ',incomplete' "$TMP/res/group.csv" && ok "group.csv rows carry the incomplete marker" \
	|| notok "group.csv rows carry the incomplete marker"
grep -q '^sub-02,missing,' "$TMP/res/group_subjects.csv" && ok "group_subjects.csv lists 02 as missing" \
	|| notok "group_subjects.csv lists 02 as missing"

# An unreadable table (here a folder where the file should be): listed, left out, exit 0.
mkdir -p "$TMP/res/sub-04/responses.csv"
run "$SPLITROI" group "$TMP/res"
expect_status 0 "an unreadable table does not stop the group step"
grep -q '^sub-04,unreadable,' "$TMP/res/group_subjects.csv" && ok "group_subjects.csv lists 04 as unreadable" \
	|| notok "group_subjects.csv lists 04 as unreadable: $(cat "$TMP/res/group_subjects.csv")"
expect_out "INCOMPLETE, 2 missing: 02 04" "the summary counts the unreadable subject as missing"
