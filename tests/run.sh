#!/bin/sh
# tests/run.sh - run each test program (and the CLI shell tests), print each
# summary and a grand total "N passed, N failed"; fail if anything failed.
# A program that exits 77 (prerequisite missing) counts as a failure here:
# CI must not pass on skipped checks.
set -u
LC_ALL=C; export LC_ALL
BUILD=${BUILD:-build}
VALGRIND=${VALGRIND:-}
total_pass=0; total_fail=0; bad=0
run_one() {
    out=$($WRAP "$@" 2>&1); rc=$?
    printf '%s\n' "$out" | grep -v ' PASS' | grep -E 'FAIL|skipped|passed,|ERROR|==' | head -40
    line=$(printf '%s\n' "$out" | grep -E '[0-9]+ passed, [0-9]+ failed' | tail -n 1)
    p=$(printf '%s' "$line" | sed -n 's/.* \([0-9][0-9]*\) passed, \([0-9][0-9]*\) failed.*/\1/p')
    f=$(printf '%s' "$line" | sed -n 's/.* \([0-9][0-9]*\) passed, \([0-9][0-9]*\) failed.*/\2/p')
    total_pass=$((total_pass + ${p:-0})); total_fail=$((total_fail + ${f:-0}))
    if [ $rc -ne 0 ]; then
        bad=1
        [ -z "$line" ] && echo "$1: exited with status $rc and no summary" && total_fail=$((total_fail + 1))
        [ $rc -eq 77 ] && echo "$1: skipped (counts as failure)" && total_fail=$((total_fail + 1))
    fi
}
# C test programs run under $VALGRIND when set; the shell tests do not (the
# shell is not ours to check)
WRAP=$VALGRIND
for t in "$@"; do run_one "$t"; done
WRAP=
for s in tests/cli/*.sh; do [ -f "$s" ] && run_one sh "$s" "$BUILD/lamina"; done
echo "$total_pass passed, $total_fail failed"
[ $bad -eq 0 ] && [ $total_fail -eq 0 ]
