#!/usr/bin/env bash
# bench.sh - times `splitroi fit` on a 64x64x36x200 run against plain inflation, and its peak memory.
# Usage: tools/bench.sh path/to/splitroi   (targets: wall ratio <= 1.5, RSS / uncompressed run <= 0.5)
set -eu
BIN=$(realpath "${1:-build/splitroi}")
PY=${PYTHON:-/usr/bin/python3}
HERE=$(cd "$(dirname "$0")" && pwd)
DIR=${BENCH_DIR:-$(mktemp -d)}
mkdir -p "$DIR"
trap '[ -z "${BENCH_KEEP:-}" ] && rm -rf "$DIR"' EXIT
RUN=$DIR/sub-01_task-tones_run-1_bold.nii.gz
echo "generating a 64x64x36x200 float32 run in $DIR ..."
"$PY" "$HERE/benchdata.py" 64 64 36 200 "$RUN"
raw=$((64 * 64 * 36 * 200 * 4))

# best of REPEAT runs of each (the machine may be shared)
REPEAT=${BENCH_REPEAT:-3}
min() { if [ -z "$1" ] || [ "$(echo "$2 < $1" | bc -l)" = 1 ]; then echo "$2"; else echo "$1"; fi; }
inflate= fitwall= rss_kb=0 gzcpu= fitcpu=
for i in $(seq "$REPEAT"); do
	/usr/bin/time -f '%e %U %S' -o "$DIR/gz.txt" sh -c 'gzip -dc "$1" >/dev/null' sh "$RUN"
	read -r w u s < <(tail -1 "$DIR/gz.txt")
	inflate=$(min "$inflate" "$w")
	gzcpu=$(min "$gzcpu" "$(echo "$u + $s" | bc -l)")
	/usr/bin/time -f '%e %M %U %S' -o "$DIR/time.txt" "$BIN" fit "$RUN" --out "$DIR/out" --quiet \
		--confounds "${RUN%_bold.nii.gz}_confounds.tsv" \
		--confound-columns "trans_x trans_y trans_z rot_x rot_y rot_z" \
		--effect "melody - scrambled" ${BENCH_FIT_ARGS:-}
	read -r w m u s < <(tail -1 "$DIR/time.txt")
	fitwall=$(min "$fitwall" "$w")
	fitcpu=$(min "$fitcpu" "$(echo "$u + $s" | bc -l)")
	[ "$m" -gt "$rss_kb" ] && rss_kb=$m
done

printf '%-40s %10s\n' "measure (best of $REPEAT; RSS: worst)" "value"
printf '%-40s %10.3f s\n' "gzip -dc run > /dev/null" "$inflate"
printf '%-40s %10.3f s\n' "splitroi fit (AR(1), 2 cond, 6 conf, drift)" "$fitwall"
printf '%-40s %10.2f   (target <= 1.5)\n' "wall ratio fit / inflate" "$(echo "$fitwall / $inflate" | bc -l)"
printf '%-40s %10.3f s\n' "CPU time of gzip -dc (user + sys)" "$gzcpu"
printf '%-40s %10.3f s\n' "CPU time of fit (all threads)" "$fitcpu"
printf '%-40s %10.2f   (load-independent view)\n' "CPU ratio fit / inflate" "$(echo "$fitcpu / $gzcpu" | bc -l)"
echo "load average: $(cut -d' ' -f1-3 /proc/loadavg) on $(nproc) CPUs (wall times need an idle machine)"
printf '%-40s %10.1f MB\n' "uncompressed run" "$(echo "$raw / 1048576" | bc -l)"
printf '%-40s %10.1f MB\n' "peak RSS of fit" "$(echo "$rss_kb / 1024" | bc -l)"
printf '%-40s %10.2f   (target <= 0.5)\n' "RSS ratio fit / run" "$(echo "$rss_kb * 1024 / $raw" | bc -l)"
bash "$HERE/bench_slurm.sh" "$BIN"
