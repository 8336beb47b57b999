#!/bin/sh
# The function-length check (issue 14, item 4): no function in src/ is over
# 120 lines unless the comment right above it gives the reason, in a line
# holding "Over 120 lines:" and the reason after it. Those comments are the
# allow-list; there is no other. A body is the lines from its "{" in column 0
# to its "}" in column 0 (the project's style, DEVELOPERS.md "Style"); the
# function's name is taken from the last column-0 line before the "{".
# The same checker then runs on a small planted tree and must reject a long
# function without a reason, accept one with it, and not let a reason above
# one function cover the next.
# ROOT: the repository (set by tests/run-shell.sh).
set -eu
: "${ROOT:?set ROOT to the repository}"
limit=120

# check_files FILE...: one line per long function without a reason, on
# stdout; exit 1 when there is any.
check_files() {
	awk -v LIMIT="$limit" '
	FNR == 1 { sig = ""; start = 0; reason = 0; pending = 0 }
	start == 0 && /^\/\*/ { pending = 0 }
	start == 0 && /Over 120 lines:[ \t]*[^ \t*]/ { pending = 1 }
	start == 0 && /^[A-Za-z_]/ { sig = $0; line = FNR; reason = pending; pending = 0; next }
	start == 0 && /^\{/ && sig != "" { start = FNR; next }
	start > 0 && /^\}/ {
		n = FNR - start + 1
		if (n > LIMIT && !reason) {
			name = sig; sub(/\(.*/, "", name); sub(/.*[ *]/, "", name)
			printf "%s:%d: %s is %d lines (over %d) with no \"Over 120 lines:\" reason above it\n", FILENAME, line, name, n, LIMIT
			bad = 1
		}
		start = 0; sig = ""; next
	}
	END { exit bad }' "$@"
}

cd "$ROOT"
check_files src/*/*.c src/*/*.h

# Self-test on planted files.
t=$(mktemp -d)
body() { # body N: a function body of N lines, braces included
	echo '{'; i=2; while [ "$i" -lt "$1" ]; do echo '	x++;'; i=$((i + 1)); done; echo '}'
}
{ echo 'static int long_one(void)'; body 121; } >"$t/a.c"
{ echo '/* Does one thing.'; echo ' * Over 120 lines: one table, row after row. */';
  echo 'static int with_reason(void)'; body 121;
  echo 'static int next_one(int a,'; echo '	int b)'; body 125; } >"$t/b.c"
{ echo 'static int at_limit(void)'; body 120;
  echo '/* Over 120 lines: */'; echo 'static int empty_reason(void)'; body 130; } >"$t/c.c"
out=$(check_files "$t/a.c" "$t/b.c" "$t/c.c" || true)
rm -rf "$t"
fail=0
expect() { # expect NAME: NAME is reported
	printf '%s\n' "$out" | grep -q " $1 is " || { echo "funclen self-test: $1 not reported"; fail=1; }
}
refuse() { # refuse NAME: NAME is not reported
	! printf '%s\n' "$out" | grep -q " $1 is " || { echo "funclen self-test: $1 reported"; fail=1; }
}
expect long_one; expect next_one; expect empty_reason
refuse with_reason; refuse at_limit
printf '%s\n' "$out" | grep -q 'a.c:1: long_one is 121 lines' ||
	{ echo "funclen self-test: wrong place or count: $out"; fail=1; }
[ "$fail" -eq 0 ] && echo "funclen: no function in src/ over $limit lines without its reason; the checker rejects each planted case"
exit "$fail"
