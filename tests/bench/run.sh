#!/bin/sh
# Runs the benchmarks: each compiled tests/bench/*.c binary given as an
# argument, then each tests/bench/bench_*.sh script. Figures only; nothing
# here asserts a time. Environment: $OMEN (binary), $BUILD (build dir).
# Real histories: set OMEN_BENCH_REPO to a git directory (e.g. a clone of a
# public project) for the history, label, train and score benchmarks.
here=$(cd "$(dirname "$0")" && pwd)
for b in "$@"; do
	echo "== $(basename "$b")"
	"$b" || echo "bench $(basename "$b") failed (exit $?)"
done
for s in "$here"/bench_*.sh; do
	[ -f "$s" ] || continue
	echo "== $(basename "$s")"
	sh "$s" || echo "bench $(basename "$s") failed (exit $?)"
done
# the leave-out table of issue 11 (skipped without OMEN_CORPUS_DIR)
echo "== leaveout.sh"
sh "$here/leaveout.sh" || echo "bench leaveout.sh failed (exit $?)"
