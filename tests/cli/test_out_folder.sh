# test_out_folder.sh - dangerous output folders are refused: '/', the dataset root or a folder
# above it, a sub-<label> symlink inside out; derivatives/<name> inside the dataset is fine.
. "$(dirname "$0")/lib.sh"
PY=${PYTHON:-/usr/bin/python3}
HERE=$(cd "$(dirname "$0")/.." && pwd)
"$PY" "$HERE/py/make_study.py" "$TMP/s" basic >/dev/null || { notok "make_study.py failed"; exit 1; }
cd "$TMP/s" || exit 1
run "$SPLITROI" analyze study.ini --quiet --no-report --out /
expect_status 1 "out = /: refused"
expect_err "root folder" "out = /: the error says why"
run "$SPLITROI" analyze study.ini --quiet --no-report --out data
expect_status 1 "out = the dataset root: refused"
expect_err "data: out is the dataset" "out = the dataset root: the error names the folder"
run "$SPLITROI" analyze study.ini --quiet --no-report --out "$TMP"
expect_status 1 "out above the dataset: refused"
ls data/sub-01 | grep -q responses && notok "out = dataset: results written into the dataset" || ok "refused out folders: nothing written into the dataset"
mkdir -p "$TMP/elsewhere" links
ln -s "$TMP/elsewhere" links/sub-01
run "$SPLITROI" analyze study.ini --quiet --no-report --out links
expect_status 1 "a sub-01 symlink in out: refused"
expect_err "links/sub-01: is a symbolic link" "a sub-01 symlink: the error names it"
[ -z "$(ls "$TMP/elsewhere")" ] && ok "a sub-01 symlink: nothing written where it points" || notok "writes followed the symlink"
run "$SPLITROI" analyze study.ini --quiet --no-report --out data/derivatives/splitroi
expect_status 0 "out = derivatives/<name> inside the dataset is allowed"
