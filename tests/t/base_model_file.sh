#!/bin/sh
# The committed base model (issue 11), fixtures/base-model/base.omen: at
# most 16 MB, a base model of the manifest's corpus that the loader accepts,
# and weights and statistics only: strings(1) of binutils finds no e-mail
# address in it at all (so none of the corpus's authors'), and, when the
# corpus snapshots are at hand (OMEN_CORPUS_DIR, as for `make base-model`),
# none of the addresses, names or paths of their histories.
set -eu
fail() { echo "FAIL base_model_file: $*"; exit 1; }
: "${OMEN:?}" "${ROOT:?}"
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
mkdir -p "$HOME"
f="$ROOT/fixtures/base-model/base.omen"
[ -f "$f" ] || fail "no $f"
size=$(wc -c <"$f")
[ "$size" -le 16777216 ] || fail "base model is $size bytes, over 16 MB"
"$OMEN" train --info --model "$f" >info 2>err || fail "train --info: $(cat err)"
n=$(grep -c '^[a-zA-Z0-9]' "$ROOT/fixtures/corpus/manifest.tsv")
n=$((n - 1))   # the header line
grep -q "^base model  $n histories, [0-9]* training commits, built [0-9T:-]*Z$" info ||
	fail "not a base model of the $n manifest histories: $(cat info)"
"$OMEN" train --info --model "$f" --format json >info.json
for name in $(awk -F'\t' '!/^#/ && NR > 1 && $1 != "name" { print $1 }' "$ROOT/fixtures/corpus/manifest.tsv"); do
	grep -q "\"name\":[[:space:]]*\"$name\"" info.json || fail "corpus entry $name not in the metadata"
done
command -v strings >/dev/null || { echo "strings is not installed: text checks skipped"; exit 0; }
strings -n 5 "$f" >strs
# the check can fail: a planted address is found
cp "$f" planted.omen && printf 'x\000dev.one@example.org\000' >>planted.omen
strings -n 5 planted.omen | grep -Eq '[A-Za-z0-9._%+-]+@[A-Za-z0-9-]+(\.[A-Za-z0-9-]+)+' ||
	fail "the address pattern misses a planted address"
if grep -E '[A-Za-z0-9._%+-]+@[A-Za-z0-9-]+(\.[A-Za-z0-9-]+)+' strs >found; then
	fail "an e-mail address in the base model: $(head -3 found)"
fi
if [ -n "${OMEN_CORPUS_DIR:-}" ]; then
	awk -F'\t' '!/^#/ && $1 != "name" && NF >= 2 { print $1 }' "$ROOT/fixtures/corpus/manifest.tsv" |
	while read -r name; do
		g="$OMEN_CORPUS_DIR/$(echo "$name" | tr / +)"
		[ -d "$g/repo" ] && g="$g/repo"
		git --git-dir="$g" log --format='%ae' | awk 'length($0) >= 5' | sort -u >who ||
			fail "cannot read the history of $name at $g"
		[ -s who ] || fail "no author addresses in $name"
		! grep -F -f who strs >/dev/null || fail "an author address of $name is in the base model"
	done
	echo "checked against the author addresses of every corpus snapshot"
fi
exit 0
