/* Walk-forward evaluation end to end on a synthetic dataset (invented
 * commits built with omen_dataset_from_samples): folds keep the gap, every
 * method is scored, a fold without inducing commits has no AUC, and the
 * metrics baseline finds a planted metric signal. Kept apart from
 * test_eval.c because it links the model and the features. */
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <stdint.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>
#include <unistd.h>
#include "omen/omen.h"

#define DAY 86400
#define NS 1400
#define T 8

typedef struct {
	omen_sample s[NS];
	int32_t file_off[NS][2], hunk_off[NS][2];
	uint32_t tok[NS][T], msg[NS][2];
	int32_t tok_line[NS][T];
	float facts[NS][OMEN_NFACTS];
	int32_t hs[NS][1], hl[NS][1], os[NS][1], ol[NS][1];
	const char *paths[NS][1];
} synth;

static const char *const path_pool[4] = {"src/parse.c", "src/io.c", "vendor/z/z.c", "docs/a.md"};

/* One commit every ~18 hours over ~3 years; inducing when many lines are
 * added (a planted metric signal) plus noise; the newest 100 days unknown. */
static void synth_build(synth *d, int quiet_tail_days)
{
	omen_rng r;
	size_t i;
	int j;
	int64_t t0 = 1600000000, tmax;
	omen_rng_seed(&r, 5);
	memset(d, 0, sizeof(*d));
	tmax = t0 + (int64_t)(NS - 1) * 18 * 3600;
	for (i = 0; i < NS; i++) {
		omen_sample *s = &d->s[i];
		double la = floor(exp(2 + 1.4 * omen_rng_normal(&r))) + 1;
		double z = -2.2 + 0.9 * log(la) - 2.0 + 0.6 * omen_rng_normal(&r);
		snprintf(s->id, sizeof(s->id), "%040zx", i * 2654435761u);
		s->time = t0 + (int64_t)i * 18 * 3600;
		s->label = omen_rng_uniform(&r) < 1 / (1 + exp(-z));
		if (s->time > tmax - 100 * DAY)
			s->label = -1;
		else if (quiet_tail_days && s->time > tmax - (100 + quiet_tail_days) * DAY)
			s->label = 0;
		s->la = (int32_t)la;
		s->ld = (int32_t)(la / 3);
		for (j = 0; j < OMEN_NMETRICS; j++)
			s->metrics[j] = (float)omen_rng_uniform(&r);
		s->metrics[OMEN_M_LA] = (float)la;
		s->metrics[OMEN_M_LD] = (float)(la / 3);
		s->metrics[OMEN_M_NF] = 1;
		s->nfiles = 1;
		s->nhunks = 1;
		s->ntok = T;
		s->nmsg = 2;
		d->file_off[i][1] = 1;
		d->hunk_off[i][1] = T;
		for (j = 0; j < T; j++) {
			d->tok[i][j] = (uint32_t)(omen_rng_next(&r) % 512);
			d->tok_line[i][j] = j + 1;
		}
		d->msg[i][0] = (uint32_t)(omen_rng_next(&r) % 64);
		d->msg[i][1] = 7;
		d->hs[i][0] = 1;
		d->hl[i][0] = s->la;
		d->os[i][0] = 1;
		d->ol[i][0] = s->ld;
		d->paths[i][0] = path_pool[i % 4];
		s->file_off = d->file_off[i];
		s->hunk_off = d->hunk_off[i];
		s->tok = d->tok[i];
		s->tok_line = d->tok_line[i];
		s->msg = d->msg[i];
		s->file_facts = d->facts[i];
		s->hunk_new_start = d->hs[i];
		s->hunk_new_lines = d->hl[i];
		s->hunk_old_start = d->os[i];
		s->hunk_old_lines = d->ol[i];
		s->file_path = d->paths[i];
	}
}

