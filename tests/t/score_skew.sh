#!/bin/sh
# Train/serve skew: the same change scored as staged changes before it is
# committed (`score --staged --message M`) and as the commit made from them
# (`score HEAD`) goes through the same sample code, so the probability, the
# metrics and the hunks agree. Only the clock differs (the staged change is
# dated "now", the commit a moment later), which moves the time-based
# metrics (age, rexp) by a few seconds' worth; everything else is equal.
set -eu
fail() { echo "FAIL: $*" >&2; exit 1; }
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
mkdir -p "$HOME"
unset GIT_AUTHOR_NAME GIT_AUTHOR_EMAIL GIT_COMMITTER_NAME GIT_COMMITTER_EMAIL GIT_AUTHOR_DATE GIT_COMMITTER_DATE 2>/dev/null || true
PY=/usr/bin/python3
$PY "$ROOT/fixtures/demo/gen.py" --seed 9 --commits 250 --out repo --quiet
cd repo
"$OMEN" label >/dev/null
"$OMEN" train >/dev/null 2>&1 || fail "training failed"
# the identity of a regular contributor, so the experience metrics matter
email=$(git log -1 --format=%ae HEAD~3); name=$(git log -1 --format=%an HEAD~3)
git config user.name "$name"; git config user.email "$email"

f=$(git ls-files 'src/*.c' | head -1)
[ -n "$f" ] || fail "no C file in the fixture"
$PY - "$f" <<'PYEOF'
import sys
p = sys.argv[1]
lines = open(p).read().split("\n")
mid = len(lines) // 2
lines[mid:mid] = ["\tif (len > limit) {", "\t\tlen = limit;", "\t\treturn retry(len);", "\t}"]
lines[2] = lines[2] + " /* reviewed */"
open(p, "w").write("\n".join(lines))
PYEOF
echo "new helper" >src/extra_notes.txt
git add "$f" src/extra_notes.txt
msg="Clamp the length before retrying"
"$OMEN" score --staged --message "$msg" --format json >staged.json || fail "score --staged failed"
git commit -q -m "$msg"
"$OMEN" score HEAD --format json >commit.json || fail "score HEAD failed"
git rev-parse HEAD >id

$PY - staged.json commit.json id <<'PYEOF' || fail "staged and committed scores differ"
import json, sys
s = json.loads(open(sys.argv[1]).read()); c = json.loads(open(sys.argv[2]).read())
assert s["staged"] is True and c["staged"] is False
assert s["id"] == "0" * 40 and c["id"] == open(sys.argv[3]).read().strip()
for k in ("lines_added", "lines_deleted", "files", "hunks", "is_fix", "capped", "top_hunks", "summary"):
    assert s[k] == c[k], (k, s[k], c[k])
for k, v in s["metrics"].items():
    w = c["metrics"][k]
    if k in ("age", "rexp"):      # days and years since earlier changes: seconds apart
        assert abs(v - w) <= 1e-3 * max(1.0, abs(w)), (k, v, w)
    else:
        assert v == w, (k, v, w)
assert abs(s["probability"] - c["probability"]) < 1e-3, (s["probability"], c["probability"])
assert abs(s["logit"] - c["logit"]) < 1e-2, (s["logit"], c["logit"])
print("staged %.6f committed %.6f" % (s["probability"], c["probability"]))
PYEOF
echo "score_skew: ok"
