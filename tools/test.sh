#!/bin/sh
# Install what is missing, build, and run every test. This is the README's test command and
# what CI runs (.ci/run). Stages:
#   1. the release build (-Werror) and its whole ctest suite: unit, mpi, slurm (a one-node
#      SLURM on localhost, tools/slurm-cluster.sh) and root (small tmpfs mounts) tests;
#   2. a format check of every C source with the pinned clang-format (14);
#   3. an AddressSanitizer + UndefinedBehaviorSanitizer build and its unit tests, leaks checked
#      in the library's test programs (third-party leaks suppressed: tests/lsan.supp);
#   4. a short libFuzzer run of the three fuzz targets (tools/fuzz.sh -r 3000).
#   tools/test.sh --quick    stage 1 only
# Extra arguments after the options go to the stage-1 ctest (e.g. -L unit).
set -eu
root=$(cd "$(dirname "$0")/.." && pwd)
quick=0
if [ "${1:-}" = "--quick" ]; then
    quick=1
    shift
fi
"$root/tools/install-deps.sh"
"$root/tools/build.sh"
build=${CX_BUILD_DIR:-$root/build}
(cd "$build" && OPENBLAS_NUM_THREADS=1 ctest --output-on-failure -j 2 "$@")
[ "$quick" -eq 1 ] && exit 0

echo "== format check (clang-format $(clang-format --version | sed 's/.*version //'))"
(cd "$root" && git ls-files '*.c' '*.h' '*.cpp' | xargs clang-format --dry-run -Werror)
echo "format check: 1 passed, 0 failed"

echo "== sanitizer build (ASan + UBSan)"
asan=${CX_ASAN_DIR:-$root/build-asan}
mkdir -p "$asan"
cmake -S "$root" -B "$asan" -DCX_SANITIZE=ON -DCMAKE_BUILD_TYPE=Debug >"$asan/configure.log" 2>&1 ||
    { cat "$asan/configure.log"; exit 1; }
cmake --build "$asan" -j "$(nproc)"
# Test programs of the library run with leak checks. Tests that start `coexist run` go through
# MPI_Init, whose dynamically loaded plugins leak memory that LeakSanitizer cannot attribute
# (no symbols, so no suppression can name it): the bad-input and security tests run with ASan and
# UBSan but leak checks off. (With the slow unwinder, fast_unwind_on_malloc=0, the stacks become
# nameable and both tests passed, but for a stretch of later runs on the same machine
# LeakSanitizer's own tracer thread crashed with SIGSEGV at the exit of every `coexist run`, code
# old and new alike, and then ran clean again: too flaky for CI. Leak checking of `run` is left
# to the fault-injection test, robust_faults.) test_speed (a minute of stepping at -O0 under ASan) and the long
# end-to-end tests run in stage 1 only, to keep CI under 20 minutes.
(cd "$asan" && OPENBLAS_NUM_THREADS=1 \
    ASAN_OPTIONS=detect_leaks=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
    LSAN_OPTIONS="suppressions=$root/tests/lsan.supp:print_suppressions=0" \
    ctest --output-on-failure -j 2 -L unit -R '^test_' -E '^test_speed$')
(cd "$asan" && OPENBLAS_NUM_THREADS=1 \
    ASAN_OPTIONS=detect_leaks=0 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
    ctest --output-on-failure -j 2 -R '^robust_(bad|security)$')

echo "== fuzz smoke run"
"$root/tools/fuzz.sh" -b "${CX_FUZZ_DIR:-$root/build-fuzz}" -r 3000
