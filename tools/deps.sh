#!/usr/bin/env bash
# Installs the Debian packages that splitroi needs, only those missing.
# Usage: tools/deps.sh build     what the build and `make demo` need
#        tools/deps.sh test      that, and what the tests need (`make deps`, `make check`)
#        tools/deps.sh --verify  install nothing; exit 1 with the command to run when a
#                                build package is missing (make runs this before compiling)
set -eu
mode=${1:-test}
# libisal-dev: ISA-L's igzip inflates .nii.gz about three times faster than zlib
# (the build falls back to zlib without it).
build_pkgs="build-essential pkg-config zlib1g-dev libnifti2-dev liblapacke-dev libopenblas-dev
libcsv-dev libinih-dev libjansson-dev libpng-dev libisal-dev"
# The reference checks run scipy, statsmodels, numpy, nibabel and pandas through /usr/bin/python3;
# tests/cli/test_threads.sh runs valgrind's helgrind; tests/py/test_bids_outputs.py reads the
# tables with R (read.csv, merge, t.test; it skips without R).
test_pkgs="python3-numpy python3-scipy python3-statsmodels python3-nibabel python3-pandas valgrind r-base-core"
# isal (its igzip program) and libdeflate-tools are only for `make bench`, which times
# them beside the fit (it sets SPLITROI_DEPS_BENCH=1).
if [ "${SPLITROI_DEPS_BENCH:-0}" = 1 ]; then
	test_pkgs="$test_pkgs isal libdeflate-tools"
fi
# Optional: SPLITROI_DEPS_SLURM=1 adds a SLURM workload manager and munge, which
# tests/cli/test_slurm.sh runs as a throw-away single-node cluster (it installs them
# itself when missing, so CI does not need this).
if [ "${SPLITROI_DEPS_SLURM:-0}" = 1 ]; then
	test_pkgs="$test_pkgs slurm-wlm munge"
fi

missing_of() { # packages... -> those not installed
	local p out=""
	for p in "$@"; do
		if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
			out="$out $p"
		fi
	done
	echo "$out"
}

case $mode in
--verify)
	if ! command -v dpkg-query >/dev/null 2>&1; then
		# not Debian: trust pkg-config, and say what is needed when it fails
		if pkg-config --exists zlib lapacke openblas inih jansson libpng 2>/dev/null &&
			[ -f /usr/include/nifti/nifti2_io.h ]; then exit 0; fi
		echo "splitroi needs: a C11 compiler, pkg-config, zlib, nifticlib (nifti2), LAPACKE, OpenBLAS, libcsv, inih, jansson, libpng" >&2
		exit 1
	fi
	# shellcheck disable=SC2086
	missing=$(missing_of $build_pkgs)
	[ -z "$missing" ] && exit 0
	echo "splitroi: the build needs these Debian packages:$missing" >&2
	echo "run 'make deps' (as root), or: sudo apt-get install -y$missing" >&2
	exit 1 ;;
build) pkgs=$build_pkgs ;;
test) pkgs="$build_pkgs $test_pkgs" ;;
*) echo "usage: tools/deps.sh build|test|--verify" >&2; exit 2 ;;
esac

# Test only: the BIDS standard's own validator (an npm package), which
# tests/cli/test_bids_validator.sh runs on a simulated dataset. Installed into the
# project (build/node), not globally, at a pinned version; when npm is missing or
# the registry does not answer, deps still succeeds and that test skips.
BIDS_VALIDATOR_VERSION=1.15.0
install_bids_validator() {
	local dir
	dir="$(cd "$(dirname "$0")/.." && pwd)/build/node"
	if grep -qs "\"version\": \"$BIDS_VALIDATOR_VERSION\"" "$dir/node_modules/bids-validator/package.json" &&
		[ -x "$dir/node_modules/.bin/bids-validator" ]; then
		return 0
	fi
	if ! command -v npm >/dev/null 2>&1; then
		echo "note: npm not found; bids-validator not installed (its test will skip)" >&2
		return 0
	fi
	mkdir -p "$dir"
	echo "installing bids-validator $BIDS_VALIDATOR_VERSION into build/node (tests only)"
	if ! timeout 600 npm install --prefix "$dir" --no-audit --no-fund --no-save --loglevel=error \
		"bids-validator@$BIDS_VALIDATOR_VERSION" >"$dir/install.log" 2>&1; then
		echo "note: could not install bids-validator (see $dir/install.log); its test will skip" >&2
	fi
	return 0
}
if [ "$mode" = test ]; then
	install_bids_validator || true
fi

# shellcheck disable=SC2086
missing=$(missing_of $pkgs)
if [ -z "$missing" ]; then
	exit 0
fi
if [ "$(id -u)" -ne 0 ]; then
	echo "splitroi needs these Debian packages:$missing" >&2
	echo "install them with:  sudo apt-get install -y$missing" >&2
	exit 1
fi
echo "installing:$missing"
export DEBIAN_FRONTEND=noninteractive
# wait for another apt (an unattended upgrade, a second make) rather than fail at once
apt_opts="-o DPkg::Lock::Timeout=600"
# shellcheck disable=SC2086
apt-get $apt_opts update -q >/dev/null || apt-get $apt_opts update
# shellcheck disable=SC2086
apt-get $apt_opts install -y -q --no-install-recommends $missing >/dev/null
