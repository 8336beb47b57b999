# The fix rules of issue 10, each on by default and off by its option
# (fixtures/label/rules.sh describes the history), the horizon, and the bad
# input of the new settings.
. "$ROOT/fixtures/label/check.sh"
sh "$ROOT/fixtures/label/rules.sh" repo >/dev/null
cd repo
LF=.git/omen/labels.jsonl
isfix() { rec "$1" | grep -q "\"fix\":$2" || fail "$1: fix is not $2"; }
scope() { rec "$1" | grep -q "\"fix_scope\":\"$2\"" || fail "$1: fix_scope is not $2: $(rec "$1")"; }
"$OMEN" label --window 0 --format json >out.json
isfix closing false
isfix trailer false
isfix typo true; scope typo cosmetic
isfix docfix true; scope docfix non-code
scope both code; scope named code; scope guard code
expect base inducing 1          # only both's calc.c line: the test line is non-code
expect extra inducing 1         # named: g's line; typo's edit of f is cosmetic
expect late inducing 1          # guard's insertion context
traced_by base both
rec base | grep -q "$(git rev-parse named)" && fail "named's other candidate was not dropped"
for k in '"closing_only":1' '"outside_only":1' '"fixes_cosmetic":1' '"fixes_non_code":1' \
	'"named_dropped":1' '"fixes_insertion":1' '"horizon_days":0'; do
	grep -q "$k" out.json || fail "summary lacks $k: $(cat out.json)"
done
head -1 "$LF" | grep -q '"horizon_days":0' || fail "header options lack horizon_days"
# each rule off
"$OMEN" label --window 0 --closing-refs --whole-message >/dev/null
isfix closing true
isfix trailer true
"$OMEN" label --window 0 --cosmetic-pattern= --non-code-paths= --keep-other-candidates \
	--no-insertion-context >/dev/null
scope typo code
scope docfix code
expect base inducing 4          # both's two lines (code and test), named's and docfix's
expect late clean
GIT_CONFIG_PARAMETERS="'omen.namedDecides'='false' 'omen.cosmeticPattern'=''" "$OMEN" label --window 0 >/dev/null
scope typo code
traced_by base named
# the horizon: guard came 416 days after late
"$OMEN" label --horizon 365 --format json >out.json
head -1 "$LF" | grep -q '"horizon_days":365' || fail "header options lack horizon_days 365"
expect late clean
expect base inducing
grep -q '"beyond_horizon":1' out.json || fail "beyond_horizon: $(cat out.json)"
"$OMEN" label --horizon 365 | grep -q "needs a fix within 365 days" || fail "horizon wording"
"$OMEN" label --horizon 500 >/dev/null
expect late inducing 1
# bad input: one line, 128, the old labels kept
cp "$LF" keep.jsonl
for args in "--horizon abc" "--horizon -3" "--horizon 1.5" "--cosmetic-pattern (typo"; do
	# shellcheck disable=SC2086
	rc=0; "$OMEN" label --full $args >/dev/null 2>err.txt || rc=$?
	[ "$rc" = 128 ] || fail "$args: exit $rc"
	[ "$(wc -l <err.txt)" = 1 ] || fail "$args: not one line: $(cat err.txt)"
	cmp -s keep.jsonl "$LF" || fail "$args: labels changed"
done
grep -q "bad cosmetic pattern '(typo'" err.txt || fail "cosmetic message: $(cat err.txt)"
rc=0; GIT_CONFIG_PARAMETERS="'omen.horizon'='-5'" "$OMEN" label --full >/dev/null 2>err.txt || rc=$?
[ "$rc" = 128 ] || fail "omen.horizon=-5: exit $rc"
grep -q "omen.horizon" err.txt || fail "horizon config message: $(cat err.txt)"
cmp -s keep.jsonl "$LF" || fail "bad config: labels changed"
# a glob list that excludes every path: a notice that nothing was traced
"$OMEN" label --full --non-code-paths '*' >out.txt 2>err.txt || fail "all non-code: failed"
grep -q "notice: nothing was traced" err.txt || fail "no notice: $(cat err.txt)"
# incremental under the rules: a grown history gives a full run's bytes
git reset -q --hard guard
"$OMEN" label --window 0 --horizon 365 >/dev/null
git reset -q --hard tip
"$OMEN" label --window 0 --horizon 365 >out.txt
grep -q "reused the saved pass state" out.txt || fail "state not reused: $(cat out.txt)"
cp "$LF" grown.jsonl
"$OMEN" label --window 0 --horizon 365 --full >/dev/null
cmp -s grown.jsonl "$LF" || fail "incremental labels differ from a full run"
# a changed rule relabels
"$OMEN" label --window 0 --horizon 30 --format json | grep -q '"mode":"full"' || fail "rule change not relabelled"
# minor candidates: a fix repairs four lines of wide and one of narrow
. "$ROOT/fixtures/label/lib.sh"
printf 'w1();\nw2();\nw3();\nw4();\n' > w.c
fx_commit 2021-04-01 wide "Add w"
printf 'w1();\nw2();\nw3();\nw4();\nw5();\n' > w.c
fx_commit 2021-04-02 narrow "Add w5"
printf 'w1(0);\nw2(0);\nw3(0);\nw4(0);\nw5(0);\n' > w.c
fx_commit 2021-04-03 wfix "Fix w calls"
"$OMEN" label --window 0 --format json >out.json
expect wide inducing 4
expect narrow clean
grep -q '"minor_dropped":1' out.json || fail "minor_dropped: $(cat out.json)"
"$OMEN" label --window 0 --min-line-share 0 >/dev/null
expect narrow inducing 1
"$OMEN" label --window 0 --min-line-share 80 >/dev/null
expect wide inducing 4
expect narrow clean
# the default horizon: none on a history younger than five years, 365 days
# once it spans five
head -1 "$LF" | grep -q '"horizon_days":0' || fail "a 1-year history got a horizon"
echo 'int y = 1;' >> other.c
fx_commit 2025-06-01 old5 "Add y"
"$OMEN" label >/dev/null
head -1 "$LF" | grep -q '"horizon_days":365' || fail "a 5-year history has no default horizon"
"$OMEN" label --horizon 0 >/dev/null
head -1 "$LF" | grep -q '"horizon_days":0' || fail "--horizon 0 did not turn it off"
