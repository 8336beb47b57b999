/* Driver for tests/ref/eval_sklearn.py: reads "n" then n lines "prob label"
 * on stdin and prints omen's AUC, average precision, Brier, ECE and the 10
 * calibration bins (count, mean prediction, positive rate) one per line.
 * "eval_driver html FILE" writes the HTML report of a synthetic walk-forward
 * result (invented commits; for looking at the report without a model).
 * "eval_driver pooled" reads "K" then per fold "n" and n lines "label s0 ..
 * s7 cal" (one score per method, OMEN_EV_* order, then the base model's
 * recalibrated probability), runs omen_eval_finish with a base model
 * present and prints "pooled <method> auc ap brier ece" per method, the
 * side-by-side figures eval reports (issue 11). */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "omen/omen.h"

static void num(const char *k, double v)
{
	if (isnan(v))
		printf("%s nan\n", k);
	else
		printf("%s %.17g\n", k, v);
}

static int synth_html(const char *path)
{
	omen_eval_result r;
	omen_buf b = OMEN_BUF_INIT;
	omen_rng g;
	size_t k, i, nf = 5;
	int rc;
	omen_rng_seed(&g, 11);
	if (omen_eval_result_init(&r, nf) < 0)
		return 2;
	r.bootstrap = 500;
	r.gap_days = 90;
	r.fold_days = 60;
	r.n_commits = 2400;
	r.n_labelled = 2100;
	for (k = 0; k < nf; k++) {
		omen_fold_result *f = &r.folds[k];
		size_t n = 150;
		f->fold.n_test = n;
		f->fold.test_start = 1650000000 + (int64_t)k * 60 * 86400;
		f->fold.test_end = f->fold.test_start + 60 * 86400;
		f->fold.train_end = f->fold.test_start - 90 * 86400;
		f->fold.n_train = 900 + 120 * k;
		f->fold.n_valid = 150;
		f->base_rate = 0.2;
		f->seconds = 10 + k;
		if (omen_eval_fold_alloc(f, n) < 0)
			return 2;
		for (i = 0; i < n; i++) {
			int yy = omen_rng_uniform(&g) < (k == 4 ? 0.0 : 0.2);
			double la = 1 + floor(exp(3 + 1.3 * omen_rng_normal(&g)));
			double z = (yy ? 0.9 : -0.6) + 0.3 * log1p(la) - 1.6 + omen_rng_normal(&g);
			f->y[i] = yy;
			f->fold.pos_test += (size_t)yy;
			f->effort[i] = la + floor(la * omen_rng_uniform(&g));
			f->time[i] = f->fold.test_start + (int64_t)i * 30000;
			snprintf(f->ids[i], sizeof(f->ids[i]), "%08zx%032zx", k * 7919 + i * 104729, i);
			f->score[OMEN_EV_MODEL][i] = 1 / (1 + exp(-z));
			f->score[OMEN_EV_LR][i] = 1 / (1 + exp(-(0.5 * z + 0.7 * omen_rng_normal(&g) - 0.6)));
			f->score[OMEN_EV_LA][i] = la;
			f->score[OMEN_EV_DENSITY][i] = f->score[OMEN_EV_MODEL][i] / f->effort[i];
			f->score[OMEN_EV_SMALL][i] = -f->effort[i];
			f->score[OMEN_EV_BASE][i] = f->base_rate;
		}
		f->m[OMEN_EV_MODEL].threshold = 0.35;
		f->m[OMEN_EV_MODEL].has_cls = 1;
		f->m[OMEN_EV_LR].threshold = 0.3;
		f->m[OMEN_EV_LR].has_cls = 1;
		f->m[OMEN_EV_BASE].threshold = 0.2;
		f->m[OMEN_EV_BASE].has_cls = 1;
	}
	r.folds[1].effort[3] = 40000;   /* a vendored drop: the warning */
	r.folds[1].score[OMEN_EV_SMALL][3] = -40000;
	if (omen_eval_finish(&r) < 0)
		return 2;
	r.risky = calloc(3, sizeof(*r.risky));
	if (!r.risky)
		return 2;
	r.nrisky = 3;
	for (i = 0; i < 3; i++) {
		memcpy(r.risky[i].id, r.folds[i].ids[0], 41);
		r.risky[i].time = r.folds[i].time[0];
		r.risky[i].prob = 0.9 - 0.1 * (double)i;
		r.risky[i].label = i != 1;
		r.risky[i].effort = 120;
		snprintf(r.risky[i].why, sizeof(r.risky[i].why),
			"files: src/store/wal.c 61%%, src/net/pool.c 20%%; metrics: la +0.41, nf +0.12");
	}
	rc = omen_eval_write_html(&b, &r, "synthetic walk-forward evaluation (invented data)");
	if (rc == 0)
		rc = omen_file_write_atomic(path, b.ptr, b.len);
	omen_buf_free(&b);
	omen_eval_result_free(&r);
	return rc ? 2 : 0;
}

