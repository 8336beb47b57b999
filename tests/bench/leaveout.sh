#!/bin/sh
# The leave-out table (issue 11): every history of fixtures/corpus/leave-out.tsv,
# cloned from its snapshot, labelled with the default rules, evaluated
# walk-forward with the five methods side by side (base model alone,
# fine-tuned from it, from scratch, logistic regression, lines added), and
# timed: `train` fine-tuning from the base against `train --scratch` on the
# same history. Prints one table and the verdict on each target of issue 11.
# Figures only: nothing here is tuned on these histories, and nothing is
# asserted; a figure that disappoints is printed as it is.
#
#   OMEN_CORPUS_DIR=<snapshots> sh tests/bench/leaveout.sh
#
# Environment:
#   OMEN_CORPUS_DIR     the snapshots, one per entry, named <owner>+<name>, as
#                       for fixtures/corpus/build.sh (bare, or repo/ or .git/
#                       inside); unset: the benchmark says it is skipped
#   OMEN_LEAVEOUT_WORK  work directory (default: a new temporary one); clones
#                       and labels there are reused by a rerun
#   OMEN_BASE_MODEL     the base model (default fixtures/base-model/base.omen)
#   OMEN_LEAVEOUT_ONLY  names to run, separated by spaces (default: all)
#   OMEN                the binary (default build/git-omen)
# Needs python3 (standard library only) to read eval's JSON.
set -u
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
OMEN=${OMEN:-$root/build/git-omen}
list=$root/fixtures/corpus/leave-out.tsv
base=${OMEN_BASE_MODEL:-$root/fixtures/base-model/base.omen}
if [ -z "${OMEN_CORPUS_DIR:-}" ]; then
	echo "leaveout: skipped: OMEN_CORPUS_DIR is not set (the directory of the snapshots)"
	exit 0
fi
die() { echo "leaveout: $*" >&2; exit 1; }
[ -x "$OMEN" ] || die "cannot run '$OMEN': build it first (make)"
[ -f "$base" ] || die "cannot read base model '$base'"
command -v python3 >/dev/null || die "python3 is needed to read eval's JSON"
work=${OMEN_LEAVEOUT_WORK:-$(mktemp -d "${TMPDIR:-/tmp}/leaveout.XXXXXX")}
mkdir -p "$work" || die "cannot make '$work'"
base=$(cd "$(dirname "$base")" && pwd)/$(basename "$base")

gitdir_of() {
	for d in "$1/repo" "$1/.git" "$1"; do
		if [ -d "$d" ] && git --git-dir="$d" rev-parse --git-dir >/dev/null 2>&1; then
			echo "$d"
			return
		fi
	done
}

# Runs a command; then cpu_wall prints its CPU seconds (user + system) and
# wall seconds
timed() {
	/usr/bin/time -f "%U %S %e" -o "$work/time.out" "$@"
}
cpu_wall() {
	awk '{printf "%.1f\t%.1f", $1 + $2, $3}' "$work/time.out"
}

echo "leave-out table: $(date -u '+%Y-%m-%d %H:%M UTC'), load $(cut -d' ' -f1-3 /proc/loadavg)," \
	"$(nproc) cores"
echo "base model: $base ($(wc -c <"$base") bytes; last commit touching it:" \
	"$(git -C "$root" log -1 --format='%h %cs' -- "$(echo "$base" | sed "s|^$root/||")" 2>/dev/null || echo none))"
echo "omen: $(git -C "$root" rev-parse --short HEAD 2>/dev/null)"
: >"$work/rows.tsv"
grep -v '^#' "$list" | tail -n +2 | while IFS='	' read -r name head lang commits; do
	[ -n "$name" ] || continue
	if [ -n "${OMEN_LEAVEOUT_ONLY:-}" ]; then
		case " $OMEN_LEAVEOUT_ONLY " in *" $name "*) ;; *) continue ;; esac
	fi
	key=$(echo "$name" | tr / +)
	g=$(gitdir_of "$OMEN_CORPUS_DIR/$key")
	if [ -z "$g" ]; then
		echo "leaveout: '$name': no snapshot at '$OMEN_CORPUS_DIR/$key'; left out" >&2
		continue
	fi
	repo=$work/$key
	if [ ! -d "$repo/.git" ]; then
		git clone -q --no-checkout "$g" "$repo" || { echo "leaveout: '$name': clone failed" >&2; continue; }
	fi
	if ! git -C "$repo" cat-file -e "$head^{commit}" 2>/dev/null; then
		echo "leaveout: '$name': snapshot lacks its head $head; left out" >&2
		continue
	fi
	echo "== $name ($lang, $commits commits)" >&2
	(cd "$repo" && "$OMEN" label "$head" >"$work/$key.label.txt") ||
		{ echo "leaveout: '$name': labelling failed" >&2; continue; }
	# a rerun with the same binary, base model and labels reuses the evaluation
	sum=$(cat "$OMEN" "$base" "$repo/.git/omen/labels.jsonl" 2>/dev/null | cksum)
	if [ ! -s "$work/$key.eval.json" ] || [ "$(cat "$work/$key.eval.sum" 2>/dev/null)" != "$sum" ]; then
		rm -f "$work/$key.eval.sum"
		(cd "$repo" && nice "$OMEN" eval "$head" --from "$base" --format json \
			>"$work/$key.eval.json" 2>"$work/$key.eval.err") ||
			{ echo "leaveout: '$name': eval failed: $(tail -1 "$work/$key.eval.err")" >&2; continue; }
		echo "$sum" >"$work/$key.eval.sum"
	fi
	# train times on the same history, each from the dataset cache eval left
	(cd "$repo" && timed "$OMEN" train "$head" --scratch --model "$work/$key.scratch.omen" \
		>"$work/$key.scratch.txt" 2>&1) || { echo "leaveout: '$name': train --scratch failed" >&2; continue; }
	sc=$(cpu_wall)
	(cd "$repo" && timed "$OMEN" train "$head" --from "$base" --model "$work/$key.tuned.omen" \
		>"$work/$key.tuned.txt" 2>&1) || { echo "leaveout: '$name': train --from failed" >&2; continue; }
	printf '%s\t%s\t%s\t%s\n' "$name" "$work/$key.eval.json" "$sc" "$(cpu_wall)" >>"$work/rows.tsv"
