#!/bin/sh
# Install the Debian 12 packages coexist needs to build, run and test, skipping those already
# installed. Idempotent: a second run installs nothing. Needs root (or sudo).
#   tools/install-deps.sh            build, run and test dependencies
set -eu

PACKAGES="build-essential g++ cmake pkg-config git
openmpi-bin libopenmpi-dev
libhdf5-openmpi-dev hdf5-tools
libopenblas-dev liblapacke-dev libarpack2-dev
libyaml-dev libcairo2-dev libsleef-dev
libpcg-cpp-dev
python3 python3-numpy python3-scipy python3-h5py python3-xarray python3-h5netcdf python3-netcdf4
netcdf-bin libxml2-utils"

missing=""
for p in $PACKAGES; do
    if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
        missing="$missing $p"
    fi
done

if [ -z "$missing" ]; then
    echo "install-deps: all packages present"
    exit 0
fi

echo "install-deps: installing$missing"
SUDO=""
if [ "$(id -u)" -ne 0 ]; then
    if command -v sudo >/dev/null 2>&1; then
        SUDO="sudo"
    else
        echo "install-deps: not root and no sudo; install as root:$missing" >&2
        exit 1
    fi
fi
export DEBIAN_FRONTEND=noninteractive
$SUDO apt-get update -qq
# shellcheck disable=SC2086
$SUDO apt-get install -y -qq --no-install-recommends $missing
echo "install-deps: done"
