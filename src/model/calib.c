/* Platt scaling (Platt, "Probabilistic outputs for support vector
 * machines", 1999) with the smoothed targets and the stable Newton
 * iteration of Lin, Lin & Weng (Machine Learning 68, 2007), and the
 * threshold of maximal F1 on the validation slice. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/rank.h"
#include "omen/model.h"
#include "model/internal.h"

double omen_platt_apply(double a, double b, double f)
{
	return omen_sigmoid_d(a * f + b);
}

/* Minimises the cross-entropy of p = sigmoid(a f + b) against the smoothed
 * targets t+ = (N+ + 1)/(N+ + 2), t- = 1/(N- + 2). */
int omen_platt_fit(double *out_a, double *out_b, const double *f, const int *y, size_t n)
{
	double np = 0, nn = 0, tp, tn, a = 1, b, fval = 0;
	size_t i;
	int it;
	for (i = 0; i < n; i++) {
		if (y[i]) np++;
		else nn++;
	}
	*out_a = 1;
	*out_b = 0;
	if (np == 0 || nn == 0)
		return omen_error_set(OMEN_EINVAL, "cannot calibrate: %zu validation commits with %.0f positives",
			n, np);
	tp = (np + 1) / (np + 2);
	tn = 1 / (nn + 2);
	b = log((np + 1) / (nn + 1));
	for (i = 0; i < n; i++) {
		double t = y[i] ? tp : tn, z = a * f[i] + b;
		fval += omen_softplus_d(z) - t * z;
	}
	for (it = 0; it < 100; it++) {
		double h11 = 1e-12, h22 = 1e-12, h21 = 0, g1 = 0, g2 = 0, det, da, db, step = 1;
		for (i = 0; i < n; i++) {
			double t = y[i] ? tp : tn, z = a * f[i] + b;
			double p = omen_sigmoid_d(z);
			double w = p * (1 - p), d = p - t;
			h11 += f[i] * f[i] * w;
			h22 += w;
			h21 += f[i] * w;
			g1 += f[i] * d;
			g2 += d;
		}
		if (fabs(g1) < 1e-9 && fabs(g2) < 1e-9)
			break;
		det = h11 * h22 - h21 * h21;
		if (!(det > 0))
			break;
		da = -(h22 * g1 - h21 * g2) / det;
		db = -(-h21 * g1 + h11 * g2) / det;
		while (step >= 1e-10) {
			double na = a + step * da, nb = b + step * db, nf = 0;
			for (i = 0; i < n; i++) {
				double t = y[i] ? tp : tn, z = na * f[i] + nb;
				nf += omen_softplus_d(z) - t * z;
			}
			if (nf < fval + 1e-4 * step * (g1 * da + g2 * db)) {
				a = na; b = nb; fval = nf;
				break;
			}
			step /= 2;
		}
		if (step < 1e-10)
			break;
	}
	if (!isfinite(a) || !isfinite(b))
		return omen_error_set(OMEN_ERROR, "cannot calibrate: diverged");
	*out_a = a;
	*out_b = b;
	return 0;
}

/* Threshold t (predict positive when prob >= t) with the highest F1 over the
 * distinct predicted values; 0.5 when there are no positives. The sweep is
 * the evaluation's own. */
double omen_threshold_max_f1(const double *prob, const int *y, size_t n)
{
	return omen_best_f1_threshold(prob, y, n);
}

/* ---- warning budget (issue 12) ---------------------------------------------
 * The threshold is chosen by how often it should fire: for each share
 * s = k / OMEN_WARN_POINTS of the calibration slice, the probability of its
 * ceil(s n)-th riskiest commit, and the precision and recall there (ties
 * counted: every commit at or above the threshold fires). Stored with the
 * model, so the share (omen.warnShare) or a precision target
 * (omen.warnPrecision) can change without retraining. */
static int cmp_desc(const void *a, const void *b)
{
	double x = *(const double *)a, y = *(const double *)b;
	return x < y ? 1 : x > y ? -1 : 0;
}

