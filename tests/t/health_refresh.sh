#!/bin/sh
# Freshness, drift and refresh (issue 12) on the demo fixture
# (fixtures/demo/gen.py, 400 commits). A model trained 100 commits back:
# `score` adds one stale notice past omen.staleCommits, none under the
# default; a model of another history gets the foreign-head notice; `git
# omen health` shows it in text and JSON, and its PSI of the count metrics
# matches a Python recomputation from `git omen features` (training-slice
# deciles, lower order statistic, the last N commits; PSI as in common
# credit-scoring practice, shares floored at 1e-4); `git omen refresh`
# retrains when enough new labels exist, then does nothing and changes no
# byte; a held train lock makes it skip, or wait with --wait; `hook install
# --refresh` chains a post-merge shim that runs it.
set -eu
fail() { echo "FAIL: $*" >&2; exit 1; }
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
mkdir -p "$HOME"
PATH="$(dirname "$OMEN"):$PATH"; export PATH
export GIT_AUTHOR_NAME="Test Author" GIT_AUTHOR_EMAIL="author@example.invalid"
export GIT_COMMITTER_NAME="Test Author" GIT_COMMITTER_EMAIL="author@example.invalid"
PY=/usr/bin/python3
top=$PWD
$PY "$ROOT/fixtures/demo/gen.py" --seed 11 --commits 400 --out "$top/work" --quiet
$PY "$ROOT/fixtures/demo/gen.py" --seed 5 --commits 300 --out "$top/other" --quiet
(cd "$top/other" && "$OMEN" label >/dev/null && "$OMEN" train >/dev/null 2>&1) || fail "other fixture"
cd work
base=$(git rev-parse HEAD~100)
since=$(git rev-list --no-merges --count "$base..HEAD")
"$OMEN" label >/dev/null
"$OMEN" train "$base" >/dev/null 2>&1 || fail "training failed"

# 1. stale: one notice past omen.staleCommits, none under the default (1000);
# one past omen.staleDays (default 90) for a model dated 2020
"$OMEN" score HEAD >out 2>err || fail "score: $(cat err)"
[ ! -s err ] || fail "a fresh model got a notice: $(cat err)"
git -c omen.staleCommits=50 omen score HEAD >out 2>err || fail "score: $(cat err)"
[ "$(wc -l <err)" -eq 1 ] || fail "not one notice: $(cat err)"
grep -q "^git omen: notice: the model is stale: $since commits behind HEAD (omen.staleCommits 50); 'git omen refresh' relabels and retrains" err ||
	fail "stale notice: $(cat err)"
git -c omen.staleCommits=50 omen health >h.txt 2>err || fail "health: $(cat err)"
grep -q "model is stale: $since commits behind HEAD" err || fail "health without the stale notice: $(cat err)"
grep -q "^model .*head $(git rev-parse --short=10 "$base").*, $since commits since$" h.txt || fail "health model line: $(cat h.txt)"
grep -q "^drift .*base rate: training" h.txt && grep -q "advisory" h.txt || fail "health text: $(cat h.txt)"
git -c omen.staleCommits=50 omen health --format json >h.json
$PY - h.json "$since" <<'PYEOF' || fail "health JSON: $(cat h.json)"
import json, sys
h = json.load(open(sys.argv[1])); since = int(sys.argv[2])
assert h["model"]["stale"] is True and h["model"]["commits_since"] == since
assert h["model"]["head_in_repository"] is True and h["model"]["base_model"] is False
assert len(h["notices"]) == 1 and h["notices"][0].startswith("the model is stale")
assert h["labels"]["commits"] > 0 and h["labels"]["commits_since"] == 0
d = h["drift"]
assert d["window"] == 300 and d["from_history"] == since, d
assert all(v >= 0 for v in d["psi"].values()) and len(d["psi"]) == 14
PYEOF
set +e; git -c omen.staleDays=-3 omen score HEAD >out 2>err; rc=$?; set -e
[ "$rc" -eq 128 ] && [ "$(wc -l <err)" -eq 1 ] && grep -q "omen.staleDays" err || fail "staleDays=-3: $rc $(cat err)"

# an old model: its training date set back to 2020 (same length, CRC-32 of
# the file recomputed with Python's zlib, the format's own checksum)
$PY - .git/omen/model.omen "$top/aged.omen" <<'PYEOF'
import re, struct, sys, zlib
b = open(sys.argv[1], "rb").read()
b2 = re.sub(rb'"date":"[0-9T:Z-]{20}"', b'"date":"2020-01-01T00:00:00Z"', b[:-4], count=1)
assert len(b2) == len(b) - 4 and b2 != b[:-4]
open(sys.argv[2], "wb").write(b2 + struct.pack("<I", zlib.crc32(b2)))
PYEOF
days=$($PY -c 'import time; print(int((time.time() - 1577836800) // 86400))')
git -c omen.model="$top/aged.omen" omen score HEAD >out 2>err || fail "aged model: $(cat err)"
[ "$(wc -l <err)" -eq 1 ] || fail "aged model: not one notice: $(cat err)"
grep -q "^git omen: notice: the model is stale: trained \($days\|$((days - 1))\) days ago (omen.staleDays 90)" err ||
	fail "age notice: $(cat err)"
git -c omen.model="$top/aged.omen" -c omen.staleDays=0 omen score HEAD >out 2>err || fail "staleDays=0: $(cat err)"
[ ! -s err ] || fail "omen.staleDays=0 still noticed: $(cat err)"

