# test_bids_validator.sh - a freshly simulated dataset passes the BIDS standard's own validator (bids-validator, an npm package that tools/deps.sh installs into build/node).
. "$(dirname "$0")/lib.sh"
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
BV=${BIDS_VALIDATOR:-$ROOT/build/node/node_modules/.bin/bids-validator}
if [ ! -x "$BV" ] || ! command -v node >/dev/null 2>&1; then
	echo "skip - bids-validator not available (npm registry unreachable)"
	exit 0
fi

# errors and warnings in the validator's JSON report, as "E W"
count() { # json file
	node -e 'const r = JSON.parse(require("fs").readFileSync(process.argv[1], "utf8"));
		console.log(r.issues.errors.length + " " + r.issues.warnings.length);
		for (const e of r.issues.errors) console.error("error: " + e.key + ": " + (e.reason || "").slice(0, 160));' "$1"
}

run "$SPLITROI" simulate --out "$TMP/sim" --subjects 2 --grid small --seed 5 --quiet
expect_status 0 "simulate 2 subjects on the small grid"
"$BV" "$TMP/sim/data" --json >"$TMP/bv.json" 2>"$TMP/bv.err"
rc=$?
read -r nerr nwarn < <(count "$TMP/bv.json" 2>"$TMP/bv.list") || nerr=x
if [ "$nerr" = 0 ]; then
	ok "bids-validator $("$BV" --version 2>/dev/null): 0 errors in the simulated dataset ($nwarn warnings), exit $rc"
else
	notok "bids-validator found ${nerr} errors in the simulated dataset: $(head -c 600 "$TMP/bv.list") $(head -c 200 "$TMP/bv.err")"
fi
if [ "$rc" -eq 0 ]; then ok "bids-validator exits 0 on the simulated dataset"; else notok "bids-validator exit $rc"; fi

# the check can fail: the same dataset without its dataset_description.json (required by the
# BIDS specification) must be reported as an error
cp -r "$TMP/sim/data" "$TMP/broken"
rm "$TMP/broken/dataset_description.json"
"$BV" "$TMP/broken" --json >"$TMP/bv2.json" 2>/dev/null
read -r nerr2 _ < <(count "$TMP/bv2.json" 2>/dev/null) || nerr2=x
if [ "$nerr2" != x ] && [ "$nerr2" -gt 0 ]; then
	ok "bids-validator reports a dataset without dataset_description.json ($nerr2 errors)"
else
	notok "bids-validator did not flag a dataset without dataset_description.json (errors: $nerr2)"
fi
