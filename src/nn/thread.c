/* Two-core execution with pthreads. Work is cut into fixed pieces by the
 * caller; per-piece gradient buffers are summed by omen_reduce_fixed in
 * index order, so results never depend on which thread ran first. */
#include <pthread.h>
#include <string.h>
#include "omen/nn.h"

typedef struct {
	void (*fn)(int tid, void *payload);
	void *payload;
	int tid;
	int ntasks, nthreads; /* omen_parallel_tasks: tasks tid, tid+nthreads, ... */
} worker;

static void *worker_main(void *p)
{
	worker *w = p;
	int t;
	if (w->ntasks < 0)
		w->fn(w->tid, w->payload);
	else
		for (t = w->tid; t < w->ntasks; t += w->nthreads)
			w->fn(t, w->payload);
	return NULL;
}

#define MAX_THREADS 64

static int run_workers(int nthreads, int ntasks, void (*fn)(int, void *), void *payload)
{
	pthread_t th[MAX_THREADS];
	worker w[MAX_THREADS];
	int started[MAX_THREADS];
	int i;

	if (nthreads > MAX_THREADS)
		nthreads = MAX_THREADS;
	if (nthreads < 1)
		nthreads = 1;
	for (i = 0; i < nthreads; i++) {
		w[i].fn = fn;
		w[i].payload = payload;
		w[i].tid = i;
		w[i].ntasks = ntasks;
		w[i].nthreads = nthreads;
		started[i] = 0;
	}
	/* a thread that cannot be started runs inline afterwards: same work,
	 * same results, only slower */
	for (i = 1; i < nthreads; i++)
		started[i] = pthread_create(&th[i], NULL, worker_main, &w[i]) == 0;
	worker_main(&w[0]);
	for (i = 1; i < nthreads; i++) {
		if (started[i])
			pthread_join(th[i], NULL);
		else
			worker_main(&w[i]);
	}
	return 0;
}

int omen_parallel_run(int n, void (*fn)(int tid, void *payload), void *payload)
{
	if (n <= 1) {
		fn(0, payload);
		return 0;
	}
	return run_workers(n, -1, fn, payload);
}

int omen_parallel_tasks(int ntasks, int nthreads, void (*fn)(int task, void *payload),
	void *payload)
{
	int t;
	if (ntasks <= 0)
		return 0;
	if (nthreads > ntasks)
		nthreads = ntasks;
	if (nthreads <= 1) {
		for (t = 0; t < ntasks; t++)
			fn(t, payload);
		return 0;
	}
	return run_workers(nthreads, ntasks, fn, payload);
}

void omen_reduce_fixed(float *dst, float *const *src, int nsrc, size_t n)
{
	size_t i;
	int k;
	if (nsrc <= 0) {
		memset(dst, 0, sizeof(float) * n);
		return;
	}
	if (dst != src[0])
		memcpy(dst, src[0], sizeof(float) * n);
	for (k = 1; k < nsrc; k++) {
		const float *s = src[k];
		for (i = 0; i < n; i++)
			dst[i] += s[i];
	}
}