static void quick_opts(omen_eval_opts *o)
{
	omen_eval_opts_init(o);
	o->folds.folds = 3;
	o->folds.fold_days = 90;
	o->train.epochs = 2;
	o->train.threads = 1;
	o->train.dim = 8;
	o->train.channels = 8;
	o->bootstrap = 100;
	o->top_risky = 5;
}

static void test_walk_forward(void **state)
{
	synth *d = malloc(sizeof(*d));
	omen_dataset *ds = NULL;
	omen_eval_result r;
	omen_eval_opts o;
	omen_buf b = OMEN_BUF_INIT;
	size_t k, i;
	int m;
	(void)state;
	assert_non_null(d);
	synth_build(d, 0);
	assert_int_equal(omen_dataset_from_samples(&ds, d->s, NS), 0);
	quick_opts(&o);
	if (omen_eval_run(&r, ds, &o) != 0)
		fail_msg("eval: %s", omen_error_last());
	assert_int_equal(r.nfolds, 3);
	for (k = 0; k < r.nfolds; k++) {
		const omen_fold_result *f = &r.folds[k];
		const omen_dataset *cd = ds;
		assert_true(f->fold.n_test > 50);
		for (i = 0; i < f->fold.n_train; i++)
			assert_true(omen_dataset_get(cd, f->fold.train_idx[i])->time <=
				f->fold.test_start - 90 * DAY);
		for (i = 0; i < f->fold.n_valid; i++)
			assert_true(omen_dataset_get(cd, f->fold.valid_idx[i])->time <=
				f->fold.test_start - 90 * DAY);
		for (i = 0; i < f->fold.n_test; i++) {
			const omen_sample *s = omen_dataset_get(cd, f->fold.test_idx[i]);
			assert_true(s->time >= f->fold.test_start && s->time < f->fold.test_end);
			assert_true(s->label >= 0);
			/* vendored paths carry no effort */
			if (!strncmp(s->file_path[0], "vendor/", 7))
				assert_true(f->effort[i] == 0);
			else
				assert_true(f->effort[i] == s->la + s->ld);
			assert_true(f->score[OMEN_EV_MODEL][i] >= 0 && f->score[OMEN_EV_MODEL][i] <= 1);
		}
		assert_true(f->seconds > 0);
		for (m = 0; m < OMEN_EV_NMETHODS; m++)
			assert_true(f->m[m].n == f->fold.n_test);
	}
	/* the metrics baseline sees the planted signal (lines added) */
	assert_true(r.pooled[OMEN_EV_LR].auc > 0.65);
	assert_true(r.pooled[OMEN_EV_LA].auc > 0.65);
	/* per fold the base rate is one constant: all ties, AUC exactly 1/2
	 * (pooled it is not: each fold has its own training rate) */
	for (k = 0; k < r.nfolds; k++)
		assert_true(fabs(r.folds[k].m[OMEN_EV_BASE].auc - 0.5) < 1e-12);
	assert_true(r.nrisky == 5);
	assert_true(r.risky[0].prob >= r.risky[4].prob);
	assert_non_null(strstr(r.risky[0].why, "files: "));
	assert_int_equal(omen_eval_write_html(&b, &r, "synthetic"), 0);
	assert_non_null(strstr(b.ptr, "id=\"roc\""));
	omen_buf_free(&b);
	omen_eval_result_free(&r);
	omen_dataset_free(ds);
	free(d);
}

