#!/bin/sh
# The layer check: data flows one way through src/, and a lower folder never
# includes a higher folder's header. The rules are read from DEVELOPERS.md,
# "Module map", so the document and the check cannot drift apart:
#   - the line "    layers: a < b, c < d": levels lowest first, folders on
#     one level separated by ',' (they include none of each other's headers);
#   - the table rows "| `src/x/` | `omen/x.h`, ... |": which public header
#     belongs to which folder (an include of an omen/ header that no row
#     names is an error, so a new header must be placed);
#   - the line "    git through history: a b c": folders that call no libgit2
#     function (git_*()) and include no <git2.h>: they reach git through
#     history/.
# And only cli/ prints to the terminal (printf, puts, fprintf(stderr, ...)).
# The line "    layer exceptions: f g" names files the check leaves out; each
# needs its reason beside it in DEVELOPERS.md.
# Every #include "..." in src/*/*.[ch] and include/omen/*.h is checked: a
# header "x/..." belongs to folder x and is internal to it (no other folder
# includes it); "omen/h.h" belongs to the folder whose row names it; a bare
# "h.h" is the including folder's own. The same checker then runs on a small
# tree with planted offences (an upward include, a sideways one, another
# folder's internal header, an unplaced header, a libgit2 call, a print)
# and must reject each.
# ROOT: the repository (set by tests/run-shell.sh).
set -eu
: "${ROOT:?set ROOT to the repository}"

