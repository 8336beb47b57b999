#!/bin/sh
# The option table (src/cli/options.c): every command answers --bogus and a
# bad value for each shared option it takes with exactly one line on standard
# error, in one of the two templates, and exit 129; a shared option's
# "expected ..." text is the same in every command that takes it; a near miss
# gets git's "did you mean" hint; and each old spelling prints one notice and
# still does what the new name does (the same bytes where the output is
# deterministic). Run by tests/run-shell.sh with $OMEN and $ROOT.
set -u
: "${OMEN:?}" "${ROOT:?}"
fail=0
bad() { echo "FAIL: $*"; fail=1; }
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null NO_COLOR=1
mkdir -p "$HOME"
top=$PWD

# usage CMD LINE ARGS...: exit 129 and stderr exactly LINE (one line)
usage() {
	cmd=$1 want=$2
	shift 2
	"$OMEN" "$cmd" "$@" >out 2>err
	rc=$?
	[ "$rc" -eq 129 ] || bad "$cmd $*: exit $rc, not 129"
	[ "$(wc -l <err)" -eq 1 ] || bad "$cmd $*: not one line: $(cat err)"
	[ "$(cat err)" = "$want" ] || bad "$cmd $*: got '$(cat err)', want '$want'"
	[ ! -s out ] || bad "$cmd $*: wrote to standard output"
}

# --bogus: the unknown-option template, no hint for a name nothing is near
for cmd in label train score explain eval features hook version; do
	usage "$cmd" "git omen $cmd: unknown option '--bogus'; see 'git omen $cmd --help'" --bogus
	usage "$cmd" "git omen $cmd: unknown option '--bogus'; see 'git omen $cmd --help'" --bogus=1
done
# a near miss: the nearest name of that command (edit distance)
usage train "git omen train: unknown option '--threds'; did you mean '--threads'?" --threds 2
usage score "git omen score: unknown option '--fromat'; did you mean '--format'?" --fromat=json
usage label "git omen label: unknown option '--widnow'; did you mean '--window'?" --widnow 3
usage eval "git omen eval: unknown option '--fold'; did you mean '--folds'?" --fold 3
usage features "git omen features: unknown option '--label'; did you mean '--labels'?" --label x

# bad values: the value as written, the option's one "expected" text
threads="expected a count from 1 to 64"
seed="expected a non-negative integer"
epochs="expected a count from 1 to 10000"
window="expected a number of days from 0 to 100000"
for cmd in train eval; do
	usage $cmd "git omen $cmd: bad value '0' for --threads: $threads" --threads 0
	usage $cmd "git omen $cmd: bad value '65' for --threads: $threads" --threads=65
	usage $cmd "git omen $cmd: bad value '-1' for --seed: $seed" --seed -1
	usage $cmd "git omen $cmd: bad value '1e3' for --seed: $seed" --seed 1e3
	usage $cmd "git omen $cmd: bad value '0' for --epochs: $epochs" --epochs 0
	usage $cmd "git omen $cmd: bad value (none) for --labels: expected a <file>" --labels
	usage $cmd "git omen $cmd: bad value 'csv' for --format: expected text or json" --format csv
done
for cmd in label eval; do
	usage $cmd "git omen $cmd: bad value 'soon' for --window: $window" --window soon
	usage $cmd "git omen $cmd: bad value '100001' for --window: $window" --window 100001
done
for cmd in label explain; do
	usage $cmd "git omen $cmd: bad value 'xml' for --format: expected text or json" --format xml
done
usage label "git omen label: bad value (none) for --labels: expected a <file>" --labels
usage label "git omen label: bad value '-1' for --max-fix-files: expected a count from 0 to 1000000000" \
	--max-fix-files -1
usage label "git omen label: bad value 'yes' for --full: expected no value" --full=yes
usage train "git omen train: bad value (none) for --model: expected a <file>" --model
usage score "git omen score: bad value 'xml' for --format: expected text, json or sarif" --format xml
usage score "git omen score: bad value (none) for --model: expected a <file>" --model
usage score "git omen score: bad value (none) for -o: expected a <file>" -o
usage score "git omen score: bad value '1.5' for --fail-above: expected a probability from 0 to 1" \
	--fail-above 1.5
