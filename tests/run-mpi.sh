#!/bin/sh
# Runs the Open MPI tests tests/mpi/*.sh (issue 13) against $OMEN (the
# default build) and $OMEN_MPI (built with -DOMEN_MPI), each in its own
# temporary directory. Prints a closing "N passed, N failed" line.
here=$(cd "$(dirname "$0")" && pwd)
pass=0; fail=0
for t in "$here"/mpi/*.sh; do
	[ -f "$t" ] || continue
	tmp=$(mktemp -d)
	if (cd "$tmp" && OMEN="$OMEN" OMEN_MPI="$OMEN_MPI" ROOT="$here/.." TMPDIR="$tmp" sh "$t") \
		>"$tmp.log" 2>&1; then
		pass=$((pass + 1)); echo "ok   mpi/$(basename "$t")"
	else
		fail=$((fail + 1)); echo "FAIL mpi/$(basename "$t")"; sed 's/^/    /' "$tmp.log" | tail -40
	fi
	rm -rf "$tmp" "$tmp.log"
done
echo "mpi: $pass passed, $fail failed"
[ "$fail" -eq 0 ]
