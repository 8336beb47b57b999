/* Walk-forward evaluation: for every fold, train the model (and with it the
 * logistic-regression baseline) on the commits before the fold's cut, pick
 * each method's threshold on the fold's validation slice, score the test
 * window, and keep the riskiest test commits with their explanations.
 * Scoring of the predictions is in results.c, so it is testable without a
 * model. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "omen/eval.h"
#include "omen/base.h"
#include "omen/error.h"
#include "omen/label.h"

void omen_eval_opts_init(omen_eval_opts *o)
{
	memset(o, 0, sizeof(*o));
	omen_fold_opts_init(&o->folds);
	omen_train_opts_init(&o->train);
	o->bootstrap = 1000;
	o->seed = OMEN_SEED_DEFAULT;
	o->top_risky = 10;
	o->seeds = 1;
}

/* Short explanation: the files with most attention and the metrics with
 * the largest gradient x input. */
static void explain_text(char *out, size_t cap, const omen_sample *s, const omen_explain *ex)
{
	size_t len = 0;
	int used[3] = {-1, -1, -1}, k, f, j;
	out[0] = '\0';
	for (k = 0; k < 3 && k < ex->nfiles && k < s->nfiles; k++) {
		int best = -1;
		for (f = 0; f < ex->nfiles && f < s->nfiles; f++) {
			if (f == used[0] || f == used[1])
				continue;
			if (best < 0 || ex->file_attn[f] > ex->file_attn[best])
				best = f;
		}
		if (best < 0)
			break;
		used[k] = best;
		if (len >= cap)
			break;
		len += (size_t)snprintf(out + len, cap - len, "%s%s %.0f%%",
			k ? ", " : "files: ", s->file_path && s->file_path[best] ? s->file_path[best] : "?",
			100.0 * ex->file_attn[best]);
	}
	{
		int mu[2] = {-1, -1};
		for (k = 0; k < 2; k++) {
			int best = -1;
			for (j = 0; j < OMEN_NMETRICS; j++) {
				if (j == mu[0])
					continue;
				if (best < 0 || fabsf(ex->metric_contrib[j]) > fabsf(ex->metric_contrib[best]))
					best = j;
			}
			mu[k] = best;
			if (best >= 0 && len < cap)
				len += (size_t)snprintf(out + len, cap - len, "%s%s %+.2f",
					k ? ", " : (len ? "; metrics: " : "metrics: "),
					omen_metric_names[best], ex->metric_contrib[best]);
		}
	}
	if (len < cap)
		snprintf(out + len, cap - len, "; message %+.2f", ex->message_contrib);
	/* snprintf may have cut a path inside a character */
	out[omen_utf8_trim(out, strlen(out))] = '\0';
}

static int cmp_risky(const void *a, const void *b)
{
	const omen_risky *x = a, *y = b;
	if (x->prob != y->prob)
		return x->prob > y->prob ? -1 : 1;
	return strcmp(x->id, y->id);
}

typedef struct {
	double p;
	size_t i;
} pidx;

static int cmp_pidx_desc(const void *a, const void *b)
{
	const pidx *x = a, *y = b;
	if (x->p != y->p)
		return x->p > y->p ? -1 : 1;
	return (x->i > y->i) - (x->i < y->i);
}

/* Appends fold k's top_risky riskiest test commits (by the model's
 * probability), explained by its model m, to r->risky. 0 or < 0. */
static int explain_riskiest(omen_eval_result *r, size_t k, const omen_dataset *ds, const omen_model *m,
	size_t top_risky, size_t *risky_cap)
{
	omen_fold_result *f = &r->folds[k];
	size_t i, nt = f->fold.n_test, want = top_risky < nt ? top_risky : nt;
	omen_explain ex;
	pidx *top = malloc(nt * sizeof(*top));
	int rc = 0;
	memset(&ex, 0, sizeof(ex));
	if (!top || OMEN_ARRAY_RESERVE(r->risky, *risky_cap, r->nrisky + want) < 0) {
		rc = omen_error_set(OMEN_ENOMEM, "cannot evaluate fold %zu: out of memory", k + 1);
		goto out;
	}
	for (i = 0; i < nt; i++) {
		top[i].p = f->score[OMEN_EV_MODEL][i];
		top[i].i = i;
	}
	qsort(top, nt, sizeof(*top), cmp_pidx_desc);
	for (i = 0; i < want; i++) {
		size_t j = top[i].i;
		const omen_sample *s = omen_dataset_get(ds, f->fold.test_idx[j]);
		omen_risky *x = &r->risky[r->nrisky++];
		float prob;
		memset(x, 0, sizeof(*x));
		memcpy(x->id, f->ids[j], sizeof(x->id));
		x->time = f->time[j];
		x->prob = top[i].p;
		x->label = f->y[j];
		x->effort = f->effort[j];
		if (omen_model_predict(&prob, NULL, m, s, &ex) == 0)
			explain_text(x->why, sizeof(x->why), s, &ex);
		else
			snprintf(x->why, sizeof(x->why), "no explanation: %s", omen_error_last());
	}
out:
	omen_explain_free(&ex);
	free(top);
	return rc;
}

