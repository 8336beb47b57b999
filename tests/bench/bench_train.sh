#!/bin/sh
# `git omen train` on a ~10k-commit history: the invented demo history
# (fixtures/demo/gen.py --commits 10000), or the repository in
# $OMEN_BENCH_REPO. Times the first train (dataset built from history and
# cached; with $OMEN_BENCH_REPO the cache may already exist) and a second one
# (dataset from the cache, the target case: <= 120 s on two cores), with the
# peak resident memory of each (target <= 1 GB for ~40k commits), and the
# test-slice AUC of the model and both baselines. On the demo history the
# first train runs 200 commits before its tip, which is then restored and
# relabelled, so a third run ("extended") shows the cache of the older
# history serving the grown one. Figures only; asserts nothing about time.
set -e
[ -n "$OMEN" ] || { echo "bench_train.sh: set OMEN"; exit 1; }
root=$(cd "$(dirname "$0")/../.." && pwd)
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
if [ -n "$OMEN_BENCH_REPO" ]; then
	export GIT_DIR="$OMEN_BENCH_REPO"
else
	/usr/bin/python3 "$root/fixtures/demo/gen.py" --seed 7 --commits 10000 --years 8 \
		--out "$tmp/repo" --quiet
	cd "$tmp/repo"
fi
runs="first cached"
if [ -z "$OMEN_BENCH_REPO" ]; then
	tip=$(git rev-parse HEAD)
	git reset -q --hard HEAD~200
	runs="first extended cached"
fi
"$OMEN" label >/dev/null
for run in $runs; do
	if [ "$run" = extended ]; then
		git reset -q --hard "$tip"
		"$OMEN" label >/dev/null
	fi
	t0=$(date +%s.%N)
	/usr/bin/time -f "%M" -o "$tmp/rss" "$OMEN" train --format json --model "$tmp/m.omen" \
		>"$tmp/train.json"
	t1=$(date +%s.%N)
	/usr/bin/python3 - "$tmp/train.json" "$t0" "$t1" "$(cat "$tmp/rss")" "$run" <<'PY'
import json, sys
r = json.load(open(sys.argv[1]))
t0, t1, rss = float(sys.argv[2]), float(sys.argv[3]), int(sys.argv[4])
t = r["test"]
print("train bench (%s dataset, %d of %d samples from the cache): %.1f s wall (%.1f s training), "
      "peak RSS %.0f MiB; "
      "train %d, valid %d, test %d; epochs %d (best %d)" % (
          sys.argv[5], r["dataset"]["from_cache"], r["dataset"]["commits"], t1 - t0,
          r["seconds"], rss / 1024.0, r["n_train"], r["n_valid"],
          r["n_test"], r["epochs_run"], r["best_epoch"]))
print("  test AUC: model %.3f, lr on metrics %.3f, lines added %.3f" % tuple(
    t[k].get("auc", float("nan")) for k in ("model", "lr_metrics", "lines_added")))
PY
done
