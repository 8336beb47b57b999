/* Walk-forward folds: a pure function over (time, label) so that the fold
 * logic is tested without a model. Test windows tile the newest part of
 * the labelled history; each fold trains on every labelled commit older
 * than its test window minus a gap. The gap equals the verification window
 * (DEVELOPERS.md "Labeller", Run): a commit younger than that at the cut would
 * still be "unknown" to someone standing at the cut, so its label must not
 * be used for training (common practice in time-aware evaluation, e.g.
 * Tan, Tan, Dara & Mayeux, ICSE 2015, "online change classification").
 * The training rows are also labelled as they were known at the fold's
 * test start (omen_label_at, issue 16): a commit fixed only after it was
 * clean then, and stays in as clean. So no label, and no choice of rows,
 * depends on a fix made after the cut. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include "omen/eval.h"
#include "omen/label.h"
#include "omen/error.h"

#define DAY 86400

void omen_fold_opts_init(omen_fold_opts *o)
{
	memset(o, 0, sizeof(*o));
	o->folds = 5;
	o->fold_days = 0;
	o->gap_days = -1;
	o->min_train = 100;
	o->valid_frac = 0.15;
}

void omen_folds_free(omen_fold *f, size_t n)
{
	size_t i;
	if (!f)
		return;
	for (i = 0; i < n; i++) {
		free(f[i].train_idx);
		free(f[i].valid_idx);
		free(f[i].test_idx);
		free(f[i].label_at_cut);
	}
	free(f);
}


/* What every fold shares: the labelled commits and every commit in time
 * order, the clock, the test span, the window and the gap. */
typedef struct {
	const int64_t *time;
	const int8_t *label;
	size_t n, nl, K;
	const omen_label_clock *clk;
	omen_time_key *lab, *order;   /* labelled commits, every commit: by time */
	int64_t tmin, tmax, W, gap;
} fold_plan;

static int oom(void)
{
	return omen_error_set(OMEN_ENOMEM, "cannot build folds: out of memory");
}

/* The labelled commits and every commit in time order, and the span the
 * test windows tile. */
static int plan_span(fold_plan *p, const omen_fold_opts *o)
{
	size_t i, n = p->n;
	p->lab = malloc((n ? n : 1) * sizeof(*p->lab));
	p->order = malloc((n ? n : 1) * sizeof(*p->order));
	if (!p->lab || !p->order)
		return oom();
	for (i = 0; i < n; i++)
		if (p->label[i] >= 0) {
			p->lab[p->nl].t = p->time[i];
			p->lab[p->nl++].i = i;
		}
	if (p->nl == 0)
		return omen_error_set(OMEN_EINVAL, "no labelled commits among the %zu commits: "
			"run 'git omen label' first", n);
	qsort(p->lab, p->nl, sizeof(*p->lab), omen_cmp_time_key);
	/* every commit in time order: a commit unknown now is unknown at every
	 * cut, but the training rows come from the clock, not from lab */
	for (i = 0; i < n; i++) {
		p->order[i].t = p->time[i];
		p->order[i].i = i;
	}
	qsort(p->order, n, sizeof(*p->order), omen_cmp_time_key);
	/* Inside the verification window only inducing commits get a label
	 * (a clean one is still "unknown"), so a test window there would hold
	 * almost nothing but positives. Test windows end at the newest clean
	 * commit; labelled commits after it are left out. */
	for (i = p->nl; i > 0; i--)
		if (p->label[p->lab[i - 1].i] == 0)
			break;
	if (i > 0 && i < p->nl && !o->test_end)
		p->nl = i;
	p->tmin = p->lab[0].t;
	p->tmax = o->test_end ? o->test_end - 1 : p->lab[p->nl - 1].t;
	if (p->tmax < p->tmin)
		return omen_error_set(OMEN_EINVAL, "cannot build folds: the test end is older than "
			"every labelled commit");
	if (o->fold_days > 0) {
		p->W = o->fold_days * DAY;
	} else {
		p->W = (int64_t)floor((double)(p->tmax - p->tmin) * 0.5 / (double)p->K / DAY) * DAY;
		if (p->W < 7 * DAY)
			p->W = 7 * DAY;
	}
	return 0;
}

/* The first fold's training slice is too small (or has no inducing commit). */
static int too_short(const fold_plan *p, const omen_fold *fk, size_t ntr, const omen_fold_opts *o)
{
	char a[16], b[16], c[16];
	omen_format_date(a, fk->train_end);
	if (ntr >= (o->min_train ? o->min_train : 1))
		return omen_error_set(OMEN_EINVAL, "no inducing commit among the %zu labelled "
			"commits before %s that the first fold would train on; use fewer --folds "
			"or a smaller --fold-days", ntr, a);
	omen_format_date(b, p->tmin);
	omen_format_date(c, p->tmax);
	return omen_error_set(OMEN_EINVAL, "history too short for %zu folds of %lld days "
		"with a %lld-day gap: the first fold would train on the %zu labelled "
		"commits before %s, %zu are needed (labelled history: %zu commits over "
		"%lld days, %s to %s); use fewer --folds or a smaller --fold-days",
		p->K, (long long)(p->W / DAY), (long long)(p->gap / DAY), ntr, a,
		o->min_train ? o->min_train : (size_t)1, p->nl,
		(long long)((p->tmax - p->tmin) / DAY), b, c);
}

