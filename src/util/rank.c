/* Ranking and calibration metrics on (score, label) arrays.
 *
 * References for each definition:
 * - AUC: the Mann-Whitney statistic, ties counted 1/2 (Hanley & McNeil,
 *   Radiology 1982); equals scikit-learn's roc_auc_score.
 * - Average precision: scikit-learn's average_precision_score, the step-wise
 *   sum over distinct thresholds of (R_k - R_{k-1}) * P_k, no interpolation.
 * - Brier score: Brier, Monthly Weather Review 1950 (mean squared error of
 *   the probability), as scikit-learn's brier_score_loss.
 * - ECE: sum over equal-width bins of (n_b / n) * |mean prediction - positive
 *   rate| (Naeini, Cooper & Hauskrecht, AAAI 2015), bins as scikit-learn's
 *   calibration_curve(strategy="uniform").
 * - MCC: Matthews 1975; 0 when a margin is empty (scikit-learn's convention).
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "omen/rank.h"
#include "omen/util.h"
#include "omen/error.h"

/* ---- sorting --------------------------------------------------------------- */
typedef struct {
	double s;
	size_t i;
} scored;

static int cmp_scored(const void *a, const void *b)
{
	const scored *x = a, *y = b;
	if (x->s < y->s)
		return -1;
	if (x->s > y->s)
		return 1;
	return (x->i > y->i) - (x->i < y->i);
}

int omen_sort_scores(size_t **out, const double *score, size_t n)
{
	scored *tmp = NULL;
	size_t *ord = NULL, i;
	int rc = 0;
	*out = NULL;
	tmp = malloc((n ? n : 1) * sizeof(*tmp));
	ord = malloc((n ? n : 1) * sizeof(*ord));
	if (!tmp || !ord) {
		rc = omen_error_set(OMEN_ENOMEM, "cannot sort %zu scores: out of memory", n);
		goto out;
	}
	for (i = 0; i < n; i++) {
		tmp[i].s = score[i];
		tmp[i].i = i;
	}
	qsort(tmp, n, sizeof(*tmp), cmp_scored);
	for (i = 0; i < n; i++)
		ord[i] = tmp[i].i;
	*out = ord;
	ord = NULL;
out:
	free(tmp);
	free(ord);
	return rc;
}

/* ---- AUC ----------------------------------------------------------------- */
double omen_auc_weighted(const double *score, const int *y, const double *w,
	const size_t *order, size_t n)
{
	/* Walk groups of equal score from the lowest: every positive in a group
	 * beats the negatives below it and ties (1/2) the negatives in it. */
	double neg_below = 0, pos_tot = 0, neg_tot = 0, sum = 0;
	size_t a = 0, b;
	while (a < n) {
		double gp = 0, gn = 0;
		b = a;
		while (b < n && score[order[b]] == score[order[a]]) {
			double wi = w ? w[order[b]] : 1.0;
			if (y[order[b]])
				gp += wi;
			else
				gn += wi;
			b++;
		}
		sum += gp * (neg_below + 0.5 * gn);
		neg_below += gn;
		pos_tot += gp;
		neg_tot += gn;
		a = b;
	}
	if (pos_tot <= 0 || neg_tot <= 0)
		return NAN;
	return sum / (pos_tot * neg_tot);
}

double omen_auc(const double *score, const int *y, size_t n)
{
	size_t *ord;
	double r;
	if (omen_sort_scores(&ord, score, n) < 0)
		return NAN;
	r = omen_auc_weighted(score, y, NULL, ord, n);
	free(ord);
	return r;
}

int omen_cmp_double(const void *a, const void *b)
{
	double x = *(const double *)a, y = *(const double *)b;
	return (x > y) - (x < y);
}

double omen_quantile_sorted(const double *v, size_t n, double q)
{
	double pos, f;
	size_t lo;
	if (!n)
		return 0;
	pos = q * (double)(n - 1);
	f = floor(pos);
	lo = (size_t)f;
	if (lo + 1 >= n)
		return v[n - 1];
	return v[lo] + (pos - f) * (v[lo + 1] - v[lo]);
}

