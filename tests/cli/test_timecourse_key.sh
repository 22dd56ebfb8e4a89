# test_timecourse_key.sh - [model] timecourse_window: range errors name the line; a window too
# long for the runs leaves the time courses empty with one warning per run, not a failure.
. "$(dirname "$0")/lib.sh"
"$SPLITROI" simulate --out "$TMP/s" --subjects 1 --runs 2 --seed 3 --quiet || { notok "simulate failed"; exit 1; }
cd "$TMP/s" || exit 1
cp study.ini study.orig
for bad in 0 -3 121 abc; do
	sed "s/^drift_cutoff = 128/drift_cutoff = 128\ntimecourse_window = $bad/" study.orig >study.ini
	run "$SPLITROI" check study.ini
	expect_status 1 "timecourse_window = $bad is refused"
	expect_err "study.ini: line [0-9]+: timecourse_window: '$bad' is not a number of seconds in \(0, 120\]" \
		"the message names file, line and the allowed range ($bad)"
done
sed "s/^drift_cutoff = 128/drift_cutoff = 128\ntimecourse_window = 120/" study.orig >study.ini
run "$SPLITROI" analyze study.ini --quiet
expect_status 0 "a window too long for 120 volumes still analyzes"
expect_err "volumes cannot fit the [0-9]+ columns of the time-course model" "and says why the time courses are empty"
n=$(grep -c "cannot fit" "$TMP/err")
[ "$n" -eq 3 ] && ok "one warning per split and task (3), not per parcel" || notok "expected 3 warnings, got $n"
if awk -F, 'NR == 1 { for (i = 1; i <= NF; i++) if ($i == "value") c = i } NR > 1 && $c != "" { bad = 1 } END { exit bad }' results/sub-01/timecourses.csv; then
	ok "every time-course value is empty"
else
	notok "every time-course value is empty"
fi
cp study.orig study.ini
run "$SPLITROI" analyze study.ini --quiet
expect_status 0 "the default window analyzes"
nb=$(awk -F, 'NR == 1 { for (i = 1; i <= NF; i++) if ($i == "time") c = i } NR > 1 { print $c }' results/sub-01/timecourses.csv | sort -un | tr '\n' ' ')
[ "$nb" = "0 2 4 6 8 10 12 14 16 18 " ] && ok "default 20 s at TR 2 s: bins 0..18 s" || notok "bins: $nb"
run "$SPLITROI" check study.ini
expect_out "time courses: bins of one TR from 0 to 20 s after onset" "check states the time-course window (default 20 s)"
