#!/bin/sh
# Install what is missing, build, and run the whole test suite (ctest). This is the README's
# test command and what CI runs.
set -eu
root=$(cd "$(dirname "$0")/.." && pwd)
"$root/tools/install-deps.sh"
"$root/tools/build.sh"
build=${CX_BUILD_DIR:-$root/build}
cd "$build"
OPENBLAS_NUM_THREADS=1 ctest --output-on-failure -j 2 "$@"