int omen_auc_bootstrap(double *out_lo, double *out_hi, const double *score,
	const int *y, size_t n, int resamples, uint64_t seed)
{
	/* Cases are put in score order once, with the end of each group of tied
	 * scores, so that every resample is one sequential pass over counts. */
	size_t *ord = NULL, *gend = NULL, i, got = 0, ng = 0;
	uint32_t *cnt = NULL;
	unsigned char *ys = NULL;
	double *aucs = NULL;
	omen_rng rng;
	int k, rc = 0;
	*out_lo = *out_hi = NAN;
	if (n == 0 || resamples <= 0)
		return 0;
	if ((rc = omen_sort_scores(&ord, score, n)) < 0)
		goto out;
	if (isnan(omen_auc_weighted(score, y, NULL, ord, n)))
		goto out;
	cnt = malloc(n * sizeof(*cnt));
	ys = malloc(n);
	gend = malloc(n * sizeof(*gend));
	aucs = malloc((size_t)resamples * sizeof(*aucs));
	if (!cnt || !ys || !gend || !aucs) {
		rc = omen_error_set(OMEN_ENOMEM, "cannot bootstrap the auc of %zu cases: out of memory", n);
		goto out;
	}
	for (i = 0; i < n; i++) {
		ys[i] = y[ord[i]] != 0;
		if (i + 1 == n || score[ord[i + 1]] != score[ord[i]])
			gend[ng++] = i + 1;
	}
	omen_rng_seed(&rng, seed);
	for (k = 0; k < resamples; k++) {
		double neg_below = 0, pt = 0, nt = 0, sum = 0;
		size_t g, a = 0;
		memset(cnt, 0, n * sizeof(*cnt));
		/* n draws with replacement, kept as multiplicities (Efron 1979) */
		for (i = 0; i < n; i++) {
			size_t j = (size_t)(omen_rng_uniform(&rng) * (double)n);
			cnt[j < n ? j : n - 1]++;
		}
		for (g = 0; g < ng; g++) {
			double gp = 0, gn = 0;
			for (; a < gend[g]; a++) {
				if (ys[a])
					gp += cnt[a];
				else
					gn += cnt[a];
			}
			sum += gp * (neg_below + 0.5 * gn);
			neg_below += gn;
			pt += gp;
			nt += gn;
		}
		if (pt > 0 && nt > 0)
			aucs[got++] = sum / (pt * nt);
	}
	if (got > 0) {
		qsort(aucs, got, sizeof(*aucs), omen_cmp_double);
		*out_lo = omen_quantile_sorted(aucs, got, 0.025);
		*out_hi = omen_quantile_sorted(aucs, got, 0.975);
	}
out:
	free(ord);
	free(cnt);
	free(ys);
	free(gend);
	free(aucs);
	return rc;
}

/* One step down the ascending order ord from a: counts the cases whose score
 * ties score[ord[a - 1]] into tp and fp and returns where the group starts. */
static size_t take_group(size_t *tp, size_t *fp, const double *score, const int *y,
	const size_t *ord, size_t a)
{
	size_t b = a;
	while (b > 0 && score[ord[b - 1]] == score[ord[a - 1]]) {
		if (y[ord[b - 1]])
			(*tp)++;
		else
			(*fp)++;
		b--;
	}
	return b;
}

/* ---- average precision ----------------------------------------------------- */
double omen_average_precision(const double *score, const int *y, size_t n)
{
	size_t *ord, a, b, P = 0, tp = 0, fp = 0, i;
	double ap = 0, prev_r = 0;
	for (i = 0; i < n; i++)
		P += y[i] != 0;
	if (P == 0)
		return NAN;
	if (omen_sort_scores(&ord, score, n) < 0)
		return NAN;
	/* from the highest score down, one step per distinct score */
	a = n;
	while (a > 0) {
		double r;
		b = take_group(&tp, &fp, score, y, ord, a);
		r = (double)tp / (double)P;
		ap += (r - prev_r) * ((double)tp / (double)(tp + fp));
		prev_r = r;
		a = b;
	}
	free(ord);
	return ap;
}

/* ---- calibration ------------------------------------------------------------ */
double omen_brier(const double *prob, const int *y, size_t n)
{
	double s = 0;
	size_t i;
	if (n == 0)
		return NAN;
	for (i = 0; i < n; i++) {
		double d = prob[i] - (y[i] ? 1.0 : 0.0);
		s += d * d;
	}
	return s / (double)n;
}

int omen_calib_bin(double p, int nbins)
{
	double step = 1.0 / nbins;
	int lo = 0, hi = nbins - 1;
	/* count inner edges j*step (j = 1..nbins-1) strictly below p */
	while (lo < hi) {
		int mid = (lo + hi) / 2;   /* edge index mid+1 */
		if ((double)(mid + 1) * step < p)
			lo = mid + 1;
		else
			hi = mid;
	}
	return lo;
}

