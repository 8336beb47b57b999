#!/bin/sh
# The README's two commands are true: both are listed under "Two commands",
# and the demo one, run as a new user would in a fresh clone of this
# repository (`git clone`, then the command; its own build directory),
# succeeds, scores the commits of the newest feature branch and shows the
# pre-push warning for that branch's push, which reaches the remote.
# (`make check` itself is what runs this test, so it is not run again here.)
# The clone holds the committed tree: uncommitted edits are not part of it.
# Takes about three minutes. Run by tests/run-shell.sh with $ROOT.
set -u
: "${ROOT:?}"
readme="$ROOT/README.md"
fail() { echo "FAIL readme_commands: $*"; [ -f demo.log ] && tail -60 demo.log; exit 1; }

cmds=$(awk '/^## Two commands/ { on = 1; next } on && /^## / { on = 0 } on && /^    [a-z]/' "$readme" |
	sed 's/#.*//; s/^ *//; s/ *$//')
printf '%s\n' "$cmds" | grep -qx 'make demo' || fail "README's 'Two commands' does not list 'make demo'"
printf '%s\n' "$cmds" | grep -qx 'make check' || fail "README's 'Two commands' does not list 'make check'"
[ "$(printf '%s\n' "$cmds" | wc -l)" -eq 2 ] || fail "README's 'Two commands' lists: $cmds"

git clone -q "$ROOT" clone || fail "git clone of $ROOT failed"
cd clone || exit 1
# A new user's shell: nothing from the make that runs this test leaks in.
unset MAKEFLAGS MFLAGS MAKELEVEL MAKEOVERRIDES CFLAGS LDLIBS BUILD OMEN DEMO_DIR DEMO_SEED DEMO_COMMITS
start=$(date +%s)
if ! sh -c 'make demo' >demo.log 2>&1; then
	fail "'make demo' in a fresh clone failed"
fi
echo "make demo in a fresh clone: ok ($(( $(date +%s) - start ))s with the build)"

repo=demo/tidewell
[ -d "$repo/.git" ] || fail "no demo repository at demo/tidewell"
[ -s demo/report.html ] || fail "no HTML report at demo/report.html"
branch=$(git -C "$repo" for-each-ref --sort=-committerdate --count=1 --format='%(refname:short)' refs/heads/feature/)
[ -n "$branch" ] || fail "demo repository has no feature branch"
ids=$(git -C "$repo" rev-list "main..$branch")
[ -n "$ids" ] || fail "$branch has no commits of its own"

# The score step's output: a line naming one of the branch's commits (by a
# prefix of at least 7 hex digits) with a probability.
score_out=$(awk '/^==> [0-9]+\/[0-9]+ score/ { on = 1; next } /^==> / { on = 0 } on' demo.log)
found=0
for id in $ids; do
	p=$(printf '%s' "$id" | cut -c1-7)
	if printf '%s\n' "$score_out" | grep "$p" | grep -Eq '(^|[^0-9.])(0\.[0-9]+|1\.0+|[0-9]{1,3}(\.[0-9]+)?%)'; then
		found=1
	fi
done
[ "$found" -eq 1 ] || fail "the score step shows no commit of $branch with a probability"

# The push step: the hook's warning, and the push went through (warn, not block).
push_out=$(awk '/^==> [0-9]+\/[0-9]+ push/ { on = 1; next } /^==> / { on = 0 } on' demo.log)
printf '%s\n' "$push_out" | grep -Eiq 'risk|warn' || fail "the push step shows no warning"
found=0
for id in $ids; do
	p=$(printf '%s' "$id" | cut -c1-7)
	printf '%s\n' "$push_out" | grep -Ei 'risk|warn' | grep -q "$p" && found=1
done
[ "$found" -eq 1 ] || fail "the push warning names no commit of $branch"
[ "$(git -C demo/remote.git rev-parse "$branch" 2>/dev/null)" = "$(git -C "$repo" rev-parse "$branch")" ] ||
	fail "the push did not reach the remote"
echo "ok: scored $(printf '%s\n' "$ids" | wc -l) commits of $branch, push warned and went through"
