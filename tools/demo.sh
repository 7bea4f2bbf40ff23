#!/bin/sh
# Install what is missing, build, and run the demo: check the demo sweep file, then compute three
# of its cells (small, middle and large spectral radius, network draw 1) and print what each
# found. CX_DEMO_SKIP_BUILD=1 (used by the test demo_script) skips the install and the build and
# takes the binary from CX_BUILD_DIR.
set -eu
root=$(cd "$(dirname "$0")/.." && pwd)
if [ "${CX_DEMO_SKIP_BUILD:-0}" != 1 ]; then
    "$root/tools/install-deps.sh"
    "$root/tools/build.sh"
fi
build=${CX_BUILD_DIR:-$root/build}
export OPENBLAS_NUM_THREADS=1
sweep="$root/jobs/demo-window.yaml"
"$build/coexist" check "$sweep"
for rho in 0.1 1.3 2.5; do
    echo
    echo "== spectral radius $rho =="
    "$build/coexist" cell "$sweep" --at "reservoir.spectral_radius=$rho,seed=1"
done
