#!/usr/bin/env bash
# demo.sh - makes the demo study (invented auditory data, 8 subjects, small grid) and runs the whole job on it.
# Usage: tools/demo.sh [BINARY]   (make demo passes build/splitroi); DEMO_DIR overrides the folder (demo).
set -u
BIN=${1:-build/splitroi}
OUT=${DEMO_DIR:-demo}
start=$(date +%s)

if [ ! -x "$BIN" ]; then
	echo "demo: no binary at $BIN (run make first)" >&2
	exit 1
fi
# replace only an earlier demo, never a folder of someone else's
if [ -e "$OUT" ]; then
	if [ -f "$OUT/truth.csv" ] && [ -f "$OUT/study.ini" ] && [ -d "$OUT/data" ]; then
		rm -rf "$OUT"
	else
		echo "demo: $OUT exists and is not an earlier demo; move it away or set DEMO_DIR" >&2
		exit 1
	fi
fi

echo "== simulating the demo study into $OUT/"
"$BIN" simulate --out "$OUT" --subjects 8 --grid small --seed 1 --quiet || exit 1

has() { "$BIN" help "$1" >/dev/null 2>&1; }
if has check; then
	echo "== checking $OUT/study.ini"
	# the full listing goes to a file; only its verdict is shown unless it fails
	if "$BIN" check "$OUT/study.ini" >"$OUT/check.txt" 2>&1; then
		tail -1 "$OUT/check.txt" | sed 's/^/   /'
	else
		cat "$OUT/check.txt"
		exit 1
	fi
else
	echo "== (this build has no check command; skipped)"
fi
ran_analyze=0
if has analyze; then
	echo "== analyzing (log: $OUT/analyze.log)"
	if ! "$BIN" analyze "$OUT/study.ini" >"$OUT/analyze.log" 2>&1; then
		tail -20 "$OUT/analyze.log"
		exit 1
	fi
	ran_analyze=1
else
	echo "== (this build has no analyze command; skipped)"
fi
if [ "$ran_analyze" -eq 1 ] && has group; then
	echo "== group statistics (log: $OUT/group.log)"
	if ! "$BIN" group "$OUT/results" >"$OUT/group.log" 2>&1; then
		tail -20 "$OUT/group.log"
		exit 1
	fi
fi

echo
if [ -f "$OUT/results/group.csv" ]; then
	echo "== estimated group means next to the truth (percent signal change, mean over subjects)"
	awk -F, 'FNR == NR { if (FNR > 1) { k = $3 "|" $2 "|" $4; s[k] += $5; n[k]++ } next }
		FNR == 1 { for (i = 1; i <= NF; i++) c[$i] = i
			printf "  %-18s %-8s %-18s %-15s %3s %8s %8s\n", "parcel", "task", "effect", "split", "n", "mean", "truth"
			next }
		$c["split"] ~ /:mean$|^all$/ {
			k = $c["measure_task"] "|" $c["parcel"] "|" $c["effect"]
			printf "  %-18s %-8s %-18s %-15s %3s %8.3f %8.3f\n", $c["parcel"], $c["measure_task"],
				$c["effect"], $c["split"], $c["n"], $c["mean"], (k in n) ? s[k] / n[k] : 0 }' \
		"$OUT/truth.csv" "$OUT/results/group.csv"
else
	echo "== true effects (mean over subjects, percent signal change; truth.csv)"
	awk -F, 'NR > 1 { k = $3 " " $2 " " $4; s[k] += $5; n[k]++ }
		END { for (k in s) printf "  %-45s %7.3f\n", k, s[k] / n[k] }' "$OUT/truth.csv" | sort
fi
echo
echo "files:"
echo "  dataset      $OUT/data"
echo "  parcels      $OUT/parcels.nii.gz, $OUT/parcels.tsv"
echo "  study file   $OUT/study.ini"
echo "  truth        $OUT/truth.csv"
[ -f "$OUT/check.txt" ] && echo "  check        $OUT/check.txt"
[ -d "$OUT/results" ] && echo "  results      $OUT/results"
[ -f "$OUT/results/responses.csv" ] && echo "  tables       $OUT/results/responses.csv, $OUT/results/group.csv, $OUT/results/responses_wide.csv"
[ -f "$OUT/group.log" ] && echo "  group test   $OUT/group.log"
[ -f "$OUT/results/report.html" ] && echo "  report       $OUT/results/report.html (open it in a browser)"
echo "demo took $(($(date +%s) - start)) s"
