#!/usr/bin/python3
"""Labels against the demo generator's hidden truth (fixtures/demo/gen.py
--truth). Prints fix-detection and inducing-label precision and recall.

Truth: a fix is a commit that repaired a planted defect ("repairs" not
empty); a culprit is a commit that planted one ("planted" > 0), and a
fixed culprit one whose planted defect a later commit repaired ("fixed_by").
Detected: a fix is a label record with "fix": true that is traced
("fix_scope" "code", or absent in files written before issue 10); an
inducing commit is "label": "inducing".

usage: demo_truth.py LABELS TRUTH"""
import json, sys

def main():
    labels, truth = sys.argv[1], sys.argv[2]
    lab = {}
    with open(labels) as fp:
        next(fp)
        for ln in fp:
            r = json.loads(ln)
            lab[r["id"]] = r
    rows = [json.loads(l) for l in open(truth)]
    t_fix = {r["id"] for r in rows if r["repairs"]}
    d_fix = {i for i, r in lab.items() if r.get("fix") and r.get("fix_scope", "code") == "code"}
    d_any = {i for i, r in lab.items() if r.get("fix")}
    culprit = {r["id"] for r in rows if r["planted"]}
    fixed = {r["id"] for r in rows if r["fixed_by"]}
    ind = {i for i, r in lab.items() if r["label"] == "inducing"}
    def pr(det, tru):
        tp = len(det & tru)
        return (tp / len(det) if det else 0.0), (tp / len(tru) if tru else 0.0)
    fp_, fr = pr(d_fix, t_fix)
    ap, ar = pr(d_any, t_fix)
    ip = len(ind & culprit) / len(ind) if ind else 0.0
    ir = len(ind & fixed) / len(fixed) if fixed else 0.0
    print("REF demo truth: %d commits, %d repairs, %d culprits (%d fixed later)"
          % (len(rows), len(t_fix), len(culprit), len(fixed)))
    print("REF fix detection (traced fixes): precision %.3f recall %.3f (%d detected)" % (fp_, fr, len(d_fix)))
    print("REF fix detection (every recorded fix): precision %.3f recall %.3f (%d recorded)" % (ap, ar, len(d_any)))
    print("REF inducing: precision %.3f recall %.3f (%d inducing)" % (ip, ir, len(ind)))
    return 0

sys.exit(main())
