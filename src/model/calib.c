/* Platt scaling (Platt, "Probabilistic outputs for support vector
 * machines", 1999) with the smoothed targets and the stable Newton
 * iteration of Lin, Lin & Weng (Machine Learning 68, 2007), and the
 * threshold of maximal F1 on the validation slice. */
#include <math.h>
#include <stdlib.h>
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
