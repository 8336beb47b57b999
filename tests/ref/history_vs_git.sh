#!/bin/sh
# Reference check: the history reader against the git CLI.
# For every non-merge commit of every fixture repository (and of the real
# histories named in $OMEN_REF_REPOS, space-separated git dirs, when set):
#   - files and added/deleted counts equal `git log --numstat -U0 --no-renames`
#     (git prints "-  -" for binary files; omen reports 0 0). Note: git's
#     numstat at its default context (3) skips the common-tail trimming that
#     git applies at -U0, so in a few commits (2 of 1840 in jq) plain
#     `--numstat` disagrees with git's own -U0 patch; omen follows -U0 and
#     the script reports how many commits plain --numstat differs in,
#   - hunk headers and the -/+ line texts equal `git log -p -U0 --no-renames`
#     (the same output as `git diff -U0 <parent> <commit>`),
# with renames off (omen's detect_renames=-1), single- and two-threaded.
# Needs $BUILD/ref/dump_history (tests/ref/dump_history.c).
set -eu
: "${ROOT:?}" "${BUILD:?}"
PY=${PYTHON:-/usr/bin/python3}
DUMP="$BUILD/ref/dump_history"
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
# git without the user's or system's configuration
export HOME="$work/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
mkdir -p "$HOME"

sh "$ROOT/fixtures/build-fixtures.sh" "$work/fx" > "$work/repos"
repos=$(cat "$work/repos")
for extra in ${OMEN_REF_REPOS:-}; do repos="$repos $extra"; done

