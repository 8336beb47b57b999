# Partial and incomplete clones (issue 12), with real objects: a blobless
# clone over file:// from a served repository (uploadpack.allowFilter) labels
# to the same bytes as the full clone, and features, train and score read it
# too; an unreachable promisor gives one notice and the skip path; a full
# repository with one deleted blob fails as git does, and labels with a count
# when told to skip. fixtures/label/churn.sh (130 commits, 5 merges).
. "$ROOT/fixtures/label/check.sh"
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 OMEN_NO_PROGRESS=1
mkdir -p "$HOME"
sh "$ROOT/fixtures/label/churn.sh" server >/dev/null
git -C server config uploadpack.allowFilter true
url="file://$PWD/server"
git clone -q "$url" full
absent() { git -C "$1" rev-list --objects --missing=print --all | grep -c '^?' || true; }
blobless() {
	git clone -q --filter=blob:none "$url" "$1"
	[ "$(git -C "$1" config remote.origin.promisor)" = true ] || fail "$1: no promisor remote"
	[ "$(absent "$1")" -gt 100 ] || fail "$1: the clone has its blobs"
}
num() { sed -n "s/.*\"$2\":\([0-9]*\).*/\1/p" "$1"; }
# scores without the model's path
same_scores() { sed 's/"model":"[^"]*"//' "$1" >"$1.x"; sed 's/"model":"[^"]*"//' "$2" >"$2.x"; cmp "$1.x" "$2.x"; }

# the reference: the full clone
(cd full && "$OMEN" label --window 0 >/dev/null && "$OMEN" features >../full.csv &&
	"$OMEN" train >/dev/null 2>&1 && "$OMEN" score HEAD~5..HEAD --format json >../full.score)

# label fetches what the pass reads, in a batch, and gives the same bytes
blobless part
want=$(absent part)
(cd part && "$OMEN" label --window 0 --format json >../part.json 2>../part.err)
[ -s part.err ] && fail "label on a blobless clone printed: $(cat part.err)"
cmp full/.git/omen/labels.jsonl part/.git/omen/labels.jsonl || fail "labels differ"
cmp full/.git/omen/labels.jsonl.state part/.git/omen/labels.jsonl.state || fail "label state differs"
grep -q '"partial":true' part.json || fail "not seen as partial"
[ "$(num part.json absent)" = "$want" ] || fail "absent $(num part.json absent), git counts $want"
[ "$(num part.json fetched)" = "$want" ] || fail "fetched $(num part.json fetched) of $want"
[ "$(num part.json batches)" = 1 ] || fail "$(num part.json batches) fetches for $want blobs"
[ "$(num part.json skipped_files)" = 0 ] || fail "skipped files on a reachable promisor"
[ "$(absent part)" = 0 ] || fail "blobs still absent after label"
# a second run has nothing to fetch
(cd part && "$OMEN" label --window 0 --format json >../part2.json)
[ "$(num part2.json absent)" = 0 ] || fail "second run found absent blobs"

# a tree-less clone: root trees first (with their subtrees), then blobs
git clone -q --filter=tree:0 "$url" treeless
(cd treeless && "$OMEN" label --window 0 --format json >../treeless.json 2>../treeless.err) ||
	fail "label on a tree-less clone: $(cat treeless.err)"
[ "$(num treeless.json trees_absent)" -gt 0 ] || fail "no absent trees in a tree-less clone"
[ "$(num treeless.json batches)" = 2 ] || fail "$(num treeless.json batches) fetches, expected trees then blobs"
cmp full/.git/omen/labels.jsonl treeless/.git/omen/labels.jsonl || fail "tree-less clone labels differ"

# features, train and score on blobless clones read the same changes
blobless feat
mkdir -p feat/.git/omen
cp full/.git/omen/labels.jsonl feat/.git/omen/
(cd feat && "$OMEN" features >../feat.csv 2>../feat.err)
[ -s feat.err ] && fail "features printed: $(cat feat.err)"
cmp full.csv feat.csv || fail "features differ"
blobless trn
mkdir -p trn/.git/omen
cp full/.git/omen/labels.jsonl trn/.git/omen/
(cd trn && "$OMEN" train >/dev/null 2>../trn.err) || fail "train on a blobless clone: $(cat trn.err)"
blobless scr
mkdir -p scr/.git/omen
cp full/.git/omen/labels.jsonl full/.git/omen/model.omen scr/.git/omen/
(cd scr && "$OMEN" score HEAD~5..HEAD --format json >../scr.score 2>../scr.err) ||
	fail "score on a blobless clone: $(cat scr.err)"
same_scores full.score scr.score || fail "scores differ"
(cd trn && "$OMEN" score HEAD~5..HEAD --format json >../trn.score)
same_scores full.score trn.score || fail "a model trained on the blobless clone scores differently"

# the history grows on the server; a pull brings commits and trees, and only
# the new tip's blobs: the incremental run fetches the others
export GIT_AUTHOR_NAME="Robin Quill" GIT_AUTHOR_EMAIL="robin@example.invalid"
export GIT_COMMITTER_NAME="Robin Quill" GIT_COMMITTER_EMAIL="robin@example.invalid"
for i in 1 2 3; do
	printf 'grown %s\n' "$i" >>server/util.c
	git -C server commit -qam "Change util.c again ($i)" --date="2021-01-0${i}T12:00:00Z"
