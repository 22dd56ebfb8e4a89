#!/usr/bin/env bash
# bench.sh - times `splitroi fit` on a 64x64x36x200 run beside plain inflation and a numpy fit, and its peak memory.
# Usage: tools/bench.sh path/to/splitroi
#   BENCH_REPEAT=N   best of N (default 3; the machine may be shared)
#   BENCH_STANDARD=1 also one standard-grid subject (91x109x91, 6 runs of 200 volumes) through analyze
#   BENCH_DIR=D BENCH_KEEP=1   work in D and keep it
# Targets (issue 18; wall times need an idle machine, CPU ratios do not):
#   fit wall <= 0.6 x gzip -dc and <= 1.3 x igzip -d; numpy / fit >= 10; RSS / raw <= 0.25;
#   smoothed fit <= 1.3 x unsmoothed; standard-grid subject CPU <= 0.6 x gzip's, peak <= 400 MB.
set -eu
BIN=$(realpath "${1:-build/splitroi}")
PY=${PYTHON:-/usr/bin/python3}
HERE=$(cd "$(dirname "$0")" && pwd)
DIR=${BENCH_DIR:-$(mktemp -d)}
mkdir -p "$DIR"
trap '[ -z "${BENCH_KEEP:-}" ] && rm -rf "$DIR"' EXIT
RUN=$DIR/sub-01_task-tones_run-1_bold.nii.gz
if [ ! -s "$RUN" ]; then
	echo "generating a 64x64x36x200 float32 run in $DIR ..."
	"$PY" "$HERE/benchdata.py" 64 64 36 200 "$RUN"
fi
raw=$((64 * 64 * 36 * 200 * 4))
REPEAT=${BENCH_REPEAT:-3}
have() { command -v "$1" >/dev/null 2>&1; }

# best[name] = smallest wall, cpu[name] = smallest user+sys, rss[name] = largest peak RSS (KB)
declare -A best cpu rss
record() { # name wall user sys rss_kb
	local c
	c=$(echo "$3 + $4" | bc -l)
	if [ -z "${best[$1]:-}" ] || [ "$(echo "$2 < ${best[$1]}" | bc -l)" = 1 ]; then best[$1]=$2; fi
	if [ -z "${cpu[$1]:-}" ] || [ "$(echo "$c < ${cpu[$1]}" | bc -l)" = 1 ]; then cpu[$1]=$c; fi
	if [ -z "${rss[$1]:-}" ] || [ "$5" -gt "${rss[$1]}" ]; then rss[$1]=$5; fi
}
timed() { # name command...
	local name=$1 w m u s
	shift
	/usr/bin/time -f '%e %M %U %S' -o "$DIR/time.txt" "$@"
	read -r w m u s < <(tail -1 "$DIR/time.txt")
	record "$name" "$w" "$u" "$s" "$m"
}
FIT=(fit "$RUN" --quiet --confounds "${RUN%_bold.nii.gz}_confounds.tsv"
	--confound-columns "trans_x trans_y trans_z rot_x rot_y rot_z" --effect "melody - scrambled")

for i in $(seq "$REPEAT"); do
	timed gzip sh -c 'gzip -dc "$1" >/dev/null' sh "$RUN"
	have igzip && timed igzip sh -c 'igzip -dc "$1" >/dev/null' sh "$RUN"
	have libdeflate-gunzip && timed libdeflate sh -c 'libdeflate-gunzip -dc "$1" >/dev/null' sh "$RUN"
	timed fit "$BIN" "${FIT[@]}" --out "$DIR/out" ${BENCH_FIT_ARGS:-}
	SPLITROI_INFLATER=zlib timed fitzlib "$BIN" "${FIT[@]}" --out "$DIR/outz" ${BENCH_FIT_ARGS:-}
	# the same fit with the runs smoothed (METHODS.md 2b) in the same streamed pass
	timed fitsmooth "$BIN" "${FIT[@]}" --out "$DIR/outs" --smoothing-fwhm 5 ${BENCH_FIT_ARGS:-}
	if [ "$i" -le 2 ]; then
		timed numpy "$PY" "$HERE/bench_ref.py" "$RUN" "${RUN%_bold.nii.gz}_events.tsv" \
			"${RUN%_bold.nii.gz}_confounds.tsv" 2 "$DIR/ref_t.npy"
	fi
