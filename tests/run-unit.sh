#!/bin/sh
# Runs each cmocka binary; VALGRIND=1 runs them under memcheck (errors and
# definite leaks fail). Prints a closing "N passed, N failed" line.
pass=0; fail=0
for t in "$@"; do
	if [ -n "$VALGRIND" ]; then
		valgrind -q --error-exitcode=99 --leak-check=full --errors-for-leak-kinds=definite \
			"$t" 2>&1 && r=0 || r=$?
	else
		"$t" 2>&1 && r=0 || r=$?
	fi
	if [ "$r" -eq 0 ]; then pass=$((pass + 1)); else fail=$((fail + 1)); echo "FAILED: $t (exit $r)"; fi
done
echo "unit: $pass passed, $fail failed"
[ "$fail" -eq 0 ]
