# Refinement: with an issue date from the fix list, candidates newer than the
# issue are dropped (da Costa et al., TSE 2017). fixtures/label/issuedate.sh:
# issue #7 opened 2020-02-01; "early" (2020-01-01) and "late" (2020-03-01)
# each wrote a line the fix repairs.
. "$ROOT/fixtures/label/check.sh"
sh "$ROOT/fixtures/label/issuedate.sh" repo >/dev/null
cd repo
LF=.git/omen/labels.jsonl
"$OMEN" label --window 0 --fix-list fixlist.txt --format json >out.json
expect early inducing 1
expect late clean
grep -q '"issue":1' out.json || fail "fix not counted as identified by issue"
# "closes #7" alone is no fix sign (issue 10): only the list names it
rec fix | grep -q '"fix_by":\["issue"\]' || fail "identification methods not recorded"
"$OMEN" label --window 0 --fix-list fixlist.txt --closing-refs --full >/dev/null
rec fix | grep -q '"fix_by":\["pattern","issue"\]' || fail "--closing-refs: closing word not a fix sign"
"$OMEN" label --window 0 --fix-list fixlist.txt --no-issue-dates --full >/dev/null
expect early inducing 1
expect late inducing 1
