# Refinement: merge commits are never candidates. fixtures/label/merge.sh:
# the merge resolves a conflict by writing a new line that the fix repairs
# (traced to the merge, which is dropped), and brings in side.c unchanged
# from the topic branch (its line keeps the topic commit as origin).
. "$ROOT/fixtures/label/check.sh"
sh "$ROOT/fixtures/label/merge.sh" repo >/dev/null
cd repo
LF=.git/omen/labels.jsonl
"$OMEN" label --window 0 >out.txt
expect merge unknown 0
rec merge | grep -q '"merge":true' || fail "merge not marked"
rec merge | grep -q '"fix":false' || fail "a merge is never a fix"
expect topic2 inducing 1
traced_by topic2 fix
expect topic1 clean
expect main1 clean
grep -q "1 merges, never candidates" out.txt || fail "summary does not count the merge"
