#!/bin/sh
# Install what is missing, build, and run the demo: check the demo sweep file, then compute three
# of its cells (small, middle and large spectral radius) and print what each found.
set -eu
root=$(cd "$(dirname "$0")/.." && pwd)
"$root/tools/install-deps.sh"
"$root/tools/build.sh"
build=${CX_BUILD_DIR:-$root/build}
export OPENBLAS_NUM_THREADS=1
sweep="$root/jobs/demo-window.yaml"
"$build/coexist" check "$sweep"
for rho in 0.1 0.9 2.5; do
    echo
    echo "== spectral radius $rho =="
    "$build/coexist" cell "$sweep" --at "reservoir.spectral_radius=$rho"
done
