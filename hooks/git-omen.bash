# bash completion for git omen.
#
# Installed as $PREFIX/share/bash-completion/completions/git-omen. git's own
# completion (git-completion.bash) calls _git_omen for `git omen ...`, and
# loads this file on demand through bash-completion's loader; it can also be
# sourced from ~/.bashrc after git's completion.
#
# Subcommands are listed here; each subcommand's options are read from its
# `git omen <cmd> --help` (lines whose first token starts with "-"), so they
# stay the same as what the code accepts.

__git_omen_commands="label train score explain eval features hook health refresh version help"

# The options `git omen <cmd> --help` lists; long options that take a value
# end in "=" so that git's __gitcomp leaves no space after them.
__git_omen_options ()
{
	local cmd=$1 var
	var="__git_omen_opts_${cmd//-/_}"
	if [ -z "${!var-}" ]; then
		local text
		text=$(git omen "$cmd" --help 2>/dev/null | awk '
			$1 ~ /^-/ {
				for (i = 1; i <= NF; i++) {
					t = $i; sub(/,$/, "", t)
					if (t ~ /^-/) {
						v = (i < NF && $(i + 1) ~ /^</) ? "=" : ""
						if (t ~ /=/) { sub(/=.*/, "", t); v = "=" }
						if (t ~ /^--/) print t v; else print t
					} else if (t !~ /^[<[]/) break
				}
			}')
		printf -v "$var" '%s' "$text"
	fi
	printf '%s\n' "${!var}"
}

__git_omen_formats ()
{
	case "$1" in
	score) echo "text json sarif" ;;
	features) echo "csv json" ;;
	*) echo "text json" ;;
	esac
}

_git_omen ()
{
	local subcommand
	subcommand="$(__git_find_on_cmdline "$__git_omen_commands")"
	if [ -z "$subcommand" ]; then
		case "$cur" in
		-*) __gitcomp "--help --version" ;;
		*) __gitcomp "$__git_omen_commands" ;;
		esac
		return
	fi
	case "$prev" in
	-o|--labels|--model|--fix-list|--html|--output)
		COMPREPLY=($(compgen -f -- "$cur"))
		compopt -o filenames 2>/dev/null
		return ;;
	--format)
		__gitcomp "$(__git_omen_formats "$subcommand")"
		return ;;
	--sort)
		__gitcomp "history risk per-line"
		return ;;
	esac
	case "$cur" in
	--format=*)
		__gitcomp "$(__git_omen_formats "$subcommand")" "" "${cur#--format=}"
		return ;;
	--sort=*)
		__gitcomp "history risk per-line" "" "${cur#--sort=}"
		return ;;
	--labels=*|--model=*|--fix-list=*|--html=*)
		local pfx="${cur%%=*}="
		COMPREPLY=($(compgen -P "$pfx" -f -- "${cur#*=}"))
		compopt -o filenames 2>/dev/null
		return ;;
	--*=*)
		return ;;
	-*)
		if [ "$subcommand" = hook ] && [ -n "$(__git_find_on_cmdline "install")" ]; then
			__gitcomp "--refresh"
		else
			__gitcomp "$(__git_omen_options "$subcommand")"
		fi
		return ;;
	esac
	case "$subcommand" in
	hook)
		local action
		action="$(__git_find_on_cmdline "install uninstall status run")"
		if [ -z "$action" ]; then
			__gitcomp "install uninstall status run"
		elif [ "$action" = run ]; then
			__gitcomp_nl "$(__git_remotes)"
		fi ;;
	help)
		__gitcomp "$__git_omen_commands" ;;
	label|train|score|explain|features)
		__git_complete_revlist ;;
	esac
}

# `git-omen ...` typed directly: reuse git's helpers when they are loaded.
if declare -F __git_complete >/dev/null 2>&1; then
	__git_complete git-omen _git_omen
fi