done

python3 - "$work/rows.tsv" <<'EOF'
import json, sys
rows = [l.rstrip("\n").split("\t") for l in open(sys.argv[1]) if l.strip()]
if not rows:
    sys.exit("leaveout: no history was measured")
cols = ["base_model", "fine_tuned", "model", "lr_metrics", "lines_added"]
heads = ["base model alone", "fine-tuned", "from scratch", "logistic regr.", "lines added"]
def cell(m):
    if m is None or m["auc"] is None:
        return "n/a"
    lo, hi = m["auc_ci95"]
    return "%.3f [%.2f-%.2f]" % (m["auc"], lo, hi) if lo is not None else "%.3f" % m["auc"]
print()
print("| history | test commits (inducing) | " + " | ".join(heads) +
      " | ECE fine-tuned | train --scratch | fine-tuning |")
print("|---" * (len(heads) + 5) + "|")
res = []
for name, path, sc_cpu, sc_wall, ft_cpu, ft_wall in rows:
    j = json.load(open(path))
    pm = j["pooled"]["methods"]
    ms = [pm.get(c) for c in cols]
    ece = ms[1]["ece"] if ms[1] else None
    print("| %s | %d (%d) | %s | %s | %s s CPU, %s s wall | %s s CPU, %s s wall |" % (
        name, j["pooled"]["n"], j["pooled"]["positives"], " | ".join(cell(m) for m in ms),
        "n/a" if ece is None else "%.3f" % ece, sc_cpu, sc_wall, ft_cpu, ft_wall))
    auc = [m["auc"] if m else None for m in ms]
    res.append((name, auc, ece, float(sc_cpu), float(ft_cpu)))
print()
n = len(res)
def ok(b):
    return "met" if b else "NOT met"
if any(r[1][0] is None or r[1][1] is None for r in res):
    print("verdict: no base model figures (see eval's notice); targets not judged")
    sys.exit(0)
lead = [r[1][1] - max(r[1][3], r[1][4]) for r in res]
wins = sum(1 for d in lead if d >= 0)
print("target 1, fine-tuned AUC >= the best baseline (LR or lines added) on at least 5 of 6: "
      "%d of %d, %s" % (wins, n, ok(wins >= 5 and n >= 6)))
print("         never more than 0.02 below it: worst %+.3f, %s" % (min(lead), ok(min(lead) >= -0.02)))
print("         mean lead over it >= 0.03: %+.3f, %s" % (sum(lead) / n, ok(sum(lead) / n >= 0.03)))
b70 = sum(1 for r in res if r[1][0] >= 0.70)
bla = sum(1 for r in res if r[1][0] >= r[1][4])
print("target 2, base model alone AUC >= 0.70 on each: %d of %d, %s" % (b70, n, ok(b70 == n)))
print("         and >= lines added on at least half: %d of %d, %s" % (bla, n, ok(2 * bla >= n)))
e5 = sum(1 for r in res if r[2] is not None and r[2] <= 0.05)
print("target 3, ECE of fine-tuned <= 0.05 (calibrated on each fold's validation slice): "
      "%d of %d, %s" % (e5, n, ok(e5 == n)))
fast = sum(1 for r in res if r[4] <= r[3])
print("target 4, fine-tuning no slower than train --scratch (CPU seconds): %d of %d, %s"
      % (fast, n, ok(fast == n)))
if n < 6:
    print("(only %d of the 6 leave-out histories were measured)" % n)
EOF