# check_tree DIR: 0 when DIR (a tree with DEVELOPERS.md, src/, include/omen/)
# keeps the layers; otherwise one line per offence on stdout and 1.
check_tree() {
	dir=$1
	list=$(mktemp)
	( cd "$dir" && for f in src/*/*.c src/*/*.h include/omen/*.h; do
		[ -f "$f" ] && grep -n '^[[:space:]]*#[[:space:]]*include[[:space:]]*"' "$f" |
			sed "s|^|$f:|"
	done ) >"$list" || true
	calls=$(mktemp)
	( cd "$dir" && for f in src/*/*.c src/*/*.h; do
		[ -f "$f" ] && grep -nE '^[[:space:]]*#[[:space:]]*include[[:space:]]*<git2|(^|[^A-Za-z0-9_])git_[a-z0-9_]+[[:space:]]*\(' "$f" |
			sed "s|^|$f:|"
	done ) >"$calls" || true
	prints=$(mktemp)
	( cd "$dir" && for f in src/*/*.c src/*/*.h; do
		case $f in src/cli/*) continue ;; esac
		[ -f "$f" ] && grep -nE '(^|[^A-Za-z0-9_])(printf|puts|putchar|perror|vprintf)[[:space:]]*\(|(fprintf|vfprintf|fputs|fputc|putc|fwrite)[[:space:]]*\([[:space:]]*(stderr|stdout)|,[[:space:]]*(stderr|stdout)[[:space:]]*\)' "$f" |
			sed "s|^|$f:|"
	done ) >"$prints" || true
	rc=0
	awk -v list="$list" -v calls="$calls" -v prints="$prints" '
	function trim(s) { gsub(/^[ \t]+|[ \t]+$/, "", s); return s }
	FNR == NR {
		if ($0 ~ /^    layers: /) {
			s = $0; sub(/^    layers: /, "", s)
			nl = split(s, lv, "<")
			for (i = 1; i <= nl; i++) {
				nf = split(lv[i], fs, ",")
				for (j = 1; j <= nf; j++) { f = trim(fs[j]); if (f != "") level[f] = i }
			}
			have_layers = 1
		} else if ($0 ~ /^    layer exceptions: /) {
			s = $0; sub(/^    layer exceptions: /, "", s)
			n = split(s, xs, " ")
			for (i = 1; i <= n; i++) exempt[xs[i]] = 1
		} else if ($0 ~ /^    git through history: /) {
			s = $0; sub(/^    git through history: /, "", s)
			n = split(s, gs, " ")
			for (i = 1; i <= n; i++) nogit[gs[i]] = 1
			have_git = 1
		} else if ($0 ~ /^\| `src\/[a-z0-9_]+\/` \|/) {
			split($0, cols, "|")
			fold = cols[2]; gsub(/[ `]/, "", fold); sub(/^src\//, "", fold); sub(/\/$/, "", fold)
			hs = cols[3]
			while (match(hs, /`[^`]+\.h`/)) {
				h = substr(hs, RSTART + 1, RLENGTH - 2)
				owner[h] = fold
				hs = substr(hs, RSTART + RLENGTH)
			}
		}
		next
	}
	END {
		bad = 0
		if (!have_layers) { print "DEVELOPERS.md: no \"    layers:\" line"; exit 1 }
		if (!have_git) { print "DEVELOPERS.md: no \"    git through history:\" line"; exit 1 }
		while ((getline line < list) > 0) {
			# file:lineno:text
			file = line; sub(/:.*/, "", file)
			if (file in exempt) continue
			rest = line; sub(/^[^:]*:/, "", rest)
			ln = rest; sub(/:.*/, "", ln)
			inc = rest; sub(/^[^"]*"/, "", inc); sub(/".*/, "", inc)
			if (file ~ /^include\/omen\//) {
				me = owner["omen/" substr(file, 14)]
				if (me == "") { print file ": not named in the module map"; bad = 1; continue }
			} else {
				me = file; sub(/^src\//, "", me); sub(/\/.*/, "", me)
			}
			if (!(me in level)) { print file ": folder \"" me "\" is not in the layers line"; bad = 1; continue }
			if (inc ~ /^omen\//) {
				to = owner[inc]
				if (to == "") { print file ":" ln ": \"" inc "\" is not named in the module map"; bad = 1; continue }
			} else if (inc ~ /\//) {
				to = inc; sub(/\/.*/, "", to)
				if (to != me) { print file ":" ln ": \"" inc "\" is internal to " to "/"; bad = 1; continue }
			} else {
				to = me
			}
			if (!(to in level)) { print file ":" ln ": folder \"" to "\" is not in the layers line"; bad = 1; continue }
			if (to != me && level[to] >= level[me]) {
				print file ":" ln ": " me "/ includes \"" inc "\" of " to "/, which is " \
					(level[to] == level[me] ? "on its level" : "above it")
				bad = 1
			}
		}
		while ((getline line < calls) > 0) {
			file = line; sub(/:.*/, "", file)
			if (file in exempt) continue
			me = file; sub(/^src\//, "", me); sub(/\/.*/, "", me)
			if (me in nogit) {
				rest = line; sub(/^[^:]*:/, "", rest)
				ln = rest; sub(/:.*/, "", ln)
				print file ":" ln ": " me "/ calls libgit2 (reach git through history/)"
				bad = 1
			}
		}
		while ((getline line < prints) > 0) {
			file = line; sub(/:.*/, "", file)
			if (file in exempt) continue
			me = file; sub(/^src\//, "", me); sub(/\/.*/, "", me)
			rest = line; sub(/^[^:]*:/, "", rest)
			ln = rest; sub(/:.*/, "", ln)
			print file ":" ln ": " me "/ prints to the terminal (only cli/ prints; pass a callback)"
			bad = 1
		}
		exit bad
	}' "$dir/DEVELOPERS.md" || rc=1
	rm -f "$list" "$calls" "$prints"
	return $rc
}

# 1. the tree itself
if ! out=$(check_tree "$ROOT"); then
	echo "layer check failed:"; echo "$out"; exit 1
fi
n=$(cd "$ROOT" && cat src/*/*.c src/*/*.h include/omen/*.h | grep -c '^[[:space:]]*#[[:space:]]*include[[:space:]]*"')
echo "layers: $n includes checked"

# 2. the checker rejects what it must: a copy of the module map over a
# small tree, one offence at a time
fake=$TMPDIR/fake
mkdir -p "$fake/src/util" "$fake/src/model" "$fake/src/eval" "$fake/src/score" "$fake/include/omen"
cp "$ROOT/DEVELOPERS.md" "$fake/"
printf '#include "omen/util.h"\n' >"$fake/src/util/a.c"
printf '#include "omen/model.h"\n#include "model/internal.h"\n' >"$fake/src/model/m.c"
printf '#include "omen/model.h"\n#include "eval/svg.h"\n' >"$fake/src/eval/e.c"
printf '#include "omen/model.h"\n' >"$fake/src/score/s.c"
printf '#include "omen/util.h"\n' >"$fake/include/omen/model.h"
: >"$fake/include/omen/util.h"
check_tree "$fake" >/dev/null || { echo "a tree that keeps the layers was rejected:"; check_tree "$fake"; exit 1; }

expect() {  # expect WHAT PATTERN: the fake tree is rejected with PATTERN
	if out=$(check_tree "$fake"); then echo "not caught: $1"; exit 1; fi
	echo "$out" | grep -q "$2" || { echo "$1: unexpected message: $out"; exit 1; }
}
printf '#include "omen/eval.h"\n' >>"$fake/src/model/m.c"
expect "model/ including eval's header" 'src/model/m.c:3: model/ includes "omen/eval.h" of eval/, which is above it'
printf '#include "omen/model.h"\n' >"$fake/src/model/m.c"
printf '#include "omen/score.h"\n' >>"$fake/src/eval/e.c"
expect "eval/ including score's header" 'eval/ includes "omen/score.h" of score/, which is on its level'
printf '#include "omen/model.h"\n' >"$fake/src/eval/e.c"
printf '#include "model/internal.h"\n' >>"$fake/src/score/s.c"
expect "score/ including model's internal header" '"model/internal.h" is internal to model/'
printf '#include "omen/model.h"\n' >"$fake/src/score/s.c"
printf '#include "omen/nothere.h"\n' >>"$fake/src/util/a.c"
expect "an unplaced header" '"omen/nothere.h" is not named in the module map'
printf '#include "omen/util.h"\n' >"$fake/src/util/a.c"
printf 'static int f(void) { return git_oid_equal(0, 0); }\n' >>"$fake/src/score/s.c"
expect "a libgit2 call in score/" 'src/score/s.c:2: score/ calls libgit2'
printf '#include "omen/model.h"\n' >"$fake/src/score/s.c"
printf 'static void f(int n) { fprintf(stderr, "%%d", n); }\n' >>"$fake/src/util/a.c"
expect "util/ printing" 'src/util/a.c:2: util/ prints to the terminal'
printf '#include "omen/util.h"\n' >"$fake/src/util/a.c"
printf '#include "omen/util.h"\n' >"$fake/include/omen/model.h"
printf '#include "omen/score.h"\n' >>"$fake/include/omen/model.h"
expect "a public header including a higher one" 'include/omen/model.h:2: model/ includes "omen/score.h"'
printf '#include "omen/util.h"\n' >"$fake/include/omen/model.h"
{ grep -v '^    layer exceptions: ' "$ROOT/DEVELOPERS.md"; echo '    layer exceptions: src/util/a.c'; } >"$fake/DEVELOPERS.md"
printf 'static void f(int n) { fprintf(stderr, "%%d", n); }\n' >>"$fake/src/util/a.c"
check_tree "$fake" >/dev/null || { echo "a listed exception was not left out:"; check_tree "$fake"; exit 1; }
grep -v '^    layer exceptions: ' "$ROOT/DEVELOPERS.md" >"$fake/DEVELOPERS.md"
expect "util/ printing once its exception is gone" 'src/util/a.c:2: util/ prints to the terminal'
printf '#include "omen/util.h"\n' >"$fake/src/util/a.c"
cp "$ROOT/DEVELOPERS.md" "$fake/"
sed 's/^    layers: .*/    layers: gone/' "$ROOT/DEVELOPERS.md" >"$fake/DEVELOPERS.md"
expect "a folder missing from the layers line" 'is not in the layers line'
grep -v '^    layers: ' "$ROOT/DEVELOPERS.md" >"$fake/DEVELOPERS.md"
expect "no layers line" 'no "    layers:" line'
echo "layers: the checker rejects each planted offence"
