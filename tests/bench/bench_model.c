/* Model benchmarks on synthetic commits shaped like ordinary ones (1-4
 * files, 1-4 hunks each, 10-120 tokens a hunk): training time per epoch at
 * the default size (D=32, C=64) on 1 and 2 threads, and the latency of
 * scoring one commit from a loaded model (median, p90), with and without
 * the explanation. Figures only, no assertions. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include "omen/omen.h"

static omen_arena arena;

static void *take(size_t n)
{
	void *p = omen_arena_alloc(&arena, n ? n : 1);
	if (!p)
		exit(2);
	memset(p, 0, n ? n : 1);
	return p;
}

static void make(omen_sample *out, size_t n, uint64_t seed, size_t *total_tok)
{
	omen_rng r;
	size_t i;
	omen_rng_seed(&r, seed);
	*total_tok = 0;
	for (i = 0; i < n; i++) {
		omen_sample *s = &out[i];
		int nf = 1 + (int)(omen_rng_next(&r) % 4), nh = 0, nt = 0, f, h, t, j;
		int hc[4], tc[16];
		int32_t *fo, *ho;
		uint32_t *tok, *msg;
		float *facts;
		memset(s, 0, sizeof(*s));
		for (f = 0; f < nf; f++) {
			hc[f] = 1 + (int)(omen_rng_next(&r) % 4);
			for (h = 0; h < hc[f]; h++) {
				tc[nh] = 10 + (int)(omen_rng_next(&r) % 111);
				nt += tc[nh++];
			}
		}
		fo = take((size_t)(nf + 1) * 4);
		ho = take((size_t)(nh + 1) * 4);
		tok = take((size_t)nt * 4);
		msg = take(12 * 4);
		facts = take((size_t)nf * OMEN_NFACTS * 4);
		nh = nt = 0;
		for (f = 0; f < nf; f++) {
			for (h = 0; h < hc[f]; h++) {
				for (t = 0; t < tc[nh]; t++)
					tok[nt++] = (uint32_t)(omen_rng_next(&r) % OMEN_VOCAB);
				ho[++nh] = nt;
			}
			fo[f + 1] = nh;
			facts[f * OMEN_NFACTS + OMEN_FF_EXT_HASH] = (float)(omen_rng_next(&r) % 32);
		}
		for (j = 0; j < 12; j++)
			msg[j] = (uint32_t)(omen_rng_next(&r) % OMEN_MSG_VOCAB);
		for (j = 0; j < OMEN_NMETRICS; j++)
			s->metrics[j] = (float)(omen_rng_uniform(&r) * 20);
		snprintf(s->id, sizeof(s->id), "%040zx", i + 1);
		s->time = (int64_t)i;
		s->label = omen_rng_uniform(&r) < 0.25;
		s->nfiles = nf; s->nhunks = nh; s->ntok = nt; s->nmsg = 12;
		s->file_off = fo; s->hunk_off = ho; s->tok = tok; s->tok_line = (const int32_t *)tok;
		s->msg = msg; s->file_facts = facts;
		*total_tok += (size_t)nt;
	}
}

static int cmp_d(const void *a, const void *b)
{
	double x = *(const double *)a, y = *(const double *)b;
	return x < y ? -1 : x > y;
}

int main(void)
{
	enum { N = 2000, NS = 300 };
	static omen_sample s[N];
	static double lat[NS], latx[NS];
	static size_t idx[N];
	omen_dataset *ds;
	omen_model *m, *l;
	omen_train_opts o;
	omen_explain ex;
	size_t tok, i;
	char path[] = "/tmp/omen-bench-model-XXXXXX";
	int th, fd;
	double t0;

	omen_arena_init(&arena, 1 << 20);
	make(s, N, 1, &tok);
	if (omen_dataset_from_samples(&ds, s, N))
		return 1;
	for (i = 0; i < N; i++)
		idx[i] = i;
	printf("synthetic: %d commits, %.0f tokens per commit on average\n", N, (double)tok / N);
	for (th = 1; th <= 2; th++) {
		omen_train_opts_init(&o);
		o.epochs = 2;
		o.threads = th;
		t0 = omen_now();
		if (omen_model_train_subset(&m, ds, idx, N, NULL, 0, &o)) {
			fprintf(stderr, "%s\n", omen_error_last());
			return 1;
		}
		printf("train D=%d C=%d, %d thread%s: %.2f s per epoch of %d commits (%.0f commits/s)\n",
			o.dim, o.channels, th, th > 1 ? "s" : "", (omen_now() - t0) / 2, N,
			2 * N / (omen_now() - t0));
		if (th == 2)
			break;
		omen_model_free(m);
	}
	fd = mkstemp(path);
	if (fd < 0)
		return 1;
	close(fd);
	if (omen_model_save(m, path) || omen_model_load(&l, path))
		return 1;
	unlink(path);
	memset(&ex, 0, sizeof(ex));
	for (i = 0; i < NS; i++) {
		float p, z;
		t0 = omen_now();
		omen_model_predict(&p, &z, l, &s[i], NULL);
		lat[i] = (omen_now() - t0) * 1e3;
		t0 = omen_now();
		omen_model_predict(&p, &z, l, &s[i], &ex);
		latx[i] = (omen_now() - t0) * 1e3;
	}
	qsort(lat, NS, sizeof(double), cmp_d);
	qsort(latx, NS, sizeof(double), cmp_d);
	printf("score one commit (loaded model): median %.3f ms, p90 %.3f ms; with explanation "
		"median %.3f ms, p90 %.3f ms\n", lat[NS / 2], lat[NS * 9 / 10], latx[NS / 2],
		latx[NS * 9 / 10]);
	printf("model parameters: %zu (%.1f MiB float32)\n", omen_model_nparams(l),
		omen_model_nparams(l) * 4.0 / (1 << 20));
	omen_explain_free(&ex);
	omen_model_free(m);
	omen_model_free(l);
	omen_dataset_free(ds);
	omen_arena_free(&arena);
	return 0;
}
