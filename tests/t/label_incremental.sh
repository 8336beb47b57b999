# Incremental runs: same head and options -> the previous labels are kept;
# the history grew -> said so (and relabelled); rewritten (the old head is
# not an ancestor, as git merge-base --is-ancestor says) -> full relabel.
. "$ROOT/fixtures/label/check.sh"
sh "$ROOT/fixtures/label/ws.sh" repo >/dev/null
cd repo
LF=.git/omen/labels.jsonl
"$OMEN" label --window 0 >out.txt
cp "$LF" first.jsonl
"$OMEN" label --window 0 >out.txt
grep -q "labels are up to date" out.txt || fail "no up-to-date detection: $(cat out.txt)"
cmp -s first.jsonl "$LF" || fail "up-to-date run changed the file"
"$OMEN" label --window 0 --format json | grep -q '"mode":"up-to-date"' || fail "json mode"
# other options: relabelled
"$OMEN" label --window 5 --format json | grep -q '"mode":"full"' || fail "changed options not relabelled"
"$OMEN" label --window 0 >/dev/null
. "$ROOT/fixtures/label/lib.sh"
echo "# more" >> calc.py
fx_commit 2020-03-01 more "Add a note"
old=$(git rev-parse HEAD~1)
"$OMEN" label --window 0 >out.txt
grep -q "history grew by 1 commit since the previous labels; reused the saved pass state of 3 commits" out.txt ||
	fail "growth: $(cat out.txt)"
expect origin inducing 1
# the reused state gives the same labels as a full pass
cp "$LF" grown.jsonl
"$OMEN" label --window 0 --full >/dev/null
cmp -s grown.jsonl "$LF" || fail "incremental labels differ from a full relabel"
# a damaged state file is not trusted: full pass, same labels
echo more >> calc.py; fx_commit 2020-03-05 more2 "Add another note"
printf 'garbage' > "$LF.state"
"$OMEN" label --window 0 >out.txt
grep -q "history grew by 1 commit since the previous labels; relabelled" out.txt || fail "bad state: $(cat out.txt)"
git reset -q --hard more
"$OMEN" label --window 0 --full >/dev/null
git merge-base --is-ancestor "$old" HEAD
# rewrite: amend the newest commit
GIT_AUTHOR_DATE="2020-03-02T12:00:00Z" GIT_COMMITTER_DATE="2020-03-02T12:00:00Z" git commit -q --amend -m "Add a longer note"
"$OMEN" label --window 0 >out.txt
grep -q "history was rewritten" out.txt || fail "rewrite: $(cat out.txt)"
"$OMEN" label --window 0 --full >out.txt
grep -q "up to date" out.txt && fail "--full did not relabel"
head -1 "$LF" | grep -q "\"head\":\"$(git rev-parse HEAD)\"" || fail "header head"
