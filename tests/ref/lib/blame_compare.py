#!/usr/bin/python3
"""Compares omen's per-deleted-line origins (git omen label --dump-origins)
with the outside reference `git blame -w --porcelain --first-parent <fix>^ --
<path>` (git CLI), one blame per (fix, file).

usage: blame_compare.py REPO DUMP [--sample N] [--seed S] [--min-agree F] [--strict]
Prints REF lines: agreement over all deleted lines, over traced lines, and
the disagreements by cause (blank lines, merge attribution, other = diff
alignment ties). Exits 1 when agreement on traced lines < --min-agree."""
import collections, random, subprocess, sys, time

def blame(repo, rev, path):
    p = subprocess.run(["git", "-C", repo, "blame", "-w", "--porcelain", "--first-parent",
                        rev, "--", path], capture_output=True)
    if p.returncode:
        return None, None
    origin, text = {}, {}
    cur = None
    for ln in p.stdout.split(b"\n"):
        if ln.startswith(b"\t"):
            if cur:
                text[cur[1]] = ln[1:]
            continue
        f = ln.split(b" ")
        if len(f) >= 3 and len(f[0]) == 40:
            try:
                cur = (f[0].decode(), int(f[2]))
                origin[cur[1]] = cur[0]
            except ValueError:
                pass
    return origin, text

def main():
    args = sys.argv[1:]
    repo, dump = args[0], args[1]
    sample = int(args[args.index("--sample") + 1]) if "--sample" in args else 0
    seed = int(args[args.index("--seed") + 1]) if "--seed" in args else 1
    min_agree = float(args[args.index("--min-agree") + 1]) if "--min-agree" in args else 0.0
    strict = "--strict" in args  # every disagreement must be a by-design merge attribution
    by = collections.OrderedDict()
    for ln in open(dump, encoding="utf-8", errors="replace"):
        f = ln.rstrip("\n").split(" ", 4)
        if len(f) < 5:
            continue
        by.setdefault(f[0], []).append((int(f[1]), f[2], int(f[3]), f[4]))
    fixes = list(by)
    if sample and sample < len(fixes):
        random.Random(seed).shuffle(fixes)
        fixes = sorted(fixes[:sample], key=list(by).index)
    parents = {}
    merges = set(subprocess.run(["git", "-C", repo, "rev-list", "--merges", "--all"],
                                capture_output=True, text=True).stdout.split())
    n = agree = n_tr = agree_tr = 0
    causes = collections.Counter()
    files = 0
    t0 = time.time()
    for fx in fixes:
        groups = collections.OrderedDict()
        for lineno, org, skip, path in by[fx]:
            groups.setdefault(path, []).append((lineno, org, skip))
        for path, lines in groups.items():
            files += 1
            bo, bt = blame(repo, fx + "^", path)
            if bo is None:
                causes["blame failed"] += len(lines)
                n += len(lines)
                continue
            for lineno, org, skip in lines:
                ref = bo.get(lineno)
                n += 1
                ok = ref == org
                agree += ok
                if skip == 0:
                    n_tr += 1
                    agree_tr += ok
                if not ok:
                    txt = bt.get(lineno, b"")
                    if not txt.strip():
                        causes["blank line"] += 1
                    elif ref in merges:
                        causes["blame --first-parent names a merge; omen the side-branch commit"] += 1
                    else:
                        causes["other: diff alignment (blame -w re-diffs ignoring whitespace; omen pairs within a -U0 hunk; tie-breaks)"] += 1
    dt = time.time() - t0
    print("REF blame comparison: %d fixes, %d (fix, file) blames, %.1f s (%.3f s per file)"
          % (len(fixes), files, dt, dt / max(files, 1)))
    print("REF agreement with git blame -w --first-parent, all deleted lines: %d/%d = %.4f"
          % (agree, n, agree / max(n, 1)))
    print("REF agreement on traced lines (not blank/comment/whitespace-rewrite): %d/%d = %.4f"
          % (agree_tr, n_tr, agree_tr / max(n_tr, 1)))
    nm = sum(k for c, k in causes.items() if "merge" in c)
    print("REF agreement excluding merge-attributed lines (by design): %d/%d = %.4f"
          % (agree, n - nm, agree / max(n - nm, 1)))
    for c, k in causes.most_common():
        print("REF   disagreement: %s: %d" % (c, k))
    if n == 0:
        print("no deleted lines to compare")
        return 1
    if strict and any("merge" not in c for c in causes):
        print("disagreements other than merge attribution")
        return 1
    if n_tr and agree_tr / n_tr < min_agree:
        print("agreement below %.3f" % min_agree)
        return 1
    return 0

sys.exit(main())
