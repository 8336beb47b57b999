#!/bin/sh
# git omen score and explain on the demo fixture (fixtures/demo/gen.py) with
# a trained model: ranges as git rev-list reads them (reference: git
# rev-list), the JSON fields the man page documents, --fail-above, -o, the
# formats, and bad input (no model, a corrupt model, an unknown revision, a
# range that names nothing, a detached HEAD), each a one-line message.
set -eu
fail() { echo "FAIL: $*" >&2; exit 1; }
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
mkdir -p "$HOME"
PY=/usr/bin/python3
top=$PWD
$PY "$ROOT/fixtures/demo/gen.py" --seed 5 --commits 300 --out "$top/repo" --quiet
cd repo
"$OMEN" label >/dev/null
"$OMEN" train HEAD~20 >/dev/null 2>&1 || fail "training failed"
one_line() { [ "$(wc -l <"$1")" -eq 1 ] || fail "$2: not one line: $(cat "$1")"; }

# --help
"$OMEN" score --help | grep -q "^usage: git omen score" || fail "score --help"
"$OMEN" explain --help | grep -q "^usage: git omen explain" || fail "explain --help"

# a range: the commits of git rev-list, oldest first, merges left out
"$OMEN" score HEAD~12..HEAD --format json >s.jsonl
git rev-list --reverse --topo-order --no-merges HEAD~12..HEAD >want
$PY -c 'import json,sys; [print(json.loads(l)["id"]) for l in open("s.jsonl")]' >got
cmp got want || fail "range commits differ from git rev-list"

# every documented JSON field is present, and nothing else (man page list)
sed -n '/^\.Ss JSON fields/,/^\.Sh /p' "$ROOT/man/git-omen-score.1" | sed -n 's/^\.It Li //p' |
	tr ',' '\n' | sed 's/^ *//; s/ .*//' | grep . | sort >documented
$PY - s.jsonl documented <<'PYEOF' || fail "JSON fields differ from the man page"
import json, sys, math
doc = set(open(sys.argv[2]).read().split())
rows = []
names = ["ns","nd","nf","entropy","la","ld","lt","fix","ndev","age","nuc","exp","rexp","sexp"]
for line in open(sys.argv[1]):
    o = json.loads(line)
    assert set(o) == doc, (sorted(set(o) - doc), sorted(doc - set(o)))
    assert list(o["metrics"]) == names, list(o["metrics"])
    p, t = o["probability"], o["threshold"]
    assert 0 <= p <= 1 and 0 <= t <= 1
    assert o["risky"] == (p >= t)
    assert (o["band"] == "high") == (p >= t)
    assert 1 <= len(o["reasons"]) <= 2 and all(r["kind"] in ("hunk","large","diffuse","fix-history","metric") for r in o["reasons"])
    assert len(o["top_hunks"]) <= 3
    w = [h["weight"] for h in o["top_hunks"]]
    assert w == sorted(w, reverse=True)
    assert o["model"].endswith("model.omen")
    rows.append((o["logit"], p, ["low", "medium", "high"].index(o["band"])))
# Platt scaling is monotone: ordering by logit orders by probability, and
# the bands (cut from the warning curve) follow the probability
rows.sort()
assert [p for _, p, _ in rows] == sorted(p for _, p, _ in rows), rows
assert [b for _, _, b in rows] == sorted(b for _, _, b in rows), rows
PYEOF

# text: a header, one line per commit, a closing line that says advisory
"$OMEN" score HEAD~3..HEAD >text
[ "$(wc -l <text)" -eq 5 ] || fail "text lines: $(cat text)"
tail -1 text | grep -q "advisory" || fail "text does not say advisory"
grep -q "$(git rev-parse --short=10 HEAD)" text || fail "text lacks HEAD"

