/* The MPI layer (issue 13): the only file that includes <mpi.h>. See
 * include/omen/mpi.h; DEVELOPERS.md "MPI" says why it lives in src/util/.
 * References: MPI 3.1 standard (MPI_Init_thread, MPI_Allreduce with
 * MPI_IN_PLACE, MPI_Abort); Open MPI 4.1 mpirun(1) for the launcher's
 * environment (OMPI_COMM_WORLD_SIZE, PMIX_RANK). */
#include <stdlib.h>
#include <string.h>
#include <signal.h>
#include <stdio.h>
#include <unistd.h>
#include <sys/resource.h>
#include "omen/error.h"
#include "omen/mpi.h"

#ifdef OMEN_MPI
#include <mpi.h>

static int g_on, g_rank, g_size = 1;
static float *g_buf;
static size_t g_cap;
/* OMEN_MPI_LOG=1: each rank writes one line at the end (exchanges, bytes,
 * time in them), the figures of tests/bench/bench_mpi.sh */
static size_t g_nx, g_xfloats, g_ngather, g_gbytes;
static double g_xsec, g_gsec, g_t0;

/* Set by mpirun in every process it starts; a plain run has neither. */
static int launched_by_mpirun(void)
{
	return getenv("OMPI_COMM_WORLD_SIZE") || getenv("PMIX_RANK") || getenv("PMI_RANK");
}

/* mpirun ends the other ranks with SIGTERM when one dies (its own line
 * names that rank: "process rank R ... exited on signal S"); rank 0 says
 * in one line that the run stopped and wrote nothing, the others go
 * quietly (one line per run, not one per rank). Outputs are written
 * through omen_atomic_open/commit, so the old files stay. */
static char g_term_line[160];
static size_t g_term_len;

static void on_term(int sig)
{
	if (g_rank == 0) {
		ssize_t w = write(2, g_term_line, g_term_len);
		(void)w;
	}
	_exit(128 + sig);
}

static void term_setup(void)
{
	struct sigaction sa;
	int n = snprintf(g_term_line, sizeof(g_term_line), "git omen: error: rank %d of %d: stopped "
		"by mpirun (another rank died or the job was cancelled); nothing written\n",
		g_rank, g_size);
	g_term_len = n > 0 && (size_t)n < sizeof(g_term_line) ? (size_t)n : 0;
	memset(&sa, 0, sizeof(sa));
	sa.sa_handler = on_term;
	sigemptyset(&sa.sa_mask);
	sigaction(SIGTERM, &sa, NULL);
}

int omen_mpi_init(int *argc, char ***argv)
{
	int provided = 0;
	if (g_on || !launched_by_mpirun())
		return 0;
	/* the training threads never call MPI: FUNNELED is enough */
	if (MPI_Init_thread(argc, argv, MPI_THREAD_FUNNELED, &provided) != MPI_SUCCESS)
		return omen_error_set(OMEN_ERROR, "cannot start MPI (MPI_Init_thread failed)");
	MPI_Comm_rank(MPI_COMM_WORLD, &g_rank);
	MPI_Comm_size(MPI_COMM_WORLD, &g_size);
	g_t0 = MPI_Wtime();
	g_on = 1;
	if (g_size > 1)
		term_setup();
	return 0;
}

void omen_mpi_finalize(void)
{
	const char *lg = getenv("OMEN_MPI_LOG");
	if (!g_on)
		return;
	if (lg && *lg && strcmp(lg, "0")) {
		struct rusage ru;
		long rss = getrusage(RUSAGE_SELF, &ru) ? 0 : ru.ru_maxrss; /* kB on Linux */
		if (g_ngather)
			fprintf(stderr, "git omen: notice: rank %d of %d: label results of %.2f MiB gathered, "
				"%.3f s in MPI_Gather(v) of %.3f s since MPI_Init, peak RSS %.1f MB\n", g_rank,
				g_size, (double)g_gbytes / 1048576.0, g_gsec, MPI_Wtime() - g_t0, rss / 1024.0);
		else
			fprintf(stderr, "git omen: notice: rank %d of %d: %zu gradient exchanges of %.1f MiB in "
				"all, %.3f s in MPI_Allreduce of %.3f s since MPI_Init, peak RSS %.1f MB\n", g_rank,
				g_size, g_nx, (double)g_xfloats * sizeof(float) / 1048576.0, g_xsec,
				MPI_Wtime() - g_t0, rss / 1024.0);
	}
	free(g_buf);
	g_buf = NULL;
	g_cap = 0;
	MPI_Finalize();
	g_on = 0;
}