done
agree=$("$PY" -c "
import sys, glob, numpy as np, nibabel as nib
a = np.load(sys.argv[1]); b = np.asarray(nib.load(glob.glob(sys.argv[2] + '/*_desc-melodyMinusScrambled_tstat.nii.gz')[0]).dataobj)
ok = np.isfinite(a) & np.isfinite(b)
print('%.6f' % np.corrcoef(a[ok], b[ok])[0, 1])" "$DIR/ref_t.npy" "$DIR/out")
same=different
cmp -s "$DIR/out/sub-01_task-tones_run-1_desc-melodyMinusScrambled_tstat.nii.gz" \
	"$DIR/outz/sub-01_task-tones_run-1_desc-melodyMinusScrambled_tstat.nii.gz" && same=identical

row() { printf '%-44s %9s %9s %9s\n' "$@"; }
num() { printf '%.3f' "$1"; }
ratio() { printf '%.2f' "$(echo "$1 / $2" | bc -l)"; }
echo
echo "one run, 64x64x36x200 float32 ($(du -m "$RUN" | cut -f1) MB compressed), best of $REPEAT (numpy: of $((REPEAT < 2 ? REPEAT : 2)))"
row "" "wall s" "CPU s" "peak MB"
show() { [ -n "${best[$1]:-}" ] && row "$2" "$(num "${best[$1]}")" "$(num "${cpu[$1]}")" "$(printf '%.0f' "$(echo "${rss[$1]} / 1024" | bc -l)")"; return 0; }
show gzip "gzip -dc > /dev/null"
show igzip "igzip -dc > /dev/null (ISA-L)"
show libdeflate "libdeflate-gunzip -dc (whole file in memory)"
show fit "splitroi fit (ISA-L inflater)"
show fitzlib "splitroi fit (SPLITROI_INFLATER=zlib)"
show fitsmooth "splitroi fit --smoothing-fwhm 5"
show numpy "numpy + nibabel OLS + AR(1) (rho bins 0.01)"
echo
echo "ratios                                            wall       CPU   target"
r2() { printf '%-44s %9s %9s   %s\n' "$1" "$(ratio "${best[$2]}" "${best[$3]}")" "$(ratio "${cpu[$2]}" "${cpu[$3]}")" "$4"; }
r2 "fit / gzip -dc" fit gzip "wall <= 0.6"
[ -n "${best[igzip]:-}" ] && r2 "fit / igzip -dc" fit igzip "wall <= 1.3"
r2 "numpy / fit" numpy fit ">= 10"
r2 "smoothed / unsmoothed fit" fitsmooth fit "<= 1.3"
r2 "fit with zlib / fit with ISA-L" fitzlib fit ""
printf '%-44s %9.3f %9s   %s\n' "peak RSS of fit / uncompressed run" "$(echo "${rss[fit]} * 1024 / $raw" | bc -l)" "" "<= 0.25 (largest of the runs: ${rss[fit]} KB of $((raw / 1024)) KB)"
echo "t maps of fit with ISA-L and with zlib: $same; correlation with numpy's t map: $agree"
echo "load average: $(cut -d' ' -f1-3 /proc/loadavg) on $(nproc) CPUs (wall times need an idle machine)"

bash "$HERE/bench_slurm.sh" "$BIN"

if [ "${BENCH_STANDARD:-0}" != 1 ]; then
	echo "standard-grid subject: skipped (BENCH_STANDARD=1 runs it: 6 runs of 91x109x91x200, about 1.5 GB)"
	exit 0
fi
STD=$DIR/std
if [ ! -s "$STD/study.ini" ]; then
	echo "simulating one standard-grid subject (6 runs of 200 volumes) in $STD ..."
	"$BIN" simulate --out "$STD" --subjects 1 --grid standard --volumes 200 --quiet
fi
mapfile -t runs < <(find "$STD/data" -name '*_bold.nii.gz' | sort)
timed stdgzip sh -c 'for f; do gzip -dc "$f" >/dev/null; done' sh "${runs[@]}"
have igzip && timed stdigzip sh -c 'for f; do igzip -dc "$f" >/dev/null; done' sh "${runs[@]}"
rm -rf "$STD/results"
timed stdanalyze "$BIN" analyze "$STD/study.ini" --jobs 1 --quiet
echo
echo "one standard-grid subject: ${#runs[@]} runs, $(du -cm "${runs[@]}" | tail -1 | cut -f1) MB compressed"
row "" "wall s" "CPU s" "peak MB"
show stdgzip "gzip -dc of its runs"
show stdigzip "igzip -dc of its runs"
show stdanalyze "splitroi analyze --jobs 1"
printf '%-44s %9s %9s   %s\n' "analyze / gzip -dc" "$(ratio "${best[stdanalyze]}" "${best[stdgzip]}")" \
	"$(ratio "${cpu[stdanalyze]}" "${cpu[stdgzip]}")" "CPU <= 0.6, peak <= 400 MB"
echo "load average: $(cut -d' ' -f1-3 /proc/loadavg) on $(nproc) CPUs"