done
for d in full part; do git -C "$d" pull -q --ff-only; done
[ "$(absent part)" -gt 0 ] || fail "the pull brought every blob"
(cd full && "$OMEN" label --window 0 >/dev/null)
(cd part && "$OMEN" label --window 0 --format json >../grown.json 2>../grown.err)
[ -s grown.err ] && fail "incremental label printed: $(cat grown.err)"
grep -q '"mode":"grew"' grown.json || fail "not an incremental run: $(cat grown.json)"
[ "$(num grown.json scanned_commits)" = 3 ] || fail "pre-pass over $(num grown.json scanned_commits) commits, not the 3 new"
[ "$(num grown.json fetched)" -gt 0 ] || fail "nothing fetched for the new commits"
cmp full/.git/omen/labels.jsonl part/.git/omen/labels.jsonl || fail "labels differ after the pull"

# an unreachable promisor: one notice, the skip path, and a full relabel
# once the remote is back
blobless off
git -C off config remote.origin.url "file://$PWD/nowhere"
(cd off && "$OMEN" label --window 0 --format json >../off.json 2>../off.err) || fail "label failed offline"
[ "$(grep -c . off.err)" = 1 ] || fail "expected one notice: $(cat off.err)"
grep -q "^git omen: notice: cannot fetch absent blobs from promisor remote 'origin': " off.err ||
	fail "notice: $(cat off.err)"
[ "$(num off.json skipped_files)" -gt 0 ] || fail "nothing skipped offline"
grep -q '"missing_blob_files":' off/.git/omen/labels.jsonl || fail "label file does not say blobs were skipped"
git -C off config remote.origin.url "$url"
(cd off && "$OMEN" label --window 0 --format json >../on.json 2>/dev/null)
grep -q '"mode":"full"' on.json || fail "labels made without blobs were reused: $(cat on.json)"
cmp full/.git/omen/labels.jsonl off/.git/omen/labels.jsonl || fail "labels differ once the promisor is back"

# a full repository with one deleted blob: util.c as the tenth-newest change
# of it left it (a loose object in the fixture)
cp -r server broken
cd broken
c=$(git log --format=%H -- util.c | sed -n 10p)
b=$(git rev-parse "$c:util.c")
rm -f ".git/objects/$(echo "$b" | cut -c1-2)/$(echo "$b" | cut -c3-)"
git cat-file -e "$b" 2>/dev/null && fail "blob $b still there"
# git's own patch log stops there too
git log -p >/dev/null 2>&1 && fail "git log -p read a deleted blob"
if "$OMEN" label --window 0 >/dev/null 2>../err; then fail "label went on past a missing blob"; fi
[ "$(grep -c . ../err)" = 1 ] || fail "expected one error line: $(cat ../err)"
grep -q "cannot read blob of 'util.c': object $(echo "$b" | cut -c1-12) is missing; set omen.missingBlobs=skip" ../err ||
	fail "error: $(cat ../err)"
GIT_CONFIG_PARAMETERS="'omen.missingblobs'='skip'" "$OMEN" label --window 0 --format json >../skip.json 2>../skip.err ||
	fail "label with omen.missingBlobs=skip: $(cat ../skip.err)"
# every change that reads the blob, as git's raw diff lists them (old or new side)
n=$(git log --raw --no-abbrev --format= | grep -c "$b")
[ "$(num ../skip.json skipped_files)" = "$n" ] || fail "skipped $(num ../skip.json skipped_files), git lists $n"
LF=.git/omen/labels.jsonl
expect "$c" unknown
[ "$(sed -n 's/.*"missing_blob_files":\([0-9]*\).*/\1/p' "$LF")" = "$n" ] || fail "label file count"
# everything readable is labelled: as many inducing commits as a run on the
# complete history, give or take those whose lines went through the blob
full_ind=$(grep -c '"label":"inducing"' ../full/.git/omen/labels.jsonl)
ind=$(grep -c '"label":"inducing"' "$LF")
[ "$ind" -gt $((full_ind / 2)) ] || fail "only $ind inducing of $full_ind"
# a promisor remote whose name git would take as an option is never run:
# the repository counts as partial (fetch by default), the fetch cannot
# work, one notice, the skip path
git config remote.-x.url "$url"
git config remote.-x.promisor true
"$OMEN" label --window 0 --full >/dev/null 2>../dash.err || fail "label with an unusable promisor: $(cat ../dash.err)"
[ "$(grep -c . ../dash.err)" = 1 ] && grep -q "^git omen: notice: no usable promisor remote to fetch 1 absent blob from; skipping it$" ../dash.err ||
	fail "unusable promisor: $(cat ../dash.err)"
git config --remove-section remote.-x
GIT_CONFIG_PARAMETERS="'omen.missingblobs'='later'" "$OMEN" label >/dev/null 2>../bad.err && fail "bad setting accepted"
grep -q "bad config value 'omen.missingBlobs': 'later' is not error, skip or fetch" ../bad.err || fail "$(cat ../bad.err)"
echo ok
