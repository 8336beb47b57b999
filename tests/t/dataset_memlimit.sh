#!/bin/sh
# omen.memoryLimit weighs a dataset the same whether train builds it from
# history or loads it from $GIT_DIR/omen/dataset.cache: the load path's
# message gives the weight N; a limit of N lets both paths through, N - 1
# stops both with one line naming the limit and the key that sets it. The
# label file is bounded by the same limit.
set -eu
fail() { echo "FAIL: $*" >&2; exit 1; }
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
mkdir -p "$HOME"
top=$PWD
/usr/bin/python3 "$ROOT/fixtures/demo/gen.py" --seed 5 --commits 300 --out "$top/repo" --quiet
cd repo
"$OMEN" label >/dev/null
"$OMEN" train HEAD~20 --model "$top/m0.omen" >/dev/null 2>&1 || fail "training failed"
[ -f .git/omen/dataset.cache ] || fail "no dataset cache written"

lim() { GIT_CONFIG_PARAMETERS="'omen.memoryLimit'='$1'"; export GIT_CONFIG_PARAMETERS; }
# the label file is read under the limit too (issue 15, item 7): one byte
# less than its size stops train before any dataset is weighed
L=$(wc -c < .git/omen/labels.jsonl)
lim $((L - 1))
rc=0; "$OMEN" train HEAD~20 --model "$top/m1.omen" >/dev/null 2>err || rc=$?
[ "$rc" -eq 128 ] || fail "labels, limit L-1: exit $rc"
grep -q "^git omen: error: cannot read labels '.*': larger than the memory limit of $((L - 1)) bytes (omen\.memoryLimit)$" err ||
	fail "labels message: $(cat err)"
lim "$L"
rc=0; "$OMEN" train HEAD~20 --model "$top/m1.omen" >/dev/null 2>err || rc=$?
[ "$rc" -eq 128 ] || fail "cached, limit L: exit $rc"
n=$(sed -n "s/^git omen: error: cannot load dataset: \([0-9]*\) bytes after [0-9]* commits is over the memory limit of $L bytes (omen\.memoryLimit)\$/\1/p" err)
[ -n "$n" ] || fail "load message: $(cat err)"
[ "$n" -gt 1000 ] || fail "implausible dataset weight $n"

# N - 1: both paths stop, each with one line naming the limit
lim $((n - 1))
for how in cached --no-cache; do
	flag=; [ "$how" = cached ] || flag=--no-cache
	rc=0; "$OMEN" train HEAD~20 $flag --model "$top/m2.omen" >/dev/null 2>err || rc=$?
	[ "$rc" -eq 128 ] || fail "$how, limit N-1: exit $rc"
	[ "$(wc -l <err)" -eq 1 ] || fail "$how, limit N-1: not one line: $(cat err)"
	grep -q "^git omen: error: cannot .* dataset: $n bytes after [0-9]* commits is over the memory limit of $((n - 1)) bytes (omen\.memoryLimit)$" err ||
		fail "$how, limit N-1: $(cat err)"
	[ ! -f "$top/m2.omen" ] || fail "$how, limit N-1: a model was written"
done
grep -q "cannot build dataset" err || fail "--no-cache did not take the build path: $(cat err)"

# N: both paths go through
lim "$n"
for flag in "" --no-cache; do
	"$OMEN" train HEAD~20 $flag --model "$top/m3.omen" >/dev/null 2>err || fail "limit N ${flag:-cached}: $(cat err)"
done
echo "ok: dataset weighs $n bytes on both paths"
