#!/bin/sh
# Strong scaling of data-parallel training under Open MPI (issue 13) on the
# invented demo history (fixtures/demo/gen.py --commits 3000), or the
# repository in $OMEN_BENCH_REPO: one process with 1 thread (the reference,
# measured in the same run), one process with 2 threads (the shared-memory
# path), and `mpirun -np 2` with 1 thread per rank. Prints wall and CPU
# seconds (the machine may be shared: CPU time is the steadier figure), the
# throughput ratios against the reference, the share of each rank's time
# spent in MPI_Allreduce (waiting for the slower rank included), and the peak
# RSS per process. Asserts nothing about time; never in `make check`.
# Needs OMEN_MPI (a build with -DOMEN_MPI: make MPI=1, or make mpi-check's
# build/mpi-test/git-omen).
set -e
[ -n "$OMEN_MPI" ] || { echo "bench_mpi.sh: set OMEN_MPI (a git-omen built with MPI=1)"; exit 1; }
root=$(cd "$(dirname "$0")/../.." && pwd)
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
EPOCHS=${EPOCHS:-4}
# Path-sharded labelling (OMEN_BENCH_LABEL_REPO=<a clone of your own>, for
# example of redis): one process with one diff thread (the reference), one
# process with the default diff threads, and `mpirun -np 2` (one diff thread
# per rank: the path filter walks in the calling thread); every run is a
# full pass with the default rules (OMEN_BENCH_LABEL_OPTS adds options) and
# all three label files must be byte-identical. Prints wall
# and CPU seconds, the throughput ratio against the reference, and the peak
# RSS of each rank (getrusage, OMEN_MPI_LOG) against the reference's. The
# clone's omen.threads is set for the reference run and unset after it.
if [ -n "$OMEN_BENCH_LABEL_REPO" ]; then
	LSH=${OMEN_BENCH_LABEL_OPTS:-}
	cd "$OMEN_BENCH_LABEL_REPO"
	lrun() { # name, command...
		name=$1; shift
		/usr/bin/time -f "%e %U %S %M" -o "$tmp/$name.time" "$@" >/dev/null 2>"$tmp/$name.err" ||
			{ cat "$tmp/$name.err"; exit 1; }
	}
	echo "load average before: $(cut -d' ' -f1-3 /proc/loadavg), $(nproc) cores"
	git config omen.threads 1
	lrun l1 "$OMEN_MPI" label --full $LSH --labels "$tmp/l1.jsonl"
	git config --unset omen.threads
	lrun lt "$OMEN_MPI" label --full $LSH --labels "$tmp/lt.jsonl"
	OMEN_MPI_LOG=1 lrun lnp2 mpirun -q -np 2 "$OMEN_MPI" label --full $LSH --labels "$tmp/lnp2.jsonl"
	echo "load average after: $(cut -d' ' -f1-3 /proc/loadavg)"
	cmp "$tmp/l1.jsonl" "$tmp/lt.jsonl" && cmp "$tmp/l1.jsonl" "$tmp/lnp2.jsonl" ||
		{ echo "bench_mpi.sh: the label files differ"; exit 1; }
	echo "labels: byte-identical ($(($(wc -l <"$tmp/l1.jsonl") - 1)) commits)"
	/usr/bin/python3 - "$tmp" <<'PY'
import re, sys
d = sys.argv[1]
def t(n):
    w, u, s, m = open("%s/%s.time" % (d, n)).read().split()[-4:]
    return float(w), float(u) + float(s), int(m) / 1024.0
ref = t("l1")
for name, what in (("l1", "1 process, 1 diff thread (reference)"), ("lt", "1 process, default diff threads"),
                   ("lnp2", "mpirun -np 2, 1 diff thread each")):
    w, c, m = t(name)
    print("%-38s wall %7.2f s  cpu %7.2f s  throughput %.2fx  peak RSS %.0f MB%s" %
          (what, w, c, ref[0] / w, m, " (largest process)" if name == "lnp2" else ""))
for line in open("%s/lnp2.err" % d):
    m = re.search(r"rank (\d+) of 2: label results of ([\d.]+) MiB gathered, ([\d.]+) s in "
                  r"MPI_Gather\(v\) of ([\d.]+) s since MPI_Init, peak RSS ([\d.]+) MB", line)
    if m:
        r, mib, gs, tot, rss = m.groups()
        print("rank %s: %.2f MiB sent, %.2f s in the gather of %.2f s, peak RSS %.0f MB = %.0f%% "
              "of the reference's" % (r, float(mib), float(gs), float(tot), float(rss),
                                      100 * float(rss) / ref[2]))
PY
	exit 0
fi
if [ -n "$OMEN_BENCH_REPO" ]; then
	cd "$OMEN_BENCH_REPO"
else
	/usr/bin/python3 "$root/fixtures/demo/gen.py" --seed 7 --commits "${COMMITS:-3000}" --years 6 \
		--out "$tmp/repo" --quiet
	cd "$tmp/repo"
	"$OMEN_MPI" label >/dev/null
fi
"$OMEN_MPI" train --epochs 1 --model "$tmp/warm.omen" >/dev/null 2>&1   # dataset cache
run() { # name, command...: wall s, user+sys s (children), peak RSS kB
	name=$1; shift
	/usr/bin/time -f "%e %U %S %M" -o "$tmp/$name.time" "$@" >/dev/null 2>"$tmp/$name.err" ||
		{ cat "$tmp/$name.err"; exit 1; }
}
run t1 "$OMEN_MPI" train --epochs "$EPOCHS" --threads 1 --model "$tmp/t1.omen"
run t2 "$OMEN_MPI" train --epochs "$EPOCHS" --threads 2 --model "$tmp/t2.omen"
OMEN_MPI_LOG=1 run np2 mpirun -q -np 2 "$OMEN_MPI" train --epochs "$EPOCHS" --threads 1 \
	--model "$tmp/np2.omen"
/usr/bin/python3 "$root/tests/mpi/cmp_models.py" "$tmp/t1.omen" "$tmp/np2.omen" 0
/usr/bin/python3 - "$tmp" <<'PY'
import re, sys
d = sys.argv[1]
def t(n):
    w, u, s, m = open("%s/%s.time" % (d, n)).read().split()[-4:]
    return float(w), float(u) + float(s), int(m)
ref = t("t1")
for name, what in (("t1", "1 process, 1 thread (reference)"), ("t2", "1 process, 2 threads"),
                   ("np2", "mpirun -np 2, 1 thread each")):
    w, c, m = t(name)
    print("%-34s wall %6.2f s  cpu %6.2f s  speed-up %.2fx  peak RSS %s" %
          (what, w, c, ref[0] / w, "%.0f MB" % (m / 1024) + (" (largest process)" if name == "np2" else "")))
for line in open("%s/np2.err" % d):
    m = re.search(r"rank (\d+) of 2: (\d+) gradient exchanges of ([\d.]+) MiB in all, ([\d.]+) s "
                  r"in MPI_Allreduce of ([\d.]+) s", line)
    if m:
        r, n, mib, xs, tot = m.groups()
        print("rank %s: %s exchanges, %.2f MiB each, MPI_Allreduce %.1f%% of the rank's time" %
              (r, n, float(mib) / max(1, int(n)), 100 * float(xs) / float(tot)))
PY
