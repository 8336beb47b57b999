#!/bin/sh
# Runs the checks against outside references (git CLI, PyTorch, scikit-learn):
# tests/ref/*.sh and tests/ref/*.py. A missing reference library fails.
here=$(cd "$(dirname "$0")" && pwd)
pass=0; fail=0
for t in "$here"/ref/*.sh "$here"/ref/*.py; do
	[ -f "$t" ] || continue
	case "$t" in *.py) run="$PYTHON $t";; *) run="sh $t";; esac
	tmp=$(mktemp -d)
	if (cd "$tmp" && ROOT="$here/.." $run) >"$tmp.log" 2>&1; then
		pass=$((pass + 1)); echo "ok   $(basename "$t")"; grep '^REF' "$tmp.log" | sed 's/^/    /'
	else
		fail=$((fail + 1)); echo "FAIL $(basename "$t")"; sed 's/^/    /' "$tmp.log" | tail -40
	fi
	rm -rf "$tmp" "$tmp.log"
done
echo "ref: $pass passed, $fail failed"
[ "$fail" -eq 0 ]
