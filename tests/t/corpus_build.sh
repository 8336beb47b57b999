#!/bin/sh
# fixtures/corpus/build.sh (issue 11) on a manifest of three generated
# histories, one of whose snapshots is missing: the build stops before any
# work with one line naming that entry; --keep-going labels and shards the
# other two and lists what it left out. An entry on the leave-out list is
# refused. The shards train a base model through `git omen train --base`,
# and the same SOURCE_DATE_EPOCH gives the same bytes twice; the file holds
# none of the corpus's authors, paths or messages; fine-tuning starts from
# it, a damaged one is a notice.
set -eu
fail() { echo "FAIL: $*" >&2; exit 1; }
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
mkdir -p "$HOME" snap
top=$PWD
/usr/bin/python3 "$ROOT/fixtures/demo/gen.py" --seed 3 --commits 160 --out "$top/snap/example+one" --bare --quiet
/usr/bin/python3 "$ROOT/fixtures/demo/gen.py" --seed 4 --commits 140 --out "$top/snap/example+two" --bare --quiet
h1=$(git --git-dir=snap/example+one rev-parse HEAD)
h2=$(git --git-dir=snap/example+two rev-parse HEAD)
printf '# test corpus\nname\thead\tlanguage\tcommits\nexample/one\t%s\tPython\t160\nexample/three\t%s\tC\t10\nexample/two\t%s\tGo\t140\n' \
	"$h1" "$h1" "$h2" >m.tsv
export OMEN_CORPUS_DIR="$top/snap" OMEN_CORPUS_WORK="$top/work"

rc=0; sh "$ROOT/fixtures/corpus/build.sh" --manifest m.tsv --no-train >out 2>err || rc=$?
[ "$rc" -eq 1 ] || fail "missing snapshot: exit $rc"
grep -q "^build.sh: corpus entry 'example/three': no snapshot at '$top/snap/example+three'$" err ||
	fail "missing snapshot not named: $(cat err)"
[ ! -e work/shards/example+one.shard ] || fail "work done before the missing entry stopped it"

sh "$ROOT/fixtures/corpus/build.sh" --manifest m.tsv --no-train --keep-going >out 2>err ||
	fail "--keep-going: $(cat err)"
[ -s work/shards/example+one.shard ] && [ -s work/shards/example+two.shard ] ||
	fail "--keep-going: shards missing"
grep -q "^left out: 1 of 3 corpus entries: example/three$" err || fail "left-out list: $(cat err)"
grep -q "wrote shard .*example+one.shard: [0-9]* commits, [0-9]* labelled" out || fail "$(cat out)"
# the snapshots were only read
[ ! -d snap/example+one/omen ] || fail "a snapshot was written to"

# a snapshot without the manifest's head is named too
printf 'name\thead\tlanguage\tcommits\nexample/one\t%s\tPython\t1\n' "$(echo "$h1" | tr 0-9a-f 1-9a-f0)" >bad.tsv
rc=0; sh "$ROOT/fixtures/corpus/build.sh" --manifest bad.tsv --no-train >out 2>err || rc=$?
[ "$rc" -eq 1 ] && grep -q "corpus entry 'example/one': snapshot .* lacks its head" err ||
	fail "head check: exit $rc: $(cat err)"
# an entry of the leave-out list is refused
printf 'name\thead\tlanguage\tcommits\npallets/click\t%s\tPython\t1\n' "$h1" >lo.tsv
rc=0; sh "$ROOT/fixtures/corpus/build.sh" --manifest lo.tsv --no-train >out 2>err || rc=$?
[ "$rc" -eq 1 ] && grep -q "corpus entry 'pallets/click' is on the leave-out list" err ||
	fail "leave-out entry: exit $rc: $(cat err)"

# a snapshot that lacks one blob: its labelling fails; --keep-going leaves
# it out and goes on, without it the build stops there naming it
git init -q --bare snap/example+four
git --git-dir=snap/example+four unpack-objects -q <"$(ls snap/example+two/objects/pack/*.pack)"
git --git-dir=snap/example+two for-each-ref --format='%(refname) %(objectname)' |
	while read -r ref id; do git --git-dir=snap/example+four update-ref "$ref" "$id"; done
