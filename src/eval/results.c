/* Walk-forward results: per-commit predictions per fold in, every method's
 * scores per fold and pooled out. No model here, so the whole scoring path
 * is testable with synthetic predictions. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "omen/eval.h"
#include "omen/error.h"

const char *const omen_eval_method_names[OMEN_EV_NMETHODS] = {
	"model", "lr_metrics", "lines_added", "model_per_line", "smallest_first", "base_rate",
	"base_model", "fine_tuned"
};

int omen_eval_needs_base(int m)
{
	return m == OMEN_EV_PRETRAINED || m == OMEN_EV_TUNED;
}

/* Which methods output probabilities (Brier and ECE make sense). */
static int is_prob(int m)
{
	return m == OMEN_EV_MODEL || m == OMEN_EV_LR || m == OMEN_EV_BASE ||
		m == OMEN_EV_PRETRAINED || m == OMEN_EV_TUNED;
}

/* Every figure undefined: a method that needs a base model, run without. */
static void method_undefined(omen_method_scores *ms, size_t n, size_t positives)
{
	memset(ms, 0, sizeof(*ms));
	ms->n = n;
	ms->positives = positives;
	ms->auc = ms->auc_lo = ms->auc_hi = ms->ap = NAN;
	ms->brier = ms->brier_base = ms->ece = ms->threshold = NAN;
	ms->eff.recall_at_20 = ms->eff.effort_at_20 = ms->eff.popt = ms->eff.commits_at_20 = NAN;
}

int omen_eval_result_init(omen_eval_result *r, size_t nfolds)
{
	memset(r, 0, sizeof(*r));
	r->bootstrap = 1000;
	r->seed = 1;
	r->folds = calloc(nfolds ? nfolds : 1, sizeof(*r->folds));
	if (!r->folds)
		return omen_error_set(OMEN_ENOMEM, "cannot hold %zu folds: out of memory", nfolds);
	r->nfolds = nfolds;
	return 0;
}

int omen_eval_fold_alloc(omen_fold_result *f, size_t n)
{
	size_t m, c = n ? n : 1;
	f->y = calloc(c, sizeof(*f->y));
	f->effort = calloc(c, sizeof(*f->effort));
	f->time = calloc(c, sizeof(*f->time));
	f->ids = calloc(c, sizeof(*f->ids));
	if (!f->y || !f->effort || !f->time || !f->ids)
		return omen_error_set(OMEN_ENOMEM, "cannot hold %zu test commits: out of memory", n);
	for (m = 0; m < OMEN_EV_NMETHODS; m++) {
		f->score[m] = calloc(c, sizeof(double));
		if (!f->score[m])
			return omen_error_set(OMEN_ENOMEM, "cannot hold %zu test commits: out of memory", n);
	}
	return 0;
}

static void fold_result_free(omen_fold_result *f)
{
	size_t m;
	free(f->fold.train_idx);
	free(f->fold.valid_idx);
	free(f->fold.test_idx);
	free(f->fold.label_at_cut);
	free(f->y);
	free(f->effort);
	free(f->time);
	free(f->ids);
	for (m = 0; m < OMEN_EV_NMETHODS; m++) {
		free(f->score[m]);
		free(f->calib[m]);
	}
}

void omen_eval_result_free(omen_eval_result *r)
{
	size_t i;
	if (!r)
		return;
	for (i = 0; i < r->nfolds; i++)
		fold_result_free(&r->folds[i]);
	free(r->folds);
	free(r->risky);
	omen_buf_free(&r->notes);
	memset(r, 0, sizeof(*r));
}

/* Scores of one method on n commits; the classification is left alone.
 * Brier and ECE read cal when given (else s). */
static int score_method(omen_method_scores *ms, int m, const double *s, const double *cal,
	const int *y, const double *effort, const double *base, size_t n, int resamples,
	uint64_t seed)
{
	size_t i;
	int rc;
	ms->n = n;
	ms->positives = 0;
	for (i = 0; i < n; i++)
		ms->positives += y[i] != 0;
	ms->auc = omen_auc(s, y, n);
	if ((rc = omen_auc_bootstrap(&ms->auc_lo, &ms->auc_hi, s, y, n, resamples, seed)) < 0)
		return rc;
	ms->ap = omen_average_precision(s, y, n);
	ms->brier_base = n ? omen_brier(base, y, n) : NAN;
	if (is_prob(m) && n) {
		ms->brier = omen_brier(cal ? cal : s, y, n);
		ms->ece = omen_ece(cal ? cal : s, y, n, 10, NULL, NULL, NULL);
	} else {
		ms->brier = NAN;
		ms->ece = NAN;
	}
	ms->eff = omen_effort(s, y, effort, n);
	return 0;
}

