#!/bin/sh
# git omen hook install | uninstall | status: the shim lands where git looks
# for hooks (githooks(5): $GIT_DIR/hooks, or core.hooksPath, relative to the
# top of the working tree), an existing pre-push hook is kept and chained,
# and uninstall gives it back byte for byte (checked with cmp(1) and the mode
# with stat(1)). Reference for where hooks run: git itself (git push runs the
# installed file).
set -eu
fail() { echo "FAIL: $*" >&2; exit 1; }
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
mkdir -p "$HOME"
PATH="$(dirname "$OMEN"):$PATH"; export PATH   # `git omen` finds git-omen on PATH
git init -q -b main repo
cd repo
git config user.name "Test Author"; git config user.email "author@example.invalid"

# --help and usage
"$OMEN" hook --help | grep -q "^usage: git omen hook" || fail "hook --help"
set +e; "$OMEN" hook frobnicate 2>err; rc=$?; set -e
[ "$rc" -eq 129 ] || fail "unknown subcommand exit $rc"
[ "$(wc -l <err)" -eq 1 ] || fail "unknown subcommand message is not one line"

# plain install into .git/hooks: identical to hooks/pre-push, executable
"$OMEN" hook status | grep -q "not installed" || fail "status before install"
"$OMEN" hook install >/dev/null
cmp .git/hooks/pre-push "$ROOT/hooks/pre-push" || fail "installed shim differs from hooks/pre-push"
[ -x .git/hooks/pre-push ] || fail "shim not executable"
"$OMEN" hook status | grep -q "installed" || fail "status after install"
"$OMEN" hook install >/dev/null   # again: refreshes, does not chain itself
[ ! -e .git/hooks/pre-push.omen-chained ] || fail "second install chained our own shim"
"$OMEN" hook uninstall >/dev/null
[ ! -e .git/hooks/pre-push ] || fail "uninstall left the shim"
"$OMEN" hook uninstall | grep -q "no pre-push hook" || fail "uninstall of nothing"

# an existing user hook: kept, chained, restored byte for byte with its mode
printf '#!/bin/sh\n# user hook\ncat >"%s/user-stdin"\necho "user hook ran: $1 $2" >&2\nexit 0\n' "$PWD" >.git/hooks/pre-push
printf '\r\n\001binary tail\n' >>.git/hooks/pre-push
chmod 750 .git/hooks/pre-push
cp -p .git/hooks/pre-push ../user-hook.orig
mode_before=$(stat -c %a .git/hooks/pre-push)
"$OMEN" hook status | grep -q "another pre-push hook" || fail "status with a foreign hook"
"$OMEN" hook install | grep -q "existing hook is kept" || fail "install over a user hook"
cmp .git/hooks/pre-push "$ROOT/hooks/pre-push" || fail "shim not installed over the user hook"
cmp .git/hooks/pre-push.omen-chained ../user-hook.orig || fail "chained hook changed"
"$OMEN" hook status | grep -q "previous hook runs after it" || fail "status chained"
"$OMEN" hook install >/dev/null
cmp .git/hooks/pre-push.omen-chained ../user-hook.orig || fail "re-install touched the chained hook"
"$OMEN" hook uninstall | grep -q "previous hook is back" || fail "uninstall chained"
cmp .git/hooks/pre-push ../user-hook.orig || fail "user hook not restored byte for byte"
[ "$(stat -c %a .git/hooks/pre-push)" = "$mode_before" ] || fail "user hook mode not restored"
[ ! -e .git/hooks/pre-push.omen-chained ] || fail "chained copy left behind"
# uninstall refuses to remove a hook that is not ours
set +e; "$OMEN" hook uninstall 2>err; rc=$?; set -e
[ "$rc" -eq 128 ] || fail "uninstall of a foreign hook: exit $rc"
grep -q "is not omen's" err || fail "uninstall foreign message"
cmp .git/hooks/pre-push ../user-hook.orig || fail "foreign hook touched by uninstall"
rm .git/hooks/pre-push

# a symlinked user hook stays a symlink to the same target
printf '#!/bin/sh\nexit 0\n' >../shared-hook; chmod 755 ../shared-hook
ln -s ../../../shared-hook .git/hooks/pre-push
"$OMEN" hook install >/dev/null
[ -L .git/hooks/pre-push.omen-chained ] || fail "symlinked hook not kept as a link"
"$OMEN" hook uninstall >/dev/null
[ "$(readlink .git/hooks/pre-push)" = "../../../shared-hook" ] || fail "symlink not restored"
rm .git/hooks/pre-push

# core.hooksPath, relative: taken from the top of the working tree, even
# when run from a subdirectory (githooks(5))
git config core.hooksPath .githooks
mkdir -p sub/dir
(cd sub/dir && "$OMEN" hook install >/dev/null)
[ -x .githooks/pre-push ] || fail "relative core.hooksPath not honoured"
[ ! -e .git/hooks/pre-push ] || fail "installed into .git/hooks despite core.hooksPath"
(cd sub/dir && "$OMEN" hook status) | grep -q "$PWD/.githooks" || fail "status path"
"$OMEN" hook uninstall >/dev/null
# absolute, and "~/" expanded as git does
git config core.hooksPath "$PWD/../abs-hooks"
"$OMEN" hook install >/dev/null
[ -x ../abs-hooks/pre-push ] || fail "absolute core.hooksPath"
"$OMEN" hook uninstall >/dev/null
git config core.hooksPath "~/my-hooks"
"$OMEN" hook install >/dev/null
[ -x "$HOME/my-hooks/pre-push" ] || fail "~/ in core.hooksPath"
# git -c core.hooksPath=... is honoured too (GIT_CONFIG_PARAMETERS)
git -c core.hooksPath="$PWD/../param-hooks" omen hook install >/dev/null
[ -x ../param-hooks/pre-push ] || fail "core.hooksPath from GIT_CONFIG_PARAMETERS"
echo "hook_install: ok"