/* Logits of model m on samples idx[0..n) into lg, then each through the
 * model's own calibration into p (when p). */
static int fold_logits(float *lg, double *p, const omen_model *m, const omen_dataset *ds,
	const size_t *idx, size_t n, int threads)
{
	size_t i;
	int rc;
	if (n && (rc = omen_model_logits(lg, m, ds, idx, n, threads)) < 0)
		return rc;
	for (i = 0; p && i < n; i++)
		p[i] = omen_model_calibrated(m, lg[i]);
	return 0;
}

/* The base model alone on fold k (issue 11): its weights and calibration
 * as they come, with the standardization fitted on the fold's training
 * split (the one rule, DEVELOPERS.md "Base model"). AUC and AP read its
 * own probabilities; Brier and ECE read them recalibrated by a Platt
 * scaling fitted on the fold's validation slice (labels as known at the
 * cut), as a team would calibrate it before use. Threshold: max F1 on
 * that slice, as for the baselines. */
static int run_pretrained(omen_eval_result *r, size_t k, const omen_dataset *ds,
	const omen_eval_opts *o)
{
	omen_fold_result *f = &r->folds[k];
	omen_model *m = NULL;
	size_t i, nv = f->fold.n_valid, nt = f->fold.n_test, c = (nv > nt ? nv : nt) + 1;
	float *lg = malloc(c * sizeof(*lg));
	double *vs = malloc(c * sizeof(*vs)), *vl = malloc(c * sizeof(*vl)), a = 1, b = 0;
	int *vy = malloc(c * sizeof(*vy)), rc, own = 0;
	f->calib[OMEN_EV_PRETRAINED] = malloc(c * sizeof(double));
	if (!lg || !vs || !vl || !vy || !f->calib[OMEN_EV_PRETRAINED]) {
		rc = omen_error_set(OMEN_ENOMEM, "cannot evaluate fold %zu: out of memory", k + 1);
		goto out;
	}
	if ((rc = omen_model_base_on(&m, o->base, ds, f->fold.train_idx, f->fold.n_train)) < 0 ||
	    (rc = fold_logits(lg, vs, m, ds, f->fold.valid_idx, nv, o->train.threads)) < 0)
		goto out;
	for (i = 0; i < nv; i++) {
		vy[i] = f->fold.label_at_cut[f->fold.valid_idx[i]] > 0;
		vl[i] = lg[i];
	}
	if (omen_platt_fit(&a, &b, vl, vy, nv) < 0 || a <= 0) {
		own = 1;
		omen_error_clear();
		omen_buf_printf(&r->notes, "fold %zu: the base model could not be calibrated on the "
			"validation slice (%zu commits), so its Brier and ECE read its own calibration\n",
			k + 1, nv);
	}
	f->m[OMEN_EV_PRETRAINED].threshold = omen_best_f1_threshold(vs, vy, nv);
	f->m[OMEN_EV_PRETRAINED].has_cls = 1;
	if ((rc = fold_logits(lg, f->score[OMEN_EV_PRETRAINED], m, ds, f->fold.test_idx, nt,
		o->train.threads)) < 0)
		goto out;
	for (i = 0; i < nt; i++)
		f->calib[OMEN_EV_PRETRAINED][i] = own ? f->score[OMEN_EV_PRETRAINED][i] :
			omen_platt_apply(a, b, lg[i]);
out:
	if (rc < 0)
		rc = omen_error_wrap(rc, "fold %zu (the base model)", k + 1);
	omen_model_free(m);
	free(lg);
	free(vs);
	free(vl);
	free(vy);
	return rc;
}

/* Fine-tuned from the base model on fold k, as `train` does by default
 * (train.init): the same training split, validation and calibration as
 * the model from scratch. */
