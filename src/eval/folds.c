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

typedef struct {
	int64_t t;
	size_t i;
} tkey;

static int cmp_tkey(const void *a, const void *b)
{
	const tkey *x = a, *y = b;
	if (x->t != y->t)
		return x->t < y->t ? -1 : 1;
	return (x->i > y->i) - (x->i < y->i);
}


int omen_folds_build(omen_fold **out, size_t *out_n, const int64_t *time,
	const int8_t *label, size_t n, const omen_fold_opts *o)
{
	omen_fold_opts def;
	omen_label_clock own;
	const omen_label_clock *clk;
	omen_fold *f = NULL;
	tkey *lab = NULL, *order = NULL;
	size_t nl = 0, i, k, K;
	int64_t tmin, tmax, W, gap;
	int rc = 0;
	*out = NULL;
	*out_n = 0;
	if (!o) {
		omen_fold_opts_init(&def);
		o = &def;
	}
	memset(&own, 0, sizeof(own));
	if (o->folds < 1 || o->fold_days < 0 || o->gap_days < -1 || o->valid_frac < 0 ||
	    o->valid_frac >= 1)
		return omen_error_set(OMEN_EINVAL, "bad fold settings: %d folds of %lld days",
			o->folds, (long long)o->fold_days);
	if (o->clock && o->clock->n != n)
		return omen_error_set(OMEN_EINVAL, "cannot build folds: the label clock covers %zu "
			"commits, not %zu", o->clock->n, n);
	K = (size_t)o->folds;
	if (o->clock) {
		clk = o->clock;
	} else {
		/* no fix times: every label counts as known at every time */
		if ((rc = omen_label_clock_known(&own, time, label, n)) < 0)
			return rc;
		clk = &own;
	}
	gap = (o->gap_days < 0 ? omen_label_clock_window(clk) : o->gap_days) * DAY;
	lab = malloc((n ? n : 1) * sizeof(*lab));
	if (!lab) {
		omen_label_clock_free(&own);
		return omen_error_set(OMEN_ENOMEM, "cannot build folds: out of memory");
	}
	for (i = 0; i < n; i++)
		if (label[i] >= 0) {
			lab[nl].t = time[i];
			lab[nl++].i = i;
		}
	if (nl == 0) {
		rc = omen_error_set(OMEN_EINVAL, "no labelled commits among the %zu commits: "
			"run 'git omen label' first", n);
		goto out;
	}
	qsort(lab, nl, sizeof(*lab), cmp_tkey);
	/* every commit in time order: a commit unknown now is unknown at every
	 * cut, but the training rows come from the clock, not from lab */
	order = malloc((n ? n : 1) * sizeof(*order));
	if (!order) {
		rc = omen_error_set(OMEN_ENOMEM, "cannot build folds: out of memory");
		goto out;
	}
	for (i = 0; i < n; i++) {
		order[i].t = time[i];
		order[i].i = i;
	}
	qsort(order, n, sizeof(*order), cmp_tkey);
	/* Inside the verification window only inducing commits get a label
	 * (a clean one is still "unknown"), so a test window there would hold
	 * almost nothing but positives. Test windows end at the newest clean
	 * commit; labelled commits after it are left out. */
	for (i = nl; i > 0; i--)
		if (label[lab[i - 1].i] == 0)
			break;
	if (i > 0 && i < nl && !o->test_end)
		nl = i;
	tmin = lab[0].t;
	tmax = o->test_end ? o->test_end - 1 : lab[nl - 1].t;
	if (tmax < tmin) {
		rc = omen_error_set(OMEN_EINVAL, "cannot build folds: the test end is older than "
			"every labelled commit");
		goto out;
	}
	if (o->fold_days > 0) {
		W = o->fold_days * DAY;
	} else {
		W = (int64_t)floor((double)(tmax - tmin) * 0.5 / (double)K / DAY) * DAY;
		if (W < 7 * DAY)
			W = 7 * DAY;
	}
	f = calloc(K, sizeof(*f));
	if (!f) {
		rc = omen_error_set(OMEN_ENOMEM, "cannot build folds: out of memory");
		goto out;
	}
	for (k = 0; k < K; k++) {
		omen_fold *fk = &f[k];
		size_t ntr = 0, nte = 0, nv, j;
		fk->test_start = tmax + 1 - (int64_t)(K - k) * W;
		fk->test_end = fk->test_start + W;
		fk->train_end = fk->test_start - gap;
		fk->labels_known = fk->test_start;
		fk->label_at_cut = malloc(n ? n : 1);
		if (!fk->label_at_cut) {
			rc = omen_error_set(OMEN_ENOMEM, "cannot build folds: out of memory");
			goto out;
		}
		omen_label_clock_at(fk->label_at_cut, clk, fk->test_start);
		/* training: every commit before the gap, labelled as known at the
		 * cut (the clock's own order, whatever labels came later) */
		for (j = 0; j < n; j++)
			if (time[j] < fk->train_end && fk->label_at_cut[j] >= 0)
				ntr++;
		for (j = 0; j < nl; j++)
			if (lab[j].t >= fk->test_start && lab[j].t < fk->test_end)
				nte++;
		if (k == 0 && ntr < (o->min_train ? o->min_train : 1)) {
			char a[16], b[16], c[16];
			omen_format_date(a, fk->train_end);
			omen_format_date(b, tmin);
			omen_format_date(c, tmax);
			rc = omen_error_set(OMEN_EINVAL, "history too short for %zu folds of %lld days "
				"with a %lld-day gap: the first fold would train on the %zu labelled "
				"commits before %s, %zu are needed (labelled history: %zu commits over "
				"%lld days, %s to %s); use fewer --folds or a smaller --fold-days",
				K, (long long)(W / DAY), (long long)(gap / DAY), ntr, a,
				o->min_train ? o->min_train : (size_t)1, nl,
				(long long)((tmax - tmin) / DAY), b, c);
			goto out;
		}
		nv = (size_t)ceil((double)ntr * o->valid_frac);
		if (o->valid_frac > 0 && nv < 1 && ntr >= 2)
			nv = 1;
		if (nv >= ntr)
			nv = ntr > 1 ? ntr / 2 : 0;
		fk->train_idx = malloc((ntr - nv ? ntr - nv : 1) * sizeof(size_t));
		fk->valid_idx = malloc((nv ? nv : 1) * sizeof(size_t));
		fk->test_idx = malloc((nte ? nte : 1) * sizeof(size_t));
		if (!fk->train_idx || !fk->valid_idx || !fk->test_idx) {
			rc = omen_error_set(OMEN_ENOMEM, "cannot build folds: out of memory");
			goto out;
		}
		for (j = 0; j < n; j++) {
			size_t id = order[j].i;
			int pos = fk->label_at_cut[id] > 0;
			if (order[j].t >= fk->train_end || fk->label_at_cut[id] < 0)
				continue;
			fk->n_late += label[id] > 0 && !pos;
			if (fk->n_train < ntr - nv) {
				fk->train_idx[fk->n_train++] = id;
				fk->pos_train += pos;
			} else {
				fk->valid_idx[fk->n_valid++] = id;
				fk->pos_valid += pos;
			}
		}
		for (j = 0; j < nl; j++) {
			size_t id = lab[j].i;
			if (lab[j].t >= fk->test_start && lab[j].t < fk->test_end) {
				fk->test_idx[fk->n_test++] = id;
				fk->pos_test += label[id] > 0;
			}
		}
		if (k == 0 && fk->pos_train + fk->pos_valid == 0) {
			char a[16];
			omen_format_date(a, fk->train_end);
			rc = omen_error_set(OMEN_EINVAL, "no inducing commit among the %zu labelled "
				"commits before %s that the first fold would train on; use fewer --folds "
				"or a smaller --fold-days", ntr, a);
			goto out;
		}
	}
	*out = f;
	*out_n = K;
	f = NULL;
out:
	omen_folds_free(f, K);
	omen_label_clock_free(&own);
	free(lab);
	free(order);
	return rc;
}
