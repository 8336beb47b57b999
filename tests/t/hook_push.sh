#!/bin/sh
# Real pushes through the installed pre-push hook, without a model: a bare
# remote in this temporary directory, a new branch, an update, a tag, a
# force-push and a deletion. Without a model the hook lets every push
# through with a one-line notice, unless omen.onError=block; a chained user
# hook always runs and gets git's pre-push lines unchanged; `git push
# --no-verify` skips the hooks (git's own rule, githooks(5)). Nothing in
# either repository changes except what git itself does (checked by
# fingerprints of every file outside refs, objects and logs).
set -eu
fail() { echo "FAIL: $*" >&2; exit 1; }
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
mkdir -p "$HOME"
PATH="$(dirname "$OMEN"):$PATH"; export PATH
export GIT_AUTHOR_NAME="Test Author" GIT_AUTHOR_EMAIL="author@example.invalid"
export GIT_COMMITTER_NAME="Test Author" GIT_COMMITTER_EMAIL="author@example.invalid"
top=$PWD

# fingerprint of a git dir (and work tree) outside what a push may change
snap() { # dir -> stdout
	(cd "$1" && find . -type f ! -path './objects/*' ! -path './.git/objects/*' \
		! -path '*/refs/*' ! -path '*/logs/*' ! -name packed-refs ! -name FETCH_HEAD \
		! -name ORIG_HEAD ! -name index ! -name 'COMMIT_EDITMSG' -print | LC_ALL=C sort |
		while read -r f; do printf '%s %s\n' "$(cksum <"$f")" "$f"; done)
}

git init -q --bare -b main remote.git
git init -q -b main work
cd work
i=0
mk() { # n: n commits of ordinary size
	n=$1
	while [ "$n" -gt 0 ]; do
		i=$((i + 1)); n=$((n - 1))
		mkdir -p src
		seq 1 $((i * 3)) | sed "s/^/line $i /" >"src/f$((i % 4)).c"
		git add src && git commit -q -m "Change $i of the widget parser"
	done
}
mk 3
git remote add origin "$top/remote.git"
git push -q origin main 2>/dev/null   # no hook yet
git fetch -q origin
"$OMEN" hook install >/dev/null
git config omen.hookTimeout 600000   # no check may hinge on the machine's speed

mark() { before_w=$(snap .git); before_r=$(snap "$top/remote.git"); }
mark
check_unchanged() {
	[ "$(snap .git)" = "$before_w" ] || fail "$1: the local repository changed"
	[ "$(snap "$top/remote.git")" = "$before_r" ] || fail "$1: the remote repository changed"
	[ ! -e .git/omen ] || fail "$1: the hook created .git/omen"
}

# update of main without a model: one-line notice, push goes through
mk 2
mark
git push origin main 2>err || fail "push without a model failed: $(cat err)"
grep -q "no model at" err || fail "no notice about the missing model"
[ "$(grep -c '^git omen:' err)" -eq 1 ] || fail "notice is not one line: $(cat err)"
grep -q "advisory" err || fail "notice does not say scores are advisory"
[ "$(git -C "$top/remote.git" rev-parse main)" = "$(git rev-parse main)" ] || fail "remote main not updated"
check_unchanged "update"

# omen.onError=block turns the missing model into a refusal
mk 1
set +e; git -c omen.onError=block push origin main 2>err; rc=$?; set -e
[ "$rc" -ne 0 ] || fail "onError=block did not stop the push"
grep -q "omen.onError=block" err || fail "block message: $(cat err)"
[ "$(git -C "$top/remote.git" rev-parse main)" != "$(git rev-parse main)" ] || fail "blocked push updated the remote"
# --no-verify skips the hook (git's rule)
git -c omen.onError=block push --no-verify -q origin main 2>err || fail "--no-verify push failed"

# new branch, tag, force-push, deletion: all through, remote as git left it
git checkout -q -b topic; mk 2
mark
git push -q origin topic 2>err || fail "new branch push failed: $(cat err)"
check_unchanged "new branch"
git tag -a -m "release one" v1; git tag light
mark
git push -q origin v1 light 2>err || fail "tag push failed: $(cat err)"
check_unchanged "tags"
git reset -q --hard HEAD~1; mk 1
set +e; git push -q origin topic 2>/dev/null; rc=$?; set -e
[ "$rc" -ne 0 ] || fail "non-fast-forward push was accepted without --force"
mark
git push -q --force origin topic 2>err || fail "force-push failed: $(cat err)"
[ "$(git -C "$top/remote.git" rev-parse topic)" = "$(git rev-parse topic)" ] || fail "force-push not applied"
check_unchanged "force-push"
git push -q origin --delete topic 2>err || fail "deletion push failed: $(cat err)"
git -C "$top/remote.git" rev-parse -q --verify refs/heads/topic >/dev/null && fail "topic not deleted"
check_unchanged "deletion"

# garbage on standard input: one line, exit 0 (exit 1 with onError=block)
set +e; printf 'this is not the pre-push protocol\n' | "$OMEN" hook run origin "$top/remote.git" 2>err; rc=$?; set -e
[ "$rc" -eq 0 ] || fail "garbage input: exit $rc"
[ "$(wc -l <err)" -eq 1 ] && grep -q "bad pre-push input: line 1" err || fail "garbage message: $(cat err)"
set +e; printf 'x y\n' | git -c omen.onError=block omen hook run origin x 2>err; rc=$?; set -e
[ "$rc" -eq 1 ] || fail "garbage input with onError=block: exit $rc"
# empty input (nothing to push) is quiet
: | "$OMEN" hook run origin x 2>err || fail "empty input failed"
[ ! -s err ] || fail "empty input printed: $(cat err)"

# a chained user hook: runs after ours, gets the same lines, its refusal counts
cat >.git/hooks/pre-push <<'HOOK'
#!/bin/sh
cat >"$(git rev-parse --git-dir)/../user-saw"
echo "user hook: $1" >&2
[ -e "$(git rev-parse --git-dir)/../user-says-no" ] && exit 3
exit 0
HOOK
chmod 755 .git/hooks/pre-push
cp -p .git/hooks/pre-push ../user-hook.orig
"$OMEN" hook install >/dev/null
git checkout -q main; mk 1
git push origin main 2>err || fail "push with a chained hook failed: $(cat err)"
grep -q "user hook: origin" err || fail "chained hook did not run"
sed -n 1p err | grep -q "^git omen:" || fail "ours did not run first: $(cat err)"
printf 'refs/heads/main %s refs/heads/main %s\n' "$(git rev-parse main)" "$(git rev-parse main~1)" >expect
cmp user-saw expect || fail "chained hook got other input: $(cat user-saw)"
touch user-says-no; mk 1
set +e; git push origin main 2>err; rc=$?; set -e
[ "$rc" -ne 0 ] || fail "the user hook's refusal was lost"
rm user-says-no
"$OMEN" hook uninstall >/dev/null
cmp .git/hooks/pre-push ../user-hook.orig || fail "user hook not restored byte for byte"

# git-omen not on PATH: the shim lets the push through with a notice
"$OMEN" hook install >/dev/null
mk 1
PATH=/usr/bin:/bin git push origin main 2>err || fail "push without git-omen on PATH failed"
grep -q "not on PATH" err || fail "no notice without git-omen: $(cat err)"
mk 1
set +e; PATH=/usr/bin:/bin git -c omen.onError=block push origin main 2>err; rc=$?; set -e
[ "$rc" -ne 0 ] || fail "onError=block without git-omen let the push through"
echo "hook_push: ok"
