#!/bin/sh
# Labelling speed and memory on a real history (OMEN_BENCH_REPO, a clone).
# Figures only, nothing asserted. In the same run:
#  1. git log -p -U0 --no-merges (the cost of reading every diff once);
#  2. git omen label --full (peak RSS from /usr/bin/time -v);
#  3. the blame route: one `git blame -w -L <deleted ranges> <fix>^ -- <file>`
#     per fixed file, timed on a seeded sample of OMEN_BENCH_BLAME_SAMPLE
#     (default 150) (fix, file) pairs and extrapolated to all of them.
# Wall time is shown with CPU time (user+sys): on a shared machine the CPU
# ratio is the steadier figure.
repo=${OMEN_BENCH_REPO:-}
if [ -z "$repo" ]; then
	echo "bench_label: skipped (set OMEN_BENCH_REPO to a clone of a real history)"
	exit 0
fi
py=${PYTHON:-/usr/bin/python3}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
cd "$repo" || exit 1
n=$(git rev-list --count HEAD)
echo "history: $(basename "$repo"), $n commits ($(git rev-list --count --no-merges HEAD) non-merge)"
/usr/bin/time -f "%e %U %S %M" -o "$tmp/gitlog.t" git log -p -U0 --no-merges >/dev/null
/usr/bin/time -f "%e %U %S %M" -o "$tmp/label.t" "$OMEN" label --full --labels "$tmp/labels.jsonl" \
	--dump-origins "$tmp/dump.txt" >"$tmp/summary.txt"
/usr/bin/time -f "%e %U %S %M" -o "$tmp/label2.t" "$OMEN" label --full --labels "$tmp/labels2.jsonl" >/dev/null
"$py" - "$tmp" "$repo" "${OMEN_BENCH_BLAME_SAMPLE:-150}" <<'PY'
import collections, random, subprocess, sys, time
tmp, repo, sample = sys.argv[1], sys.argv[2], int(sys.argv[3])
def t(name):
    e, u, s, m = open("%s/%s.t" % (tmp, name)).read().split()[-4:]
    return float(e), float(u) + float(s), int(m)
gl, lb, lb2 = t("gitlog"), t("label"), t("label2")
print("git log -p -U0 --no-merges: %.1f s wall, %.1f s cpu" % gl[:2])
print("git omen label (with --dump-origins): %.1f s wall, %.1f s cpu, peak RSS %.0f MB" % (lb[0], lb[1], lb[2] / 1024))
print("git omen label: %.1f s wall, %.1f s cpu, peak RSS %.0f MB" % (lb2[0], lb2[1], lb2[2] / 1024))
print("label / git log: %.2fx wall, %.2fx cpu" % (lb2[0] / gl[0], lb2[1] / max(gl[1], 1e-9)))
ranges = collections.OrderedDict()
for ln in open(tmp + "/dump.txt", encoding="utf-8", errors="replace"):
    f = ln.rstrip("\n").split(" ", 4)
    ranges.setdefault((f[0], f[4]), []).append(int(f[1]))
keys = list(ranges)
fixes = len({k[0] for k in keys})
rng = random.Random(1)
pick = rng.sample(keys, min(sample, len(keys)))
t0 = time.time()
for fx, path in pick:
    ls = sorted(set(ranges[(fx, path)]))
    args, a = [], ls[0]
    for i in range(1, len(ls) + 1):
        if i == len(ls) or ls[i] != ls[i - 1] + 1:
            args += ["-L", "%d,%d" % (a, ls[i - 1])]
            if i < len(ls):
                a = ls[i]
    subprocess.run(["git", "-C", repo, "blame", "-w", "--porcelain"] + args + [fx + "^", "--", path],
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
dt = time.time() - t0
per = dt / max(len(pick), 1)
total = per * len(keys)
print("blame route: %d fixes, %d (fix, file) pairs; sampled %d: %.3f s per file -> %.0f s extrapolated"
      % (fixes, len(keys), len(pick), per, total))
print("label is %.0fx faster than the blame route (extrapolated)" % (total / lb2[0]))
PY
sed -n '1,12p' "$tmp/summary.txt" | sed 's/^/  /'