# 2. a model of another history: one notice, named so
git -c omen.model="$top/other/.git/omen/model.omen" omen score HEAD >out 2>err || fail "foreign: $(cat err)"
[ "$(wc -l <err)" -eq 1 ] && grep -q "trained on another history" err || fail "foreign notice: $(cat err)"

# 3. PSI against a recomputation from the exported metrics: model at HEAD,
# the last 120 commits all from its saved reference
"$OMEN" train >/dev/null 2>&1 || fail "training at HEAD failed"
git -c omen.driftCommits=120 omen health --format json >h2.json
"$OMEN" features >f.csv
$PY - f.csv h2.json <<'PYEOF' || fail "PSI differs from the recomputation"
import csv, json, math, sys
rows = list(csv.DictReader(open(sys.argv[1])))
h = json.load(open(sys.argv[2]))["drift"]
assert h["from_history"] == 0 and h["window"] == 120, h
lab = [r for r in rows if r["label"] in ("inducing", "clean")][: h["training_commits"]]
recent = rows[-120:]
for m in ("ns", "nd", "nf", "la", "ld", "lt", "ndev", "nuc"):
    v = sorted(float(r[m]) for r in lab); n = len(v)
    edges = []
    for k in range(1, 10):
        e = v[min(k * n // 10, n - 1)]
        if e >= v[-1]:
            break
        if not edges or e > edges[-1]:
            edges.append(e)
    def share(xs):
        c = [0] * (len(edges) + 1)
        for x in xs:
            c[sum(x > e for e in edges)] += 1
        return [max(q / len(xs), 1e-4) for q in c]
    e = share(v); a = share([float(r[m]) for r in recent])
    psi = sum((ai - ei) * math.log(ai / ei) for ai, ei in zip(a, e))
    got = h["psi"][m]
    assert abs(psi - got) <= 1e-5 * max(1, abs(psi)), (m, psi, got)
PYEOF

# 4. refresh: retrains when enough new labels exist, then does nothing
"$OMEN" train "$base" >/dev/null 2>&1
"$OMEN" refresh >r.txt 2>err || fail "refresh failed: $(cat err)"
[ "$(wc -l <r.txt)" -eq 1 ] && grep -q "^git omen refresh: retrained on [0-9]* labelled commits ([0-9]* since the last model)" r.txt ||
	fail "refresh output: $(cat r.txt) $(cat err)"
[ ! -s err ] || fail "refresh wrote to stderr: $(cat err)"
"$OMEN" train --info --format json | grep -q "\"head\":.*\"$(git rev-parse HEAD)\"" || fail "refresh did not train to HEAD"
sums() { cksum .git/omen/model.omen .git/omen/labels.jsonl .git/omen/dataset.cache; }
before=$(sums)
"$OMEN" refresh >r.txt 2>err || fail "second refresh failed: $(cat err)"
[ ! -s r.txt ] && [ ! -s err ] || fail "an idle refresh printed: $(cat r.txt) $(cat err)"
[ "$(sums)" = "$before" ] || fail "an idle refresh changed files"
"$OMEN" refresh --verbose | grep -q "up to date" || fail "--verbose says nothing"
# a running train (its lock held): skip by default, wait with --wait
flock .git/omen/train.lock sleep 4 &
holder=$!
# until the holder has it (a non-blocking try fails); no time is asserted
i=0
while "$PY" -c 'import fcntl; fcntl.flock(open(".git/omen/train.lock"), fcntl.LOCK_EX | fcntl.LOCK_NB)' 2>/dev/null &&
	[ $i -lt 200 ]; do i=$((i + 1)); sleep 0.05; done
"$OMEN" refresh >r.txt 2>err || fail "refresh under the lock failed: $(cat err)"
grep -q "skipped: 'git omen train' is running" r.txt || fail "no skip: $(cat r.txt)"
"$OMEN" refresh --wait --verbose >r.txt 2>err || fail "refresh --wait failed: $(cat err)"
wait "$holder"
if grep -q "waiting for a running" r.txt; then :; else
	# the holder may have ended first on a slow machine: then no wait was needed
	grep -q "up to date" r.txt || fail "refresh --wait: $(cat r.txt)"
fi
grep -q "up to date" r.txt || fail "refresh --wait did not go on: $(cat r.txt)"
set +e; "$OMEN" refresh --budget 0 >out 2>err; rc=$?; set -e
[ "$rc" -eq 129 ] && [ "$(wc -l <err)" -eq 1 ] || fail "--budget 0: $rc $(cat err)"

# 5. hook install --refresh: a chained post-merge shim that runs refresh
printf '#!/bin/sh\necho theirs >>"%s/theirs.log"\n' "$top" >.git/hooks/post-merge
chmod +x .git/hooks/post-merge
cp .git/hooks/post-merge "$top/theirs.hook"
"$OMEN" train "$base" >/dev/null 2>&1
"$OMEN" hook install --refresh >out || fail "install --refresh"
grep -q "installed the post-merge hook" out || fail "install --refresh output: $(cat out)"
"$OMEN" hook status | grep -q "^post-merge refresh hook: installed, the previous hook runs after it" || fail "status: $("$OMEN" hook status)"
git checkout -q -b old "$base"
OMEN_REFRESH_WAIT=1 git merge -q --ff-only main 2>err || fail "merge: $(cat err)"
grep -q "^theirs$" "$top/theirs.log" || fail "the chained post-merge hook did not run"
grep -q "^git omen refresh: retrained" .git/omen/refresh.log || fail "post-merge refresh: $(cat .git/omen/refresh.log)"
"$OMEN" hook uninstall >/dev/null
cmp .git/hooks/post-merge "$top/theirs.hook" || fail "uninstall did not restore the post-merge hook"
exit 0
