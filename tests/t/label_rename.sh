# Refinement: renamed files keep origins (exact renames, and renames with
# edits at >= 50% similarity as git's -M default). fixtures/label/rename.sh.
. "$ROOT/fixtures/label/check.sh"
sh "$ROOT/fixtures/label/rename.sh" repo >/dev/null
cd repo
LF=.git/omen/labels.jsonl
"$OMEN" label --window 0 >/dev/null
expect origin inducing 1
expect move clean
expect moveedit clean
# the reference: git blame follows the renames to the same commit
[ "$(git blame -w --porcelain -L3,3 fix^ -- lib.c | head -1 | cut -c1-40)" = "$(git rev-parse origin)" ] ||
	fail "git blame disagrees"
"$OMEN" label --window 0 --no-renames --full >/dev/null
expect origin clean
expect moveedit inducing 1
