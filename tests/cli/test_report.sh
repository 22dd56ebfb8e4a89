#!/usr/bin/env bash
# test_report.sh - `splitroi report`: self-contained pages whose tables equal the CSVs, and that render.
. "$(dirname "$0")/lib.sh"
HERE=$(cd "$(dirname "$0")" && pwd)
PY=${PYTHON:-/usr/bin/python3}

# usage errors and bad input
run "$SPLITROI" report
expect_status 2 "report without a folder is a usage error"
run "$SPLITROI" report "$TMP/nowhere"
expect_status 1 "report on a missing folder fails"
expect_err "nowhere: not a folder" "the message names the folder"
mkdir -p "$TMP/empty"
run "$SPLITROI" report "$TMP/empty"
expect_status 1 "report on a folder without results fails"
expect_err "holds no results" "the message says there is nothing to report"
[ ! -e "$TMP/empty/report.html" ] && ok "no page is written for an empty folder" || notok "a page was written for an empty folder"

# a hand-made results folder (odd-even), checked against its CSVs and maps
if ! "$PY" -c "import nibabel, numpy" 2>/dev/null; then
	echo "skip - $PY lacks nibabel/numpy: no report fixture"
	exit 0
fi
"$PY" "$HERE/report_fixture.py" "$TMP/oe" || notok "fixture builds"
run "$SPLITROI" report "$TMP/oe"
expect_status 0 "report on an odd-even results folder"
expect_out "report: .*report.html \(3 of 3 subject pages\)" "summary line names the page"
"$PY" "$HERE/report_check.py" "$TMP/oe" fixture
ls "$TMP"/oe/*.tmp* "$TMP"/oe/sub-*/*.tmp* >/dev/null 2>&1 && notok "temporary files left" || ok "no temporary files left"

# leave-one-out: Dice is the mean over pairs of folds
"$PY" "$HERE/report_fixture.py" "$TMP/loo" --loo || notok "leave-one-out fixture builds"
run "$SPLITROI" report --quiet "$TMP/loo"
expect_status 0 "report on a leave-one-out results folder"
[ ! -s "$TMP/out" ] && ok "--quiet prints nothing" || notok "--quiet printed: $(head -c 200 "$TMP/out")"
"$PY" "$HERE/report_check.py" "$TMP/loo"

# a subject whose maps are gone: the others still get pages, the exit status says it failed
rm -rf "$TMP/oe/sub-02/func"
run "$SPLITROI" report "$TMP/oe"
expect_status 1 "a subject without maps makes report fail"
expect_err "sub-02: .*func: no maps to show" "the message names the subject and the missing maps"
[ -s "$TMP/oe/report.html" ] && ok "the study page is still written" || notok "the study page is missing"
[ ! -e "$TMP/oe/sub-02/report.html" ] && ok "the failed subject's old page is removed" || notok "a stale sub-02 page is left"
grep -q 'href="sub-02/report.html"' "$TMP/oe/report.html" && notok "the study page links to the missing sub-02 page" || ok "no link to the missing page"
grep -q 'href="sub-01/report.html"' "$TMP/oe/report.html" && ok "the other subjects are still linked" || notok "sub-01 lost its link"

# damaged inputs: each named in a message or on the page, never a crash
"$PY" "$HERE/report_fixture.py" "$TMP/bad" || notok "fixture builds"
printf '{"subject": "01",\n  "inputs": [1,\n' >"$TMP/bad/sub-01/run.json"
printf 'tx\tty\n1\t2\n' >"$TMP/bad/sub-02/conf_tones_1.tsv"
echo "melody" >"$TMP/bad/sub-03/design/task-tones_run-1.csv"
run "$SPLITROI" report "$TMP/bad"
expect_status 1 "a damaged run record makes report fail"
expect_err "sub-01/run.json: line 3" "the message names the run record and its line"
grep -q "conf_tones_1.tsv: no column tz" "$TMP/bad/sub-02/report.html" && ok "a confounds file without the motion columns is named on the page" || notok "missing motion columns not reported"
grep -q "task-tones_run-1.csv: no rows" "$TMP/bad/sub-03/report.html" && ok "an empty design matrix is named on the page" || notok "empty design not reported"
# a table that cannot be read becomes a note naming the file and line; the rest of the page stays
printf 'a,b\n"unclosed\n' >"$TMP/bad/sub-02/design/task-tones_run-2.csv"
printf 'tx\tty\n"1\t2\n' >"$TMP/bad/sub-03/conf_tones_1.tsv"
printf 'subject,parcel\n"x\n' >"$TMP/bad/sub-03/responses.csv"
run "$SPLITROI" report "$TMP/bad"
for f in "sub-02/design/task-tones_run-2.csv" "sub-03/conf_tones_1.tsv" "sub-03/responses.csv"; do
	grep -q "${f}: line 2: a quoted field is never closed</p>" "$TMP/bad/${f%%/*}/report.html" &&
		ok "an unreadable $f is a note on its page" || notok "no note for an unreadable $f"
