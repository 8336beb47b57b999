#!/usr/bin/python3
"""Developer-informed oracle (Rosa et al., ICSE 2021): where a fix names the
commit it repairs ("Fixes: <id>", "This reverts commit <id>", "Follow-up to
<id>", ...), compare
the candidates omen traced for that fix (from --dump-origins: traced lines,
merges excluded) with the named commits. Prints micro precision and recall.

With LABELS (the label file of the same run) a second line counts only the
fixes the rules trace ("fix_scope" "code"): a fix that changes only
documentation, tests or build files names a commit the tracer never sees.

usage: named_oracle.py REPO DUMP [LABELS]"""
import collections, json, os, re, subprocess, sys

FORMS = re.compile(r"(?im)^[ \t>]*(?:fixes:?|fixes commit|fix:|reverts:?|revert commit|reverting commit|"
                   r"introduced (?:by|in):?|regressed by:?|broken by:?|caused by:?|follow-?up to)[ \t]*(?:commit )?"
                   r"[ \t]*([0-9a-f]{7,40})\b|reverts commit ([0-9a-f]{7,40})\b")

# OMEN_ORACLE_FORMS=strict leaves "Follow-up to" out: a follow-up often
# extends the commit it names rather than repairing it.
if os.environ.get("OMEN_ORACLE_FORMS") == "strict":
    FORMS = re.compile(FORMS.pattern.replace("|follow-?up to", ""), FORMS.flags)

def git(repo, *a):
    return subprocess.run(["git", "-C", repo] + list(a), capture_output=True, text=True, errors="replace").stdout

def main():
    repo, dump = sys.argv[1], sys.argv[2]
    merges = set(git(repo, "rev-list", "--merges", "--all").split())
    traced = collections.defaultdict(set)
    for ln in open(dump, encoding="utf-8", errors="replace"):
        f = ln.split(" ", 4)
        if len(f) == 5 and f[3] == "0" and f[2] != "-" and f[2] not in merges:
            traced[f[0]].add(f[2])
    fixes = 0
    tp = n_traced = n_named = 0
    log = git(repo, "log", "--no-merges", "--format=%H%x00%B%x01", "HEAD")
    ids = {}
    for rec in log.split("\x01"):
        if "\x00" not in rec:
            continue
        c, msg = rec.strip("\n").split("\x00", 1)
        hexes = [m.group(1) or m.group(2) for m in FORMS.finditer(msg)]
        if hexes:
            ids[c] = hexes
    short = sorted({h for hs in ids.values() for h in hs})
    full = {}
    if short:
        for h in short:
            r = subprocess.run(["git", "-C", repo, "rev-parse", "-q", "--verify", h + "^{commit}"],
                               capture_output=True, text=True).stdout.strip()
            if r:
                full[h] = r
    scope = None
    if len(sys.argv) > 3:
        scope = {}
        with open(sys.argv[3]) as fp:
            next(fp)
            for ln in fp:
                r = json.loads(ln)
                if r.get("fix"):
                    scope[r["id"]] = r.get("fix_scope", "code")
    for only_code in ([False, True] if scope is not None else [False]):
        fixes = tp = n_traced = n_named = 0
        for c, hexes in ids.items():
            named = {full[h] for h in hexes if h in full and full[h] != c}
            if not named or (only_code and scope.get(c) != "code"):
                continue
            fixes += 1
            t = traced.get(c, set())
            tp += len(t & named)
            n_traced += len(t)
            n_named += len(named)
        p = tp / n_traced if n_traced else 0.0
        r = tp / n_named if n_named else 0.0
        what = "traced (code) fixes" if only_code else "fixes"
        print("REF named-commit oracle: %d %s name %d commits; traced candidates %d; hits %d"
              % (fixes, what, n_named, n_traced, tp))
        print("REF%s precision %.3f recall %.3f (Rosa et al. ICSE 2021: precision 0.4-0.66, recall 0.6-0.7)"
              % (" code" if only_code else "", p, r))
    return 0

if __name__ == "__main__":
    sys.exit(main())
