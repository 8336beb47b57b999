#!/bin/sh
# `make install PREFIX=… DESTDIR=…` puts git-omen where git finds it as
# `git omen`, the man pages where `git omen --help` (git runs `man git-omen`,
# see git-help(1)) and `man git-omen-<cmd>` find them, and the bash completion
# where bash-completion loads it; `make uninstall` removes all of it.
# Installs the binary $OMEN was built as (BUILD = its directory), so nothing
# is rebuilt. Run by tests/run-shell.sh with $OMEN and $ROOT.
set -u
: "${OMEN:?}" "${ROOT:?}"
fail() { echo "FAIL install_layout: $*"; exit 1; }
build=$(cd "$(dirname "$OMEN")" && pwd)
stage=$PWD/stage
prefix=/opt/omen-test
dest=$stage$prefix
# Only the install rules run here: the binary is up to date.
make -s -C "$ROOT" -o "$build/git-omen" BUILD="$build" OMEN="$build/git-omen" PREFIX="$prefix" DESTDIR="$stage" install \
	>install.log 2>&1 || { cat install.log; fail "make install failed"; }

[ -x "$dest/bin/git-omen" ] || fail "no executable $prefix/bin/git-omen"
cmp -s "$dest/bin/git-omen" "$OMEN" || fail "installed git-omen is not the built one"
for page in "$ROOT"/man/*.1; do
	[ -f "$dest/share/man/man1/$(basename "$page")" ] || fail "man page $(basename "$page") not installed"
done
[ -f "$dest/share/man/man1/git-omen.1" ] || fail "no git-omen.1"
[ -f "$dest/share/bash-completion/completions/git-omen" ] || fail "no bash completion"
[ -x "$dest/share/git-omen/hooks/pre-push" ] || fail "no pre-push shim copy"
# the base model (issue 11), found beside the installed binary
cmp -s "$dest/share/git-omen/base.omen" "$ROOT/fixtures/base-model/base.omen" || fail "no base model under $prefix/share/git-omen"
PATH="$dest/bin:$PATH" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null git omen version >version.out 2>&1
grep -q "^base model  /.*/opt/omen-test/share/git-omen/base.omen: [0-9]* histories, [0-9]* commits, [0-9.]* MB, built [0-9T:-]*Z$" version.out ||
	fail "version does not show the installed base model: $(cat version.out)"

# git finds the extension on PATH, and `git omen --help` shows its man page.
export GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
PATH="$dest/bin:$PATH" git omen version | grep -q '^git-omen ' || fail "'git omen version' does not run the installed binary"
if command -v man >/dev/null; then
	for p in git-omen git-omen-score; do
		if [ -f "$ROOT/man/$p.1" ]; then
			MANPATH="$dest/share/man" man -w "$p" >/dev/null 2>&1 || fail "man -w $p finds nothing under $prefix/share/man"
		fi
	done
	PATH="$dest/bin:$PATH" MANPATH="$dest/share/man" MANPAGER=cat PAGER=cat git omen --help 2>&1 |
		grep -q 'git-omen' || fail "'git omen --help' does not show the git-omen man page"
else
	echo "man is not installed: man -w checks skipped, install paths checked"
fi

# The completion defines _git_omen, which git's completion calls for `git omen`.
if command -v bash >/dev/null; then
	bash -c ". '$dest/share/bash-completion/completions/git-omen' && declare -F _git_omen" >/dev/null ||
		fail "the completion file does not define _git_omen"
fi

make -s -C "$ROOT" -o "$build/git-omen" BUILD="$build" OMEN="$build/git-omen" PREFIX="$prefix" DESTDIR="$stage" uninstall \
	>uninstall.log 2>&1 || { cat uninstall.log; fail "make uninstall failed"; }
left=$(find "$stage" -type f | sed "s|^$stage||")
[ -z "$left" ] || fail "make uninstall left: $left"
echo "ok: install and uninstall under DESTDIR=$stage PREFIX=$prefix"