git --git-dir=snap/example+four symbolic-ref HEAD "$(git --git-dir=snap/example+two symbolic-ref HEAD)"
blob=$(git --git-dir=snap/example+four ls-tree -r HEAD~30 | awk '$2 == "blob" { print $3; exit }')
rm -f "snap/example+four/objects/$(echo "$blob" | cut -c1-2)/$(echo "$blob" | cut -c3-)"
printf 'name\thead\tlanguage\tcommits\nexample/four\t%s\tGo\t140\nexample/one\t%s\tPython\t160\n' "$h2" "$h1" >m2.tsv
rc=0; sh "$ROOT/fixtures/corpus/build.sh" --manifest m2.tsv --no-train >out 2>err || rc=$?
[ "$rc" -eq 1 ] && grep -q "^build.sh: corpus entry 'example/four': labelling failed$" err ||
	fail "missing blob: exit $rc: $(cat err)"
sh "$ROOT/fixtures/corpus/build.sh" --manifest m2.tsv --no-train --keep-going >out 2>err ||
	fail "missing blob, --keep-going: $(cat err)"
grep -q "^build.sh: corpus entry 'example/four': labelling failed; left out$" err &&
	grep -q "^left out: 1 of 2 corpus entries: example/four$" err ||
	fail "missing blob, --keep-going: $(cat err)"
[ ! -e work/shards/example+four.shard ] && [ -s work/shards/example+one.shard ] ||
	fail "missing blob, --keep-going: shards"
# back to the first manifest's shards for what follows
sh "$ROOT/fixtures/corpus/build.sh" --manifest m.tsv --no-train --keep-going >out 2>err ||
	fail "rebuild: $(cat err)"

# --leave-out reads the leave-out list (none of whose snapshots is here)
rc=0; sh "$ROOT/fixtures/corpus/build.sh" --leave-out >out 2>err || rc=$?
[ "$rc" -eq 1 ] && grep -q "^build.sh: corpus entry 'pallets/click': no snapshot at" err ||
	fail "--leave-out: exit $rc: $(cat err)"

# the base model from the two shards, twice: the same bytes
for k in 1 2; do
	SOURCE_DATE_EPOCH=1700000000 "$OMEN" train --base work/shards --model "b$k.omen" --epochs 2 \
		--threads $k >out 2>err || fail "train --base: $(cat err)"
done
cmp -s b1.omen b2.omen || fail "base model differs between runs at 1 and 2 threads"
grep -q "^corpus: 2 histories; train [0-9]* commits" out || fail "summary: $(cat out)"
"$OMEN" train --info --model b1.omen --format json >info
grep -q '"metrics":[[:space:]]*"relative"' info || fail "info: $(cat info)"
grep -q '"name":[[:space:]]*"example/one"' info || fail "corpus not listed: $(cat info)"
grep -q '"date":[[:space:]]*"2023-11-14T22:13:20Z"' info || fail "date: $(cat info)"
# weights and statistics only: no author name or address, no path, no
# message of the corpus in the file (strings(1) of binutils)
if command -v strings >/dev/null; then
	strings -n 4 b1.omen >strs
	for g in snap/example+one snap/example+two; do
		git --git-dir="$g" log --format='%ae%n%an' | sort -u >who
		git --git-dir="$g" ls-tree -r --name-only HEAD | grep '/' | sort -u >paths
		git --git-dir="$g" log --format='%s' | awk 'length($0) >= 12' | sort -u >subjects
		[ -s who ] && [ -s paths ] && [ -s subjects ] || fail "no names to look for in $g"
		! grep -F -f who strs >/dev/null || fail "an author of $g is in the base model"
		! grep -F -f paths strs >/dev/null || fail "a path of $g is in the base model"
		! grep -F -f subjects strs >/dev/null || fail "a commit message of $g is in the base model"
	done
fi
"$OMEN" train --info --model b1.omen | grep -q "^base model  2 histories, [0-9]* training commits, built 2023-11-14T22:13:20Z$" ||
	fail "info text: $("$OMEN" train --info --model b1.omen)"
rc=0; "$OMEN" train --base work/shards >out 2>err || rc=$?
[ "$rc" -eq 129 ] || fail "--base without --model: exit $rc"
rc=0; "$OMEN" train --base work/shards --model x.omen --from b1.omen >out 2>err || rc=$?
[ "$rc" -eq 129 ] && grep -q "^git omen train: --base reads shards" err || fail "--base --from: exit $rc: $(cat err)"
rc=0; "$OMEN" train --base "$top/none" --model x.omen >out 2>err || rc=$?
[ "$rc" -eq 128 ] && grep -q "^git omen: error: cannot read shard directory '$top/none'" err ||
	fail "no directory: exit $rc: $(cat err)"

