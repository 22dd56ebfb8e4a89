#!/usr/bin/env bash
# Installs the Debian packages that splitroi's build and tests need, only those missing.
set -eu
pkgs="build-essential pkg-config zlib1g-dev libnifti2-dev liblapacke-dev libopenblas-dev
libcsv-dev libinih-dev libjansson-dev libpng-dev libisal-dev
python3-numpy python3-scipy python3-statsmodels python3-nibabel python3-pandas"
# libisal-dev: ISA-L's igzip inflates .nii.gz about three times faster than zlib
# (the build falls back to zlib without it). isal (its igzip program) and
# libdeflate-tools are only for `make bench`, which times them beside the fit.
if [ "${SPLITROI_DEPS_BENCH:-0}" = 1 ]; then
	pkgs="$pkgs isal libdeflate-tools"
fi
# Optional: SPLITROI_DEPS_SLURM=1 adds a SLURM workload manager and munge, which
# tests/cli/test_slurm.sh runs as a throw-away single-node cluster (it installs them
# itself when missing, so CI does not need this).
if [ "${SPLITROI_DEPS_SLURM:-0}" = 1 ]; then
	pkgs="$pkgs slurm-wlm munge"
fi

# Optional: the BIDS standard's own validator (an npm package), which
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
	echo "installing bids-validator $BIDS_VALIDATOR_VERSION into build/node"
	if ! timeout 600 npm install --prefix "$dir" --no-audit --no-fund --no-save --loglevel=error \
		"bids-validator@$BIDS_VALIDATOR_VERSION" >"$dir/install.log" 2>&1; then
		echo "note: could not install bids-validator (see $dir/install.log); its test will skip" >&2
	fi
	return 0
}
install_bids_validator || true

missing=""
for p in $pkgs; do
	if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
		missing="$missing $p"
	fi
done
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
apt-get update -q >/dev/null || apt-get update
apt-get install -y -q --no-install-recommends $missing >/dev/null