done
grep -q "task-tones_run-1.csv: no rows" "$TMP/bad/sub-03/report.html" && ok "the page goes on past an unreadable table" || notok "the page stopped at an unreadable table"
printf 'subject,parcel\n"unclosed\n' >"$TMP/bad/responses.csv"
run "$SPLITROI" report "$TMP/bad"
expect_err "responses.csv: line 2" "a broken responses.csv is named with its line"

# rendering in headless Chromium (installed only at the full level, as root)
CHR=$(command -v chromium || command -v chromium-browser || true)
if [ -z "$CHR" ] && [ "$(id -u)" = 0 ] && [ "${SPLITROI_TEST_LEVEL:-quick}" = full ]; then
	DEBIAN_FRONTEND=noninteractive apt-get install -y --no-install-recommends chromium >"$TMP/apt.log" 2>&1
	CHR=$(command -v chromium || true)
fi
shot() { # page png
	timeout 120 "$CHR" --headless --no-sandbox --disable-gpu --disable-background-networking \
		--disable-component-update --disable-sync --no-first-run --disable-quic \
		--enable-logging=stderr --v=0 --user-data-dir="$TMP/chr" --screenshot="$2" \
		--window-size=1200,2000 "file://$1" >"$TMP/chr.out" 2>"$TMP/chr.err"
}
if [ -z "$CHR" ]; then
	echo "skip - chromium not installed (installed only as root with SPLITROI_TEST_LEVEL=full)"
else
	"$SPLITROI" report --quiet "$TMP/loo" >/dev/null 2>&1
	shot "$TMP/loo/report.html" "$TMP/study.png"
	[ -s "$TMP/study.png" ] && ok "chromium renders the study page" || notok "no screenshot of the study page: $(tail -3 "$TMP/chr.err")"
	grep -Eq "Uncaught|ERROR:CONSOLE" "$TMP/chr.err" && notok "console errors on the study page: $(grep -E 'Uncaught|CONSOLE' "$TMP/chr.err" | head -3)" || ok "no console errors on the study page"
	[ -s "$TMP/study.png" ] && "$PY" "$HERE/shot_check.py" "$TMP/study.png" "study page, first chart" 60 340 520 600 \
		"!study page, right margin beside the charts" 900 300 1150 600
	shot "$TMP/loo/sub-01/report.html" "$TMP/sub.png"
	[ -s "$TMP/sub.png" ] && ok "chromium renders a subject page" || notok "no screenshot of the subject page"
	grep -Eq "Uncaught|ERROR:CONSOLE" "$TMP/chr.err" && notok "console errors on the subject page" || ok "no console errors on the subject page"
	[ -s "$TMP/sub.png" ] && "$PY" "$HERE/shot_check.py" "$TMP/sub.png" "subject page, first fROI slices" 50 640 460 790
fi

# the real pipeline on a partial run: 8 subjects simulated, 3 analyzed (the group step is incomplete);
# a binary without analyze or simulate fails here, it does not skip
if true; then
	run "$SPLITROI" simulate --out "$TMP/s" --subjects 8 --volumes 60 --runs 2 --quiet
	expect_status 0 "simulate a small study of 8 subjects"
	STUDY=$(ls "$TMP"/s/*.ini 2>/dev/null | head -1)
	run "$SPLITROI" analyze "$STUDY" --out "$TMP/res" --subjects 01,02,03 --quiet
	expect_status 0 "analyze 3 of them (writes the report)"
	[ -s "$TMP/res/report.html" ] && ok "analyze wrote report.html" || notok "analyze wrote no report.html"
	"$PY" "$HERE/report_check.py" "$TMP/res"
	if [ -n "$CHR" ]; then
		VER=$("$SPLITROI" --version | awk '{print $2}')
		"$PY" "$HERE/report_partial.py" "$TMP/res" "$TMP/s/data" "$CHR" "$TMP" "$VER"
	fi
	# group --paired rewrites the report, so the paired rows show on the page
	run "$SPLITROI" group "$TMP/res" --paired melody:scrambled --quiet
	expect_status 0 "group --paired on the results folder"
	grep -q "<td>paired</td>" "$TMP/res/report.html" && ok "group --paired rewrote the report (paired rows shown)" \
		|| notok "the report does not show group --paired's rows"
	rm -rf "$TMP/res2"
	run "$SPLITROI" analyze "$STUDY" --out "$TMP/res2" --subjects 01 --quiet --no-report
	[ ! -e "$TMP/res2/report.html" ] && ok "--no-report writes no report" || notok "--no-report still wrote report.html"
fi