static int run_tuned(omen_eval_result *r, size_t k, const omen_dataset *ds,
	const omen_eval_opts *o)
{
	omen_fold_result *f = &r->folds[k];
	omen_model *m = NULL;
	omen_train_opts to = o->train;
	float *lg = malloc((f->fold.n_test + 1) * sizeof(*lg));
	int rc;
	if (!lg)
		return omen_error_set(OMEN_ENOMEM, "cannot evaluate fold %zu: out of memory", k + 1);
	to.labels = f->fold.label_at_cut;
	to.init = o->base;
	if ((rc = omen_model_train_subset(&m, ds, f->fold.train_idx, f->fold.n_train,
		f->fold.valid_idx, f->fold.n_valid, &to)) < 0) {
		rc = omen_error_wrap(rc, "fold %zu (fine-tuning on %zu commits)", k + 1, f->fold.n_train);
		goto out;
	}
	f->m[OMEN_EV_TUNED].threshold = omen_model_threshold(m);
	f->m[OMEN_EV_TUNED].has_cls = 1;
	if ((rc = fold_logits(lg, f->score[OMEN_EV_TUNED], m, ds, f->fold.test_idx,
		f->fold.n_test, o->train.threads)) < 0)
		rc = omen_error_wrap(rc, "fold %zu: cannot score the test commits", k + 1);
out:
	omen_model_free(m);
	free(lg);
	return rc;
}

static int run_fold(omen_eval_result *r, size_t k, const omen_dataset *ds,
	const omen_eval_opts *o, const char *const *pat, size_t npat, size_t *risky_cap)
{
	omen_fold_result *f = &r->folds[k];
	omen_model *m = NULL;
	omen_train_opts to = o->train;
	double *vs = NULL, t0 = omen_now(), base;
	float *logits = NULL;
	int *vy = NULL, rc = 0;
	size_t i, nv = f->fold.n_valid, nt = f->fold.n_test, partial = 0;
	if (o->progress)
		o->progress(o->payload, k, r->nfolds, 0, 0);
	/* training, validation, calibration and thresholds: the labels as
	 * known at the fold's cut; the test window below: as known now */
	to.labels = f->fold.label_at_cut;
	if ((rc = omen_model_train_subset(&m, ds, f->fold.train_idx, f->fold.n_train,
		f->fold.valid_idx, f->fold.n_valid, &to)) < 0) {
		rc = omen_error_wrap(rc, "fold %zu (training on %zu commits)", k + 1, f->fold.n_train);
		goto out;
	}
	base = f->fold.n_train + nv ? (double)(f->fold.pos_train + f->fold.pos_valid) /
		(double)(f->fold.n_train + nv) : 0;
	f->base_rate = base;
	/* thresholds: the model's own; for the baselines max F1 on validation */
	f->m[OMEN_EV_MODEL].threshold = omen_model_threshold(m);
	f->m[OMEN_EV_MODEL].has_cls = 1;
	vs = malloc((nv ? nv : 1) * sizeof(*vs));
	vy = malloc((nv ? nv : 1) * sizeof(*vy));
	if (!vs || !vy) {
		rc = omen_error_set(OMEN_ENOMEM, "cannot evaluate fold %zu: out of memory", k + 1);
		goto out;
	}
	for (i = 0; i < nv; i++) {
		const omen_sample *s = omen_dataset_get(ds, f->fold.valid_idx[i]);
		vy[i] = f->fold.label_at_cut[f->fold.valid_idx[i]] > 0;
		vs[i] = omen_model_predict_lr(m, s);
		if (isnan(vs[i]))
			vs[i] = base;
	}
	f->m[OMEN_EV_LR].threshold = omen_best_f1_threshold(vs, vy, nv);
	f->m[OMEN_EV_LR].has_cls = 1;
	for (i = 0; i < nv; i++)
		vs[i] = (double)omen_dataset_get(ds, f->fold.valid_idx[i])->la;
	f->m[OMEN_EV_LA].threshold = omen_best_f1_threshold(vs, vy, nv);
	f->m[OMEN_EV_LA].has_cls = 1;
	f->m[OMEN_EV_BASE].threshold = base;   /* flags every commit: the "inspect all" reference */
	f->m[OMEN_EV_BASE].has_cls = 1;
	f->m[OMEN_EV_DENSITY].has_cls = 0;
	f->m[OMEN_EV_SMALL].has_cls = 0;

	if ((rc = omen_eval_fold_alloc(f, nt)) < 0)
		goto out;
	/* the test slice in batches over the training threads */
	logits = malloc((nt ? nt : 1) * sizeof(*logits));
	if (!logits) {
		rc = omen_error_set(OMEN_ENOMEM, "cannot evaluate fold %zu: out of memory", k + 1);
		goto out;
	}
	if ((rc = omen_model_logits(logits, m, ds, f->fold.test_idx, nt, o->train.threads)) < 0) {
		rc = omen_error_wrap(rc, "fold %zu: cannot score the test commits", k + 1);
		goto out;
	}
	for (i = 0; i < nt; i++) {
		const omen_sample *s = omen_dataset_get(ds, f->fold.test_idx[i]);
		float prob = omen_model_calibrated(m, logits[i]), lr = omen_model_predict_lr(m, s);
		int part = 0, excl = 0;
		f->y[i] = s->label > 0;
		f->effort[i] = omen_sample_effort(s, pat, npat, &part, &excl);
		f->time[i] = s->time;
		memcpy(f->ids[i], s->id, sizeof(f->ids[i]));
		f->ids[i][40] = '\0';
		f->score[OMEN_EV_MODEL][i] = prob;
		f->score[OMEN_EV_LR][i] = isnan(lr) ? base : lr;
		f->score[OMEN_EV_LA][i] = (double)s->la;
		/* risk per line to review: the effort-aware ranking of a classifier
		 * (Mende & Koschke, CSMR 2010; Kamei et al., TSE 2013, section 5) */
		f->score[OMEN_EV_DENSITY][i] = prob / (f->effort[i] > 1 ? f->effort[i] : 1);
		f->score[OMEN_EV_SMALL][i] = -f->effort[i];
		f->score[OMEN_EV_BASE][i] = base;
		f->n_excluded_effort += excl != 0;
		partial += part != 0;
	}
	if (o->base && ((rc = run_pretrained(r, k, ds, o)) < 0 || (rc = run_tuned(r, k, ds, o)) < 0))
		goto out;
	if (partial)
		omen_buf_printf(&r->notes, "fold %zu: %zu test commits were capped and touch excluded "
			"paths, so their effort may include some excluded lines\n", k + 1, partial);
	/* the fold's riskiest commits, explained while its model is at hand */
	if (o->top_risky > 0 && nt > 0 && (rc = explain_riskiest(r, k, ds, m, (size_t)o->top_risky, risky_cap)) < 0)
		goto out;
	f->seconds = omen_now() - t0;
	if (o->progress)
		o->progress(o->payload, k, r->nfolds, 1, f->seconds);
out:
	omen_model_free(m);
	free(vs);
	free(vy);
	free(logits);
	return rc;
}