/* Fold k's largest commit by effort, and its notes. */
static void fold_notes(omen_eval_result *r, size_t k)
{
	omen_fold_result *f = &r->folds[k];
	size_t n = f->fold.n_test, i, imax = 0;
	double etot = 0, emax = 0;
	for (i = 0; i < n; i++) {
		etot += f->effort[i];
		if (f->effort[i] > emax) {
			emax = f->effort[i];
			imax = i;
		}
	}
	f->top_effort_share = etot > 0 ? emax / etot : 0;
	if (n)
		memcpy(f->top_effort_id, f->ids[imax], sizeof(f->top_effort_id));
	if (f->top_effort_share > 0.10)
		omen_buf_printf(&r->notes, "fold %zu: commit %.12s holds %.0f%% of the test "
			"slice's effort (lines added + deleted outside excluded paths); "
			"effort-aware figures of this fold lean on it\n",
			k + 1, f->top_effort_id, 100 * f->top_effort_share);
	if (f->fold.n_late)
		omen_buf_printf(&r->notes, "fold %zu: %zu training commits inducing now were "
			"fixed only after the test window opened: trained on as clean, as they were "
			"known then\n", k + 1, f->fold.n_late);
	if (n && f->m[OMEN_EV_MODEL].positives == 0)
		omen_buf_printf(&r->notes, "fold %zu: no inducing commit among its %zu test "
			"commits, so its auc and recall are undefined\n", k + 1, n);
	else if (!n)
		omen_buf_printf(&r->notes, "fold %zu: no labelled commit in its test window\n",
			k + 1);
}

int omen_eval_finish(omen_eval_result *r)
{
	size_t k, i, total = 0, off;
	int m, rc = 0;
	int *py = NULL;
	double *pe = NULL, *ps[OMEN_EV_NMETHODS] = {0}, *pc[OMEN_EV_NMETHODS] = {0};
	size_t cnt[OMEN_EV_NMETHODS][4];
	int any_cls[OMEN_EV_NMETHODS];

	memset(cnt, 0, sizeof(cnt));
	memset(any_cls, 0, sizeof(any_cls));
	for (k = 0; k < r->nfolds; k++) {
		omen_fold_result *f = &r->folds[k];
		size_t n = f->fold.n_test;
		for (m = 0; m < OMEN_EV_NMETHODS; m++) {
			omen_method_scores *ms = &f->m[m];
			uint64_t seed = r->seed * 1000003u + k * 101u + (uint64_t)m;
			if (omen_eval_needs_base(m) && !r->has_base) {
				size_t i2, p2 = 0;
				for (i2 = 0; i2 < n; i2++)
					p2 += f->y[i2] != 0;
				method_undefined(ms, n, p2);
				continue;
			}
			if ((rc = score_method(ms, m, f->score[m], f->calib[m], f->y, f->effort,
				f->score[OMEN_EV_BASE], n, r->bootstrap, seed)) < 0)
				goto out;
			if (ms->has_cls) {
				ms->cls = omen_classify_at(f->score[m], f->y, n, ms->threshold);
				cnt[m][0] += ms->cls.tp;
				cnt[m][1] += ms->cls.fp;
				cnt[m][2] += ms->cls.tn;
				cnt[m][3] += ms->cls.fn;
				any_cls[m] = 1;
			}
		}
		fold_notes(r, k);
		total += n;
	}
	/* pooled: every fold's test commits scored by that fold's models */
	py = malloc((total ? total : 1) * sizeof(*py));
	pe = malloc((total ? total : 1) * sizeof(*pe));
	if (!py || !pe) {
		rc = omen_error_set(OMEN_ENOMEM, "cannot pool %zu test commits: out of memory", total);
		goto out;
	}
	for (m = 0; m < OMEN_EV_NMETHODS; m++) {
		int any = 0;
		for (k = 0; k < r->nfolds; k++)
			any |= r->folds[k].calib[m] != NULL;
		ps[m] = malloc((total ? total : 1) * sizeof(double));
		if (any)
			pc[m] = malloc((total ? total : 1) * sizeof(double));
		if (!ps[m] || (any && !pc[m])) {
			rc = omen_error_set(OMEN_ENOMEM, "cannot pool %zu test commits: out of memory", total);
			goto out;
		}
	}
	off = 0;
	for (k = 0; k < r->nfolds; k++) {
		omen_fold_result *f = &r->folds[k];
		size_t n = f->fold.n_test;
		memcpy(py + off, f->y, n * sizeof(*py));
		memcpy(pe + off, f->effort, n * sizeof(*pe));
		for (m = 0; m < OMEN_EV_NMETHODS; m++) {
			memcpy(ps[m] + off, f->score[m], n * sizeof(double));
			if (pc[m])   /* a fold without its own calibration: its scores */
				memcpy(pc[m] + off, f->calib[m] ? f->calib[m] : f->score[m],
					n * sizeof(double));
		}
		off += n;
	}
	for (m = 0; m < OMEN_EV_NMETHODS; m++) {
		omen_method_scores *ms = &r->pooled[m];
		if (omen_eval_needs_base(m) && !r->has_base) {
			size_t i2, p2 = 0;
			for (i2 = 0; i2 < total; i2++)
				p2 += py[i2] != 0;
			method_undefined(ms, total, p2);
			continue;
		}
		if ((rc = score_method(ms, m, ps[m], pc[m], py, pe, ps[OMEN_EV_BASE], total,
			r->bootstrap, r->seed * 1000003u + 99991u + (uint64_t)m)) < 0)
			goto out;
		ms->has_cls = any_cls[m];
		ms->threshold = NAN;   /* one per fold */
		if (any_cls[m])
			ms->cls = omen_cls_from_counts(cnt[m][0], cnt[m][1], cnt[m][2], cnt[m][3]);
	}
	{
		double etot = 0, emax = 0;
		for (i = 0; i < total; i++) {
			etot += pe[i];
			if (pe[i] > emax)
				emax = pe[i];
		}
		if (etot > 0 && emax / etot > 0.10)
			omen_buf_printf(&r->notes, "pooled: one commit holds %.0f%% of all test effort\n",
				100 * emax / etot);
	}
out:
	free(py);
	free(pe);
	for (m = 0; m < OMEN_EV_NMETHODS; m++) {
		free(ps[m]);
		free(pc[m]);
	}
	return rc;
}