static void test_walk_no_positive_fold(void **state)
{
	synth *d = malloc(sizeof(*d));
	omen_dataset *ds = NULL;
	omen_eval_result r;
	omen_eval_opts o;
	omen_buf b = OMEN_BUF_INIT;
	(void)state;
	assert_non_null(d);
	synth_build(d, 95);   /* the newest labelled 95 days hold no inducing commit */
	assert_int_equal(omen_dataset_from_samples(&ds, d->s, NS), 0);
	quick_opts(&o);
	if (omen_eval_run(&r, ds, &o) != 0)
		fail_msg("eval: %s", omen_error_last());
	assert_int_equal(r.folds[2].fold.pos_test, 0);
	assert_true(isnan(r.folds[2].m[OMEN_EV_MODEL].auc));   /* undefined, not 0.5 */
	assert_true(isnan(r.folds[2].m[OMEN_EV_MODEL].eff.recall_at_20));
	assert_int_equal(omen_eval_write_json(&b, &r), 0);
	assert_non_null(strstr(b.ptr, "\"no_positives\":true"));
	omen_buf_clear(&b);
	assert_int_equal(omen_eval_write_text(&b, &r), 0);
	assert_non_null(strstr(b.ptr, "no inducing commit"));
	omen_buf_free(&b);
	omen_eval_result_free(&r);

	/* too many folds for the history: a message with the numbers */
	o.folds.folds = 12;
	assert_int_equal(omen_eval_run(&r, ds, &o), OMEN_EINVAL);
	assert_non_null(strstr(omen_error_last(), "history too short for 12 folds of 90 days"));
	omen_eval_result_free(&r);
	omen_dataset_free(ds);
	free(d);
}

/* ---- labels as known at a cut (issue 16) ------------------------------------ */
/* Fix times for the synthetic history: every inducing commit is fixed
 * 5 to 600 days later (median latency of real histories is 0.8-2 years:
 * many fixes come after a fold's cut). */
static void synth_clock(omen_label_clock *c, const synth *d)
{
	omen_rng r;
	size_t i;
	omen_rng_seed(&r, 23);
	assert_int_equal(omen_label_clock_alloc(c, NS), 0);
	for (i = 0; i < NS; i++) {
		c->time[i] = d->s[i].time;
		c->label[i] = (int8_t)d->s[i].label;
		c->first_fix[i] = d->s[i].label > 0 ?
			d->s[i].time + (int64_t)(5 + omen_rng_uniform(&r) * 595) * DAY : INT64_MAX;
	}
}

/* Rewrites every label newer than cut, in the clock and in the samples:
 * mode 0 deletes them (commits newer than the cut unknown, fixes after it
 * never made), mode 1 shuffles them (the labels of the commits newer than
 * the cut permuted among themselves, fixes after the cut moved to other
 * times after it, some added, some removed). */
static void rewrite_future(omen_label_clock *c, synth *d, int64_t cut, int mode)
{
	omen_rng r;
	size_t i, nnew = 0, *newer = malloc(NS * sizeof(size_t));
	int64_t tmax = c->time[NS - 1];
	assert_non_null(newer);
	omen_rng_seed(&r, 77);
	for (i = 0; i < NS; i++) {
		if (c->time[i] >= cut) {
			if (mode == 0)
				c->label[i] = -1;
			else if (c->label[i] >= 0)
				newer[nnew++] = i;
			continue;
		}
		if (c->label[i] < 0)
			continue;
		if (c->first_fix[i] != INT64_MAX && c->first_fix[i] >= cut) {
			if (mode == 0 || omen_rng_uniform(&r) < 0.3) {
				c->first_fix[i] = INT64_MAX;   /* that fix never came */
				c->label[i] = 0;
			} else {
				c->first_fix[i] = cut + (int64_t)(omen_rng_uniform(&r) * (double)(tmax - cut));
			}
		} else if (mode == 1 && c->label[i] == 0 && omen_rng_uniform(&r) < 0.1) {
			c->first_fix[i] = cut + (int64_t)(omen_rng_uniform(&r) * (double)(tmax - cut));
			c->label[i] = 1;                      /* a late fix that was not there */
		}
	}
	for (i = nnew; i > 1; i--) {
		size_t j = (size_t)(omen_rng_next(&r) % i);
		int8_t tmp = c->label[newer[i - 1]];
		c->label[newer[i - 1]] = c->label[newer[j]];
		c->label[newer[j]] = tmp;
	}
	for (i = 0; i < NS; i++)
		if (c->time[i] >= cut && c->label[i] > 0 && c->first_fix[i] == INT64_MAX)
			c->first_fix[i] = c->time[i] + 30 * DAY;
	for (i = 0; i < NS; i++)
		d->s[i].label = c->label[i];
	free(newer);
}

