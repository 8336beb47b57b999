#!/bin/sh
# Data-parallel base-model training (`git omen train --base`, issue 11) under
# Open MPI (issue 13): two demo histories (fixtures/demo/gen.py) as shards;
# `mpirun -np 2` and `-np 3 --oversubscribe` write the same bytes as one
# process (SOURCE_DATE_EPOCH fixes the date in the file). Note: on this small
# corpus the validation keeps the warm start (best epoch 0), so this checks
# that the dense exchange runs and every rank agrees to the end, while
# tests/mpi/train.sh and test_model's test_parts_identical check trained
# weights.
set -eu
fail() { echo "FAIL: $*" >&2; exit 1; }
export HOME="$PWD/home" GIT_CONFIG_NOSYSTEM=1 GIT_CONFIG_GLOBAL=/dev/null
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1   # CI runs as root
export SOURCE_DATE_EPOCH=1700000000
mkdir -p "$HOME" shards
top=$PWD
for k in 1 2; do
	/usr/bin/python3 "$ROOT/fixtures/demo/gen.py" --seed $((k + 3)) --commits 300 --out "$top/r$k" --quiet
	(cd "$top/r$k" && "$OMEN" label >/dev/null &&
		"$OMEN" train --shard "$top/shards/demo+r$k.shard" >/dev/null) || fail "shard $k"
done
"$OMEN" train --base shards --model one.omen --epochs 2 >one.out 2>&1 || fail "train --base: $(cat one.out)"
for n in 2 3; do
	mpirun -q --oversubscribe -np $n "$OMEN_MPI" train --base shards --model np$n.omen --epochs 2 \
		>np$n.out 2>&1 || fail "mpirun -np $n train --base: $(cat np$n.out)"
	cmp -s one.omen np$n.omen || fail "-np $n base model differs from one process"
	[ "$(grep -c '^wrote np' np$n.out)" -eq 1 ] || fail "-np $n: not one report: $(cat np$n.out)"
done
echo "mpi base: ok"