int omen_label_clock_load(omen_label_clock *out, const omen_dataset *ds, const char *labels_path)
{
	omen_labels *l = NULL;
	size_t n = omen_dataset_size(ds), i;
	int rc;
	memset(out, 0, sizeof(*out));
	if (labels_path && (rc = omen_labels_load(&l, labels_path)) < 0)
		return rc;
	if ((rc = omen_label_clock_alloc(out, n)) < 0) {
		omen_labels_free(l);
		return rc;
	}
	if (l)
		omen_labels_rule(l, &out->window_days, &out->horizon_days);
	for (i = 0; i < n; i++) {
		const omen_sample *s = omen_dataset_get(ds, i);
		const omen_label_rec *rec = l ? omen_labels_get(l, s->id) : NULL;
		uint32_t j;
		out->time[i] = s->time;
		out->label[i] = (int8_t)(s->label < 0 ? -1 : s->label > 0);
		out->first_fix[i] = !l && s->label > 0 ? INT64_MIN : INT64_MAX;
		if (!rec)
			continue;
		/* the earliest listed fix (every fix that traced to the commit,
		 * up to the 64 a record lists) */
		for (j = 0; j < rec->nfixes; j++) {
			const omen_label_rec *fx = omen_labels_get(l, rec->fixes[j]);
			if (fx && fx->time < out->first_fix[i])
				out->first_fix[i] = fx->time;
		}
	}
	omen_labels_free(l);
	return 0;
}

