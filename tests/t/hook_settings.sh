#!/bin/sh
# The pre-push hook against hostile names and every source of settings
# (issue 15, items 4, 5 and 9), without a model: the hook's one-line notice
# ("no model at ...") shows that it ran, and omen.onError=block turns it
# into a refusal. Each source git reads is checked against what
# `git config --get omen.onError` prints in the same environment (git 2.39
# is the reference), and the shim (which asks git itself when git-omen
# cannot run) must agree with the binary. A remote named '-h' is a remote,
# not a request for help. The shim's temporary file goes when it is killed.
# A misspelt omen.* key gets one warning naming the nearest setting.
set -eu
fail() { echo "FAIL: $*" >&2; exit 1; }
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
unset GIT_CONFIG_PARAMETERS GIT_CONFIG_COUNT 2>/dev/null || true
mkdir -p "$HOME"
PATH="$(dirname "$OMEN"):$PATH"; export PATH
export GIT_AUTHOR_NAME="Test Author" GIT_AUTHOR_EMAIL="author@example.invalid"
export GIT_COMMITTER_NAME="Test Author" GIT_COMMITTER_EMAIL="author@example.invalid"
top=$PWD

git init -q --bare -b main remote.git
git init -q -b main work
cd work
n=0
mk() { n=$((n + 1)); echo "line $n" >>f.c; git add f.c; git commit -q -m "Change $n of the parser"; }
mk
git remote add origin "$top/remote.git"
git push -q origin main
"$OMEN" hook install >/dev/null
git config omen.hookTimeout 600000

# pushed <ref>: does the remote have our HEAD under <ref>?
pushed() { [ "$(git -C "$top/remote.git" rev-parse -q --verify "$1" 2>/dev/null)" = "$(git rev-parse HEAD)" ]; }

# blocked <what> <env...> : git config says block, and the push is refused
blocked() {
	what=$1; shift
	[ "$(env "$@" git config --get omen.onError)" = block ] || fail "$what: git itself does not say block"
	mk
	set +e; env "$@" git push -q origin HEAD:refs/heads/main 2>err; rc=$?; set -e
	[ "$rc" -ne 0 ] || fail "$what: omen.onError=block from this source was lost: $(cat err)"
	grep -q "omen.onError=block" err || fail "$what: message: $(cat err)"
	! pushed refs/heads/main || fail "$what: the remote was updated"
}

# 1. every source of settings git reads
blocked "GIT_CONFIG_COUNT" GIT_CONFIG_COUNT=1 GIT_CONFIG_KEY_0=omen.onError GIT_CONFIG_VALUE_0=block
printf '[omen]\n\tonError = block\n' >"$top/global.cfg"
blocked "GIT_CONFIG_GLOBAL" GIT_CONFIG_GLOBAL="$top/global.cfg"
printf '[omen]\n\tonError = block\n' >"$top/system.cfg"
blocked "GIT_CONFIG_SYSTEM" GIT_CONFIG_NOSYSTEM= GIT_CONFIG_SYSTEM="$top/system.cfg"
printf '[omen]\n\tonError = block\n' >"$top/inc.cfg"
git config "includeIf.gitdir:$top/work/.git.path" "$top/inc.cfg"
blocked "includeIf" X=1
git config --unset "includeIf.gitdir:$top/work/.git.path"
blocked "git -c" GIT_CONFIG_PARAMETERS="'omen.onError'='block'"
# the last one wins, as git says: -c allow over a count variable's block
[ "$(GIT_CONFIG_COUNT=1 GIT_CONFIG_KEY_0=omen.onError GIT_CONFIG_VALUE_0=block \
	git -c omen.onError=allow config --get omen.onError)" = allow ] || fail "git's own order"
GIT_CONFIG_COUNT=1 GIT_CONFIG_KEY_0=omen.onError GIT_CONFIG_VALUE_0=block \
	git -c omen.onError=allow push -q origin HEAD:refs/heads/main 2>err || fail "-c allow did not win: $(cat err)"
