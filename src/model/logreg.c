/* Logistic regression with an L2 penalty on the weights (not the intercept),
 * fit by Newton's method (iteratively reweighted least squares) on
 * standardized features. The objective is
 *   sum_i logloss(y_i, b + w.x_i) + l2/2 |w|^2,
 * which is scikit-learn's LogisticRegression(C = 1/l2) objective
 * (Hastie, Tibshirani & Friedman, "The Elements of Statistical Learning",
 * 2nd ed., section 4.4.1, for the Newton step). */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/model.h"
#include "model/internal.h"

/* Solves A x = r for symmetric positive definite A [k,k] in place by
 * Cholesky; returns -1 when A is not positive definite. */
static int cholesky_solve(double *A, double *r, int k)
{
	int i, j, l;
	for (j = 0; j < k; j++) {
		double d = A[j * k + j];
		for (l = 0; l < j; l++)
			d -= A[j * k + l] * A[j * k + l];
		if (!(d > 0))
			return -1;
		d = sqrt(d);
		A[j * k + j] = d;
		for (i = j + 1; i < k; i++) {
			double s = A[i * k + j];
			for (l = 0; l < j; l++)
				s -= A[i * k + l] * A[j * k + l];
			A[i * k + j] = s / d;
		}
	}
	for (i = 0; i < k; i++) {
		double s = r[i];
		for (l = 0; l < i; l++)
			s -= A[i * k + l] * r[l];
		r[i] = s / A[i * k + i];
	}
	for (i = k - 1; i >= 0; i--) {
		double s = r[i];
		for (l = i + 1; l < k; l++)
			s -= A[l * k + i] * r[l];
		r[i] = s / A[i * k + i];
	}
	return 0;
}

/* Objective at theta = [w (p), b] over standardized Z. */
static double objective(const double *Z, const double *y, int n, int p, const double *th,
	double l2)
{
	double f = 0;
	int i, j;
	for (i = 0; i < n; i++) {
		double z = th[p];
		for (j = 0; j < p; j++)
			z += Z[(size_t)i * p + j] * th[j];
		f += omen_softplus_d(z) - y[i] * z;
	}
	for (j = 0; j < p; j++)
		f += 0.5 * l2 * th[j] * th[j];
	return f;
}

int omen_logreg_fit(omen_logreg *out, const double *X, const double *y, int n, int p,
	double l2)
{
	double *Z = NULL, *H = NULL, *g = NULL, *th = NULL, *cand = NULL;
	int e = 0, i, j, l, it, k = p + 1;
	double f;

	memset(out, 0, sizeof(*out));
	if (n <= 0 || p <= 0 || !(l2 >= 0))
		return omen_error_set(OMEN_EINVAL, "cannot fit logistic regression: %d rows, %d columns",
			n, p);
	out->p = p;
	out->w = calloc((size_t)p, sizeof(double));
	out->mean = calloc((size_t)p, sizeof(double));
	out->scale = calloc((size_t)p, sizeof(double));
	Z = malloc((size_t)n * p * sizeof(double));
	H = malloc((size_t)k * k * sizeof(double));
	g = malloc((size_t)k * sizeof(double));
	th = calloc((size_t)k, sizeof(double));
	cand = malloc((size_t)k * sizeof(double));
	if (!out->w || !out->mean || !out->scale || !Z || !H || !g || !th || !cand) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	/* Standardize as scikit-learn's StandardScaler: population std, a
	 * constant column keeps scale 1. */
	for (j = 0; j < p; j++) {
		double m = 0, v = 0;
		for (i = 0; i < n; i++)
			m += X[(size_t)i * p + j];
		m /= n;
		for (i = 0; i < n; i++) {
			double d = X[(size_t)i * p + j] - m;
			v += d * d;
		}
		v = sqrt(v / n);
		out->mean[j] = m;
		out->scale[j] = v > 1e-12 ? v : 1.0;
	}
	for (i = 0; i < n; i++)
		for (j = 0; j < p; j++)
			Z[(size_t)i * p + j] = (X[(size_t)i * p + j] - out->mean[j]) / out->scale[j];

	f = objective(Z, y, n, p, th, l2);
	for (it = 0; it < 100; it++) {
		double gnorm = 0, step = 1.0, fn = f;
		memset(H, 0, (size_t)k * k * sizeof(double));
		memset(g, 0, (size_t)k * sizeof(double));
		for (i = 0; i < n; i++) {
			const double *zi = Z + (size_t)i * p;
			double z = th[p], mu, w;
			for (j = 0; j < p; j++)
				z += zi[j] * th[j];
			mu = omen_sigmoid_d(z);
			w = mu * (1 - mu);
			for (j = 0; j < p; j++) {
				g[j] += (mu - y[i]) * zi[j];
				for (l = 0; l <= j; l++)
					H[j * k + l] += w * zi[j] * zi[l];
				H[p * k + j] += w * zi[j];
			}
			g[p] += mu - y[i];
			H[p * k + p] += w;
		}
		for (j = 0; j < p; j++) {
			g[j] += l2 * th[j];
			H[j * k + j] += l2;
		}
		for (j = 0; j < k; j++)
			for (l = j + 1; l < k; l++)
				H[j * k + l] = H[l * k + j];
		for (j = 0; j < k; j++) {
			H[j * k + j] += 1e-10;   /* separable data without penalty */
			gnorm += g[j] * g[j];
		}
		if (sqrt(gnorm) < 1e-10 * (1 + n))
			break;
		if (cholesky_solve(H, g, k)) {
			e = omen_error_set(OMEN_ERROR, "cannot fit logistic regression: singular hessian");
			goto out;
		}
		/* Backtracking on the Newton direction -g. */
		for (l = 0; l < 40; l++) {
			for (j = 0; j < k; j++)
				cand[j] = th[j] - step * g[j];
			fn = objective(Z, y, n, p, cand, l2);
			if (fn <= f + 1e-12 * fabs(f))
				break;
			step *= 0.5;
		}
		if (l == 40)
			break;
		memcpy(th, cand, (size_t)k * sizeof(double));
		if (f - fn < 1e-13 * (fabs(f) + 1)) {
			f = fn;
			break;
		}
		f = fn;
	}
	for (j = 0; j < p; j++)
		out->w[j] = th[j];
	out->b = th[p];
out:
	free(Z); free(H); free(g); free(th); free(cand);
	if (e)
		omen_logreg_free(out);
	return e;
}

double omen_logreg_predict(const omen_logreg *lr, const double *x)
{
	double z = lr->b;
	int j;
	for (j = 0; j < lr->p; j++)
		z += lr->w[j] * (x[j] - lr->mean[j]) / lr->scale[j];
	return omen_sigmoid_d(z);
}

void omen_logreg_free(omen_logreg *lr)
{
	if (!lr)
		return;
	free(lr->w); free(lr->mean); free(lr->scale);
	memset(lr, 0, sizeof(*lr));
}
