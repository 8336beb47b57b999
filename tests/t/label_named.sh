# Fixes that name the repaired commit ("Fixes: <id>" trailer, git revert's
# "This reverts commit <id>.") are strong links. fixtures/label/named.sh.
. "$ROOT/fixtures/label/check.sh"
sh "$ROOT/fixtures/label/named.sh" repo >/dev/null
cd repo
LF=.git/omen/labels.jsonl
"$OMEN" label --window 0 --fix-pattern '^never-matches$' --format json >out.json
expect gamma inducing 1
expect delta inducing 2
traced_by gamma named
traced_by delta revert
rec gamma | grep -q '"named":1' || fail "named link not counted"
rec revert | grep -q '"fix_by":\["named"\]' || fail "revert not identified as named"
grep -q '"named":2' out.json || fail "summary named count"
