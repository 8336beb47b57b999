#!/bin/sh
# Whole walk-forward evaluation of a ~10k-commit history with labels cached:
# the invented demo history (fixtures/demo/gen.py --commits 10000), or the
# repository in $OMEN_BENCH_REPO. Prints the time of each fold and the total;
# asserts nothing about time. Target: <= 5 minutes on two cores.
set -e
[ -n "$OMEN" ] || { echo "bench_eval.sh: set OMEN"; exit 1; }
root=$(cd "$(dirname "$0")/../.." && pwd)
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
if [ -n "$OMEN_BENCH_REPO" ]; then
	repo=$OMEN_BENCH_REPO
	export GIT_DIR="$repo"
else
	/usr/bin/python3 "$root/fixtures/demo/gen.py" --seed 7 --commits 10000 --years 8 \
		--out "$tmp/repo" --quiet
	repo=$tmp/repo
	cd "$repo"
fi
t0=$(date +%s.%N)
"$OMEN" label >/dev/null
t1=$(date +%s.%N)
"$OMEN" eval --format json --html "$tmp/report.html" >"$tmp/eval.json"
t2=$(date +%s.%N)
/usr/bin/python3 - "$tmp/eval.json" "$t0" "$t1" "$t2" <<'PY'
import json, sys
r = json.load(open(sys.argv[1]))
t0, t1, t2 = map(float, sys.argv[2:5])
print("eval bench: %d commits, %d labelled; label %.1f s; eval (dataset, %d folds, "
      "report) %.1f s" % (r["commits"], r["labelled"], t1 - t0, len(r["folds"]), t2 - t1))
for f in r["folds"]:
    m = f["methods"]["model"]
    print("  fold %d: train %d, test %d (%d inducing): %.1f s, auc %s" % (
        f["fold"], f["n_train"] + f["n_valid"], f["n_test"], f["pos_test"], f["seconds"],
        "n/a" if m["auc"] is None else "%.3f" % m["auc"]))
p = r["pooled"]["methods"]
print("  pooled auc: model %s, lr %s, lines added %s" % tuple(
    "n/a" if p[k]["auc"] is None else "%.3f" % p[k]["auc"]
    for k in ("model", "lr_metrics", "lines_added")))
PY
