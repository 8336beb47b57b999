# Refinement: blank, whitespace-only and comment-only lines are not traced
# (Kim et al., ASE 2006). fixtures/label/blank.sh: "layout" adds only blank
# and comment lines that the fix deletes, "logic" adds the code it repairs.
. "$ROOT/fixtures/label/check.sh"
sh "$ROOT/fixtures/label/blank.sh" repo >/dev/null
cd repo
LF=.git/omen/labels.jsonl
"$OMEN" label --window 0 >out.txt
expect logic inducing 1
expect layout clean
expect base clean
traced_by logic fix
"$OMEN" label --window 0 --no-skip-blank --full >/dev/null
expect layout inducing 2
"$OMEN" label --window 0 --no-skip-blank --no-skip-comments --full >/dev/null
expect layout inducing 4
"$OMEN" label --window 0 --no-skip-comments --full >/dev/null
expect layout inducing 2
