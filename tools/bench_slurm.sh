#!/usr/bin/env bash
# bench_slurm.sh - times `splitroi slurm` writing the scripts for a 10,000-subject study, and --status on it.
# Usage: tools/bench_slurm.sh path/to/splitroi   (target: well under 1 s per 1,000 subjects)
# The subjects' files are symbolic links to a 2-subject simulated study (6 runs a subject), so the
# run headers come from the page cache: this measures splitroi's own work, not a cold file system.
set -eu
BIN=$(realpath "${1:-build/splitroi}")
HERE=$(cd "$(dirname "$0")" && pwd)
N=${BENCH_SLURM_SUBJECTS:-10000}
DIR=$(mktemp -d)
trap 'rm -rf "$DIR"' EXIT
. "$HERE/../tests/cli/slurm_lib.sh"
echo "making a $N-subject study of linked runs in $DIR ..."
"$BIN" simulate --out "$DIR/src" --subjects 2 --volumes 60 --quiet
study_links "$DIR/src" "$N" "$DIR/big"
mkdir -p "$DIR/nobin"
# no scontrol on PATH: SLURM's defaults, so the numbers do not depend on a cluster being reachable
best() { # LABEL ARGS...: best wall and CPU time of 3 runs
	local label=$1 w= c= i ww cc
	shift
	for i in 1 2 3; do
		/usr/bin/time -f '%e %U %S' -o "$DIR/t" env PATH="$DIR/nobin" "$BIN" slurm "$DIR/big/study.ini" --out "$DIR/big/res" "$@" >/dev/null
		read -r ww u s <"$DIR/t"
		cc=$(echo "$u + $s" | bc -l)
		if [ -z "$w" ] || [ "$(echo "$ww < $w" | bc -l)" = 1 ]; then w=$ww; fi
		if [ -z "$c" ] || [ "$(echo "$cc < $c" | bc -l)" = 1 ]; then c=$cc; fi
	done
	printf '%-40s %8.2f s wall %8.2f s CPU %6.3f s CPU per 1000 subjects\n' "$label" "$w" "$c" "$(echo "$c * 1000 / $N" | bc -l)"
}
best "slurm: scripts for $N subjects" --cpus 1
best "slurm --per-task 10" --cpus 1 --per-task 10
best "slurm --status" --status
echo "arrays written: $(ls "$DIR"/big/res/slurm/subjects-*.sbatch | wc -l) (--per-task 10: 1 array of $((N / 10)) tasks)"
echo "load average: $(cut -d' ' -f1-3 /proc/loadavg) on $(nproc) CPUs (wall times need an idle machine)"
