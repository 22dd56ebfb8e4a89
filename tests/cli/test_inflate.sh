# test_inflate.sh - the two inflaters (ISA-L, zlib) give byte-identical tables and maps; damaged streams fail cleanly.
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
HERE=$(cd "$(dirname "$0")" && pwd)
if ! "$PY" -c 'import nibabel, numpy' 2>/dev/null; then
	echo "skip - inflater tests need nibabel and numpy in $PY"
	exit 0
fi
if ! "$SPLITROI" --version >/dev/null 2>&1; then
	notok "no binary at $SPLITROI"
	exit 1
fi
V=$TMP/v
"$PY" "$HERE/mkstudy.py" "$V" || { notok "could not build the test study"; exit 1; }
F=$V/data/sub-01/func
RUN=$F/sub-01_task-tones_run-1_bold.nii.gz
# the same run as plain .nii, and as a gzip file of three members (python's gzip writes each)
"$PY" - "$RUN" "$TMP" <<'PYEOF'
import gzip, sys, shutil
raw = gzip.decompress(open(sys.argv[1], "rb").read())
d = sys.argv[2]
open(d + "/plain_bold.nii", "wb").write(raw)
k = len(raw) // 3
open(d + "/multi_bold.nii.gz", "wb").write(gzip.compress(raw[:k], 1) + gzip.compress(raw[k:2 * k], 9) +
                                          gzip.compress(raw[2 * k:], 6))
open(d + "/cut_bold.nii.gz", "wb").write(open(sys.argv[1], "rb").read()[:-3000])
for n in ("plain", "multi", "cut"):
    shutil.copy(sys.argv[1].replace("_bold.nii.gz", "_events.tsv"), d + "/%s_events.tsv" % n)
PYEOF

maps_equal() { # dir_a dir_b: every map and design table equal byte for byte
	local a=$1 b=$2 f n=0
	for f in "$a"/*.nii.gz "$a"/*.csv; do
		[ -e "$f" ] || continue
		cmp -s "$f" "$b/$(basename "$f" | sed "s/^[a-z]*_/X_/; s/^X_/$3_/")" || return 1
		n=$((n + 1))
	done
	[ "$n" -gt 0 ]
}
for inf in zlib isa-l; do
	for src in plain multi; do
		ext=.nii.gz
		[ $src = plain ] && ext=.nii
		SPLITROI_INFLATER=$inf run "$SPLITROI" fit "$TMP/${src}_bold$ext" --out "$TMP/o-$src-$inf" --quiet --threads 1
		expect_status 0 "fit of the $src run with $inf"
	done
done
same=1
for inf in zlib isa-l; do
	maps_equal "$TMP/o-plain-zlib" "$TMP/o-multi-$inf" multi || same=0
done
if [ "$same" = 1 ]; then
	ok "a three-member .nii.gz gives the maps of the plain .nii, byte for byte, with zlib and with ISA-L"
else
	notok "a three-member .nii.gz gives the maps of the plain .nii, byte for byte, with zlib and with ISA-L"
fi

# a cut stream: exit 1 naming the file, and not one map or fit.json written, with either inflater
for inf in zlib isa-l; do
	SPLITROI_INFLATER=$inf run "$SPLITROI" fit "$TMP/cut_bold.nii.gz" --out "$TMP/o-cut-$inf" --quiet
	expect_status 1 "a truncated .nii.gz fails with $inf"
	expect_err "cut_bold.nii.gz: truncated" "the $inf message names the file and says truncated"
	if [ -z "$(ls -A "$TMP/o-cut-$inf" 2>/dev/null)" ]; then
		ok "no output from the truncated run with $inf"
	else
		notok "no output from the truncated run with $inf: $(ls "$TMP/o-cut-$inf")"
	fi
done

# the whole analysis: tables and maps the same whichever inflater read the runs
for inf in zlib isa-l; do
	cp -r "$V" "$TMP/a-$inf"
	SPLITROI_INFLATER=$inf run "$SPLITROI" analyze "$TMP/a-$inf/study.ini" --quiet --jobs 1
	expect_status 0 "analyze with $inf"
done
diffs=0 n=0
while IFS= read -r f; do
	rel=${f#"$TMP/a-zlib/results/"}
	# run records, the tables' completion record and the locks hold times and process ids;
	# the dataset description and the mean image's sidecar name the (copied) input paths
	case "$rel" in *run.json | tables.json | .lock.* | */.lock.* | *.html | *.png | *.svg | dataset_description.json | *_boldref.json) continue ;; esac
	n=$((n + 1))
	cmp -s "$f" "$TMP/a-isa-l/results/$rel" || { diffs=$((diffs + 1)); echo "# differs: $rel"; }
done < <(find "$TMP/a-zlib/results" -type f)
if [ "$diffs" = 0 ] && [ "$n" -gt 5 ]; then
	ok "analyze: all $n tables and maps byte-identical between zlib and ISA-L"
else
	notok "analyze: $diffs of $n tables and maps differ between zlib and ISA-L"
fi
