#!/bin/sh
# Build coexist's libFuzzer targets with clang, AddressSanitizer and UndefinedBehaviorSanitizer
# in a build directory of their own, and run each target for a number of executions from its
# seed corpus (tests/fuzz/corpus/<target>). New inputs and any crash, leak or UB reproducer go
# under BUILD/fuzz-out/<target>/, never into the source tree; a reproducer worth keeping is
# copied by hand into tests/fuzz/corpus/<target>/ as a regression case.
#
#   tools/fuzz.sh [-b BUILD] [-r RUNS] [-t TARGET]...
#     -b BUILD   build directory (default /tmp/build-fuzz)
#     -r RUNS    executions per target (default 3000, the CI smoke run; the documented long
#                run is -r 1000000)
#     -s SECONDS stop each target after this many seconds even if RUNS are not done
#     -t TARGET  study, journal or cube (default: all three)
#
# Exit status: 0 when every target ran its executions without a finding, 1 otherwise.
set -eu
src=$(cd "$(dirname "$0")/.." && pwd)
build=/tmp/build-fuzz
runs=3000
targets=""
extra=""
while getopts b:r:s:t: opt; do
    case $opt in
        s) extra="-max_total_time=$OPTARG" ;;
        b) build=$OPTARG ;;
        r) runs=$OPTARG ;;
        t) targets="$targets $OPTARG" ;;
        *) echo "usage: $0 [-b BUILD] [-r RUNS] [-s SECONDS] [-t TARGET]..." >&2; exit 2 ;;
    esac
done
[ -n "$targets" ] || targets="study journal cube"

mkdir -p "$build"
# Warnings are not errors here: clang warns about other things than the gcc build that CI
# gates on. The sanitizers instrument the library as well as the targets.
CC=clang cmake -S "$src" -B "$build" -DCX_FUZZ=ON -DCX_WERROR=OFF -DCMAKE_BUILD_TYPE=Debug \
    -DCMAKE_C_FLAGS="-O1 -g -fno-omit-frame-pointer -fsanitize=fuzzer-no-link,address,undefined" \
    >"$build/configure.log" 2>&1 || { cat "$build/configure.log"; exit 1; }
for t in $targets; do
    cmake --build "$build" -j2 --target "fuzz_$t" >"$build/build.log" 2>&1 ||
        { tail -40 "$build/build.log"; exit 1; }
done

status=0
for t in $targets; do
    out="$build/fuzz-out/$t"
    mkdir -p "$out/corpus"
    # A cube is a whole HDF5 file: its seed (tests/fuzz/corpus/cube) is about 44 KB.
    maxlen=8192
    [ "$t" = cube ] && maxlen=65536
    echo "fuzz_$t: $runs executions from tests/fuzz/corpus/$t" >&2
    # The cube target suppresses one leak inside libhdf5 (tests/fuzz/hdf5.supp); full stacks
    # are needed to match it.
    lsan=""
    [ "$t" = cube ] && lsan="suppressions=$src/tests/fuzz/hdf5.supp:print_suppressions=0"
    if ASAN_OPTIONS=detect_leaks=1:fast_unwind_on_malloc=0 LSAN_OPTIONS="$lsan" \
        UBSAN_OPTIONS=halt_on_error=1:print_stacktrace=1 \
        "$build/tests/fuzz_$t" -runs="$runs" -seed=2385 -max_len=$maxlen -print_final_stats=1 $extra \
        -artifact_prefix="$out/" "$out/corpus" "$src/tests/fuzz/corpus/$t" \
        >"$out/log" 2>&1; then
        grep -E "^stat::number_of_executed_units|^stat::peak_rss_mb|Done [0-9]+ runs" "$out/log" >&2 || true
    else
        echo "fuzz_$t: FINDING, see $out/log and $out/crash-* / leak-* / oom-*" >&2
        tail -30 "$out/log" >&2
        status=1
    fi
done
exit $status