static void assert_same_fold(const omen_fold_result *a, const omen_fold_result *b, int scores)
{
	size_t i;
	assert_int_equal(a->fold.n_train, b->fold.n_train);
	assert_int_equal(a->fold.n_valid, b->fold.n_valid);
	assert_int_equal(a->fold.pos_train, b->fold.pos_train);
	assert_int_equal(a->fold.pos_valid, b->fold.pos_valid);
	assert_memory_equal(a->fold.train_idx, b->fold.train_idx, a->fold.n_train * sizeof(size_t));
	assert_memory_equal(a->fold.valid_idx, b->fold.valid_idx, a->fold.n_valid * sizeof(size_t));
	for (i = 0; i < a->fold.n_train; i++)
		assert_int_equal(a->fold.label_at_cut[a->fold.train_idx[i]],
			b->fold.label_at_cut[b->fold.train_idx[i]]);
	for (i = 0; i < a->fold.n_valid; i++)
		assert_int_equal(a->fold.label_at_cut[a->fold.valid_idx[i]],
			b->fold.label_at_cut[b->fold.valid_idx[i]]);
	if (!scores)
		return;
	/* the same test commits, scored by bit-identical models */
	assert_int_equal(a->fold.n_test, b->fold.n_test);
	assert_memory_equal(a->fold.test_idx, b->fold.test_idx, a->fold.n_test * sizeof(size_t));
	assert_memory_equal(a->score[OMEN_EV_MODEL], b->score[OMEN_EV_MODEL],
		a->fold.n_test * sizeof(double));
	assert_memory_equal(a->score[OMEN_EV_LR], b->score[OMEN_EV_LR], a->fold.n_test * sizeof(double));
	assert_true(a->m[OMEN_EV_MODEL].threshold == b->m[OMEN_EV_MODEL].threshold);
	assert_true(a->m[OMEN_EV_LR].threshold == b->m[OMEN_EV_LR].threshold);
}

/* The audit's experiment: deleting or shuffling every label newer than the
 * last fold's cut leaves the training rows, their labels and the models of
 * every fold up to that cut bit-identical (the folds pinned by test_end). */
static void test_walk_future_labels(void **state)
{
	synth *d = malloc(sizeof(*d)), *e = malloc(sizeof(*e));
	omen_dataset *ds = NULL, *de = NULL;
	omen_label_clock ca, cb;
	omen_eval_result ra, rb;
	omen_eval_opts o;
	int64_t cut;
	size_t k, late = 0;
	int mode;
	(void)state;
	assert_non_null(d);
	assert_non_null(e);
	synth_build(d, 0);
	synth_clock(&ca, d);
	assert_int_equal(omen_dataset_from_samples(&ds, d->s, NS), 0);
	quick_opts(&o);
	o.top_risky = 0;
	o.bootstrap = 0;
	o.folds.test_end = d->s[NS - 1].time - 100 * DAY;
	o.folds.clock = &ca;
	if (omen_eval_run(&ra, ds, &o) != 0)
		fail_msg("eval: %s", omen_error_last());
	assert_int_equal(ra.nfolds, 3);
	cut = ra.folds[2].fold.test_start;
	for (k = 0; k < ra.nfolds; k++)
		late += ra.folds[k].fold.n_late;
	assert_true(late > 0);   /* the experiment bites: late fixes exist */
	for (mode = 0; mode < 2; mode++) {
		synth_build(e, 0);
		synth_clock(&cb, e);
		rewrite_future(&cb, e, cut, mode);
		assert_int_equal(omen_dataset_from_samples(&de, e->s, NS), 0);
		o.folds.clock = &cb;
		if (omen_eval_run(&rb, de, &o) != 0)
			fail_msg("eval (%s): %s", mode ? "shuffled" : "deleted", omen_error_last());
		assert_int_equal(rb.nfolds, 3);
		for (k = 0; k < 3; k++) {
			assert_true(rb.folds[k].fold.test_start == ra.folds[k].fold.test_start);
			/* deleted: the last fold has no test commits left to score */
			assert_same_fold(&ra.folds[k], &rb.folds[k], mode == 1 || k < 2);
		}
		omen_eval_result_free(&rb);
		omen_dataset_free(de);
		omen_label_clock_free(&cb);
	}
	omen_eval_result_free(&ra);
	omen_dataset_free(ds);
	omen_label_clock_free(&ca);
	free(d);
	free(e);
}