int omen_mpi_rank(void) { return g_rank; }
int omen_mpi_size(void) { return g_size; }
int omen_mpi_built(void) { return 1; }

void omen_mpi_abort(int code)
{
	if (g_on)
		MPI_Abort(MPI_COMM_WORLD, code);
}

int omen_mpi_barrier(void)
{
	if (g_on && MPI_Barrier(MPI_COMM_WORLD) != MPI_SUCCESS)
		return omen_error_set(OMEN_ERROR, "rank %d: MPI_Barrier failed", g_rank);
	return 0;
}

int omen_mpi_bcast_int(int *v)
{
	if (g_on && MPI_Bcast(v, 1, MPI_INT, 0, MPI_COMM_WORLD) != MPI_SUCCESS)
		return omen_error_set(OMEN_ERROR, "rank %d: MPI_Bcast failed", g_rank);
	return 0;
}

/* A test hook, documented in DEVELOPERS.md "MPI": OMEN_MPI_KILL_RANK=<r>
 * makes rank r die (SIGKILL) at its first gradient exchange (train) or at
 * the gather of its label results (label), as a node lost in the middle of
 * a run. */
static void maybe_die(void)
{
	const char *k = getenv("OMEN_MPI_KILL_RANK");
	if (k && *k && atoi(k) == g_rank)
		raise(SIGKILL);
}

int omen_mpi_grad_exchange(void *ctx, float *const *grad, float *loss, int nchunks,
	const omen_span *spans, size_t nspans)
{
	size_t tot = 0, i, k, need;
	float *p;
	double t;
	int c, parts = g_size;
	(void)ctx;
	maybe_die();
	for (i = 0; i < nspans; i++)
		tot += spans[i].n;
	need = tot * (size_t)nchunks + (size_t)nchunks;
	if (need > (size_t)2147483647)
		return omen_error_set(OMEN_ELIMIT, "rank %d: gradient exchange of %zu floats is over "
			"MPI's count limit", g_rank, need);
	if (need > g_cap) {
		float *nb = realloc(g_buf, need * sizeof(float));
		if (!nb)
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		g_buf = nb;
		g_cap = need;
	}
	/* layout: chunk 0's spans, chunk 1's spans, ..., then the chunk losses */
	p = g_buf;
	for (c = 0; c < nchunks; c++) {
		int mine = c % parts == g_rank;
		for (i = 0; i < nspans; i++) {
			if (mine)
				memcpy(p, grad[c] + spans[i].off, spans[i].n * sizeof(float));
			else
				memset(p, 0, spans[i].n * sizeof(float));
			p += spans[i].n;
		}
	}
	for (c = 0; c < nchunks; c++)
		p[c] = c % parts == g_rank ? loss[c] : 0.0f;
	t = MPI_Wtime();
	if (MPI_Allreduce(MPI_IN_PLACE, g_buf, (int)need, MPI_FLOAT, MPI_SUM, MPI_COMM_WORLD)
	    != MPI_SUCCESS)
		return omen_error_set(OMEN_ERROR, "rank %d: MPI_Allreduce of the gradients failed", g_rank);
	g_xsec += MPI_Wtime() - t;
	g_nx++;
	g_xfloats += need;
	p = g_buf;
	for (c = 0; c < nchunks; c++)
		for (i = 0; i < nspans; i++) {
			if (c % parts != g_rank)
				memcpy(grad[c] + spans[i].off, p, spans[i].n * sizeof(float));
			p += spans[i].n;
		}
	for (c = 0, k = 0; c < nchunks; c++, k++)
		if (c % parts != g_rank)
			loss[c] = p[k];
	return 0;
}