static int run_one(omen_eval_result *out, const omen_dataset *ds, const omen_eval_opts *o)
{
	omen_fold_opts fo;
	omen_label_clock clock;
	omen_eval_opts def;
	omen_fold *folds = NULL;
	size_t nf = 0, n = omen_dataset_size(ds), i, k, npat = 0, risky_cap = 0;
	int64_t *t = NULL;
	int8_t *y = NULL;
	const char *const *pat;
	double t0 = omen_now();
	int rc = 0;
	memset(out, 0, sizeof(*out));
	memset(&clock, 0, sizeof(clock));
	if (!o) {
		omen_eval_opts_init(&def);
		o = &def;
	}
	pat = o->effort_exclude ? o->effort_exclude : omen_effort_exclude_default;
	if (o->effort_exclude)
		npat = o->n_effort_exclude;
	else
		while (pat[npat])
			npat++;
	t = malloc((n ? n : 1) * sizeof(*t));
	y = malloc(n ? n : 1);
	if (!t || !y) {
		rc = omen_error_set(OMEN_ENOMEM, "cannot evaluate %zu commits: out of memory", n);
		goto out;
	}
	for (i = 0; i < n; i++) {
		const omen_sample *s = omen_dataset_get(ds, i);
		t[i] = s->time;
		y[i] = s->label;
	}
	fo = o->folds;
	if (!fo.clock) {
		if ((rc = omen_label_clock_load(&clock, ds, o->labels_path)) < 0)
			goto out;
		fo.clock = &clock;
	}
	if ((rc = omen_folds_build(&folds, &nf, t, y, n, &fo)) < 0)
		goto out;
	if ((rc = omen_eval_result_init(out, nf)) < 0)
		goto out;
	out->bootstrap = o->bootstrap;
	out->seed = o->seed;
	out->gap_days = nf ? (folds[0].test_start - folds[0].train_end) / 86400 : o->folds.gap_days;
	out->fold_days = nf ? (folds[0].test_end - folds[0].test_start) / 86400 : 0;
	out->n_commits = n;
	out->has_base = o->base != NULL;
	if (o->base_path)
		snprintf(out->base_path, sizeof(out->base_path), "%s", o->base_path);
	for (i = 0; i < n; i++)
		out->n_labelled += y[i] >= 0;
	for (k = 0; k < nf; k++) {
		out->folds[k].fold = folds[k];   /* the result owns the index arrays now */
		memset(&folds[k], 0, sizeof(folds[k]));
	}
	for (k = 0; k < nf; k++)
		if ((rc = run_fold(out, k, ds, o, pat, npat, &risky_cap)) < 0)
			goto out;
	if ((rc = omen_eval_finish(out)) < 0)
		goto out;
	if (out->nrisky) {
		qsort(out->risky, out->nrisky, sizeof(*out->risky), cmp_risky);
		if (out->nrisky > (size_t)o->top_risky)
			out->nrisky = (size_t)o->top_risky;
	}
	out->seconds = omen_now() - t0;
out:
	omen_folds_free(folds, nf);
	omen_label_clock_free(&clock);
	free(t);
	free(y);
	return rc;
}

int omen_eval_run(omen_eval_result *out, const omen_dataset *ds, const omen_eval_opts *o)
{
	omen_eval_opts def, so;
	omen_method_scores (*pooled)[OMEN_EV_NMETHODS] = NULL;
	omen_eval_result extra;
	int rc, k, n;
	if (!o) {
		omen_eval_opts_init(&def);
		o = &def;
	}
	n = o->seeds > 1 ? o->seeds : 1;
	if ((rc = run_one(out, ds, o)) < 0 || n == 1)
		return rc;
	pooled = calloc((size_t)n, sizeof(*pooled));
	if (!pooled)
		return omen_error_set(OMEN_ENOMEM, "cannot evaluate over %d seeds: out of memory", n);
	memcpy(pooled[0], out->pooled, sizeof(pooled[0]));
	/* the same folds and settings; only the training seed (weights,
	 * dropout, batch order) and the bootstrap seed move */
	for (k = 1; k < n; k++) {
		so = *o;
		so.seeds = 1;
		so.seed = o->seed + (uint64_t)k;
		so.train.seed = o->train.seed + (uint64_t)k;
		so.top_risky = 0;
		rc = run_one(&extra, ds, &so);
		if (rc == 0)
			memcpy(pooled[k], extra.pooled, sizeof(pooled[k]));
		omen_eval_result_free(&extra);
		if (rc < 0) {
			rc = omen_error_wrap(rc, "seed %llu", (unsigned long long)so.train.seed);
			goto out;
		}
	}
	omen_seed_summarize(&out->seeds, (const omen_method_scores (*)[OMEN_EV_NMETHODS])pooled, n);
	out->seeds.first = o->train.seed;
out:
	free(pooled);
	return rc;
}
