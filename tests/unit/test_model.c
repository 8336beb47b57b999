/* The hierarchical model: gradients against central finite differences,
 * thread-count independence, learning a known function of the input,
 * staying near chance on shuffled labels, the model file (round trip,
 * truncation, flipped byte, other version, other architecture) and the
 * too-few-labels message. The PyTorch comparison of one full forward and
 * backward pass lives in tests/ref/model_torch.py. */
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <stdint.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <signal.h>
#include <pthread.h>
#include <sys/resource.h>
#include <unistd.h>
#include <cmocka.h>
#include "omen/omen.h"

#define MARK 777u   /* the token whose presence makes a commit "inducing" */

typedef struct {
	omen_sample *s;
	size_t n;
	omen_arena a;
} synth;

static void *take(synth *x, size_t n)
{
	void *p = omen_arena_alloc(&x->a, n ? n : 1);
	assert_non_null(p);
	memset(p, 0, n ? n : 1);
	return p;
}

/* n commits, 1-3 files of 1-3 hunks of 4-24 tokens from a small alphabet;
 * label 1 iff MARK occurs in an added line (when by_mark), else a coin. */
static void synth_make(synth *x, size_t n, uint64_t seed, int by_mark)
{
	omen_rng r;
	size_t i;
	omen_rng_seed(&r, seed);
	omen_arena_init(&x->a, 1 << 16);
	x->n = n;
	x->s = take(x, n * sizeof(omen_sample));
	for (i = 0; i < n; i++) {
		omen_sample *s = &x->s[i];
		int nf = 1 + (int)(omen_rng_next(&r) % 3), f, h, t, nh = 0, nt = 0, j;
		int hcount[3], tcount[9];
		int pos = omen_rng_uniform(&r) < 0.3;
		int32_t *fo, *ho, *tl, *hs;
		uint32_t *tok, *msg;
		float *facts;
		const char **paths;
		for (f = 0; f < nf; f++) {
			hcount[f] = 1 + (int)(omen_rng_next(&r) % 3);
			for (h = 0; h < hcount[f]; h++) {
				tcount[nh] = 4 + (int)(omen_rng_next(&r) % 21);
				nt += tcount[nh];
				nh++;
			}
		}
		fo = take(x, (size_t)(nf + 1) * 4);
		ho = take(x, (size_t)(nh + 1) * 4);
		tok = take(x, (size_t)nt * 4);
		tl = take(x, (size_t)nt * 4);
		msg = take(x, 4 * 4);
		facts = take(x, (size_t)nf * OMEN_NFACTS * 4);
		hs = take(x, (size_t)nh * 4);
		paths = take(x, (size_t)nf * sizeof(char *));
		nh = nt = 0;
		for (f = 0; f < nf; f++) {
			for (h = 0; h < hcount[f]; h++) {
				for (t = 0; t < tcount[nh]; t++) {
					int del = omen_rng_uniform(&r) < 0.3;
					tok[nt] = (uint32_t)(omen_rng_next(&r) % 200) + 1000u +
						(del ? OMEN_VOCAB / 2 : 0);
					tl[nt] = del ? -(t + 1) : t + 1;
					nt++;
				}
				nh++;
				ho[nh] = nt;
			}
			fo[f + 1] = nh;
			for (j = 0; j < OMEN_NFACTS; j++)
				facts[f * OMEN_NFACTS + j] = (float)omen_rng_uniform(&r);
			facts[f * OMEN_NFACTS + OMEN_FF_EXT_HASH] = (float)(omen_rng_next(&r) % OMEN_EXT_BUCKETS);
			paths[f] = "src/x.c";
		}
		if (by_mark && pos)
			tok[omen_rng_next(&r) % (uint64_t)nt] = MARK;   /* an added-line token */
		for (j = 0; j < 4; j++)
			msg[j] = (uint32_t)(omen_rng_next(&r) % 50);
		for (j = 0; j < OMEN_NMETRICS; j++)
			s->metrics[j] = (float)(omen_rng_uniform(&r) * 10);
		snprintf(s->id, sizeof(s->id), "%040zx", i + 1);
		s->time = 1700000000 + (int64_t)i * 86400;   /* daily: the 90-day gap leaves most */
		s->label = (int8_t)pos;
		s->la = nt; s->ld = 1;
		s->nfiles = nf; s->nhunks = nh; s->ntok = nt; s->nmsg = 4;
		s->file_off = fo; s->hunk_off = ho; s->tok = tok; s->tok_line = tl; s->msg = msg;
		s->file_facts = facts;
		s->hunk_new_start = hs; s->hunk_new_lines = hs; s->hunk_old_start = hs;
		s->hunk_old_lines = hs;
		s->file_path = paths;
	}
}