# default range: HEAD alone without an upstream; @{upstream}..HEAD with one
"$OMEN" score --format json >d.jsonl
[ "$(wc -l <d.jsonl)" -eq 1 ] && grep -q "$(git rev-parse HEAD)" d.jsonl || fail "default without upstream"
git remote add origin "$top/nowhere.git"
git update-ref refs/remotes/origin/main HEAD~4
git config branch.main.remote origin; git config branch.main.merge refs/heads/main
"$OMEN" score --format json >u.jsonl
[ "$(wc -l <u.jsonl)" -eq "$(git rev-list --no-merges --count @{upstream}..HEAD)" ] || fail "default with upstream"
# up to date with the upstream: nothing to score, one line, exit 0
git update-ref refs/remotes/origin/main HEAD
"$OMEN" score >out 2>err || fail "empty default range failed"
[ ! -s out ] || fail "empty range printed: $(cat out)"
one_line err "empty default range"; grep -q "names no commits" err || fail "empty range message"
git config --unset branch.main.remote

# --fail-above: exit 1 above p, 0 otherwise, 129 for a bad p
set +e
"$OMEN" score HEAD~3..HEAD --fail-above 0 >/dev/null; rc=$?
[ "$rc" -eq 1 ] || fail "--fail-above 0 exit $rc"
"$OMEN" score HEAD~3..HEAD --fail-above 1 >/dev/null; rc=$?
[ "$rc" -eq 0 ] || fail "--fail-above 1 exit $rc"
"$OMEN" score HEAD --fail-above 1.5 2>err; rc=$?
[ "$rc" -eq 129 ] || fail "--fail-above 1.5 exit $rc"
one_line err "bad --fail-above"
grep -qx "git omen score: bad value '1.5' for --fail-above: expected a probability from 0 to 1" err ||
	fail "--fail-above 1.5 message: $(cat err)"
"$OMEN" score HEAD --format xml 2>err; rc=$?
[ "$rc" -eq 129 ] || fail "--format xml exit $rc"
"$OMEN" score HEAD --bogus 2>err; rc=$?
[ "$rc" -eq 129 ] || fail "unknown option exit $rc"
"$OMEN" score HEAD --sort size 2>err; rc=$?
[ "$rc" -eq 129 ] || fail "--sort size exit $rc"
one_line err "bad --sort"
grep -qx "git omen score: bad value 'size' for --sort: expected history, risk or per-line" err ||
	fail "--sort size message: $(cat err)"
set -e
# --sort: the same commits, reordered; ties keep the history order
"$OMEN" score HEAD~8..HEAD --format json >h.jsonl
"$OMEN" score HEAD~8..HEAD --format json --sort risk >r.jsonl
"$OMEN" score HEAD~8..HEAD --format json --sort per-line >l.jsonl
$PY - h.jsonl r.jsonl l.jsonl <<'PY' || fail "--sort order"
import json, sys
h, r, l = ([json.loads(x) for x in open(p)] for p in sys.argv[1:])
pos = {c["id"]: i for i, c in enumerate(h)}
assert len(h) >= 5 and sorted(pos) == sorted(c["id"] for c in r) == sorted(c["id"] for c in l)
line = lambda c: c["probability"] / max(1, c["lines_added"] + c["lines_deleted"])
assert [c["id"] for c in r] == [c["id"] for c in sorted(h, key=lambda c: (-c["probability"], pos[c["id"]]))]
assert [c["id"] for c in l] == [c["id"] for c in sorted(h, key=lambda c: (-line(c), pos[c["id"]]))]
PY
set +e
# the threshold of a JSON line agrees with --fail-above at that probability
p=$($PY -c 'import json; print(json.loads(open("d.jsonl").readline())["probability"])')
"$OMEN" score HEAD --fail-above "$p" >/dev/null; rc=$?
[ "$rc" -eq 0 ] || fail "--fail-above at the commit's own probability: exit $rc"
set -e

# -o writes the file (atomically), nothing on standard output
"$OMEN" score HEAD~2..HEAD --format sarif -o out.sarif >out
[ ! -s out ] || fail "-o printed to standard output"
$PY -c 'import json; d=json.load(open("out.sarif")); assert d["version"]=="2.1.0"' || fail "sarif -o"