usage score "git omen score: bad value 'size' for --sort: expected history, risk or per-line" --sort size
usage explain "git omen explain: bad value (none) for --model: expected a <file>" --model
usage explain "git omen explain: bad value '0' for --top: expected a count from 1 to 1000" HEAD --top 0
usage eval "git omen eval: bad value '0' for --folds: expected a count from 1 to 1000" --folds 0
usage features "git omen features: bad value 'text' for --format: expected csv or json" --format text
usage features "git omen features: bad value (none) for --labels: expected a <file>" --labels
usage features "git omen features: bad value (none) for -o: expected a <file>" -o
# an old spelling takes the same checks as its new name
usage eval "git omen eval: bad value 'x' for --window: $window" --gap-days x

# every shared option's help line is the same in each command that takes it
# (train and eval give --window and --seed narrower lines of their own)
for opt in --threads --epochs --labels --no-cache; do
	a=$("$OMEN" train --help | grep -e "^  $opt ")
	b=$("$OMEN" eval --help | grep -e "^  $opt ")
	[ -n "$a" ] && [ "$a" = "$b" ] || bad "help line of $opt: train '$a', eval '$b'"
done
a=$("$OMEN" score --help | grep -e "^  --model ")
b=$("$OMEN" explain --help | grep -e "^  --model ")
[ -n "$a" ] && [ "$a" = "$b" ] || bad "help line of --model: score '$a', explain '$b'"
# hidden aliases stay out of the help
for cmd in label train eval features; do
	"$OMEN" $cmd --help | grep -qe "--gap-days\|jsonl (" && bad "$cmd --help lists an old name"
done
"$OMEN" train --help | grep -qe "^  -o " && bad "train --help lists -o"

# old spellings: one notice each, and the same result as the new name
/usr/bin/python3 "$ROOT/fixtures/demo/gen.py" --seed 11 --commits 240 --out "$top/repo" --quiet ||
	{ echo "FAIL: demo generator"; exit 1; }
cd "$top/repo" || exit 1
notice() {   # notice FILE TEXT: FILE is exactly the one notice line TEXT
	[ "$(cat "$1")" = "git omen: notice: $2" ] || bad "notice: got '$(cat "$1")', want '$2'"
}
"$OMEN" label --window 0 --labels "$top/new.jsonl" >/dev/null 2>err || bad "label --labels: $(cat err)"
[ ! -s err ] || bad "label --labels wrote to stderr: $(cat err)"
"$OMEN" label --window 0 -o "$top/old.jsonl" >/dev/null 2>err || bad "label -o failed: $(cat err)"
notice err "'-o' is now '--labels'; the old name goes in a later release"
cmp -s "$top/new.jsonl" "$top/old.jsonl" || bad "label -o and --labels wrote different labels"

"$OMEN" features --labels "$top/new.jsonl" --format json >new.f 2>err || bad "features json: $(cat err)"
"$OMEN" features --labels "$top/new.jsonl" --format jsonl >old.f 2>err || bad "features jsonl: $(cat err)"
notice err "--format 'jsonl' is now 'json'; the old word goes in a later release"
cmp -s new.f old.f || bad "features --format jsonl and json differ"
[ "$(head -c 11 new.f)" = '{"commit":"' ] || bad "features --format json is not JSON Lines: $(head -c 40 new.f)"

"$OMEN" train --labels "$top/new.jsonl" --epochs 1 -o "$top/old.omen" >/dev/null 2>err ||
	bad "train -o failed: $(cat err)"
notice err "'-o' is now '--model'; the old name goes in a later release"
"$OMEN" train --info --model "$top/old.omen" --format json >new.i 2>err || bad "train --info --model: $(cat err)"
[ ! -s err ] || bad "train --info --model wrote to stderr: $(cat err)"
"$OMEN" train --info "$top/old.omen" --format json >old.i 2>err || bad "train --info FILE: $(cat err)"
notice err "'--info <file>' is now '--info --model <file>'; the old form goes in a later release"
cmp -s new.i old.i || bad "train --info FILE and --info --model FILE differ"
grep -q '"arch"' new.i || bad "train --info printed no metadata"

# eval --gap-days: accepted (one notice), then eval goes on to its own checks
"$OMEN" eval --gap-days 5 --labels "$top/missing.jsonl" >/dev/null 2>err
rc=$?
[ "$rc" -eq 128 ] || bad "eval --gap-days with missing labels: exit $rc"
[ "$(sed -n 1p err)" = "git omen: notice: '--gap-days' is now '--window'; the old name goes in a later release" ] ||
	bad "eval --gap-days notice: $(cat err)"
[ "$(sed -n 2p err)" = "git omen: error: cannot read labels '$top/missing.jsonl': run 'git omen label' first" ] ||
	bad "eval missing labels: $(cat err)"
exit $fail
