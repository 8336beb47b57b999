# One rule for where the label file is (omen_labels_path, src/label/location.c),
# followed by `label` as by every reader: omen.labels when set and not empty,
# else $GIT_DIR/omen/labels.jsonl. An empty omen.labels (git -c omen.labels=,
# here through GIT_CONFIG_PARAMETERS as git passes it)
# means the default; `label` once took it as the path '' and failed.
. "$ROOT/fixtures/label/check.sh"
sh "$ROOT/fixtures/label/ws.sh" repo >/dev/null
cd repo
LF=.git/omen/labels.jsonl
GIT_CONFIG_PARAMETERS="'omen.labels'=''" "$OMEN" label --window 0 >out.txt 2>err.txt ||
	fail "label with an empty omen.labels failed: $(cat err.txt)"
[ -s "$LF" ] || fail "empty omen.labels: no labels at the default path"
# the readers agree: features joins the same file (it says which labels it read)
GIT_CONFIG_PARAMETERS="'omen.labels'=''" "$OMEN" features -o feat.csv 2>err.txt || fail "features: $(cat err.txt)"
grep -q ',inducing$\|,clean$' feat.csv || fail "features did not join the default labels"
# a set omen.labels is followed by label and features alike
rm -f "$LF"
GIT_CONFIG_PARAMETERS="'omen.labels'='$PWD/elsewhere.jsonl'" "$OMEN" label --window 0 >/dev/null 2>err.txt ||
	fail "label with omen.labels set: $(cat err.txt)"
[ -s elsewhere.jsonl ] || fail "omen.labels not followed by label"
[ ! -e "$LF" ] || fail "labels written to the default path despite omen.labels"
GIT_CONFIG_PARAMETERS="'omen.labels'='$PWD/elsewhere.jsonl'" "$OMEN" features -o feat2.csv 2>err.txt ||
	fail "features with omen.labels set: $(cat err.txt)"
cmp -s feat.csv feat2.csv || fail "features differ between the two label paths"
echo "labels_path: ok"
