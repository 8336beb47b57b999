#!/usr/bin/python3
"""Where the developer-named oracle (tests/ref/lib/named_oracle.py, Rosa et
al. ICSE 2021) loses recall: for every named link the tracer missed, one
category: the fix is not traced (its scope), it traced no line, it traced
only commits newer than the named one (lines rewritten between the named
commit and its fix; with the newer commits' subjects), or only older ones.
Figures only, for choosing tracing rules.

usage: named_misses.py REPO DUMP LABELS [EXAMPLES]
(DUMP and LABELS from one `git omen label --full --dump-origins DUMP
--keep-other-candidates` run)"""
import collections, json, os, subprocess, sys
sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "ref", "lib"))
from named_oracle import FORMS
repo, dump, labels = sys.argv[1:4]
def git(*a): return subprocess.run(["git","-C",repo]+list(a),capture_output=True,text=True,errors="replace").stdout
merges=set(git("rev-list","--merges","--all").split())
traced=collections.defaultdict(collections.Counter); allskip=collections.defaultdict(collections.Counter)
for ln in open(dump,errors="replace"):
    f=ln.rstrip("\n").split(" ",4)
    if len(f)<5: continue
    allskip[f[0]][f[3]]+=1
    if f[3]=="0" and f[2]!="-" and f[2] not in merges: traced[f[0]][f[2]]+=1
scope={}
with open(labels) as fp:
    next(fp)
    for ln in fp:
        r=json.loads(ln); scope[r["id"]]=r.get("fix_scope","code")
log=git("log","--no-merges","--format=%H%x00%B%x01","HEAD")
cat=collections.Counter(); ex=collections.defaultdict(list)
for rec in log.split("\x01"):
    if "\x00" not in rec: continue
    c,msg=rec.strip("\n").split("\x00",1)
    hs=[m.group(1) or m.group(2) for m in FORMS.finditer(msg)]
    for h in hs:
        n=git("rev-parse","-q","--verify",h+"^{commit}").strip()
        if not n: continue
        if n in traced[c]: cat["hit"]+=1; continue
        sc=scope.get(c)
        if sc not in (None,"code"): cat["scope:"+str(sc)]+=1; continue
        if not traced[c]:
            k="notraced:"+",".join("%s=%d"%kv for kv in sorted(allskip[c].items()))
            cat["no traced lines"]+=1; ex["no traced lines"].append((c[:10],n[:10],k)); continue
        # is named an ancestor of traced origins? (line rewritten after named)
        anc=[o for o in traced[c] if subprocess.run(["git","-C",repo,"merge-base","--is-ancestor",n,o]).returncode==0]
        if anc:
            cat["traced later commit"]+=1
            ex["traced later commit"].append((c[:10],n[:10],[(o[:10],git("log","-1","--format=%s",o).strip()[:60]) for o in anc][:3]))
        else:
            cat["traced older only"]+=1
            ex["traced older only"].append((c[:10],n[:10],[o[:10] for o in traced[c]][:3]))
print(cat)
for k,v in ex.items():
    print("==",k,len(v))
    for x in v[:int(sys.argv[4]) if len(sys.argv)>4 else 15]: print(" ",x)
