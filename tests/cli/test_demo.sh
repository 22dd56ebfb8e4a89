# test_demo.sh - tools/demo.sh (what `make demo` runs) removes only its own files on a rerun:
# a file someone added survives, a demo file someone changed stops it with the file's name,
# and a folder no demo made is refused untouched.
. "$(dirname "$0")/lib.sh"
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
demo() { DEMO_DIR="$TMP/demo" DEMO_SIZE="--subjects 2 --volumes 60" run bash "$ROOT/tools/demo.sh" "$SPLITROI"; }

demo
expect_status 0 "the demo runs in a new folder"
expect_out "true effects significant" "the demo prints its summary"
if [ -s "$TMP/demo/.demo-files" ] && grep -q ' study.ini$' "$TMP/demo/.demo-files" &&
	grep -q ' results/responses.csv$' "$TMP/demo/.demo-files"; then
	ok "the demo lists its own files in .demo-files"
else
	notok "the demo's manifest lacks study.ini or results/responses.csv"
fi

# every map of the demo results is found by its BIDS entities (the parser of tests/py/test_bids_outputs.py)
"${PYTHON:-/usr/bin/python3}" - "$TMP/demo/results" "$ROOT/tests/py" <<'PYEOF' >"$TMP/ent" 2>&1
import glob, os, sys
sys.path.insert(0, sys.argv[2])
from test_bids_outputs import parse_bids
out = sys.argv[1]
index, bad = [], []
for f in glob.glob(os.path.join(out, 'sub-*', 'func', '*')):
    p = parse_bids(os.path.basename(f))
    (index.append(p) if p else bad.append(f))
subs = sorted(os.path.basename(d)[4:] for d in glob.glob(os.path.join(out, 'sub-*')))
want = [(s, d, k) for s in subs for d in ('oddevenA', 'oddevenB', 'allmemory') for k in ('tstat', 'dseg')]
found = [(e.get('sub'), e.get('desc'), suf) for e, suf, ext in index if ext == '.nii.gz']
refs = [e['sub'] for e, suf, ext in index if suf == 'boldref' and ext == '.nii.gz']
miss = [w for w in want if found.count(w) != 1] + [s for s in subs if refs.count(s) != 1]
print(len(index), 'files', bad[:3], miss[:3])
sys.exit(0 if index and not bad and not miss and len(subs) == 2 else 1)
PYEOF
[ $? = 0 ] && ok "every map of the demo results is found by its entities ($(cat "$TMP/ent"))" ||
	notok "demo maps not all found by their entities: $(tail -c 400 "$TMP/ent")"

# a user's study file, parcels folder and a file inside the demo's own results folder
echo "[study]" >"$TMP/demo/my_study.ini"
mkdir -p "$TMP/demo/my_parcels" "$TMP/demo/results/notes"
echo "1	left" >"$TMP/demo/my_parcels/labels.tsv"
echo "looked fine" >"$TMP/demo/results/notes/tuesday.txt"
demo
expect_status 0 "a second demo over the first runs"
if [ "$(cat "$TMP/demo/my_study.ini")" = "[study]" ] && [ -s "$TMP/demo/my_parcels/labels.tsv" ] &&
	[ "$(cat "$TMP/demo/results/notes/tuesday.txt")" = "looked fine" ]; then
	ok "the user's files under demo/ survive a second demo"
else
	notok "a user's file under demo/ was lost or changed by the second demo"
fi
if grep -q -e my_study -e my_parcels -e tuesday "$TMP/demo/.demo-files"; then
	notok "the manifest claims a user's file as the demo's"
else
	ok "the manifest does not claim the user's files"
fi
[ -s "$TMP/demo/results/group.csv" ] && ok "the second demo rewrote its tables" || notok "no group.csv after the second demo"

# a demo file changed by hand is not deleted: the demo stops and names it
echo "; my edit" >>"$TMP/demo/study.ini"
demo
expect_status 1 "a changed demo file stops the demo"
expect_err "study.ini" "the message names the changed file"
grep -q "my edit" "$TMP/demo/study.ini" && ok "the changed file is kept" || notok "the changed study.ini was lost"
[ -s "$TMP/demo/results/group.csv" ] && ok "nothing was removed" || notok "the refused demo removed its tables"

# a folder with someone's files and no manifest is refused, untouched
mkdir -p "$TMP/other"
echo keep >"$TMP/other/data.txt"
DEMO_DIR="$TMP/other" DEMO_SIZE="--subjects 2 --volumes 60" run bash "$ROOT/tools/demo.sh" "$SPLITROI"
expect_status 1 "a folder no demo made is refused"
expect_err "no demo recorded" "the refusal says why"
[ "$(ls -A "$TMP/other")" = data.txt ] && ok "the foreign folder is left as it was" || notok "the foreign folder was changed"