pushed refs/heads/main || fail "-c allow: not pushed"

# a misspelt key is ignored by git and by the typed reads: the hook says so,
# with the setting it probably meant, and does not block
mk
git -c omen.onRsik=block push -q origin HEAD:refs/heads/main 2>err || fail "a misspelt key blocked: $(cat err)"
grep -q "^git omen: warning: unknown setting 'omen.onrsik' is ignored; did you mean 'omen.onRisk'?$" err ||
	fail "no warning for a misspelt key: $(cat err)"
[ "$(grep -c 'unknown setting' err)" -eq 1 ] || fail "the warning is not one line: $(cat err)"
git -c omen.zzzzzzzzzz=1 push -q origin HEAD:refs/heads/main 2>err
grep -q "^git omen: warning: unknown setting 'omen.zzzzzzzzzz' is ignored$" err || fail "far key: $(cat err)"

# 2. the shim and the binary agree: a git-omen that crashes leaves the
# decision to the shim, which reads the same sources through git config
mkdir -p "$top/crash"
printf '#!/bin/sh\nexit 3\n' >"$top/crash/git-omen"; chmod 755 "$top/crash/git-omen"
mk
set +e; PATH="$top/crash:$PATH" GIT_CONFIG_COUNT=1 GIT_CONFIG_KEY_0=omen.onError GIT_CONFIG_VALUE_0=block \
	git push -q origin HEAD:refs/heads/main 2>err; rc=$?; set -e
[ "$rc" -ne 0 ] || fail "shim: onError=block from GIT_CONFIG_COUNT ignored after a crash"
grep -q "the hook failed (exit 3) and omen.onError=block" err || fail "shim message: $(cat err)"
PATH="$top/crash:$PATH" git push -q origin HEAD:refs/heads/main 2>err || fail "shim: crash blocked without block"
grep -q "push not checked" err || fail "shim: no notice: $(cat err)"

# 3. a remote named '-h' runs the hook (before: usage on stdout, exit 0,
# nothing checked); 'hook run -h' alone still prints help
git remote add -- -h "$top/remote.git"
mk
git push -q -- -h HEAD:refs/heads/dash 2>err || fail "push to remote '-h' failed: $(cat err)"
grep -q "no model at" err || fail "the hook did not run for remote '-h': $(cat err)"
mk
set +e; git -c omen.onError=block push -q -- -h HEAD:refs/heads/dash 2>err; rc=$?; set -e
[ "$rc" -ne 0 ] || fail "remote '-h' with onError=block was pushed"
printf 'x\n' | "$OMEN" hook run -- -h "$top/remote.git" 2>err || fail "'hook run -- -h url' failed"
grep -q "bad pre-push input" err || fail "'hook run -- -h url' did not read its input: $(cat err)"
"$OMEN" hook run -h >out 2>&1 || fail "'hook run -h' failed"
grep -q "^usage: git omen hook" out || fail "'hook run -h' printed no help"

# 4. the shim's temporary file goes when the shim is killed (TERM, HUP)
for sig in TERM HUP; do
	t="$top/tmp-$sig"; mkdir -p "$t"
	rm -f "$top/fifo"; mkfifo "$top/fifo"
	TMPDIR="$t" sh .git/hooks/pre-push origin "$top/remote.git" <"$top/fifo" &
	pid=$!
	exec 3>"$top/fifo"
	i=0
	while [ -z "$(ls "$t")" ] && [ "$i" -lt 600 ]; do sleep 0.1; i=$((i + 1)); done
	[ -n "$(ls "$t")" ] || fail "$sig: the shim made no temporary file"
	kill -"$sig" "$pid"
	exec 3>&-
	set +e; wait "$pid"; rc=$?; set -e
	[ "$rc" -ne 0 ] || fail "$sig: the killed shim exited 0"
	[ -z "$(ls "$t")" ] || fail "$sig: temporary file left behind: $(ls "$t")"
done
echo "hook_settings: ok"