static void synth_free(synth *x)
{
	omen_arena_free(&x->a);
}

static void small_opts(omen_train_opts *o)
{
	omen_train_opts_init(o);
	o->dim = 8;
	o->channels = 16;
	o->epochs = 12;
	o->patience = 4;
	o->lr = 1e-2f;
	o->threads = 1;
	o->seed = 5;
}

/* Analytic gradient against central differences of the loss (common
 * practice for checking a backward pass), on a few entries of every tensor. */
static void test_gradient_fd(void **state)
{
	synth x;
	omen_model *m;
	const omen_sample *sp[4];
	float y[4] = {1, 0, 1, 0}, loss, lp, lm, *g, *p;
	int i, k, checked = 0;
	(void)state;
	synth_make(&x, 4, 11, 1);
	for (i = 0; i < 4; i++)
		sp[i] = &x.s[i];
	assert_int_equal(omen_model_new(&m, 4, 6, 3), 0);
	p = omen_model_params(m);
	g = malloc(omen_model_nparams(m) * sizeof(float));
	assert_int_equal(omen_model_loss_grad(&loss, g, NULL, m, sp, y, 4, 2.0f), 0);
	for (i = 0; ; i++) {
		size_t off, n, j;
		int shape[3];
		const char *name = omen_model_tensor(m, i, &off, &n, shape);
		if (!name)
			break;
		for (k = 0; k < 3; k++) {
			float keep, h = 1e-2f, num;
			j = off + (strcmp(name, "tok_emb") == 0 ? (size_t)x.s[0].tok[k] * 4 + 1 :
				strcmp(name, "msg_emb") == 0 ? (size_t)x.s[0].msg[k] * 4 :
				(size_t)(k * 7) % n);
			keep = p[j];
			p[j] = keep + h;
			omen_model_loss_grad(&lp, NULL, NULL, m, sp, y, 4, 2.0f);
			p[j] = keep - h;
			omen_model_loss_grad(&lm, NULL, NULL, m, sp, y, 4, 2.0f);
			p[j] = keep;
			num = (lp - lm) / (2 * h);
			if (fabsf(num - g[j]) > 2e-3f + 2e-2f * fabsf(num))
				fail_msg("tensor %s entry %zu: analytic %g numeric %g", name, j - off, g[j], num);
			checked++;
		}
	}
	assert_true(checked >= 3 * 15);
	free(g);
	omen_model_free(m);
	synth_free(&x);
}

static void test_learns_and_chance(void **state)
{
	synth x, z;
	omen_dataset *ds, *dz;
	omen_model *m, *mz;
	omen_train_report rep, repz;
	omen_train_opts o;
	size_t i;
	(void)state;
	small_opts(&o);
	synth_make(&x, 1000, 21, 1);
	assert_int_equal(omen_dataset_from_samples(&ds, x.s, x.n), 0);
	assert_int_equal(omen_model_train(&m, &rep, ds, &o), 0);
	print_message("known function: test AUC %.3f (lr on metrics %.3f, lines added %.3f)\n",
		rep.model.auc, rep.lr_metrics.auc, rep.lines_added.auc);
	assert_true(rep.model.auc > 0.95);
	/* the 90-day gap before the test slice is used nowhere, nor are the
	 * inducing commits after the newest clean one */
	assert_int_equal(rep.n_train + rep.n_valid + rep.n_gap + rep.n_test + rep.n_window_left_out, 1000);
	assert_true(rep.n_gap > 0 && rep.n_relabelled == 0);
	/* the same inputs with labels shuffled: no signal left */
	synth_make(&z, 1000, 21, 1);
	{
		omen_rng r;
		omen_rng_seed(&r, 99);
		for (i = z.n; i > 1; i--) {
			size_t j = (size_t)(omen_rng_next(&r) % i);
			int8_t t = z.s[i - 1].label;
			z.s[i - 1].label = z.s[j].label;
			z.s[j].label = t;
		}
	}
	assert_int_equal(omen_dataset_from_samples(&dz, z.s, z.n), 0);
	assert_int_equal(omen_model_train(&mz, &repz, dz, &o), 0);
	print_message("shuffled labels: test AUC %.3f\n", repz.model.auc);
	assert_true(fabs(repz.model.auc - 0.5) < 0.15);
	omen_model_free(m);
	omen_model_free(mz);
	omen_dataset_free(ds);
	omen_dataset_free(dz);
	synth_free(&x);
	synth_free(&z);
}