static int pooled(void)
{
	omen_eval_result r;
	size_t nf, k, i;
	int m;
	if (scanf("%zu", &nf) != 1 || !nf || omen_eval_result_init(&r, nf) < 0)
		return 2;
	r.bootstrap = 200;
	r.has_base = 1;
	snprintf(r.base_path, sizeof(r.base_path), "base.omen");
	for (k = 0; k < nf; k++) {
		omen_fold_result *f = &r.folds[k];
		size_t n;
		if (scanf("%zu", &n) != 1 || omen_eval_fold_alloc(f, n) < 0)
			return 2;
		f->fold.n_test = n;
		if (!(f->calib[OMEN_EV_PRETRAINED] = malloc((n ? n : 1) * sizeof(double))))
			return 2;
		for (i = 0; i < n; i++) {
			if (scanf("%d", &f->y[i]) != 1)
				return 2;
			for (m = 0; m < OMEN_EV_NMETHODS; m++)
				if (scanf("%lf", &f->score[m][i]) != 1)
					return 2;
			if (scanf("%lf", &f->calib[OMEN_EV_PRETRAINED][i]) != 1)
				return 2;
			f->effort[i] = 1 + (double)(i % 7);
		}
	}
	if (omen_eval_finish(&r) < 0)
		return 2;
	for (m = 0; m < OMEN_EV_NMETHODS; m++) {
		const omen_method_scores *x = &r.pooled[m];
		printf("pooled %s %.17g %.17g %.17g %.17g %.17g %.17g\n", omen_eval_method_names[m],
			x->auc, x->ap, x->brier, x->ece, x->auc_lo, x->auc_hi);
	}
	omen_eval_result_free(&r);
	return 0;
}

int main(int argc, char **argv)
{
	size_t n, i, bn[10];
	double *p, bp[10], bt[10];
	int *y, b;
	if (argc == 3 && !strcmp(argv[1], "html"))
		return synth_html(argv[2]);
	if (argc == 2 && !strcmp(argv[1], "pooled"))
		return pooled();
	if (scanf("%zu", &n) != 1)
		return 2;
	p = malloc((n ? n : 1) * sizeof(*p));
	y = malloc((n ? n : 1) * sizeof(*y));
	if (!p || !y)
		return 2;
	for (i = 0; i < n; i++)
		if (scanf("%lf %d", &p[i], &y[i]) != 2)
			return 2;
	num("auc", omen_auc(p, y, n));
	num("ap", omen_average_precision(p, y, n));
	num("brier", omen_brier(p, y, n));
	num("ece", omen_ece(p, y, n, 10, bn, bp, bt));
	for (b = 0; b < 10; b++) {
		printf("bin %d %zu ", b, bn[b]);
		if (bn[b])
			printf("%.17g %.17g\n", bp[b], bt[b]);
		else
			printf("nan nan\n");
	}
	free(p);
	free(y);
	return 0;
}
