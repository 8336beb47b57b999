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

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_walk_forward),
		cmocka_unit_test(test_walk_no_positive_fold),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
