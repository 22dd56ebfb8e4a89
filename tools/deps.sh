#!/usr/bin/env bash
# Installs the Debian packages that splitroi's build and tests need, only those missing.
set -eu
pkgs="build-essential pkg-config zlib1g-dev libnifti2-dev liblapacke-dev libopenblas-dev
libcsv-dev libinih-dev libjansson-dev libpng-dev
python3-numpy python3-scipy python3-statsmodels python3-nibabel python3-pandas"
# Optional: SPLITROI_DEPS_SLURM=1 adds a SLURM workload manager and munge, which
# tests/cli/test_slurm.sh runs as a throw-away single-node cluster (it installs them
# itself when missing, so CI does not need this).
if [ "${SPLITROI_DEPS_SLURM:-0}" = 1 ]; then
	pkgs="$pkgs slurm-wlm munge"
fi
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