/* One and two threads give identical weights (fixed chunks, fixed order). */
static void test_threads_identical(void **state)
{
	synth x;
	omen_dataset *ds;
	omen_model *a, *b;
	omen_train_opts o;
	size_t *idx, i;
	(void)state;
	small_opts(&o);
	o.epochs = 2;
	synth_make(&x, 200, 4, 1);
	assert_int_equal(omen_dataset_from_samples(&ds, x.s, x.n), 0);
	idx = malloc(200 * sizeof(size_t));
	for (i = 0; i < 200; i++)
		idx[i] = i;
	o.threads = 1;
	assert_int_equal(omen_model_train_subset(&a, ds, idx, 160, idx + 160, 40, &o), 0);
	o.threads = 2;
	assert_int_equal(omen_model_train_subset(&b, ds, idx, 160, idx + 160, 40, &o), 0);
	assert_int_equal(omen_model_nparams(a), omen_model_nparams(b));
	assert_memory_equal(omen_model_params(a), omen_model_params(b),
		omen_model_nparams(a) * sizeof(float));
	free(idx);
	omen_model_free(a);
	omen_model_free(b);
	omen_dataset_free(ds);
	synth_free(&x);
}

/* The data-parallel hook of issue 13 without MPI: two threads train as
 * parts 0 and 1 of 2, each computing one of the two chunks, and exchange the
 * chunk gradients and losses through shared memory (what src/util/mpi.c's
 * MPI_Allreduce does between processes); both get the weights of one
 * process, bit for bit. */
typedef struct {
	pthread_barrier_t bar;
	float *const *grad[2];
	float *loss[2];
	int calls[2];
} parts_shared;

typedef struct {
	parts_shared *sh;
	int part;
	const omen_dataset *ds;
	const size_t *idx;
	omen_model *m;
	int rc;
} parts_arg;

static __thread parts_arg *parts_self;

static int parts_exchange(void *ctx, float *const *grad, float *loss, int nchunks,
	const omen_span *spans, size_t nspans)
{
	parts_arg *a = ctx;
	parts_shared *sh = a->sh;
	int c, other = 1 - a->part;
	size_t i;
	if (a != parts_self || nchunks != 2)
		return -1;
	sh->grad[a->part] = grad;
	sh->loss[a->part] = loss;
	sh->calls[a->part]++;
	pthread_barrier_wait(&sh->bar);
	for (c = 0; c < nchunks; c++) {
		if (c % 2 != other)
			continue;
		for (i = 0; i < nspans; i++)
			memcpy(grad[c] + spans[i].off, sh->grad[other][c] + spans[i].off,
				spans[i].n * sizeof(float));
		loss[c] = sh->loss[other][c];
	}
	pthread_barrier_wait(&sh->bar);   /* the owner clears its buffers after this */
	return 0;
}

static void *parts_main(void *p)
{
	parts_arg *a = p;
	omen_train_opts o;
	parts_self = a;
	small_opts(&o);
	o.epochs = 2;
	o.part = a->part;
	o.parts = 2;
	o.exchange = parts_exchange;
	o.exchange_ctx = a;
	a->rc = omen_model_train_subset(&a->m, a->ds, a->idx, 160, a->idx + 160, 40, &o);
	return NULL;
}

