# Bad input: an invalid fix pattern, a fix list with unknown ids, a history
# with no fixes, a shallow clone, a file that becomes binary;
# and a failed run leaves the previous labels intact.
. "$ROOT/fixtures/label/check.sh"
sh "$ROOT/fixtures/label/ws.sh" repo >/dev/null
cd repo
LF=.git/omen/labels.jsonl
# invalid regex: exit 128 and a clear message (POSIX regerror text)
set +e
"$OMEN" label --fix-pattern '(unclosed' >out.txt 2>err.txt; rc=$?
set -e
[ $rc -eq 128 ] || fail "bad pattern exit $rc"
grep -q "bad fix pattern '(unclosed'" err.txt || fail "bad pattern message: $(cat err.txt)"
[ ! -e "$LF" ] || fail "labels written despite the error"
# fix list with ids that match nothing: warned and counted
printf '%s\n0badc0ffee00\n#999\n' "$(git rev-parse --short=10 reindent)" >list.txt
"$OMEN" label --window 0 --fix-list list.txt --format json >out.json 2>err.txt
grep -q "warning: 2 of 3 fix list entries matched no commit" err.txt || fail "no unknown-id warning: $(cat err.txt)"
grep -q '"list_unmatched":2' out.json || fail "unmatched not counted"
rec reindent | grep -q '"fix_by":\["list"\]' || fail "listed commit not a fix"
# usage errors
set +e
"$OMEN" label --window soon >/dev/null 2>&1; rc=$?
set -e
[ $rc -eq 129 ] || fail "bad --window exit $rc"
# an interrupted or failed run leaves the previous labels intact
cp "$LF" before.jsonl
set +e
GIT_CONFIG_PARAMETERS="'omen.memoryLimit'='1'" "$OMEN" label --full >/dev/null 2>err.txt; rc=$?
set -e
[ $rc -eq 128 ] || fail "memory limit exit $rc"
grep -q "over the memory limit" err.txt || fail "memory limit message: $(cat err.txt)"
cmp -s before.jsonl "$LF" || fail "previous labels changed by a failed run"
ls .git/omen | grep -q tmp && fail "temporary file left behind"
cd ..

# a history with no fixes: said plainly, nothing inducing
mkdir nofix && cd nofix
. "$ROOT/fixtures/label/lib.sh"
fx_init .
echo one > a.txt; fx_commit 2020-01-01 c1 "Add a"
echo two >> a.txt; fx_commit 2020-06-01 c2 "Extend a"
# a file that becomes binary, then is edited again
printf 'x\0y\n' > a.txt; fx_commit 2020-07-01 c3 "Store a as data"
printf 'text again\n' > a.txt; fx_commit 2020-08-01 c4 "Fix a back to text"
"$OMEN" label --fix-pattern '^nothing$' >out.txt
grep -q "no fix commits found" out.txt || fail "no-fix history not said plainly"
LF=.git/omen/labels.jsonl
expect c1 clean
expect c4 unknown
"$OMEN" label --full >out.txt
grep -q "fixes       1" out.txt || fail "the binary-to-text fix not found"
expect c3 unknown
cd ..

# shallow clone: boundary commits are unknown
git clone -q --depth 2 "file://$PWD/repo" shallow
cd shallow
"$OMEN" label --window 0 --format json >out.json
grep -q '"shallow":true' out.json || fail "shallow not reported"
LF=.git/omen/labels.jsonl
rec reindent >/dev/null 2>&1 || true
grep -c '"boundary":true' "$LF" | grep -q '^1$' || fail "expected one boundary commit"
grep '"boundary":true' "$LF" | grep -q '"label":"unknown"' || fail "boundary not unknown"
