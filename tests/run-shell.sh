#!/bin/sh
# Runs the end-to-end shell tests tests/t/*.sh against $OMEN, each in its own
# temporary directory. Prints a closing "N passed, N failed" line.
here=$(cd "$(dirname "$0")" && pwd)
pass=0; fail=0
for t in "$here"/t/*.sh; do
	[ -f "$t" ] || continue
	tmp=$(mktemp -d)
	if (cd "$tmp" && OMEN="$OMEN" ROOT="$here/.." TMPDIR="$tmp" sh "$t") >"$tmp.log" 2>&1; then
		pass=$((pass + 1)); echo "ok   $(basename "$t")"
	else
		fail=$((fail + 1)); echo "FAIL $(basename "$t")"; sed 's/^/    /' "$tmp.log" | tail -40
	fi
	rm -rf "$tmp" "$tmp.log"
done
echo "shell: $pass passed, $fail failed"
[ "$fail" -eq 0 ]
