#!/bin/sh
# The fix and tracing rules of issue 10, one at a time, on a real history
# (OMEN_BENCH_REPO, a clone; OMEN_BENCH_BASE=<git-omen built before the
# rules> adds a "before" row). Figures only, nothing asserted. Per row: fix
# share, inducing share (of labelled commits), and the developer-named
# oracle of tests/ref/lib/named_oracle.py (Rosa et al., ICSE 2021): for the
# fixes that name the commit they repair, the share of named commits among
# those traced (recall) and of traced commits that are named (candidate
# precision), from --dump-origins, with the named-link rule off
# (--keep-other-candidates) so that the oracle does not grade itself.
repo=${OMEN_BENCH_REPO:-}
if [ -z "$repo" ]; then
	echo "bench_label_rules: skipped (set OMEN_BENCH_REPO to a clone of a real history)"
	exit 0
fi
py=${PYTHON:-/usr/bin/python3}
here=$(cd "$(dirname "$0")/.." && pwd)
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
cd "$repo" || exit 1
off="--closing-refs --whole-message --feature-subjects --cosmetic-pattern= --non-code-paths= --no-insertion-context --min-line-share 0 --keep-other-candidates --horizon 0"
row() { # name binary options...
	name=$1 bin=$2
	shift 2
	# shellcheck disable=SC2086
	/usr/bin/time -f "%e" -o "$tmp/t" "$bin" label --full -o "$tmp/l.jsonl" --dump-origins "$tmp/d.txt" \
		--format json "$@" >"$tmp/s.json" 2>/dev/null || { echo "$name: label failed"; return; }
	"$py" - "$name" "$tmp/s.json" "$tmp/t" <<'PY'
import json, sys
s = json.load(open(sys.argv[2]))
t = float(open(sys.argv[3]).read().split()[-1])
known = s["inducing"] + s["clean"]
nm = s["commits"] - s["merges"]
sys.stdout.write("%-20s fixes %5.1f%% traced %5.1f%%  inducing %5.1f%% of %6d labelled  %6.1f s  " % (
    sys.argv[1], 100.0 * s["fixes"] / max(nm, 1), 100.0 * s["fixes_traced"] / max(nm, 1),
    100.0 * s["inducing"] / max(known, 1), known, t))
PY
	"$py" "$here/ref/lib/named_oracle.py" "$repo" "$tmp/d.txt" "$tmp/l.jsonl" | sed -n \
		-e 's/^REF precision \([0-9.]*\) recall \([0-9.]*\).*/oracle P \1 R \2/p' \
		-e 's/^REF code precision \([0-9.]*\) recall \([0-9.]*\).*/code fixes P \1 R \2/p' | paste -sd' '
}
echo "history: $(basename "$repo"), $(git rev-list --count HEAD) commits"
"$py" "$here/ref/lib/named_oracle.py" "$repo" /dev/null | head -1
[ -n "$OMEN_BENCH_BASE" ] && row before "$OMEN_BENCH_BASE" --window 90
# shellcheck disable=SC2086
row "all rules off" "$OMEN" $off
row "+closing words" "$OMEN" --whole-message --feature-subjects --cosmetic-pattern= --non-code-paths= --no-insertion-context --min-line-share 0 --keep-other-candidates --horizon 0
row "+description only" "$OMEN" --feature-subjects --cosmetic-pattern= --non-code-paths= --no-insertion-context --min-line-share 0 --keep-other-candidates --horizon 0
row "+feature subjects" "$OMEN" --cosmetic-pattern= --non-code-paths= --no-insertion-context --min-line-share 0 --keep-other-candidates --horizon 0
row "+cosmetic" "$OMEN" --non-code-paths= --no-insertion-context --min-line-share 0 --keep-other-candidates --horizon 0
row "+non-code paths" "$OMEN" --no-insertion-context --min-line-share 0 --keep-other-candidates --horizon 0
row "+insertion context" "$OMEN" --min-line-share 0 --keep-other-candidates --horizon 0
row "+minor candidates" "$OMEN" --keep-other-candidates --horizon 0
row "+named decides" "$OMEN" --horizon 0
for h in ${OMEN_BENCH_HORIZONS:-}; do
	row "+horizon $h" "$OMEN" --horizon "$h"
done