# fine-tuning: --from starts from the base model; a damaged base model is a
# notice and training goes on from scratch; --scratch ignores omen.baseModel
git clone -q snap/example+one r1
cd r1
"$OMEN" label >/dev/null
"$OMEN" train --from ../b1.omen --epochs 2 --model ft.omen >out 2>err || fail "--from: $(cat err)"
grep -q "^fine-tuned from base model \.\./b1\.omen$" out || fail "--from: $(cat out)"
"$OMEN" train --info --model ft.omen --format json | grep -q '"from_base"' || fail "no from_base in metadata"
"$OMEN" train --info --model ft.omen | grep -q "^from base   2 histories" || fail "info text: no from base line"
cp ../b1.omen flipped.omen
printf 'X' | dd of=flipped.omen bs=1 seek=300 conv=notrunc 2>/dev/null
"$OMEN" train --from flipped.omen --epochs 2 --model ft2.omen >out 2>err || fail "flipped base: $(cat err)"
[ "$(wc -l <err)" -eq 1 ] && grep -q "^git omen: notice: cannot use base model 'flipped.omen': .*; training from scratch$" err ||
	fail "flipped base notice: $(cat err)"
! grep -q "fine-tuned" out || fail "flipped base was used"
# eval side by side (issue 11): the base model alone and fine-tuned from it
# with a base; "no base model" without one; a damaged one is a notice
ev="--folds 2 --fold-days 60 --epochs 2 --bootstrap 20"
if "$OMEN" eval $ev --format json >ev0 2>everr; then
	grep -q '"base_model_file":null' ev0 && grep -q '"base_model":null,"fine_tuned":null' ev0 ||
		fail "eval without a base: $(head -c 300 ev0)"
	"$OMEN" eval $ev >ev0.txt 2>/dev/null || fail "eval text without a base"
	grep -q "^base_model *no base model$" ev0.txt && grep -q "^fine_tuned *no base model$" ev0.txt ||
		fail "eval text without a base: $(cat ev0.txt)"
	"$OMEN" eval $ev --from ../b1.omen --format json >ev1 2>everr || fail "eval --from: $(cat everr)"
	grep -q '"base_model_file":"../b1.omen"' ev1 || fail "eval --from: no base file"
	grep -q '"fine_tuned":null' ev1 && fail "eval --from: fine_tuned is null"
	grep -q '"base_model":{"n":' ev1 || fail "eval --from: no base_model figures"
	"$OMEN" eval $ev --from flipped.omen >ev2.txt 2>everr || fail "eval flipped base: $(cat everr)"
	grep -q "^git omen: notice: cannot use base model 'flipped.omen': .*no base model" everr &&
		grep -q "^base_model *no base model$" ev2.txt || fail "eval flipped base: $(cat everr)"
else
	fail "eval on r1: $(cat everr)"
fi
git config omen.baseModel ../b1.omen
"$OMEN" train --scratch --epochs 2 --model ft3.omen >out 2>err || fail "--scratch: $(cat err)"
! grep -q "fine-tuned" out || fail "--scratch used the base model"
"$OMEN" train --info --model ft3.omen --format json | grep -q '"from_base"' && fail "--scratch: from_base in metadata"

# a young repository (too few labelled commits): without a base model train
# stops with the figure; with one it keeps the base model, says so once with
# the figure, and score uses it
cd "$top"
/usr/bin/python3 "$ROOT/fixtures/demo/gen.py" --seed 9 --commits 45 --out "$top/young" --quiet
cd young
"$OMEN" label >/dev/null
rc=0; "$OMEN" train >out 2>err || rc=$?
[ "$rc" -eq 128 ] && grep -q "^git omen: error: too few labelled commits to train: [0-9]* labelled" err ||
	fail "young, no base: exit $rc: $(cat err)"
"$OMEN" train --from ../b1.omen >out 2>err || fail "young, base: $(cat err)"
[ "$(wc -l <err)" -eq 1 ] &&
	grep -q "^git omen: notice: too few labelled commits to train: [0-9]* labelled .*: keeping the base model '../b1.omen', standardized on this repository's [0-9]* commits$" err ||
	fail "young, base notice: $(cat err)"
