#!/bin/sh
# The command line's contract: --help on every command, exit status 2 with a file:line:column
# message for bad input, 0 for a valid file. Prints one PASS/FAIL line per check.
exe=$1
src=$2
pass=0
fail=0
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT

expect() { # expect WHAT WANT_STATUS FRAGMENT -- command...
    what=$1 want=$2 frag=$3
    shift 4
    "$@" >"$tmp/out" 2>"$tmp/err"
    got=$?
    if [ "$got" -eq "$want" ] && { [ -z "$frag" ] || grep -qF -- "$frag" "$tmp/out" "$tmp/err"; }; then
        pass=$((pass + 1))
        echo "PASS: $what (exit $got, wants $want, message contains '$frag')"
    else
        fail=$((fail + 1))
        echo "FAIL: $what (exit $got, wants $want, message contains '$frag')"
        sed 's/^/    /' "$tmp/err" | head -5
    fi
}

expect "coexist --help" 0 "commands:" -- "$exe" --help
expect "coexist --version" 0 "coexist" -- "$exe" --version
for c in check cell; do
    expect "coexist $c --help" 0 "usage: coexist $c" -- "$exe" $c --help
done
expect "unknown command" 2 "unknown command" -- "$exe" frobnicate
expect "no arguments" 2 "usage" -- "$exe"
expect "check the demo sweep" 0 "is valid" -- "$exe" check "$src/jobs/demo-window.yaml"
for f in "$src"/jobs/*.yaml; do
    expect "check $(basename "$f")" 0 "is valid" -- "$exe" check "$f"
done
expect "check a missing file" 2 "cannot open sweep file" -- "$exe" check "$tmp/none.yaml"

printf 'study: {name: bad, seed: 1}\nreservoir:\n  nodes: 40\n  spectral_radius: -0.5\n' >"$tmp/bad.yaml"
expect "negative spectral radius: file:line:col" 2 "bad.yaml:4:20: reservoir.spectral_radius" -- "$exe" check "$tmp/bad.yaml"
printf 'study: {name: bad}\nreservoir: {nodes: 40, colour: red}\n' >"$tmp/unknown.yaml"
expect "unknown key" 2 "unknown.yaml:2:24:" -- "$exe" check "$tmp/unknown.yaml"
printf 'study: {name: bad\n' >"$tmp/syntax.yaml"
expect "YAML syntax error" 2 "YAML syntax error" -- "$exe" check "$tmp/syntax.yaml"
expect "cell of a multi-cell sweep without --at" 2 "choose one with --at" -- "$exe" cell "$src/jobs/demo-window.yaml"
expect "cell --index out of range" 2 "--index must be in" -- "$exe" cell "$src/jobs/demo-window.yaml" --index 999
expect "cell --at with an unknown axis value" 2 "reservoir.spectral_radius" -- "$exe" cell "$src/jobs/demo-window.yaml" --at "reservoir.spectral_radius=0.77,seed=0"
expect "cell --at and --index together" 2 "not both" -- "$exe" cell "$src/jobs/demo-window.yaml" --at x=1 --index 0
expect "option without its value" 2 "needs a value" -- "$exe" cell "$src/jobs/demo-window.yaml" --index

echo "$pass passed, $fail failed"
[ "$fail" -eq 0 ]