static void quick_train(omen_train_opts *o)
{
	omen_train_opts_init(o);
	o->epochs = 3;
	o->patience = 2;
	o->threads = 1;
	o->dim = 8;
	o->channels = 8;
}

/* The same for train at its test start: the evaluation model's split and
 * the shipped model's weights do not move when every label newer than the
 * test start is shuffled, or every fix after it deleted. */
static void test_train_future_labels(void **state)
{
	synth *d = malloc(sizeof(*d)), *e = malloc(sizeof(*e));
	omen_dataset *ds = NULL, *de = NULL;
	omen_label_clock ca, cb;
	omen_train_opts o;
	omen_train_report ra, rb;
	omen_model *ma = NULL, *mb = NULL;
	size_t i;
	int mode;
	(void)state;
	assert_non_null(d);
	assert_non_null(e);
	synth_build(d, 0);
	synth_clock(&ca, d);
	assert_int_equal(omen_dataset_from_samples(&ds, d->s, NS), 0);
	quick_train(&o);
	o.clock = &ca;
	if (omen_model_train(&ma, &ra, ds, &o) != 0)
		fail_msg("train: %s", omen_error_last());
	assert_true(ra.labels_known == ra.test_start && ra.test_start > 0);
	assert_true(ra.n_relabelled > 0);
	assert_true(ra.gap_days == 90);
	assert_true(ra.check.n > 0 && ra.check.n + ra.check.n_calib == ra.n_test);
	assert_true(ra.check.start >= ra.test_start);
	for (mode = 0; mode < 2; mode++) {
		synth_build(e, 0);
		synth_clock(&cb, e);
		if (mode == 0) {
			/* every fix made after the test start deleted; the test slice
			 * keeps its labels (train needs inducing commits there) */
			for (i = 0; i < NS; i++)
				if (cb.time[i] < ra.test_start && cb.first_fix[i] != INT64_MAX &&
				    cb.first_fix[i] >= ra.test_start) {
					cb.first_fix[i] = INT64_MAX;
					cb.label[i] = 0;
					e->s[i].label = 0;
				}
		} else {
			rewrite_future(&cb, e, ra.test_start, 1);
		}
		assert_int_equal(omen_dataset_from_samples(&de, e->s, NS), 0);
		o.clock = &cb;
		o.test_start = ra.test_start;
		if (omen_model_train(&mb, &rb, de, &o) != 0)
			fail_msg("train (%s): %s", mode ? "shuffled" : "deleted", omen_error_last());
		assert_int_equal(rb.n_train, ra.n_train);
		assert_int_equal(rb.n_valid, ra.n_valid);
		assert_int_equal(rb.pos_train, ra.pos_train);
		assert_int_equal(rb.pos_valid, ra.pos_valid);
		assert_int_equal(rb.best_epoch, ra.best_epoch);
		assert_int_equal(rb.epochs_run, ra.epochs_run);
		assert_true(rb.threshold == ra.threshold);
		/* the shipped weights (refit on train+validation as known at the
		 * cut); its calibration reads the test slice, which did change */
		assert_int_equal(omen_model_nparams(mb), omen_model_nparams(ma));
		assert_memory_equal(omen_model_params(mb), omen_model_params(ma),
			omen_model_nparams(ma) * sizeof(float));
		omen_model_free(mb);
		mb = NULL;
		omen_dataset_free(de);
		omen_label_clock_free(&cb);
		o.test_start = 0;
	}
	omen_model_free(ma);
	omen_dataset_free(ds);
	omen_label_clock_free(&ca);
	free(d);
	free(e);
}

