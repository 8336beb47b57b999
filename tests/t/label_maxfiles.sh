# Refinement: fixes touching more than omen.maxFixFiles files are skipped.
# fixtures/label/maxfiles.sh: the fix touches three files.
. "$ROOT/fixtures/label/check.sh"
sh "$ROOT/fixtures/label/maxfiles.sh" repo >/dev/null
cd repo
LF=.git/omen/labels.jsonl
"$OMEN" label --window 0 >/dev/null
expect origin inducing 3
"$OMEN" label --window 0 --max-fix-files 2 --full >out.txt
expect origin clean
grep -q "skipped     1 fixes touching too many files" out.txt || fail "skip not reported"
rec fix | grep -q '"fix":true' || fail "a skipped fix is still a fix"
# the same through git config (git -c sets GIT_CONFIG_PARAMETERS)
PATH="$(dirname "$OMEN"):$PATH" git -c omen.maxFixFiles=2 omen label --window 0 --full >/dev/null
expect origin clean
git config omen.maxFixFiles 5
"$OMEN" label --window 0 --full >/dev/null
expect origin inducing 3
