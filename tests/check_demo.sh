#!/bin/sh
# coexist tests: the README's demo command (tools/demo.sh) runs to the end with the build under
# test, computes its three cells and shows the window the README describes (test_cell checks
# the same window cell by cell). Source: the README sections "Quick start" and "What the demo
# shows" (a property of the documentation, no external reference).
#   check_demo.sh SOURCE_DIR BUILD_DIR
src=$1
build=$2
passed=0
failed=0
check() {
    if [ "$2" = 0 ]; then
        echo "PASS: $1 [source: README, Quick start and What the demo shows]"
        passed=$((passed + 1))
    else
        echo "FAIL: $1 ($3) [source: README, Quick start and What the demo shows]"
        failed=$((failed + 1))
    fi
}
out=$(CX_DEMO_SKIP_BUILD=1 CX_BUILD_DIR="$build" sh "$src/tools/demo.sh" 2>&1)
rc=$?
check "tools/demo.sh exits 0" "$([ $rc = 0 ]; echo $?)" "exit $rc: $(echo "$out" | tail -1)"
n=$(echo "$out" | grep -c '^status: computed')
check "the demo computes its three cells" "$([ "$n" = 3 ]; echo $?)" "$n computed"
small=$(echo "$out" | sed -n '/== spectral radius 0.1 ==/,/== spectral radius/p' | grep -c 'multifunctional: no')
check "spectral radius 0.1: not multifunctional" "$([ "$small" = 1 ]; echo $?)" "$small"
mid=$(echo "$out" | sed -n '/== spectral radius 1.3 ==/,/== spectral radius 2.5/p' | grep -c 'multifunctional: yes')
check "spectral radius 1.3: multifunctional" "$([ "$mid" = 1 ]; echo $?)" "$mid"
echo "$passed passed, $failed failed"
[ "$failed" = 0 ]