/* A planted late fix, read from a label file: commit P (old, in every
 * fold's training) is fixed only after the last fold's cut, so every fold
 * trains on it as clean while the file calls it inducing; commit Q, in the
 * middle fold's test window, is fixed after that window closed and is
 * inducing in the test, as known now. */
static void test_walk_planted_late_fix(void **state)
{
	synth *d = malloc(sizeof(*d));
	omen_dataset *ds = NULL;
	omen_label_clock c;
	omen_eval_result r;
	omen_eval_opts o;
	omen_buf b = OMEN_BUF_INIT;
	char path[] = "/tmp/omen-late-XXXXXX";
	size_t i, P = 100, Q = 0, k, j;
	int fd, found = 0;
	int64_t tend;
	FILE *fp;
	(void)state;
	assert_non_null(d);
	synth_build(d, 0);
	tend = d->s[NS - 1].time - 100 * DAY;
	d->s[P].label = 0;   /* made inducing below, by the planted fix */
	/* Q: a clean commit in the middle of the second fold's window */
	for (i = 0; i < NS; i++)
		if (d->s[i].time >= tend - 3 * 90 * DAY / 2 && d->s[i].label == 0) {
			Q = i;
			break;
		}
	assert_true(Q > 0);
	fd = mkstemp(path);
	assert_true(fd >= 0);
	fp = fdopen(fd, "w");
	assert_non_null(fp);
	fprintf(fp, "{\"omen_labels\":1,\"head\":\"\",\"options\":{\"window_days\":90}}\n");
	for (i = 0; i < NS; i++) {
		const omen_sample *s = &d->s[i];
		int planted = i == P || i == Q;
		int64_t fix = planted ? (i == P ? tend - 10 * DAY : tend + 20 * DAY) : s->time + 30 * DAY;
		if (s->label > 0 || planted) {
			fprintf(fp, "{\"id\":\"%s\",\"time\":%lld,\"label\":\"inducing\",\"fixes\":"
				"[\"f%039zx\"]}\n", s->id, (long long)s->time, i);
			fprintf(fp, "{\"id\":\"f%039zx\",\"time\":%lld,\"label\":\"unknown\",\"fix\":true}\n",
				i, (long long)fix);
		} else {
			fprintf(fp, "{\"id\":\"%s\",\"time\":%lld,\"label\":\"%s\"}\n", s->id,
				(long long)s->time, s->label == 0 ? "clean" : "unknown");
		}
	}
	fclose(fp);
	d->s[P].label = 1;
	d->s[Q].label = 1;
	assert_int_equal(omen_dataset_from_samples(&ds, d->s, NS), 0);
	if (omen_label_clock_load(&c, ds, path) != 0)
		fail_msg("clock: %s", omen_error_last());
	assert_true(c.window_days == 90 && c.horizon_days == 0);
	assert_true(c.first_fix[P] == tend - 10 * DAY);
	quick_opts(&o);
	o.top_risky = 0;
	o.bootstrap = 0;
	o.folds.test_end = tend;
	o.labels_path = path;
	if (omen_eval_run(&r, ds, &o) != 0)
		fail_msg("eval: %s", omen_error_last());
	for (k = 0; k < r.nfolds; k++) {
		const omen_fold *f = &r.folds[k].fold;
		int in_train = 0;
		assert_true(f->test_start < tend - 10 * DAY);
		for (j = 0; j < f->n_train; j++)
			in_train |= f->train_idx[j] == P;
		assert_true(in_train);                       /* not dropped */
		assert_int_equal(f->label_at_cut[P], 0);     /* clean at the cut */
		for (j = 0; j < f->n_test; j++)
			if (f->test_idx[j] == Q) {
				assert_int_equal(r.folds[k].y[j], 1);   /* inducing in the test */
				assert_int_equal(k, 1);
				found = 1;
			}
	}
	assert_true(found);
	assert_int_equal(omen_eval_write_json(&b, &r), 0);
	assert_non_null(strstr(b.ptr, "\"relabelled_clean_at_cut\":"));
	omen_buf_free(&b);
	omen_eval_result_free(&r);
	omen_label_clock_free(&c);
	omen_dataset_free(ds);
	unlink(path);
	free(d);
}

