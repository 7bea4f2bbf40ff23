#!/bin/sh
# Configure and build coexist in build/ (or $CX_BUILD_DIR). Used by tools/demo.sh and
# tools/test.sh; extra arguments go to cmake's configure step.
set -eu
root=$(cd "$(dirname "$0")/.." && pwd)
build=${CX_BUILD_DIR:-$root/build}
mkdir -p "$build"
cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo "$@" >"$build/configure.log" 2>&1 || {
    cat "$build/configure.log" >&2
    exit 1
}
cmake --build "$build" -j "$(nproc)"