/* Fold k: its window, its labels as known at its cut, and its training,
 * validation and test slices. */
static int fold_fill(omen_fold *fk, size_t k, const fold_plan *p, const omen_fold_opts *o)
{
	size_t ntr = 0, nte = 0, nv, j, n = p->n;
	fk->test_start = p->tmax + 1 - (int64_t)(p->K - k) * p->W;
	fk->test_end = fk->test_start + p->W;
	fk->train_end = fk->test_start - p->gap;
	fk->labels_known = fk->test_start;
	if (!(fk->label_at_cut = malloc(n ? n : 1)))
		return oom();
	omen_label_clock_at(fk->label_at_cut, p->clk, fk->test_start);
	/* training: every commit before the gap, labelled as known at the
	 * cut (the clock's own order, whatever labels came later) */
	for (j = 0; j < n; j++)
		if (p->time[j] < fk->train_end && fk->label_at_cut[j] >= 0)
			ntr++;
	for (j = 0; j < p->nl; j++)
		if (p->lab[j].t >= fk->test_start && p->lab[j].t < fk->test_end)
			nte++;
	if (k == 0 && ntr < (o->min_train ? o->min_train : 1))
		return too_short(p, fk, ntr, o);
	nv = (size_t)ceil((double)ntr * o->valid_frac);
	if (o->valid_frac > 0 && nv < 1 && ntr >= 2)
		nv = 1;
	if (nv >= ntr)
		nv = ntr > 1 ? ntr / 2 : 0;
	fk->train_idx = malloc((ntr - nv ? ntr - nv : 1) * sizeof(size_t));
	fk->valid_idx = malloc((nv ? nv : 1) * sizeof(size_t));
	fk->test_idx = malloc((nte ? nte : 1) * sizeof(size_t));
	if (!fk->train_idx || !fk->valid_idx || !fk->test_idx)
		return oom();
	for (j = 0; j < n; j++) {
		size_t id = p->order[j].i;
		int pos = fk->label_at_cut[id] > 0;
		if (p->order[j].t >= fk->train_end || fk->label_at_cut[id] < 0)
			continue;
		fk->n_late += p->label[id] > 0 && !pos;
		if (fk->n_train < ntr - nv) {
			fk->train_idx[fk->n_train++] = id;
			fk->pos_train += pos;
		} else {
			fk->valid_idx[fk->n_valid++] = id;
			fk->pos_valid += pos;
		}
	}
	for (j = 0; j < p->nl; j++) {
		size_t id = p->lab[j].i;
		if (p->lab[j].t >= fk->test_start && p->lab[j].t < fk->test_end) {
			fk->test_idx[fk->n_test++] = id;
			fk->pos_test += p->label[id] > 0;
		}
	}
	if (k == 0 && fk->pos_train + fk->pos_valid == 0)
		return too_short(p, fk, ntr, o);
	return 0;
}

int omen_folds_build(omen_fold **out, size_t *out_n, const int64_t *time,
	const int8_t *label, size_t n, const omen_fold_opts *o)
{
	omen_fold_opts def;
	omen_label_clock own;
	omen_fold *f = NULL;
	fold_plan p;
	size_t k;
	int rc = 0;
	*out = NULL;
	*out_n = 0;
	if (!o) {
		omen_fold_opts_init(&def);
		o = &def;
	}
	memset(&own, 0, sizeof(own));
	memset(&p, 0, sizeof(p));
	if (o->folds < 1 || o->fold_days < 0 || o->gap_days < -1 || o->valid_frac < 0 ||
	    o->valid_frac >= 1)
		return omen_error_set(OMEN_EINVAL, "bad fold settings: %d folds of %lld days",
			o->folds, (long long)o->fold_days);
	if (o->clock && o->clock->n != n)
		return omen_error_set(OMEN_EINVAL, "cannot build folds: the label clock covers %zu "
			"commits, not %zu", o->clock->n, n);
	p.time = time;
	p.label = label;
	p.n = n;
	p.K = (size_t)o->folds;
	if (o->clock) {
		p.clk = o->clock;
	} else {
		/* no fix times: every label counts as known at every time */
		if ((rc = omen_label_clock_known(&own, time, label, n)) < 0)
			return rc;
		p.clk = &own;
	}
	p.gap = (o->gap_days < 0 ? omen_label_clock_window(p.clk) : o->gap_days) * DAY;
	if ((rc = plan_span(&p, o)) < 0)
		goto out;
	if (!(f = calloc(p.K, sizeof(*f)))) {
		rc = oom();
		goto out;
	}
	for (k = 0; k < p.K; k++)
		if ((rc = fold_fill(&f[k], k, &p, o)) < 0)
			goto out;
	*out = f;
	*out_n = p.K;
	f = NULL;
out:
	omen_folds_free(f, p.K);
	omen_label_clock_free(&own);
	free(p.lab);
	free(p.order);
	return rc;
}
