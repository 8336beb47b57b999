#!/bin/sh
# Every option `git-omen <cmd> --help` lists appears in the OPTIONS section of
# man/git-omen-<cmd>.1, and every option that section lists appears in the
# --help text (the CLI contract; options are lines whose first token starts
# with "-"), and every number in a help line's "(default ...)" appears in
# that option's paragraph of the page. The subcommands are the ones
# `git-omen --help` lists. The man pages are rendered with mandoc
# (mandoc(1)), so man(7) and mdoc(7) sources both work. Run by
# tests/run-shell.sh with $OMEN and $ROOT.
set -u
: "${OMEN:?}" "${ROOT:?}"
command -v mandoc >/dev/null || { echo "help_matches_man: mandoc is not installed" >&2; exit 1; }

# Option names on the lines whose first token starts with "-": "-h, --help",
# "-o <file>", "--format=<fmt>", "--fail-above P" give -h --help -o --format
# --fail-above. One value token may follow each option; the first other word
# ends the line's options.
opts() {
	awk '
	$1 ~ /^-/ {
		val = 0
		for (i = 1; i <= NF; i++) {
			t = $i
			sub(/,$/, "", t)
			if (t ~ /^--?[A-Za-z0-9?]/) {
				sub(/[=[].*/, "", t)
				print t
				val = 1
			} else if (val)
				val = 0
			else
				break
		}
	}' | sort -u
}

# "option number" for each number inside a help line's "(default ...)":
# "--epochs <n>  most training epochs (default 30)" gives "--epochs 30".
help_defaults() {
	awk '
	$1 ~ /^-/ && match($0, /\(default [^)]*\)/) {
		opt = $1; sub(/,$/, "", opt)
		d = substr($0, RSTART, RLENGTH)
		while (match(d, /[0-9]+/)) {
			print opt, substr(d, RSTART, RLENGTH)
			d = substr(d, RSTART + RLENGTH)
		}
	}'
}

# Whether the man page's paragraph for option $1 (its tag line and text up
# to the next tag) holds the number $2 as a word; reads man_options output.
man_has_number() {
	awk -v opt="$1" -v num="$2" '
	/^     [^ ]/ { t = $1; sub(/,$/, "", t); on = (t == opt) }
	on { text = text " " $0 }
	END {
		gsub(/[^0-9]/, " ", text)
		n = split(text, w, " ")
		for (i = 1; i <= n; i++) if (w[i] == num) exit 0
		exit 1
	}'
}

# The OPTIONS section of a rendered man page: from the OPTIONS heading to the
# next heading (a line starting with a capital letter in the first column).
man_options() {
	mandoc -Tascii -O width=300 "$1" | sed 's/.\x08//g' |
		awk '/^OPTIONS/ { on = 1; next } on && /^[A-Z]/ { on = 0 } on'
}

cmds=$("$OMEN" --help | awk 'NR > 1 && /^   [a-z]/ { print $1 }')
[ -n "$cmds" ] || { echo "help_matches_man: git-omen --help lists no commands" >&2; exit 1; }
fail=0
checked=0
for cmd in $cmds; do
	# version takes no options and has no page of its own (git-omen(1) covers it)
	[ "$cmd" = version ] && continue
	page="$ROOT/man/git-omen-$cmd.1"
	if [ ! -f "$page" ]; then
		echo "FAIL $cmd: no man page man/git-omen-$cmd.1"
		fail=1
		continue
	fi
	help=$("$OMEN" "$cmd" --help 2>&1)
	rc=$?
	if [ "$rc" -ne 0 ]; then
		echo "FAIL $cmd: 'git-omen $cmd --help' exited $rc: $help"
		fail=1
		continue
	fi
	bad=0
	printf '%s\n' "$help" | opts >help.opts
	man_options "$page" | opts >man.opts
	if [ ! -s help.opts ]; then
		echo "FAIL $cmd: --help lists no options"
		bad=1
	fi
	if [ ! -s man.opts ]; then
		echo "FAIL $cmd: man page has no options in an OPTIONS section"
		bad=1
	fi
	only_help=$(comm -23 help.opts man.opts | tr '\n' ' ')
	only_man=$(comm -13 help.opts man.opts | tr '\n' ' ')
	if [ -n "$only_help" ]; then
		echo "FAIL $cmd: in --help but not in man/git-omen-$cmd.1 OPTIONS: $only_help"
		bad=1
	fi
	if [ -n "$only_man" ]; then
		echo "FAIL $cmd: in man/git-omen-$cmd.1 OPTIONS but not in --help: $only_man"
		bad=1
	fi
	# the defaults --help states are the ones the page states
	man_options "$page" >man.txt
	printf '%s\n' "$help" | help_defaults >help.defaults
	while read -r opt num; do
		if ! man_has_number "$opt" "$num" <man.txt; then
			echo "FAIL $cmd: --help gives $opt a default with $num; man/git-omen-$cmd.1 does not"
			bad=1
		fi
	done <help.defaults
	checked=$((checked + 1))
	if [ "$bad" -eq 0 ]; then
		echo "ok   $cmd: $(wc -l <help.opts) options agree, $(wc -l <help.defaults) defaults"
	else
		fail=1
	fi
done
[ "$checked" -gt 0 ] || fail=1
exit $fail
