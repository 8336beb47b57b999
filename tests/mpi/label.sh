#!/bin/sh
# Path-sharded labelling under Open MPI (issue 13): `mpirun -np 2` and
# `-np 3 --oversubscribe` write labels byte-identical to one process, on the
# rename fixture (fixtures/label/rename.sh: an exact rename and a rename with
# an edit, whose paths hash to other ranks than the file's first path, so
# the lineage must carry the owner across), on the merge fixture and on the
# demo (fixtures/demo/gen.py: merges, deletions, fixes); a killed rank and a
# failing rank end the run with one omen line, exit 137 and 128, and the old
# labels are kept byte for byte. Both with the issue 10 rules that decide
# over a whole fix (on by default) and with them off.
set -eu
fail() { echo "FAIL: $*" >&2; exit 1; }
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1   # CI runs as root
mkdir -p "$HOME"
top=$PWD
mpi() { mpirun --oversubscribe "$@"; }

# same bytes as one process (the default build) at 2 and 3 ranks; $1 names
# the case, the rest are label's options
same() {
	name=$1; shift
	"$OMEN" label "$@" --labels "$top/$name.1" >/dev/null 2>&1 || fail "$name: label"
	for n in 2 3; do
		mpi -np $n "$OMEN_MPI" label "$@" --labels "$top/$name.$n" >"$top/$name.$n.out" \
			2>"$top/$name.$n.err" || { cat "$top/$name.$n.err"; fail "$name: mpirun -np $n label"; }
		cmp -s "$top/$name.1" "$top/$name.$n" || fail "$name: -np $n labels differ from one process"
		[ ! -e "$top/$name.$n.state" ] || fail "$name: a sharded pass wrote a .state file"
		# one summary (rank 0's)
		[ "$(grep -c '^wrote ' "$top/$name.$n.out")" -eq 1 ] || fail "$name: -np $n: not one summary"
	done
}

sh "$ROOT/fixtures/label/rename.sh" rename >/dev/null
# the issue 10 rules that decide on a whole fix at once (the line share, the
# insertion context) on, as by default, and off: rank 0 decides them over
# every rank's candidates
SH="--min-line-share 0 --no-insertion-context"
(cd rename && same rename --window 0 && same rename-off --window 0 $SH)
# the renames cross shards: the check would fail if the owner did not follow them
grep -q '"label":"inducing"' rename.1 || fail "rename: nothing inducing"
# the issue 10 rules (fixtures/label/rules.sh): a fix over code and test
# files on other ranks, non-code lines, a named commit that decides
sh "$ROOT/fixtures/label/rules.sh" rules >/dev/null
(cd rules && same rules --window 0 && same rules-off --window 0 $SH)
grep -q '"non_code_lines":[1-9]' rules.1 || fail "rules: no non-code lines counted"
grep -q '"named_dropped":[1-9]' rules.1 || fail "rules: no candidate dropped by a named commit"
# a fix whose files are on different ranks (fixtures/label/shares.sh): the
# line share drops a candidate that is the only one on its rank, the
# insertion context applies only where no rank traced a line, and an
# add-only fix takes its insertion candidates from two ranks
sh "$ROOT/fixtures/label/shares.sh" shares >/dev/null
(cd shares && same shares --window 0)
lab() { grep "^{\"id\":\"$(cd shares && git rev-parse "$1")\"" shares.1; }
lab narrow | grep -q '"label":"clean"' || fail "shares: narrow is not dropped by the line share"
lab guards | grep -q '"label":"inducing","lines":2,' || fail "shares: guards: $(lab guards)"
lab guards | grep -q "\"fixes\":\[\"$(cd shares && git rev-parse addonly)\"\]" ||
	fail "shares: guards is a candidate of more than the add-only fix: $(lab guards)"
sh "$ROOT/fixtures/label/merge.sh" merge >/dev/null
(cd merge && same merge --window 0 && same merge-off --window 0 $SH)
/usr/bin/python3 "$ROOT/fixtures/demo/gen.py" --seed 5 --commits 300 --out "$top/demo" --quiet
cd demo
same demo
same demo-off $SH
same demo-norenames --no-renames
# the insertion context did decide something on the demo (and is off in the
# other run); the line share drops nothing here, shares.sh above covers it
grep -q '"fixes_insertion":[1-9]' "$top/demo.1" || fail "demo: no insertion context used"
grep -q '"fixes_insertion":0' "$top/demo-off.1" || fail "demo-off: the insertion context was on"
# the MPI build without mpirun is one process too
"$OMEN_MPI" label --labels "$top/plain" >/dev/null 2>&1 || fail "MPI build without mpirun"
cmp -s "$top/demo.1" "$top/plain" || fail "MPI build without mpirun labels differently"

# a rank killed at the gather (the test hook OMEN_MPI_KILL_RANK): mpirun
# names it and exits 128+9, rank 0 says nothing was written, old labels kept
"$OMEN" label >/dev/null
cp .git/omen/labels.jsonl "$top/labels.before"
rc=0
OMEN_MPI_KILL_RANK=1 mpi -np 2 "$OMEN_MPI" label --full $SH >/dev/null 2>"$top/kill.err" || rc=$?
[ "$rc" -eq 137 ] || { cat "$top/kill.err"; fail "killed rank: exit $rc, want 137"; }
grep -q "process rank 1 .*exited on signal 9" "$top/kill.err" || fail "mpirun does not name rank 1"
[ "$(grep -c '^git omen: ' "$top/kill.err")" -eq 1 ] || fail "killed rank: not one omen line"
grep -q "^git omen: error: rank 0 of 2: stopped by mpirun .*nothing written$" "$top/kill.err" ||
	fail "killed rank: no line from rank 0: $(cat "$top/kill.err")"
cmp -s .git/omen/labels.jsonl "$top/labels.before" || fail "killed rank: the old labels changed"
[ -z "$(ls .git/omen | grep -v -x -e labels.jsonl -e labels.jsonl.state)" ] ||
	fail "killed rank: a temporary file was left: $(ls .git/omen)"

# rank 0 cannot write the labels: one line naming it, 128
rc=0
mpi -q -np 2 "$OMEN_MPI" label $SH --labels /proc/omen-no/l.jsonl >/dev/null 2>"$top/w.err" || rc=$?
[ "$rc" -eq 128 ] || { cat "$top/w.err"; fail "unwritable labels: exit $rc, want 128"; }
[ "$(wc -l <"$top/w.err")" -eq 1 ] || fail "unwritable labels: not one line: $(cat "$top/w.err")"
grep -q "^git omen: error: rank 0 of 2: cannot .*/proc/omen-no" "$top/w.err" ||
	fail "unwritable labels: $(cat "$top/w.err")"

# the origin dump runs as one process only
rc=0
mpi -q -np 2 "$OMEN_MPI" label --dump-origins "$top/d.txt" >/dev/null 2>"$top/d.err" || rc=$?
[ "$rc" -eq 129 ] || fail "--dump-origins under mpirun: exit $rc, want 129"
[ "$(wc -l <"$top/d.err")" -eq 1 ] || fail "--dump-origins under mpirun: not one line: $(cat "$top/d.err")"
cmp -s .git/omen/labels.jsonl "$top/labels.before" || fail "--dump-origins: the labels changed"
echo "mpi label: ok"