grep -q "the base model, not trained on this repository; scores are advisory" out || fail "$(cat out)"
"$OMEN" train --info --format json | grep -q '"young"' || fail "young: metadata"
"$OMEN" score HEAD >out 2>err || fail "young: score: $(cat err)"
grep -q "advisory" out || fail "young: score output: $(cat out)"
[ "$(grep -c "^git omen: notice: scored with a base model: this repository had [0-9]* labelled commits, too few to train its own model; scores are advisory$" err)" -eq 1 ] ||
	fail "young: score notice: $(cat err)"
# a model trained on the repository itself gives no such notice
cd "$top/r1"
"$OMEN" score --model ft3.omen HEAD >out 2>err || fail "r1: score: $(cat err)"
! grep -q "base model" err || fail "r1: base-model notice on its own model: $(cat err)"

# no model of its own, no labels: score and the hook fall back to the base
# model (omen.baseModel here; the installed one in install_layout.sh), one
# notice each; a damaged base is a one-line error; --model or omen.model
# naming a missing file stays an error
cd "$top"
/usr/bin/python3 "$ROOT/fixtures/demo/gen.py" --seed 11 --commits 30 --out "$top/fresh" --quiet
cd fresh
rc=0; "$OMEN" score HEAD >out 2>err || rc=$?
[ "$rc" -eq 128 ] && grep -q "^git omen: error: no model at '.*model.omen': run 'git omen train' first$" err ||
	fail "fresh, no base: exit $rc: $(cat err)"
git config omen.baseModel ../b1.omen
n=$(git rev-list --count HEAD)   # git's own count of the commits standardized on
"$OMEN" score HEAD~3..HEAD >out 2>err || fail "fresh: score: $(cat err)"
[ "$(grep -c . out)" -ge 4 ] && grep -q "3 scored; .*advisory" out || fail "fresh: score output: $(cat out)"
[ "$(wc -l <err)" -eq 1 ] &&
	grep -q "^git omen: notice: no model of this repository's own: scored with the base model '../b1.omen', standardized on this repository's $n commits; scores are advisory$" err ||
	fail "fresh: score notice: $(cat err)"
[ ! -e .git/omen/model.omen ] || fail "fresh: score wrote a model"
"$OMEN" score --format json HEAD >out 2>/dev/null && grep -q '"probability":.*"model":"../b1.omen"' out || fail "fresh: json: $(cat out)"
rc=0; "$OMEN" score --model none.omen HEAD >out 2>err || rc=$?
[ "$rc" -eq 128 ] && grep -q "^git omen: error: no model at 'none.omen'" err || fail "fresh, --model: exit $rc: $(cat err)"
cp ../b1.omen flipped.omen
printf 'X' | dd of=flipped.omen bs=1 seek=300 conv=notrunc 2>/dev/null
git config omen.baseModel flipped.omen
rc=0; "$OMEN" score HEAD >out 2>err || rc=$?
[ "$rc" -eq 128 ] && [ "$(wc -l <err)" -eq 1 ] && grep -q "^git omen: error: cannot use base model 'flipped.omen': " err ||
	fail "fresh, flipped base: exit $rc: $(cat err)"
! grep -q "cannot use base model.*cannot use base model" err || fail "fresh, flipped base: message twice: $(cat err)"
head -c 1000 ../b1.omen >cut.omen
git config omen.baseModel cut.omen
rc=0; "$OMEN" score HEAD >out 2>err || rc=$?
[ "$rc" -eq 128 ] && [ "$(wc -l <err)" -eq 1 ] && grep -q "^git omen: error: cannot use base model 'cut.omen': " err ||
	fail "fresh, cut base: exit $rc: $(cat err)"
! grep -q "cannot use base model.*cannot use base model" err || fail "fresh, cut base: message twice: $(cat err)"
# the hook: one notice, the push goes through
git config omen.baseModel ../b1.omen
git clone -q --bare . "$top/fresh-remote.git"
git -C "$top/fresh-remote.git" update-ref refs/heads/main "$(git rev-parse HEAD~4)" 2>/dev/null ||
	git -C "$top/fresh-remote.git" update-ref "$(git symbolic-ref HEAD)" "$(git rev-parse HEAD~4)"
git remote add origin "$top/fresh-remote.git"
git fetch -q origin
"$OMEN" hook install >/dev/null
git config omen.hookTimeout 600000
PATH="$(dirname "$OMEN"):$PATH" git push -q origin HEAD 2>err || fail "fresh: push: $(cat err)"
[ "$(grep -c "^git omen: notice: no model of this repository's own: scored with the base model" err)" -eq 1 ] ||
	fail "fresh: hook notice: $(cat err)"
exit 0
