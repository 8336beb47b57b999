#!/bin/sh
# fixtures/demo/gen.py: the same seed gives the same commit ids, another seed
# other ones; the history has merges, tags and the unmerged newest branch; a
# "Fixes:" trailer names an ancestor of its commit; and the fixes of planted
# defects really edit the lines that broke: `git blame` (the git CLI as the
# reference) of the lines a fix deletes, in the fix's parent, names the
# planted commit for most of them (the rest: fixes that only add lines, and
# lines a later rewrite took over - the generator's deliberate noise).
# Run by tests/run-shell.sh with $ROOT.
set -u
: "${ROOT:?}"
py=${PYTHON:-/usr/bin/python3}
gen="$ROOT/fixtures/demo/gen.py"
fail() { echo "FAIL demo_gen: $*"; exit 1; }

"$py" "$gen" --seed 5 --commits 300 --out a --truth a.truth --issues a.issues --quiet || fail "gen.py failed"
"$py" "$gen" --seed 5 --commits 300 --out b --quiet --bare || fail "gen.py --bare failed"
"$py" "$gen" --seed 6 --commits 300 --out c --quiet || fail "gen.py seed 6 failed"
refs_a=$(git -C a for-each-ref --format='%(objectname) %(refname)')
refs_b=$(git -C b for-each-ref --format='%(objectname) %(refname)')
[ "$refs_a" = "$refs_b" ] || fail "seed 5 twice gave different refs"
[ "$(git -C a rev-parse main)" != "$(git -C c rev-parse main)" ] || fail "seeds 5 and 6 gave the same main"
[ -z "$(git -C a status --porcelain)" ] || fail "work tree of the generated repository is not clean"
git -C a fsck --no-progress >/dev/null 2>&1 || fail "git fsck found problems"

n=$(git -C a rev-list --count --all)
[ "$n" -ge 250 ] && [ "$n" -le 330 ] || fail "--commits 300 gave $n commits"
[ "$(git -C a rev-list --count --merges main)" -ge 1 ] || fail "no merge commits"
[ "$(git -C a tag | wc -l)" -ge 1 ] || fail "no tags"
git -C a rev-parse -q --verify refs/heads/feature/pool-rebalancing >/dev/null || fail "no newest branch"
git -C a merge-base --is-ancestor feature/pool-rebalancing main && fail "the newest branch is merged"
[ "$(git -C a log --format=%an | sort -u | wc -l)" -ge 5 ] || fail "fewer than 5 authors"
[ -s a.issues ] || fail "no issue list"
grep -Eqv '^#[0-9]+ [0-9]{4}-[0-9]{2}-[0-9]{2}$' a.issues && fail "bad line in the issue list"

cd a || exit 1
"$py" - ../a.truth <<'EOF' || exit 1
import json, re, subprocess, sys

def git(*a):
    return subprocess.run(("git",) + a, check=True, capture_output=True, text=True).stdout

rows = [json.loads(l) for l in open(sys.argv[1])]
ids = {r["id"] for r in rows}
if len(rows) != int(git("rev-list", "--count", "--all")) or None in ids:
    sys.exit("FAIL demo_gen: truth file does not list every commit once")
# Fixes: trailers name an ancestor
for line in git("log", "--all", "--format=%H %(trailers:key=Fixes,valueonly,separator=%x2C)").splitlines():
    parts = line.split(" ", 1)
    if len(parts) < 2 or not parts[1].strip():
        continue
    full = git("rev-parse", parts[1].strip() + "^{commit}").strip()
    if subprocess.run(["git", "merge-base", "--is-ancestor", full, parts[0]]).returncode:
        sys.exit("FAIL demo_gen: %s names %s, not an ancestor" % (parts[0][:12], full[:12]))
# fixes edit the planted lines
hits = total = 0
for r in rows:
    for fx in r["fixed_by"]:
        total += 1
        blamed = set()
        cur = None
        for l in git("diff", "-U0", "--no-renames", fx + "^", fx).splitlines():
            if l.startswith("--- "):
                cur = l[6:] if l.startswith("--- a/") else None
            m = re.match(r"@@ -(\d+)(?:,(\d+))? ", l)
            if m and cur:
                start, cnt = int(m.group(1)), int(m.group(2) or "1")
                if cnt == 0:
                    continue
                out = git("blame", "--porcelain", "-L", "%d,+%d" % (start, cnt), fx + "^", "--", cur)
                blamed |= {x.split()[0] for x in out.splitlines() if re.match(r"^[0-9a-f]{40} ", x)}
        hits += r["id"] in blamed
if total < 20:
    sys.exit("FAIL demo_gen: only %d fixes of planted defects" % total)
share = hits / total
print("fixes whose deleted lines blame to the planted commit: %d of %d (%.0f%%)" % (hits, total, 100 * share))
if share < 0.6:
    sys.exit("FAIL demo_gen: too few fixes edit the planted lines")
planted = sum(1 for r in rows if r["planted"])
print("commits with planted defects: %d of %d" % (planted, len(rows)))
if not 0.08 < planted / len(rows) < 0.4:
    sys.exit("FAIL demo_gen: implausible share of defective commits")
EOF
echo "ok: deterministic, $n commits, fixes edit the planted lines"