compare() { # <git dir or work tree> <threads>
	repo=$1
	(cd "$repo" && "$DUMP" --lines --threads "$2") > "$work/omen.txt"
	git -C "$repo" -c core.quotepath=false log --no-merges --no-renames --numstat -U0 \
		--no-ext-diff --no-textconv --format='commit %H' HEAD > "$work/numstat.txt"
	git -C "$repo" -c core.quotepath=false log --no-merges --no-renames --numstat \
		--no-ext-diff --no-textconv --format='commit %H' HEAD > "$work/numstat3.txt"
	git -C "$repo" -c core.quotepath=false -c diff.algorithm=myers -c diff.indentHeuristic=true \
		log --no-merges --no-renames -p -U0 --no-ext-diff --no-textconv --format='commit %H' \
		HEAD > "$work/patch.txt"
	"$PY" - "$work/omen.txt" "$work/numstat.txt" "$work/patch.txt" "$repo" "$work/numstat3.txt" <<'EOF'
import re, sys
omen_p, num_p, patch_p, name, num3_p = sys.argv[1:6]

def read(p):
    with open(p, 'rb') as f:
        return f.read().split(b'\n')

# omen dump
omen = {}
cur = None
for ln in read(omen_p):
    if ln.startswith(b'commit ') and len(ln.split()) == 4:
        cur = {'files': []}
        omen[ln.split()[1].decode()] = cur
    elif ln.startswith(b'F ') and cur is not None:
        parts = ln.split(b' ', 5)
        cur['files'].append({'status': parts[1], 'flags': int(parts[2]), 'a': int(parts[3]),
                             'd': int(parts[4]), 'path': parts[5], 'hunks': []})
    elif ln.startswith(b'H ') and cur is not None:
        m = re.match(rb'H -(\d+),(\d+) \+(\d+),(\d+)$', ln)
        cur['files'][-1]['hunks'].append([tuple(int(x) for x in m.groups()), []])
    elif ln[:1] in (b'+', b'-') and cur is not None and cur['files'] and cur['files'][-1]['hunks']:
        cur['files'][-1]['hunks'][-1][1].append(ln)

# git log --numstat
def numstat(p):
    num = {}
    cur = None
    for ln in read(p):
        if ln.startswith(b'commit ') and len(ln) == 47:
            cur = []
            num[ln.split()[1].decode()] = cur
        elif ln.startswith(b'diff --git '):   # -U0 implies -p: numstat lines come first
            cur = None
        elif ln and cur is not None:
            a, d, path = ln.split(b'\t', 2)
            cur.append((0 if a == b'-' else int(a), 0 if d == b'-' else int(d), path))
    return num
num = numstat(num_p)
num3 = numstat(num3_p)

# git log -p -U0: per commit, file blocks (a typechange's two blocks merged)
patch = {}
cur = None
blk = None
hdr = re.compile(rb'^@@ -(\d+)(?:,(\d+))? \+(\d+)(?:,(\d+))? @@')
for ln in read(patch_p):
    if ln.startswith(b'commit ') and len(ln.split()) == 2 and len(ln) == 47:
        cur = []
        patch[ln.split()[1].decode()] = cur
        blk = None
    elif ln.startswith(b'diff --git ') and cur is not None:
        if cur and cur[-1]['hdr'] == ln and cur[-1]['deleted_mode']:
            blk = cur[-1]
            blk['deleted_mode'] = False
            blk['in_hunk'] = False
        else:
            blk = {'hdr': ln, 'hunks': [], 'deleted_mode': False, 'in_hunk': False}
            cur.append(blk)
    elif blk is not None and not blk['in_hunk'] and ln.startswith(b'deleted file mode'):
        blk['deleted_mode'] = True
    elif blk is not None and hdr.match(ln):
        m = hdr.match(ln)
        g = m.groups()
        blk['hunks'].append([(int(g[0]), int(g[1]) if g[1] is not None else 1,
                              int(g[2]), int(g[3]) if g[3] is not None else 1), []])
        blk['in_hunk'] = True
    elif blk is not None and blk['in_hunk'] and ln[:1] in (b'+', b'-'):
        blk['hunks'][-1][1].append(ln)

errors = []
def err(msg):
    errors.append(msg)

if set(omen) != set(num):
    err('commit sets differ: omen %d, git %d, only omen %s, only git %s' % (
        len(omen), len(num), sorted(set(omen) - set(num))[:3], sorted(set(num) - set(omen))[:3]))
nfiles = nhunks = nlines = 0
for cid, o in omen.items():
    g = num.get(cid)
    if g is None:
        continue
    ofs = [(f['a'], f['d'], f['path']) for f in o['files']]
    if ofs != g:
        err('%s: numstat differs:\n  omen %s\n  git  %s' % (cid, ofs[:6], g[:6]))
        continue
    blocks = patch.get(cid, [])
    if len(blocks) != len(o['files']):
        err('%s: %d files in omen, %d diff blocks in git -p' % (cid, len(o['files']), len(blocks)))
        continue
    for f, b in zip(o['files'], blocks):
        nfiles += 1
        if f['flags'] & 2:   # submodule: git prints "Subproject commit" hunks, omen none
            continue
        oh = [h[0] for h in f['hunks']]
        gh = [h[0] for h in b['hunks']]
        if oh != gh:
            err('%s %s: hunk headers differ:\n  omen %s\n  git  %s' % (cid, f['path'], oh[:5], gh[:5]))
            continue
        for (hh, ol), (_, gl) in zip(f['hunks'], b['hunks']):
            nhunks += 1
            nlines += len(ol)
            if ol != gl:
                err('%s %s %s: line texts differ' % (cid, f['path'], hh))
                break
ctx3 = sum(1 for cid, o in omen.items()
           if [(f['a'], f['d'], f['path']) for f in o['files']] != num3.get(cid))
for e in errors[:20]:
    print(e)
print('REF history vs git (%s): %d commits, %d files, %d hunks, %d lines, %d mismatches'
      ' (plain --numstat differs in %d commits)' % (
    name.rstrip('/').split('/')[-1], len(omen), nfiles, nhunks, nlines, len(errors), ctx3))
sys.exit(1 if errors or not omen else 0)
EOF
}

status=0
for repo in $repos; do
	git -C "$repo" rev-parse -q --verify HEAD >/dev/null || continue
	for th in 1 2; do
		compare "$repo" "$th" || status=1
	done
done
exit $status