static void test_parts_identical(void **state)
{
	synth x;
	omen_dataset *ds;
	omen_model *one;
	omen_train_opts o;
	parts_shared sh;
	parts_arg arg[2];
	pthread_t th[2];
	size_t *idx, i;
	int k;
	(void)state;
	small_opts(&o);
	o.epochs = 2;
	synth_make(&x, 200, 4, 1);
	assert_int_equal(omen_dataset_from_samples(&ds, x.s, x.n), 0);
	idx = malloc(200 * sizeof(size_t));
	for (i = 0; i < 200; i++)
		idx[i] = i;
	assert_int_equal(omen_model_train_subset(&one, ds, idx, 160, idx + 160, 40, &o), 0);
	memset(&sh, 0, sizeof(sh));
	pthread_barrier_init(&sh.bar, NULL, 2);
	for (k = 0; k < 2; k++) {
		arg[k] = (parts_arg){&sh, k, ds, idx, NULL, -1};
		assert_int_equal(pthread_create(&th[k], NULL, parts_main, &arg[k]), 0);
	}
	for (k = 0; k < 2; k++)
		pthread_join(th[k], NULL);
	pthread_barrier_destroy(&sh.bar);
	for (k = 0; k < 2; k++) {
		assert_int_equal(arg[k].rc, 0);
		/* 160 commits in batches of 32, 2 epochs, plus the refit's steps */
		assert_true(sh.calls[k] >= 10);
		assert_memory_equal(omen_model_params(one), omen_model_params(arg[k].m),
			omen_model_nparams(one) * sizeof(float));
		omen_model_free(arg[k].m);
	}
	free(idx);
	omen_model_free(one);
	omen_dataset_free(ds);
	synth_free(&x);
}

static void expect_parse_error(const unsigned char *img, size_t n, const char *what)
{
	omen_model *m = (omen_model *)1;
	int e = omen_model_parse(&m, "m.omen", img, n);
	assert_int_not_equal(e, 0);
	assert_null(m);
	if (!strstr(omen_error_last(), what))
		fail_msg("expected '%s' in: %s", what, omen_error_last());
	assert_null(strchr(omen_error_last(), '\n'));
}