int omen_mpi_gather_bytes(void *ctx, const void *send, size_t n, void **all, size_t *counts)
{
	int *cnt = NULL, *disp = NULL, me, r, rc = 0;
	char *buf = NULL;
	long long tot = 0;
	double t;
	(void)ctx;
	*all = NULL;
	maybe_die();
	if (n > (size_t)2147483647)
		return omen_error_set(OMEN_ELIMIT, "rank %d: %zu bytes of label results are over MPI's "
			"count limit", g_rank, n);
	me = (int)n;
	if (!(cnt = calloc((size_t)g_size, sizeof(*cnt))) || !(disp = calloc((size_t)g_size, sizeof(*disp)))) {
		rc = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	t = MPI_Wtime();
	if (MPI_Gather(&me, 1, MPI_INT, cnt, 1, MPI_INT, 0, MPI_COMM_WORLD) != MPI_SUCCESS) {
		rc = omen_error_set(OMEN_ERROR, "rank %d: MPI_Gather of the label result sizes failed", g_rank);
		goto out;
	}
	if (g_rank == 0) {
		for (r = 0; r < g_size; r++) {
			disp[r] = (int)tot;
			tot += cnt[r];
			counts[r] = (size_t)cnt[r];
		}
		if (tot > 2147483647LL) {
			/* the error line, then main()'s MPI_Abort ends the others */
			rc = omen_error_set(OMEN_ELIMIT, "rank 0: %lld bytes of label results are over MPI's "
				"count limit", tot);
			goto out;
		}
		if (!(buf = malloc(tot ? (size_t)tot : 1))) {
			rc = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
	}
	if (MPI_Gatherv(send, me, MPI_BYTE, buf, cnt, disp, MPI_BYTE, 0, MPI_COMM_WORLD) != MPI_SUCCESS) {
		rc = omen_error_set(OMEN_ERROR, "rank %d: MPI_Gatherv of the label results failed", g_rank);
		goto out;
	}
	g_gsec += MPI_Wtime() - t;
	g_ngather++;
	g_gbytes += n;
	*all = buf;
	buf = NULL;
out:
	free(buf);
	free(cnt);
	free(disp);
	return rc;
}

void omen_mpi_label_setup(omen_label_opts *o)
{
	if (!g_on || g_size < 2)
		return;
	o->part = g_rank;
	o->parts = g_size;
	o->gather = omen_mpi_gather_bytes;
	o->gather_ctx = NULL;
}

void omen_mpi_train_setup(omen_train_opts *o)
{
	if (!g_on || g_size < 2)
		return;
	o->part = g_rank;
	o->parts = g_size;
	o->exchange = omen_mpi_grad_exchange;
	o->exchange_ctx = NULL;
}

#else /* one process: no MPI at all */

int omen_mpi_init(int *argc, char ***argv)
{
	(void)argc;
	(void)argv;
	return 0;
}
void omen_mpi_finalize(void) {}
int omen_mpi_rank(void) { return 0; }
int omen_mpi_size(void) { return 1; }
int omen_mpi_built(void) { return 0; }
void omen_mpi_abort(int code) { (void)code; }
int omen_mpi_barrier(void) { return 0; }
int omen_mpi_bcast_int(int *v) { (void)v; return 0; }
void omen_mpi_train_setup(omen_train_opts *o) { (void)o; }
void omen_mpi_label_setup(omen_label_opts *o) { (void)o; }
int omen_mpi_gather_bytes(void *ctx, const void *send, size_t n, void **all, size_t *counts)
{
	(void)ctx;
	*all = NULL;
	if (n && !(*all = malloc(n)))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	if (n)
		memcpy(*all, send, n);
	counts[0] = n;
	return 0;
}
int omen_mpi_grad_exchange(void *ctx, float *const *grad, float *loss, int nchunks,
	const omen_span *spans, size_t nspans)
{
	(void)ctx; (void)grad; (void)loss; (void)nchunks; (void)spans; (void)nspans;
	return 0;
}

#endif
