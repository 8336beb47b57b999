#!/bin/sh
# Real pushes through the installed pre-push hook with a model trained on the
# demo fixture (fixtures/demo/gen.py, 300 commits; trained on all but the
# newest 15). A bare remote in this temporary directory that lacks the
# newest commits; pushes of an update, a new branch from a detached HEAD, a
# deletion, a tag and a force-push, and one from a shallow clone. Checks the
# exit status, standard error (one line per notice, scores called advisory)
# and that neither repository changes except what git itself does.
# References: git push and githooks(5) (pre-push input and exit status).
set -eu
fail() { echo "FAIL: $*" >&2; exit 1; }
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
mkdir -p "$HOME"
PATH="$(dirname "$OMEN"):$PATH"; export PATH
export GIT_AUTHOR_NAME="Test Author" GIT_AUTHOR_EMAIL="author@example.invalid"
export GIT_COMMITTER_NAME="Test Author" GIT_COMMITTER_EMAIL="author@example.invalid"
top=$PWD

/usr/bin/python3 "$ROOT/fixtures/demo/gen.py" --seed 11 --commits 300 --out "$top/work" --quiet
cd work
"$OMEN" label >/dev/null
"$OMEN" train HEAD~15 >/dev/null 2>&1 || fail "training on the fixture failed"
[ -f .git/omen/model.omen ] || fail "no model written"
git clone -q --bare . "$top/remote.git"
git -C "$top/remote.git" update-ref refs/heads/main "$(git rev-parse main~10)"
git remote add origin "$top/remote.git"
git fetch -q origin
"$OMEN" hook install >/dev/null
# a generous budget so that a slow or busy machine (or a sanitizer build)
# does not turn a check into the timeout's let-through; section 4 tests it
git config omen.hookTimeout 600000

snap() { # dir: fingerprints of files a push must leave alone
	(cd "$1" && find . -type f ! -path '*/objects/*' ! -path '*/refs/*' ! -path '*/logs/*' \
		! -name packed-refs ! -name FETCH_HEAD ! -name ORIG_HEAD -print | LC_ALL=C sort |
		while read -r f; do printf '%s %s\n' "$(cksum <"$f")" "$f"; done)
}
mark() { bw=$(snap .git); br=$(snap "$top/remote.git"); }
unchanged() {
	[ "$(snap .git)" = "$bw" ] || fail "$1: the local repository changed"
	[ "$(snap "$top/remote.git")" = "$br" ] || fail "$1: the remote repository changed"
}
only_notices() { # every stderr line is ours, none is empty
	if grep -v '^git omen: ' err | grep -q .; then fail "$1: unexpected output: $(cat err)"; fi
}

# 1. an update of main: 10 new commits, scored, push goes through
mark
git push -q origin main 2>err || fail "update push failed: $(cat err)"
only_notices "update"
[ "$(git -C "$top/remote.git" rev-parse main)" = "$(git rev-parse main)" ] || fail "remote not updated"
unchanged "update"

# 2. blocking only when asked: threshold 0 makes every commit risky
git checkout -q -b blocked main~3
echo "tweak" >>README.md && git commit -q -am "Tweak the readme"
mark
set +e; git -c omen.onRisk=block -c omen.threshold=0 push -q origin blocked 2>err; rc=$?; set -e
[ "$rc" -ne 0 ] || fail "onRisk=block with threshold 0 let the push through"
grep -q "^git omen: risky commit $(git rev-parse --short=10 HEAD)" err || fail "no warning for the risky commit: $(cat err)"
grep -q "push blocked" err && grep -q "advisory" err && grep -q -- "--no-verify" err || fail "block message: $(cat err)"
git -C "$top/remote.git" rev-parse -q --verify refs/heads/blocked >/dev/null && fail "blocked push created the branch"
unchanged "blocked"
# warn (the default) with the same threshold: warnings, push goes through
git -c omen.threshold=0 push -q origin blocked 2>err || fail "warn-only push failed: $(cat err)"
grep -q "risky commit" err && grep -q "the push goes on" err || fail "no warning in warn mode: $(cat err)"
only_notices "warn"
# block with threshold 1: nothing is risky
echo "tweak 2" >>README.md && git commit -q -am "Tweak the readme again"
git -c omen.onRisk=block -c omen.threshold=1 push -q origin blocked 2>err || fail "threshold 1 blocked: $(cat err)"
[ ! -s err ] || fail "quiet push printed: $(cat err)"
# --no-verify bypasses a blocking hook (git's rule)
echo "tweak 3" >>README.md && git commit -q -am "Tweak the readme a third time"
git -c omen.onRisk=block -c omen.threshold=0 push -q --no-verify origin blocked 2>err || fail "--no-verify was blocked"

# 3. a corrupt model: one-line notice, push through; blocked with onError=block
cp .git/omen/model.omen "$top/corrupt.omen"
printf 'garbage' | dd of="$top/corrupt.omen" bs=1 seek=200 conv=notrunc 2>/dev/null
echo "tweak 4" >>README.md && git commit -q -am "Tweak four"
mark
git -c omen.model="$top/corrupt.omen" push -q origin blocked 2>err || fail "corrupt model broke the push: $(cat err)"
[ "$(wc -l <err)" -eq 1 ] && grep -q "corrupt.omen" err && grep -q "advisory" err || fail "corrupt model notice: $(cat err)"
unchanged "corrupt model"
echo "tweak 5" >>README.md && git commit -q -am "Tweak five"
set +e; git -c omen.model="$top/corrupt.omen" -c omen.onError=block push -q origin blocked 2>err; rc=$?; set -e
[ "$rc" -ne 0 ] || fail "corrupt model with onError=block let the push through"
grep -q "omen.onError=block" err || fail "onError=block message: $(cat err)"

