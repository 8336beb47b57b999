#!/bin/sh
# hooks/git-omen.bash under git's own bash completion (git-completion.bash,
# shipped by Debian's git package): `git omen <Tab>` offers the subcommands,
# `git omen <cmd> --<Tab>` offers exactly the long options of that command's
# --help, `--format=<Tab>` the formats, and `hook <Tab>` the actions.
# Run by tests/run-shell.sh with $OMEN and $ROOT.
set -u
: "${OMEN:?}" "${ROOT:?}"
gitcomp=
for f in /usr/share/bash-completion/completions/git /etc/bash_completion.d/git-prompt; do
	[ -f "$f" ] && grep -q '__git_main' "$f" && { gitcomp=$f; break; }
done
[ -n "$gitcomp" ] || { echo "FAIL completion: git's bash completion is not installed"; exit 1; }
command -v bash >/dev/null || { echo "FAIL completion: bash is not installed"; exit 1; }
git init -q repo && cd repo || exit 1
bindir=$(cd "$(dirname "$OMEN")" && pwd)

cat >comp.bash <<'EOF'
. "$GITCOMP"
. "$ROOT/hooks/git-omen.bash"
c() {
	COMP_LINE="$1"; COMP_POINT=${#COMP_LINE}
	read -ra COMP_WORDS <<<"$COMP_LINE"
	[ "${COMP_LINE: -1}" = " " ] && COMP_WORDS+=("")
	COMP_CWORD=$((${#COMP_WORDS[@]} - 1))
	COMPREPLY=()
	__git_wrap__git_main
	printf '%s\n' "${COMPREPLY[@]}" | sed 's/ *$//' | sort
}
"$@"
EOF
comp() { GITCOMP=$gitcomp ROOT=$ROOT PATH="$bindir:$PATH" bash comp.bash c "$1"; }
fail=0
check() { # what, got, want
	if [ "$2" != "$3" ]; then
		echo "FAIL completion: $1"; echo "  got:  $(echo $2)"; echo "  want: $(echo $3)"; fail=1
	else
		echo "ok   $1"
	fi
}

want=$(printf '%s\n' label train score explain eval features hook health refresh version help | sort)
check "subcommands" "$(comp 'git omen ')" "$want"
check "prefix 'sc'" "$(comp 'git omen sc')" "score"
for cmd in label train score explain eval features health refresh; do
	# the long options the --help text lists, "=" after those taking a value
	want=$("$OMEN" "$cmd" --help | awk '$1 ~ /^-/ { for (i = 1; i <= NF; i++) { t = $i; sub(/,$/, "", t)
		if (t ~ /^--/) { print t (($(i + 1) ~ /^</) ? "=" : ""); break } else if (t !~ /^-/) break } }' | sort -u)
	check "$cmd long options" "$(comp "git omen $cmd --")" "$want"
done
check "score --format=" "$(comp 'git omen score --format=')" "$(printf '%s\n' json sarif text)"
check "score --sort " "$(comp 'git omen score --sort ')" "$(printf '%s\n' history per-line risk)"
check "features --format " "$(comp 'git omen features --format ')" "$(printf '%s\n' csv json)"
check "hook actions" "$(comp 'git omen hook ')" "$(printf '%s\n' install run status uninstall)"
check "hook install --" "$(comp 'git omen hook install --')" "--refresh"
exit $fail
