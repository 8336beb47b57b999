#!/bin/sh
# Line origins against the outside reference, the git CLI:
#   git blame -w --porcelain --first-parent <fix>^ -- <file>
# on every line every fix deletes, in every label fixture (fixtures/label/),
# and, when OMEN_REF_REPO names a clone of a real history, on a seeded
# sample of OMEN_REF_SAMPLE (default 250) of its fixes. Also the
# developer-informed oracle (fixes that name the commit they repair; Rosa et
# al., ICSE 2021) on that history. Fixture disagreements must all be the
# by-design one: a line merged unchanged from a side branch keeps its
# side-branch origin, where blame --first-parent names the merge.
set -e
py=${PYTHON:-/usr/bin/python3}
lib="$ROOT/tests/ref/lib"
for b in "$ROOT"/fixtures/label/*.sh; do
	n=$(basename "$b" .sh)
	case "$n" in lib|check) continue;; esac
	sh "$b" "fx-$n" >/dev/null 2>&1
	# --closing-refs: this compares tracing, not fix detection, and the
	# issuedate fixture's fix is a "closes #7" message (issue 10's rule)
	(cd "fx-$n" && "$OMEN" label --window 0 --closing-refs --dump-origins ../"$n".dump >/dev/null)
	echo "fixture $n:"
	"$py" "$lib/blame_compare.py" "fx-$n" "$n".dump --strict
done
if [ -n "$OMEN_REF_REPO" ]; then
	echo "real history: $(basename "$OMEN_REF_REPO")"
	here=$PWD
	(cd "$OMEN_REF_REPO" && "$OMEN" label --full --labels "$here/real-labels.jsonl" --dump-origins "$here/real.dump" >/dev/null)
	"$py" "$lib/blame_compare.py" "$OMEN_REF_REPO" real.dump --sample "${OMEN_REF_SAMPLE:-250}" --seed 1 --min-agree 0.75
	"$py" "$lib/named_oracle.py" "$OMEN_REF_REPO" real.dump
else
	echo "REF real history: skipped (set OMEN_REF_REPO to a clone, e.g. of a public project)"
fi