double omen_ece(const double *prob, const int *y, size_t n, int nbins,
	size_t *bin_n, double *bin_pred, double *bin_true)
{
	size_t *cnt;
	double *sp, *st, ece = 0;
	size_t i;
	int b;
	if (nbins <= 0)
		return NAN;
	cnt = calloc((size_t)nbins, sizeof(*cnt));
	sp = calloc((size_t)nbins, sizeof(*sp));
	st = calloc((size_t)nbins, sizeof(*st));
	if (!cnt || !sp || !st) {
		free(cnt); free(sp); free(st);
		return NAN;
	}
	for (i = 0; i < n; i++) {
		b = omen_calib_bin(prob[i], nbins);
		cnt[b]++;
		sp[b] += prob[i];
		st[b] += y[i] ? 1.0 : 0.0;
	}
	for (b = 0; b < nbins; b++) {
		double mp = cnt[b] ? sp[b] / (double)cnt[b] : NAN;
		double mt = cnt[b] ? st[b] / (double)cnt[b] : NAN;
		if (cnt[b])
			ece += (double)cnt[b] / (double)n * fabs(mp - mt);
		if (bin_n)
			bin_n[b] = cnt[b];
		if (bin_pred)
			bin_pred[b] = mp;
		if (bin_true)
			bin_true[b] = mt;
	}
	free(cnt); free(sp); free(st);
	return n ? ece : NAN;
}

/* ---- classification at a threshold ---------------------------------------- */
omen_cls_scores omen_cls_from_counts(size_t tp, size_t fp, size_t tn, size_t fn)
{
	omen_cls_scores c;
	double den;
	c.tp = tp; c.fp = fp; c.tn = tn; c.fn = fn;
	c.precision = tp + fp ? (double)tp / (double)(tp + fp) : 0.0;
	c.recall = tp + fn ? (double)tp / (double)(tp + fn) : 0.0;
	c.f1 = 2 * tp + fp + fn ? 2.0 * (double)tp / (double)(2 * tp + fp + fn) : 0.0;
	den = sqrt((double)(tp + fp) * (double)(tp + fn) * (double)(tn + fp) * (double)(tn + fn));
	c.mcc = den > 0 ? ((double)tp * (double)tn - (double)fp * (double)fn) / den : 0.0;
	return c;
}

omen_cls_scores omen_classify_at(const double *prob, const int *y, size_t n, double t)
{
	size_t tp = 0, fp = 0, tn = 0, fn = 0, i;
	for (i = 0; i < n; i++) {
		int pred = prob[i] >= t;
		if (pred && y[i])
			tp++;
		else if (pred)
			fp++;
		else if (y[i])
			fn++;
		else
			tn++;
	}
	return omen_cls_from_counts(tp, fp, tn, fn);
}

double omen_best_f1_threshold(const double *score, const int *y, size_t n)
{
	size_t *ord, a, b, P = 0, tp = 0, fp = 0, i;
	double best_f1 = -1, best_t = 0.5;
	for (i = 0; i < n; i++)
		P += y[i] != 0;
	if (P == 0 || omen_sort_scores(&ord, score, n) < 0)
		return 0.5;
	a = n;
	while (a > 0) {
		double f1;
		b = take_group(&tp, &fp, score, y, ord, a);
		f1 = 2.0 * (double)tp / (double)(tp + fp + P);
		if (f1 > best_f1) {   /* strict: on ties the higher threshold stays */
			best_f1 = f1;
			best_t = score[ord[a - 1]];
		}
		a = b;
	}
	free(ord);
	return best_t;
}

/* ---- ROC curve -------------------------------------------------------------- */
size_t omen_roc_curve(double *out_fpr, double *out_tpr, const double *score,
	const int *y, size_t n)
{
	size_t *ord, a, b, P = 0, N = 0, tp = 0, fp = 0, k = 0, i;
	for (i = 0; i < n; i++) {
		if (y[i])
			P++;
		else
			N++;
	}
	if (P == 0 || N == 0 || omen_sort_scores(&ord, score, n) < 0)
		return 0;
	out_fpr[k] = 0;
	out_tpr[k++] = 0;
	a = n;
	while (a > 0) {
		b = take_group(&tp, &fp, score, y, ord, a);
		out_fpr[k] = (double)fp / (double)N;
		out_tpr[k++] = (double)tp / (double)P;
		a = b;
	}
	free(ord);
	return k;
}

/* ---- population stability index -------------------------------------------- */
double omen_psi(const double *expected, const double *actual, int k)
{
	double psi = 0;
	int i;
	for (i = 0; i < k; i++) {
		double e = expected[i] > 1e-4 ? expected[i] : 1e-4;
		double a = actual[i] > 1e-4 ? actual[i] : 1e-4;
		psi += (a - e) * log(a / e);
	}
	return psi;
}