int omen_warn_curve_build_on(omen_warn_curve *out, const double *fire, size_t nfire,
	const double *prob, const int *y, size_t n)
{
	double *s;
	size_t i, pos = 0;
	int k;
	memset(out, 0, sizeof(*out));
	if (!nfire || !n)
		return 0;
	if (!(s = malloc(nfire * sizeof(double))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	memcpy(s, fire, nfire * sizeof(double));
	for (i = 0; i < n; i++)
		pos += y[i] != 0;
	qsort(s, nfire, sizeof(double), cmp_desc);
	out->n_slice = n;
	out->n_fire = nfire;
	out->positives = pos;
	for (k = 0; k < OMEN_WARN_POINTS; k++) {
		size_t want = (size_t)ceil((double)(k + 1) * (double)nfire / OMEN_WARN_POINTS - 1e-9);
		size_t fired = 0, flagged = 0, tp = 0;
		double t;
		if (want < 1) want = 1;
		if (want > nfire) want = nfire;
		t = s[want - 1];
		for (i = 0; i < nfire; i++)
			fired += fire[i] >= t;
		for (i = 0; i < n; i++) {
			if (prob[i] >= t) {
				flagged++;
				tp += y[i] != 0;
			}
		}
		out->thr[k] = t;
		out->fired[k] = (double)fired / (double)nfire;
		out->precision[k] = flagged ? (double)tp / (double)flagged : 0;
		out->recall[k] = pos ? (double)tp / (double)pos : 0;
	}
	out->npoints = OMEN_WARN_POINTS;
	free(s);
	return 0;
}

int omen_warn_curve_build(omen_warn_curve *out, const double *prob, const int *y, size_t n)
{
	return omen_warn_curve_build_on(out, prob, n, prob, y, n);
}

/* The grid point of share s: the nearest k with (k + 1) / POINTS >= s. */
static int share_point(double share)
{
	int k = (int)ceil(share * OMEN_WARN_POINTS - 1e-9) - 1;
	if (k < 0) k = 0;
	if (k >= OMEN_WARN_POINTS) k = OMEN_WARN_POINTS - 1;
	return k;
}

int omen_warn_pick(omen_warn_choice *out, const omen_warn_curve *c, double share,
	double precision_target)
{
	int k, best = -1;
	memset(out, 0, sizeof(*out));
	if (!c->npoints)
		return omen_error_set(OMEN_ENOTFOUND, "the model has no warning curve");
	if (precision_target > 0) {
		if (!(precision_target < 1))
			return omen_error_set(OMEN_EINVAL, "bad config value 'omen.warnPrecision': '%g' "
				"is not a precision between 0 and 1", precision_target);
		/* the largest share whose precision reaches the target */
		for (k = c->npoints - 1; k >= 0; k--) {
			if (c->precision[k] >= precision_target) {
				best = k;
				break;
			}
		}
		if (best < 0) {
			/* unmet: the most precise point, and say so */
			best = 0;
			for (k = 1; k < c->npoints; k++)
				if (c->precision[k] > c->precision[best])
					best = k;
			out->unmet = 1;
		}
		k = best;
	} else {
		if (!(share > 0 && share < 1))
			return omen_error_set(OMEN_EINVAL, "bad config value 'omen.warnShare': '%g' "
				"is not a share between 0 and 1", share);
		k = share_point(share);
	}
	out->threshold = c->thr[k];
	out->share = c->fired[k];
	out->precision = c->precision[k];
	out->recall = c->recall[k];
	out->point = k;
	return 0;
}

double omen_warn_share_at(const omen_warn_curve *c, double threshold)
{
	int k;
	/* thresholds fall as the share grows: the first point at or under it */
	for (k = 0; k < c->npoints; k++)
		if (c->thr[k] <= threshold)
			return c->thr[k] == threshold ? c->fired[k] : (k ? c->fired[k - 1] : 0);
	return c->npoints ? 1.0 : NAN;
}

cJSON *omen_warn_curve_json(const omen_warn_curve *c)
{
	cJSON *o = cJSON_CreateObject(), *t = cJSON_CreateArray(), *f = cJSON_CreateArray(),
		*p = cJSON_CreateArray(), *r = cJSON_CreateArray();
	int k;
	cJSON_AddNumberToObject(o, "points", c->npoints);
	cJSON_AddNumberToObject(o, "n", (double)c->n_slice);
	cJSON_AddNumberToObject(o, "positives", (double)c->positives);
	cJSON_AddNumberToObject(o, "n_fire", (double)c->n_fire);
	for (k = 0; k < c->npoints; k++) {
		cJSON_AddItemToArray(t, cJSON_CreateNumber(c->thr[k]));
		cJSON_AddItemToArray(f, cJSON_CreateNumber(c->fired[k]));
		cJSON_AddItemToArray(p, cJSON_CreateNumber(c->precision[k]));
		cJSON_AddItemToArray(r, cJSON_CreateNumber(c->recall[k]));
	}
	cJSON_AddItemToObject(o, "threshold", t);
	cJSON_AddItemToObject(o, "fired", f);
	cJSON_AddItemToObject(o, "precision", p);
	cJSON_AddItemToObject(o, "recall", r);
	return o;
}

static int num_array(double *out, const cJSON *a, int n, int monotone_down)
{
	int k = 0;
	const cJSON *v;
	if (!cJSON_IsArray(a) || cJSON_GetArraySize(a) != n)
		return -1;
	cJSON_ArrayForEach(v, a) {
		double d;
		if (!cJSON_IsNumber(v))
			return -1;
		d = v->valuedouble;
		if (!(d >= 0 && d <= 1))
			return -1;
		if (monotone_down && k && d > out[k - 1])
			return -1;
		out[k++] = d;
	}
	return 0;
}

int omen_warn_curve_parse(omen_warn_curve *out, const cJSON *j)
{
	const cJSON *v;
	memset(out, 0, sizeof(*out));
	if (!cJSON_IsObject(j))
		return omen_error_set(OMEN_ENOTFOUND, "the model has no warning curve");
	v = cJSON_GetObjectItemCaseSensitive(j, "points");
	if (!cJSON_IsNumber(v) || v->valuedouble != OMEN_WARN_POINTS ||
	    num_array(out->thr, cJSON_GetObjectItemCaseSensitive(j, "threshold"), OMEN_WARN_POINTS, 1) ||
	    num_array(out->fired, cJSON_GetObjectItemCaseSensitive(j, "fired"), OMEN_WARN_POINTS, 0) ||
	    num_array(out->precision, cJSON_GetObjectItemCaseSensitive(j, "precision"), OMEN_WARN_POINTS, 0) ||
	    num_array(out->recall, cJSON_GetObjectItemCaseSensitive(j, "recall"), OMEN_WARN_POINTS, 0)) {
		memset(out, 0, sizeof(*out));
		return omen_error_set(OMEN_ECORRUPT, "bad warning curve in the model metadata");
	}
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "n")) && cJSON_IsNumber(v) && v->valuedouble >= 0 &&
	    v->valuedouble <= 9007199254740992.0)
		out->n_slice = (size_t)v->valuedouble;
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "positives")) && cJSON_IsNumber(v) && v->valuedouble >= 0 &&
	    v->valuedouble <= 9007199254740992.0)
		out->positives = (size_t)v->valuedouble;
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "n_fire")) && cJSON_IsNumber(v) && v->valuedouble >= 0 &&
	    v->valuedouble <= 9007199254740992.0)
		out->n_fire = (size_t)v->valuedouble;
	out->npoints = OMEN_WARN_POINTS;
	return 0;
}

int omen_calib_threshold(omen_model *m, const double *p, const int *y, size_t n,
	const double *fire, size_t nfire, double share)
{
	omen_warn_choice ch;
	int e;
	m->threshold_f1 = (float)omen_threshold_max_f1(p, y, n);
	if (!fire) {
		fire = p;
		nfire = n;
	}
	if ((e = omen_warn_curve_build_on(&m->warn, fire, nfire, p, y, n)))
		return e;
	if ((e = omen_warn_pick(&ch, &m->warn, share, 0)))
		return e;
	m->threshold = (float)ch.threshold;
	return 0;
}

int omen_model_warn_curve(omen_warn_curve *out, const omen_model *m)
{
	if (m->warn.npoints) {
		*out = m->warn;
		return 0;
	}
	return omen_warn_curve_parse(out, m->meta ? cJSON_GetObjectItemCaseSensitive(m->meta,
		"warn_curve") : NULL);
}
