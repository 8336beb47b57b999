# Refinement: a whitespace-only rewrite keeps the line's origin (as
# git blame -w does). fixtures/label/ws.sh: "reindent" only re-indents the
# line that "origin" wrote and the fix repairs.
. "$ROOT/fixtures/label/check.sh"
sh "$ROOT/fixtures/label/ws.sh" repo >/dev/null
cd repo
LF=.git/omen/labels.jsonl
"$OMEN" label --window 0 >/dev/null
expect origin inducing 1
expect reindent clean
"$OMEN" label --window 0 --no-ws-origin --full >/dev/null
expect origin clean
expect reindent inducing 1
# the reference: git blame -w names the same origin
[ "$(git blame -w --porcelain -L4,4 fix^ -- calc.py | head -1 | cut -c1-40)" = "$(git rev-parse origin)" ] ||
	fail "git blame -w disagrees"
