#!/bin/sh
# Labelling a blobless partial clone against the full clone (issue 12), on a
# real history (OMEN_BENCH_REPO, a git directory) served over file:// with
# filters allowed (upload-pack run as `git -c uploadpack.allowFilter=true
# upload-pack`; the served repository is not changed). Figures only, nothing
# asserted. In the same run:
#  1. git clone (full) and git clone --filter=blob:none, both over file://;
#  2. git omen label --full on the full clone (twice, the faster run kept);
#  3. git omen label on the blobless clone: the pre-pass, the batched fetch
#     and the pass, the fetch time taken from the label summary;
#  4. git omen label --full on that clone again, now that its blobs are in
#     promisor packs (the pre-pass finds nothing to fetch);
#  5. git's own lazy fetch, one blob at a time (`git cat-file -p` of absent
#     blobs in another blobless clone), timed on OMEN_BENCH_LAZY_SAMPLE
#     (default 20) blobs and extrapolated to all of them: the cost of not
#     batching.
# Target: (3 without its fetch) <= 2 x (2). Wall time with CPU time
# (user+sys of the children): on a shared machine the CPU ratio is steadier.
repo=${OMEN_BENCH_REPO:-}
if [ -z "$repo" ]; then
	echo "bench_partial: skipped (set OMEN_BENCH_REPO to a git directory of a real history)"
	exit 0
fi
: "${OMEN:?}"
py=${PYTHON:-/usr/bin/python3}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
repo=$(cd "$repo" && pwd)
up='git -c uploadpack.allowFilter=true upload-pack'
export OMEN_NO_PROGRESS=1
tm() { name=$1; shift; /usr/bin/time -f "%e %U %S %M" -o "$tmp/$name.t" "$@"; }
tm clone_full git clone -q -u "$up" "file://$repo" "$tmp/full" || exit 1
tm clone_part git clone -q -u "$up" --filter=blob:none "file://$repo" "$tmp/part" 2>/dev/null || exit 1
git clone -q -u "$up" --filter=blob:none --no-checkout "file://$repo" "$tmp/lazy" 2>/dev/null || exit 1
for d in part lazy; do git -C "$tmp/$d" config remote.origin.uploadpack "$up"; done
absent=$(git -C "$tmp/part" rev-list --objects --missing=print HEAD | grep -c '^?')
n=$(git -C "$tmp/full" rev-list --count HEAD)
echo "history: $(basename "$(dirname "$repo")")/$(basename "$repo"), $n commits; the blobless clone lacks $absent blobs of HEAD's history"
(cd "$tmp/full" && tm label_full1 "$OMEN" label --full -o "$tmp/full.jsonl" >/dev/null &&
	tm label_full2 "$OMEN" label --full -o "$tmp/full2.jsonl" >/dev/null) || exit 1
(cd "$tmp/part" && tm label_part "$OMEN" label --full -o "$tmp/part.jsonl" --format json >"$tmp/part.json" &&
	tm label_part2 "$OMEN" label --full -o "$tmp/part2.jsonl" --format json >"$tmp/part2.json") || exit 1
git -C "$tmp/lazy" rev-list --objects --missing=print HEAD | sed -n 's/^?//p' >"$tmp/absent.txt"
"$py" - "$tmp" "${OMEN_BENCH_LAZY_SAMPLE:-20}" <<'PY'
import json, random, subprocess, sys, time
tmp, sample = sys.argv[1], int(sys.argv[2])
def t(name):
    e, u, s, m = open("%s/%s.t" % (tmp, name)).read().split()[-4:]
    return float(e), float(u) + float(s), int(m)
cf, cp = t("clone_full"), t("clone_part")
f1, f2 = t("label_full1"), t("label_full2")
full = f1 if f1[0] <= f2[0] else f2
lp, lp2 = t("label_part"), t("label_part2")
js = json.load(open(tmp + "/part.json"))["blobs"]
js2 = json.load(open(tmp + "/part2.json"))["blobs"]
same = open(tmp + "/full.jsonl", "rb").read() == open(tmp + "/part.jsonl", "rb").read()
print("git clone: full %.1f s, blobless %.1f s (wall)" % (cf[0], cp[0]))
print("label, full clone: %.1f s wall, %.1f s cpu, peak RSS %.0f MB" % (full[0], full[1], full[2] / 1024))
print("label, blobless clone: %.1f s wall, %.1f s cpu, peak RSS %.0f MB; of it: pre-pass %.2f s (%d commits), "
      "fetch %.1f s (%d of %d absent blobs, %d batches)" % (lp[0], lp[1], lp[2] / 1024, js["scan_seconds"],
      js["scanned_commits"], js["fetch_seconds"], js["fetched"], js["absent"], js["batches"]))
rest, rest_cpu = lp[0] - js["fetch_seconds"], lp[1] - js["fetch_cpu_seconds"]
print("  without the fetch (%.1f s wall, %.1f s cpu of git and the processes it ran): %.1f s wall, %.1f s cpu "
      "= %.2fx wall, %.2fx cpu the full clone's (target <= 2x); labels %s" %
      (js["fetch_seconds"], js["fetch_cpu_seconds"], rest, rest_cpu, rest / full[0],
       rest_cpu / max(full[1], 1e-9), "byte-identical" if same else "DIFFER"))
print("label again on the blobless clone (blobs now in promisor packs): %.1f s wall, %.1f s cpu = %.2fx wall, "
      "%.2fx cpu; pre-pass %.2f s, %d absent" % (lp2[0], lp2[1], lp2[0] / full[0], lp2[1] / max(full[1], 1e-9),
      js2["scan_seconds"], js2["absent"]))
ids = [l.strip() for l in open(tmp + "/absent.txt") if l.strip()]
pick = random.Random(1).sample(ids, min(sample, len(ids)))
t0 = time.time()
for i in pick:
    subprocess.run(["git", "-C", tmp + "/lazy", "cat-file", "-p", i], stdout=subprocess.DEVNULL,
                   stderr=subprocess.DEVNULL)
per = (time.time() - t0) / max(len(pick), 1)
print("git's lazy fetch, one blob at a time: %.3f s per blob (%d sampled) -> %.0f s for %d blobs, "
      "%.0fx the batched fetch" % (per, len(pick), per * len(ids), len(ids), per * len(ids) / max(js["fetch_seconds"], 1e-9)))
PY
