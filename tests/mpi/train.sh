#!/bin/sh
# Data-parallel training under Open MPI (issue 13), on the demo fixture
# (fixtures/demo/gen.py): the MPI build without mpirun trains the model of
# the default build; `mpirun -np 2` and `-np 3 --oversubscribe` (uneven:
# the third rank has no chunk of the two) train the same parameters as one
# process, with tolerance 0 (bit-identical: each chunk's gradient comes from
# one rank, and every rank sums the chunks in chunk order as one process
# does); a killed rank and a failing rank end the run with one line naming
# the rank, exit codes 137 and 128, and the old model kept byte for byte.
set -eu
fail() { echo "FAIL: $*" >&2; exit 1; }
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1   # CI runs as root
mkdir -p "$HOME"
PY=/usr/bin/python3
CMP="$PY $ROOT/tests/mpi/cmp_models.py"
top=$PWD
mpi() { mpirun --oversubscribe "$@"; }
$PY "$ROOT/fixtures/demo/gen.py" --seed 5 --commits 300 --out "$top/repo" --quiet
cd repo
"$OMEN" label >/dev/null
ep="--epochs 3"

# without mpirun, the MPI build is the default build
"$OMEN" train $ep --model "$top/one.omen" >/dev/null 2>&1 || fail "train (default build)"
"$OMEN_MPI" train $ep --model "$top/plain.omen" >/dev/null 2>&1 || fail "train (MPI build, no mpirun)"
$CMP "$top/one.omen" "$top/plain.omen" 0 || fail "MPI build without mpirun trains another model"

# the comparison can fail: another seed gives other parameters
"$OMEN" train $ep --seed 7 --model "$top/seed7.omen" >/dev/null 2>&1 || fail "train --seed 7"
if $CMP "$top/one.omen" "$top/seed7.omen" 0 >/dev/null; then fail "the model comparison cannot fail"; fi

for n in 2 3; do
	mpi -np $n "$OMEN_MPI" train $ep --model "$top/np$n.omen" --format json >"$top/np$n.json" \
		2>"$top/np$n.err" || { cat "$top/np$n.err"; fail "mpirun -np $n train"; }
	$CMP "$top/one.omen" "$top/np$n.omen" 0 || fail "-np $n parameters differ from one process"
	# one report (rank 0), one JSON object
	$PY -c 'import json,sys; json.load(open(sys.argv[1]))' "$top/np$n.json" || fail "-np $n report"
done

# a rank killed in its first gradient exchange (the test hook
# OMEN_MPI_KILL_RANK): mpirun names it and exits 128+9, rank 0 says nothing
# was written, and the old model is kept
cp "$top/one.omen" "$top/keep.omen"
rc=0
OMEN_MPI_KILL_RANK=1 mpi -np 2 "$OMEN_MPI" train $ep --model "$top/keep.omen" >/dev/null \
	2>"$top/kill.err" || rc=$?
[ "$rc" -eq 137 ] || { cat "$top/kill.err"; fail "killed rank: exit $rc, want 137"; }
grep -q "process rank 1 .*exited on signal 9" "$top/kill.err" || fail "mpirun does not name rank 1"
[ "$(grep -c '^git omen: ' "$top/kill.err")" -eq 1 ] || fail "killed rank: not one omen line"
grep -q "^git omen: error: rank 0 of 2: stopped by mpirun .*nothing written$" "$top/kill.err" ||
	fail "killed rank: no line from rank 0: $(cat "$top/kill.err")"
cmp -s "$top/one.omen" "$top/keep.omen" || fail "killed rank: the old model changed"
[ -z "$(ls "$top" | grep '^keep\.omen.')" ] || fail "killed rank: a temporary file was left"

# a rank that fails (rank 0 cannot write the model): one line naming it, 128
rc=0
mpi -q -np 2 "$OMEN_MPI" train $ep --model /proc/omen-no/m.omen >/dev/null 2>"$top/w.err" || rc=$?
[ "$rc" -eq 128 ] || { cat "$top/w.err"; fail "unwritable model: exit $rc, want 128"; }
[ "$(wc -l <"$top/w.err")" -eq 1 ] || fail "unwritable model: not one line: $(cat "$top/w.err")"
grep -q "^git omen: error: rank 0 of 2: cannot .*/proc/omen-no" "$top/w.err" ||
	fail "unwritable model: $(cat "$top/w.err")"

# commands that do not run in parallel refuse under mpirun, and leave the labels
cp .git/omen/labels.jsonl "$top/labels.before"
rc=0
mpi -q -np 2 "$OMEN_MPI" score HEAD >/dev/null 2>"$top/s.err" || rc=$?
[ "$rc" -eq 129 ] || fail "score under mpirun: exit $rc, want 129"
[ "$(wc -l <"$top/s.err")" -eq 1 ] || fail "score under mpirun: not one line: $(cat "$top/s.err")"
cmp -s .git/omen/labels.jsonl "$top/labels.before" || fail "labels changed"
echo "mpi train: ok"
