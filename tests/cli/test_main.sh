# test_main.sh - top-level help, version, unknown commands and exit codes.
. "$(dirname "$0")/lib.sh"

run "$SPLITROI" --help
expect_status 0 "--help succeeds"
expect_out "not validated for clinical" "--help carries the clinical caution"
run "$SPLITROI" --version
expect_status 0 "--version succeeds"
expect_out "^splitroi [0-9]+\.[0-9]+\.[0-9]+" "--version prints a version"
run "$SPLITROI"
expect_status 2 "no command is a usage error"
run "$SPLITROI" frobnicate
expect_status 2 "unknown command exits 2"
expect_err "unknown command 'frobnicate'" "unknown command is named"
run "$SPLITROI" --bogus
expect_status 2 "unknown top-level option exits 2"
