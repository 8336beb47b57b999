#!/bin/sh
# SARIF output against the published SARIF 2.1.0 JSON schema (OASIS SARIF
# 2.1.0; the schema file sarif-2.1.0-rtm.5.json as shipped in the npm package
# @microsoft/jest-sarif@1.0.0-beta.0), validated with python3-jsonschema
# (Debian) as JSON Schema draft-04, which the schema declares.
# The schema is fetched at test time with npm into this test's temporary
# directory (never committed); OMEN_SARIF_SCHEMA=<file> uses a local copy.
# Checks: synthetic score sets (tests/ref/sarif_synth.c) and real
# `git omen score --format sarif` output on the demo fixture.
set -u
fail() { echo "sarif_schema: $*" >&2; exit 1; }
PY=${PYTHON:-/usr/bin/python3}
$PY -c 'import jsonschema' 2>/dev/null ||
	fail "python3-jsonschema is missing (apt-get install python3-jsonschema)"
schema=${OMEN_SARIF_SCHEMA:-}
if [ -z "$schema" ]; then
	command -v npm >/dev/null 2>&1 || fail "cannot get the SARIF 2.1.0 schema: npm is not installed (apt-get install npm, or set OMEN_SARIF_SCHEMA)"
	mkdir -p npm && (cd npm && npm pack --silent --cache "$PWD/cache" @microsoft/jest-sarif@1.0.0-beta.0 >pack.log 2>&1) ||
		fail "cannot get the SARIF 2.1.0 schema: 'npm pack @microsoft/jest-sarif@1.0.0-beta.0' failed: $(tail -1 npm/pack.log)"
	tar xzf npm/microsoft-jest-sarif-1.0.0-beta.0.tgz -C npm package/lib/schemas/sarif-2.1.0-rtm.5.json ||
		fail "cannot get the SARIF 2.1.0 schema: the npm package has no sarif-2.1.0-rtm.5.json"
	schema=npm/package/lib/schemas/sarif-2.1.0-rtm.5.json
fi
[ -f "$schema" ] || fail "no schema file '$schema'"
SYNTH="$BUILD/ref/sarif_synth"
[ -x "$SYNTH" ] || fail "driver '$SYNTH' is not built"
"$SYNTH" sarif >synth.sarif || fail "sarif_synth failed"
"$SYNTH" empty >empty.sarif || fail "sarif_synth empty failed"

cat >validate.py <<'PYEOF'
import json, sys, jsonschema
schema = json.load(open(sys.argv[1]))
assert "2.1.0" in schema.get("title", ""), "not the SARIF 2.1.0 schema"
v = jsonschema.Draft4Validator(schema)
bad = 0
for path in sys.argv[2:]:
    doc = json.load(open(path))
    errs = sorted(v.iter_errors(doc), key=lambda e: list(e.path))
    for e in errs[:5]:
        print("%s: %s at %s" % (path, e.message, "/".join(map(str, e.path))))
    bad += len(errs) > 0
    if not errs:
        n = sum(len(r.get("results", [])) for r in doc["runs"])
        print("REF sarif %s: valid against SARIF 2.1.0 schema, %d results" % (path, n))
# the validator must reject a broken log (so this test can fail)
doc = json.load(open(sys.argv[2]))
del doc["version"]
doc["runs"][0]["results"][0]["locations"][0]["physicalLocation"]["region"]["startLine"] = 0
if not list(v.iter_errors(doc)):
    print("the schema accepted a log without a version and with startLine 0"); bad += 1
sys.exit(1 if bad else 0)
PYEOF
files="synth.sarif empty.sarif"
# synthetic: one result per risky hunk (3 hunks of the 0.81 commit, 1 of the
# staged 0.55 one; the 0.05 commit none)
$PY - synth.sarif <<'PYEOF' || fail "synthetic SARIF has the wrong results"
import json, sys
d = json.load(open(sys.argv[1]))
res = d["runs"][0]["results"]
assert len(res) == 4, len(res)
uris = [r["locations"][0]["physicalLocation"]["artifactLocation"]["uri"] for r in res]
assert uris == ["src/net/conn.c", "src/old.c", "docs/read%20me.md", "lib/caf%C3%A9.py"], uris
reg = res[1]["locations"][0]["physicalLocation"]["region"]
assert reg["startLine"] == 1 and reg["endLine"] == 1, reg
assert all("advisory" in r["message"]["text"] for r in res)
PYEOF

# real output: the demo fixture, labelled and trained, scored with a
# threshold of 0 so that every commit is risky and every hunk rule applies
if [ -n "${OMEN:-}" ]; then
	$PY "$ROOT/fixtures/demo/gen.py" --seed 3 --commits 200 --out "$PWD/demo" --quiet ||
		fail "the demo generator failed"
	(cd demo && "$OMEN" label >/dev/null && "$OMEN" train >/dev/null 2>&1) || fail "label/train on the demo failed"
	(cd demo && git config omen.threshold 0 && "$OMEN" score HEAD~30..HEAD --format sarif) \
		>real.sarif 2>real.err || fail "git omen score --format sarif failed: $(cat real.err)"
	files="$files real.sarif"
fi
$PY validate.py "$schema" $files || fail "SARIF output does not validate against the SARIF 2.1.0 schema"