const char *const omen_spread_names[OMEN_SPREAD_N] = {
	"auc", "ap", "brier", "ece", "f1", "recall_at_20_effort", "popt"
};

static double spread_value(const omen_method_scores *m, int k)
{
	switch (k) {
	case OMEN_SPREAD_AUC: return m->auc;
	case OMEN_SPREAD_AP: return m->ap;
	case OMEN_SPREAD_BRIER: return m->brier;
	case OMEN_SPREAD_ECE: return m->ece;
	case OMEN_SPREAD_F1: return m->has_cls ? m->cls.f1 : NAN;
	case OMEN_SPREAD_R20: return m->eff.recall_at_20;
	default: return m->eff.popt;
	}
}

void omen_seed_summarize(omen_seed_summary *out, const omen_method_scores (*pooled)[OMEN_EV_NMETHODS],
	int n)
{
	int s, meth, k;
	out->n = n;
	for (meth = 0; meth < OMEN_EV_NMETHODS; meth++)
		for (k = 0; k < OMEN_SPREAD_N; k++) {
			omen_spread *x = &out->m[meth][k];
			double sum = 0, ss = 0;
			memset(x, 0, sizeof(*x));
			x->mean = x->sd = x->min = x->max = NAN;
			for (s = 0; s < n; s++) {
				double v = spread_value(&pooled[s][meth], k);
				if (!isfinite(v))
					continue;
				if (!x->n || v < x->min) x->min = v;
				if (!x->n || v > x->max) x->max = v;
				x->n++;
				sum += v;
			}
			if (!x->n)
				continue;
			x->mean = sum / (double)x->n;
			for (s = 0; s < n; s++) {
				double v = spread_value(&pooled[s][meth], k);
				if (isfinite(v))
					ss += (v - x->mean) * (v - x->mean);
			}
			x->sd = x->n > 1 ? sqrt(ss / (double)(x->n - 1)) : NAN;
			if (x->n > 1 && x->min == x->max)
				x->sd = 0;   /* not the rounding of the mean */
		}
}