static void test_file_format(void **state)
{
	synth x;
	omen_model *m, *l;
	omen_buf img = OMEN_BUF_INIT;
	char path[] = "/tmp/omen-test-model-XXXXXX";
	char file[64];
	unsigned char *bad;
	float p1, z1, p2, z2;
	omen_explain ex;
	int fd;
	(void)state;
	synth_make(&x, 3, 8, 1);
	assert_int_equal(omen_model_new(&m, 8, 16, 1), 0);
	fd = mkstemp(path);
	assert_true(fd >= 0);
	close(fd);
	unlink(path);
	snprintf(file, sizeof(file), "%s/model.omen", path);
	assert_int_equal(omen_model_save(m, file), 0);
	assert_int_equal(omen_model_load(&l, file), 0);
	assert_memory_equal(omen_model_params(m), omen_model_params(l),
		omen_model_nparams(m) * sizeof(float));
	assert_int_equal(omen_model_predict(&p1, &z1, m, &x.s[0], NULL), 0);
	memset(&ex, 0, sizeof(ex));
	assert_int_equal(omen_model_predict(&p2, &z2, l, &x.s[0], &ex), 0);
	assert_true(p1 == p2 && z1 == z2);
	assert_int_equal(ex.nfiles, x.s[0].nfiles);
	assert_int_equal(ex.ntok, x.s[0].ntok);
	{
		float sum = 0;
		int i;
		for (i = 0; i < ex.nfiles; i++)
			sum += ex.file_attn[i];
		assert_true(fabsf(sum - 1) < 1e-5f);   /* softmax over files */
	}
	omen_explain_free(&ex);
	omen_explain_free(&ex);
	assert_non_null(omen_model_meta(l));
	assert_int_equal(omen_file_read(&img, file, 0), 0);
	bad = malloc(img.len);
	/* truncated anywhere */
	expect_parse_error((const unsigned char *)img.ptr, img.len - 1, "truncated");
	expect_parse_error((const unsigned char *)img.ptr, img.len / 2, "truncated");
	expect_parse_error((const unsigned char *)img.ptr, 20, "truncated");
	expect_parse_error((const unsigned char *)img.ptr, 3, "not an omen model");
	/* one flipped byte in the weights, in the metadata */
	memcpy(bad, img.ptr, img.len);
	bad[img.len - 100] ^= 0x10;
	expect_parse_error(bad, img.len, "bad checksum");
	memcpy(bad, img.ptr, img.len);
	bad[40] ^= 0x01;
	expect_parse_error(bad, img.len, "bad checksum");
	/* another format version */
	memcpy(bad, img.ptr, img.len);
	bad[8] = 2;
	expect_parse_error(bad, img.len, "version 2");
	free(bad);
	omen_buf_free(&img);
	omen_model_free(l);
	/* another architecture: the arch name, then a dimension, changed in
	 * place with a valid checksum */
	{
		static const char *const edits[2][3] = {
			{"\"arch\":\"omen-hier-1\"", "\"arch\":\"omen-hier-9\"", "architecture 'omen-hier-9'"},
			{"\"K\":3", "\"K\":5", "other architecture"},
		};
		int k;
		for (k = 0; k < 2; k++) {
			unsigned char *q;
			uint32_t crc;
			assert_int_equal(omen_model_save(m, file), 0);
			assert_int_equal(omen_file_read(&img, file, 0), 0);
			q = (unsigned char *)strstr(img.ptr + 32, edits[k][0]);
			assert_non_null(q);
			memcpy(q, edits[k][1], strlen(edits[k][1]));
			crc = omen_crc32(0, img.ptr, img.len - 4);
			memcpy(img.ptr + img.len - 4, &crc, 4);   /* little-endian host */
			expect_parse_error((const unsigned char *)img.ptr, img.len, edits[k][2]);
			omen_buf_free(&img);
		}
	}
	/* a failed save (directory missing and not creatable) is an error */
	assert_int_not_equal(omen_model_save(m, "/proc/omen-no/model.omen"), 0);
	/* disk full while saving: the file-size limit makes the write fail
	 * part way (EFBIG, as ENOSPC would); the old model stays whole */
	{
		struct rlimit old_lim, lim;
		omen_model *m2, *back;
		assert_int_equal(omen_model_save(m, file), 0);
		assert_int_equal(omen_model_new(&m2, 8, 16, 77), 0);
		signal(SIGXFSZ, SIG_IGN);
		assert_int_equal(getrlimit(RLIMIT_FSIZE, &old_lim), 0);
		lim = old_lim;
		lim.rlim_cur = 65536;
		assert_int_equal(setrlimit(RLIMIT_FSIZE, &lim), 0);
		assert_int_equal(omen_model_save(m2, file), OMEN_EIO);
		assert_int_equal(setrlimit(RLIMIT_FSIZE, &old_lim), 0);
		assert_int_equal(omen_model_load(&back, file), 0);
		assert_memory_equal(omen_model_params(back), omen_model_params(m),
			omen_model_nparams(m) * sizeof(float));
		omen_model_free(back);
		omen_model_free(m2);
	}
	unlink(file);
	rmdir(path);
	omen_model_free(m);
	synth_free(&x);
}

static void test_too_few(void **state)
{
	synth x;
	omen_dataset *ds;
	omen_model *m;
	omen_train_report rep;
	omen_train_opts o;
	(void)state;
	small_opts(&o);
	synth_make(&x, 30, 1, 1);
	assert_int_equal(omen_dataset_from_samples(&ds, x.s, x.n), 0);
	assert_int_equal(omen_model_train(&m, &rep, ds, &o), OMEN_EINVAL);
	assert_non_null(strstr(omen_error_last(), "30 labelled"));
	assert_non_null(strstr(omen_error_last(), "need at least"));
	omen_dataset_free(ds);
	synth_free(&x);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_gradient_fd),
		cmocka_unit_test(test_file_format),
		cmocka_unit_test(test_too_few),
		cmocka_unit_test(test_threads_identical),
		cmocka_unit_test(test_parts_identical),
		cmocka_unit_test(test_learns_and_chance),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