/* eval --seeds: the first run is the result, the summary spreads over the
 * seeds; the baselines do not depend on the training seed. */
static void test_walk_seeds(void **state)
{
	synth *d = malloc(sizeof(*d));
	omen_dataset *ds = NULL;
	omen_eval_result r1, r3;
	omen_eval_opts o;
	omen_buf b = OMEN_BUF_INIT;
	(void)state;
	assert_non_null(d);
	synth_build(d, 0);
	assert_int_equal(omen_dataset_from_samples(&ds, d->s, NS), 0);
	quick_opts(&o);
	o.top_risky = 0;
	o.bootstrap = 0;
	if (omen_eval_run(&r1, ds, &o) != 0)
		fail_msg("eval: %s", omen_error_last());
	assert_int_equal(r1.seeds.n, 0);
	o.seeds = 3;
	if (omen_eval_run(&r3, ds, &o) != 0)
		fail_msg("eval: %s", omen_error_last());
	assert_int_equal(r3.seeds.n, 3);
	assert_true(r3.pooled[OMEN_EV_MODEL].auc == r1.pooled[OMEN_EV_MODEL].auc);
	{
		const omen_spread *m = &r3.seeds.m[OMEN_EV_MODEL][OMEN_SPREAD_AUC];
		const omen_spread *l = &r3.seeds.m[OMEN_EV_LR][OMEN_SPREAD_AUC];
		assert_int_equal(m->n, 3);
		assert_true(m->min <= r1.pooled[OMEN_EV_MODEL].auc && r1.pooled[OMEN_EV_MODEL].auc <= m->max);
		assert_true(m->min < m->max);   /* the seed moves the model */
		assert_true(m->sd > 0);
		assert_true(l->min == l->max && l->sd == 0);
	}
	assert_int_equal(omen_eval_write_json(&b, &r3), 0);
	assert_non_null(strstr(b.ptr, "\"seeds\":{\"n\":3,"));
	omen_buf_clear(&b);
	assert_int_equal(omen_eval_write_json(&b, &r1), 0);
	assert_null(strstr(b.ptr, "\"seeds\""));
	omen_buf_clear(&b);
	assert_int_equal(omen_eval_write_text(&b, &r3), 0);
	assert_non_null(strstr(b.ptr, "pooled over 3 seeds"));
	omen_buf_clear(&b);
	assert_int_equal(omen_eval_write_html(&b, &r3, "seeds"), 0);
	assert_non_null(strstr(b.ptr, "Pooled figures over 3 seeds"));
	omen_buf_free(&b);
	omen_eval_result_free(&r1);
	omen_eval_result_free(&r3);
	omen_dataset_free(ds);
	free(d);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_walk_forward),
		cmocka_unit_test(test_walk_no_positive_fold),
		cmocka_unit_test(test_walk_future_labels),
		cmocka_unit_test(test_train_future_labels),
		cmocka_unit_test(test_walk_planted_late_fix),
		cmocka_unit_test(test_walk_seeds),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
