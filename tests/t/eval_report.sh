#!/bin/sh
# git omen eval on the invented demo history (fixtures/demo/gen.py): JSON
# figures are sane, a too-short history gets a clear message with the
# numbers, and the --html report, opened in headless Chromium (Debian
# package chromium), holds its four plots with non-empty paths and no
# script. The screenshot goes to $EVAL_SCREENSHOT_DIR when that is set.
set -e
command -v chromium >/dev/null 2>&1 || {
	echo "eval_report.sh: chromium is not installed (Debian package chromium)"; exit 1; }
py=/usr/bin/python3
$py "$ROOT/fixtures/demo/gen.py" --seed 7 --out repo --commits 1200 --quiet
cd repo
"$OMEN" label >/dev/null

# too short a history for the folds asked: exit 128 and the numbers
set +e
"$OMEN" eval --folds 40 --fold-days 60 --bootstrap 0 >../short.out 2>../short.err
rc=$?
set -e
[ "$rc" -eq 128 ] || { echo "expected exit 128, got $rc"; cat ../short.err; exit 1; }
grep -q "history too short for 40 folds of 60 days" ../short.err || { cat ../short.err; exit 1; }
grep -q "labelled history: [0-9]* commits over [0-9]* days" ../short.err || { cat ../short.err; exit 1; }

"$OMEN" eval --folds 3 --epochs 4 --bootstrap 200 --format json --html ../report.html >../eval.json
# omen.effortExclude replaces the default list: excluding every file leaves
# no effort, so the effort-aware figures are undefined (null), not 0 or 1
GIT_CONFIG_PARAMETERS="'omen.effortExclude'='*'" "$OMEN" eval --folds 2 --epochs 1 \
	--bootstrap 0 --format json >../noeffort.json
cd ..
$py - noeffort.json <<'PY'
import json, sys
r = json.load(open(sys.argv[1]))
m = r["pooled"]["methods"]["model"]
assert m["recall_at_20_effort"] is None and m["popt"] is None, m
assert m["auc"] is not None
PY
$py - eval.json <<'PY'
import json, math, sys
r = json.load(open(sys.argv[1]))
assert len(r["folds"]) == 3, len(r["folds"])
names = ["model", "lr_metrics", "lines_added", "model_per_line", "smallest_first", "base_rate"]
for f in r["folds"] + [r["pooled"]]:
    for n in names:
        m = f["methods"][n]
        for k in ("auc", "ap", "popt", "recall_at_20_effort"):
            v = m[k]
            assert v is None or 0 <= v <= 1, (n, k, v)
        if m["positives"] == 0:
            assert m["auc"] is None, "auc of a fold without positives must be null"
for f in r["folds"]:
    assert f["n_train"] > 0 and f["seconds"] is not None
    assert f["test_from"] > f["train_before"]
# within a fold the base rate ranks nothing: all ties, AUC exactly 1/2 (Mann-Whitney)
for f in r["folds"]:
    a = f["methods"]["base_rate"]["auc"]
    assert a is None or abs(a - 0.5) < 1e-9, a
p = r["pooled"]["methods"]
assert p["lines_added"]["brier"] is None
assert p["model"]["brier_base_rate"] is not None
print("pooled auc model %s lr %s lines-added %s" % (p["model"]["auc"], p["lr_metrics"]["auc"],
      p["lines_added"]["auc"]))
PY

grep -q "<script" report.html && { echo "report holds a script"; exit 1; }
grep -Eq "(src|href)=\"(https?:)?//" report.html && { echo "report loads something from outside"; exit 1; }
ud=$(mktemp -d)
flags="--headless --no-sandbox --disable-gpu --disable-background-networking \
--disable-component-update --disable-sync --no-first-run --user-data-dir=$ud"
# shellcheck disable=SC2086
timeout 120 chromium $flags --dump-dom "file://$PWD/report.html" >dom.html 2>chromium.log
# shellcheck disable=SC2086
timeout 120 chromium $flags --screenshot="$PWD/report.png" --window-size=1200,2400 \
	"file://$PWD/report.html" >>chromium.log 2>&1
rm -rf "$ud"
[ -s report.png ] || { echo "no screenshot"; tail chromium.log; exit 1; }
if [ -n "$EVAL_SCREENSHOT_DIR" ]; then cp report.png "$EVAL_SCREENSHOT_DIR/eval-report.png"; fi
$py - dom.html report.png <<'PY'
import re, sys
dom = open(sys.argv[1]).read()
for pid in ("roc", "reliability", "effort", "folds"):
    m = re.search(r'<svg[^>]*id="%s"[^>]*>(.*?)</svg>' % pid, dom, re.S)
    assert m, "plot %s missing from the rendered page" % pid
    paths = re.findall(r'<path class="series"[^>]* d="([^"]*)"', m.group(1))
    drawn = [d for d in paths if re.search(r"M[-0-9.]+ [-0-9.]+ L", d)]
    assert drawn, "plot %s has no non-empty series path" % pid
    print("plot %-12s %d series, %d drawn" % (pid, len(paths), len(drawn)))
png = open(sys.argv[2], "rb").read()
assert png[:8] == b"\x89PNG\r\n\x1a\n" and len(png) > 20000, "screenshot looks empty"
PY