# 4. the time budget: 1 ms cannot load a 4 MiB model; push goes through
set +e; git -c omen.hookTimeout=1 push -q origin blocked 2>err; rc=$?; set -e
[ "$rc" -eq 0 ] || fail "hook timeout broke the push: $(cat err)"
[ "$(wc -l <err)" -eq 1 ] && grep -q "omen.hookTimeout (1 ms)" err || fail "timeout notice: $(cat err)"

# 5. detached HEAD pushed to a new branch, a tag, a force-push, a deletion
git checkout -q --detach main~1
echo "detached" >>README.md && git commit -q -am "Work on a detached head"
mark
git push -q origin HEAD:refs/heads/detached 2>err || fail "detached push failed: $(cat err)"
only_notices "detached"; unchanged "detached"
git tag -a -m "release" v9 HEAD
git push -q origin v9 2>err || fail "tag push failed: $(cat err)"
only_notices "tag"
git commit -q --amend -m "Work on a detached head, reworded"
git push -q --force origin HEAD:refs/heads/detached 2>err || fail "force-push failed: $(cat err)"
only_notices "force"
[ "$(git -C "$top/remote.git" rev-parse detached)" = "$(git rev-parse HEAD)" ] || fail "force-push not applied"
mark
git push -q origin --delete detached 2>err || fail "deletion failed: $(cat err)"
[ ! -s err ] || fail "deletion printed: $(cat err)"
unchanged "deletion"
git checkout -q main

# 6. the whole history to an empty remote: the newest 200 commits are scored,
# those the model saw against its saved state (no replay), within the budget
git init -q --bare "$top/empty.git"
git remote add empty "$top/empty.git"
git push -q empty main~20:refs/heads/old 2>err || fail "push of old history failed: $(cat err)"
grep -q "scoring the newest 200 of" err || fail "no cap notice: $(cat err)"
only_notices "old history"
# once pushed, refs/remotes/empty/old hides it: nothing new for another ref
git -c omen.onRisk=block -c omen.threshold=0 push -q empty main~20:refs/heads/old2 2>err ||
	fail "already pushed history was scored again: $(cat err)"
[ ! -s err ] || fail "already pushed history printed: $(cat err)"
git init -q --bare "$top/empty2.git"
set +e; git -c omen.onRisk=block -c omen.threshold=0 push -q "$top/empty2.git" main~20:refs/heads/old 2>err; rc=$?; set -e
[ "$rc" -ne 0 ] || fail "old history with threshold 0 was not blocked"
[ "$(grep -c 'risky commit' err)" -eq 200 ] || fail "old history: $(grep -c 'risky commit' err) warnings, want 200"
# a new name for what the remote already has, pushed to its URL (no
# remote-tracking refs for a URL): git ls-remote says the remote has it, so
# nothing is new; before, the whole history was scored and blocked
have=$(git -C "$top/remote.git" rev-parse main)
git -c omen.onRisk=block -c omen.threshold=0 push -q "$top/remote.git" "$have:refs/heads/newmain" 2>err ||
	fail "push of the remote's own main under a new name to its URL was blocked: $(head -3 err)"
if grep -q "risky commit" err; then fail "commits the remote has were scored: $(head -3 err)"; fi
# one commit on top of it: that one alone is scored
git checkout -q -b on-top "$have"
echo "on top" >>README.md && git commit -q -am "Change on top of the remote's main"
set +e; git -c omen.onRisk=block -c omen.threshold=0 push -q "$top/remote.git" on-top 2>err; rc=$?; set -e
[ "$rc" -ne 0 ] || fail "the new commit on top was not blocked with threshold 0"
[ "$(grep -c 'risky commit' err)" -eq 1 ] || fail "on top: $(grep -c 'risky commit' err) warnings, want 1"
git checkout -q main

# 7. a push from a shallow clone (no model inside it; omen.model points at ours)
git clone -q --depth 3 "file://$top/remote.git" "$top/shallow"
cd "$top/shallow"
[ -f .git/shallow ] || fail "clone is not shallow"
"$OMEN" hook install >/dev/null
git config omen.hookTimeout 600000
git checkout -q -b from-shallow
echo "shallow work" >>README.md && git commit -q -am "Change made in a shallow clone"
git -c omen.model="$top/work/.git/omen/model.omen" push -q origin from-shallow 2>err ||
	fail "shallow push failed: $(cat err)"
only_notices "shallow"
git -c omen.model="$top/work/.git/omen/model.omen" -c omen.onRisk=block -c omen.threshold=0 \
	push -q origin from-shallow:refs/heads/from-shallow-2 2>err && fail "shallow block not applied"
grep -q "risky commit" err || fail "shallow clone commit not scored: $(cat err)"
echo "hook_push_model: ok"