# bad input: each one line, exit 128
set +e
"$OMEN" score no-such-revision 2>err; rc=$?
[ "$rc" -eq 128 ] || fail "unknown revision exit $rc"; one_line err "unknown revision"
grep -q "no-such-revision" err || fail "unknown revision not named"
"$OMEN" score HEAD..HEAD 2>err; rc=$?
[ "$rc" -eq 0 ] || fail "empty range exit $rc"; one_line err "empty range"
"$OMEN" score HEAD --model "$top/none.omen" 2>err; rc=$?
[ "$rc" -eq 128 ] || fail "missing model exit $rc"; one_line err "missing model"
grep -q "git omen train" err || fail "missing model message: $(cat err)"
head -c 1000 .git/omen/model.omen >"$top/short.omen"
"$OMEN" score HEAD --model "$top/short.omen" 2>err; rc=$?
[ "$rc" -eq 128 ] || fail "truncated model exit $rc"; one_line err "truncated model"
cp .git/omen/model.omen "$top/flip.omen"
printf 'Z' | dd of="$top/flip.omen" bs=1 seek=5000 conv=notrunc 2>/dev/null
"$OMEN" score HEAD --model "$top/flip.omen" 2>err; rc=$?
[ "$rc" -eq 128 ] || fail "corrupt model exit $rc"; one_line err "corrupt model"
"$OMEN" explain 2>err; rc=$?
[ "$rc" -eq 129 ] || fail "explain without a commit exit $rc"; one_line err "explain usage"
merge=$(git rev-list --merges -1 HEAD)
if [ -n "$merge" ]; then
	"$OMEN" score "$merge" 2>err >/dev/null; rc=$?
	[ "$rc" -eq 0 ] || fail "merge exit $rc"; grep -q "merges are not scored" err || fail "merge note"
	"$OMEN" explain "$merge" 2>err; rc=$?
	[ "$rc" -eq 128 ] || fail "explain merge exit $rc"; one_line err "explain merge"
fi
set -e

# detached HEAD: scores HEAD
git checkout -q --detach HEAD~2
"$OMEN" score --format json >det.jsonl 2>err || fail "detached HEAD failed: $(cat err)"
grep -q "$(git rev-parse HEAD)" det.jsonl || fail "detached HEAD did not score HEAD"
git checkout -q main

# explain: ranked files, hunks, lines, metrics, neighbours among inducing commits
"$OMEN" explain HEAD~1 --format json --top 3 >x.json
git rev-parse HEAD~1 >xid
$PY - x.json xid .git/omen/labels.jsonl <<'PYEOF' || fail "explain JSON"
import json, sys
x = json.load(open(sys.argv[1])); want = open(sys.argv[2]).read().strip()
assert x["id"] == want
assert set(x) >= {"id","probability","threshold","band","reasons","files","hunks","lines","metrics","message_contribution","neighbours"}
assert len(x["files"]) <= 3 and len(x["hunks"]) <= 3 and len(x["neighbours"]) <= 3
w = [h["weight"] for h in x["hunks"]]; assert w == sorted(w, reverse=True)
c = [abs(l["contribution"]) for l in x["lines"]]; assert c == sorted(c, reverse=True)
c = [abs(m["contribution"]) for m in x["metrics"]]; assert c == sorted(c, reverse=True)
assert len(x["metrics"]) == 14
labels = {}
for l in open(sys.argv[3]):
    o = json.loads(l)
    if "id" in o: labels[o["id"]] = o
for n in x["neighbours"]:
    assert labels[n["id"]]["label"] in ("inducing", 1), labels[n["id"]]
d = [n["distance"] for n in x["neighbours"]]; assert d == sorted(d)
PYEOF
"$OMEN" explain HEAD~1 >x.txt
grep -q "advisory" x.txt && grep -q "closest past commits" x.txt || fail "explain text"
echo "score_cli: ok"
