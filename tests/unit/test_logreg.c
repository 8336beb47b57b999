/* The metrics baseline (Newton/IRLS logistic regression with L2), Platt
 * scaling, the max-F1 threshold and the warning curve (issue 12). The scikit-learn comparison lives in
 * tests/ref/logreg_sklearn.py; here: optimality conditions and known cases. */
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <stdint.h>
#include <math.h>
#include <stdlib.h>
#include <cmocka.h>
#include "omen/omen.h"

static void make_data(double *X, double *y, int n, int p, uint64_t seed)
{
	omen_rng r;
	int i, j;
	omen_rng_seed(&r, seed);
	for (i = 0; i < n; i++) {
		double z = -0.5;
		for (j = 0; j < p; j++) {
			X[i * p + j] = omen_rng_normal(&r) * (j + 1) + j;
			z += (j % 2 ? 0.8 : -0.5) * (X[i * p + j] - j) / (j + 1);
		}
		y[i] = omen_rng_uniform(&r) < 1 / (1 + exp(-z));
	}
}

/* At the optimum of sum logloss + l2/2 |w|^2 the gradient vanishes:
 * sum_i (mu_i - y_i) z_ij + l2 w_j = 0 and sum_i (mu_i - y_i) = 0
 * (first-order optimality; any convex-optimisation text). */
static void test_logreg_stationary(void **state)
{
	enum { N = 500, P = 6 };
	double X[N * P], y[N], g[P + 1] = {0};
	omen_logreg lr;
	int i, j;
	(void)state;
	make_data(X, y, N, P, 7);
	assert_int_equal(omen_logreg_fit(&lr, X, y, N, P, 1.0), 0);
	for (i = 0; i < N; i++) {
		double mu = omen_logreg_predict(&lr, X + i * P);
		for (j = 0; j < P; j++)
			g[j] += (mu - y[i]) * (X[i * P + j] - lr.mean[j]) / lr.scale[j];
		g[P] += mu - y[i];
	}
	for (j = 0; j < P; j++)
		assert_true(fabs(g[j] + 1.0 * lr.w[j]) < 1e-6);
	assert_true(fabs(g[P]) < 1e-6);
	/* the signs of the generating weights are recovered */
	for (j = 0; j < P; j++)
		assert_true(j % 2 ? lr.w[j] > 0 : lr.w[j] < 0);
	omen_logreg_free(&lr);
	omen_logreg_free(&lr);   /* second free is a no-op */
}

/* Separable data still converges with a penalty (weights stay finite). */
static void test_logreg_separable(void **state)
{
	double X[20], y[20];
	omen_logreg lr;
	int i;
	(void)state;
	for (i = 0; i < 20; i++) {
		X[i] = i;
		y[i] = i >= 10;
	}
	assert_int_equal(omen_logreg_fit(&lr, X, y, 20, 1, 0.01), 0);
	assert_true(isfinite(lr.w[0]) && lr.w[0] > 1);
	assert_true(omen_logreg_predict(&lr, X + 15) > 0.9);
	assert_true(omen_logreg_predict(&lr, X + 4) < 0.1);
	omen_logreg_free(&lr);
	assert_int_equal(omen_logreg_fit(&lr, X, y, 0, 1, 1.0), OMEN_EINVAL);
}

/* Platt: scores drawn with P(y=1|f) = sigmoid(2 f - 1) give a ~ 2, b ~ -1. */
static void test_platt_recovers(void **state)
{
	enum { N = 20000 };
	static double f[N];
	static int y[N];
	omen_rng r;
	double a, b;
	int i;
	(void)state;
	omen_rng_seed(&r, 3);
	for (i = 0; i < N; i++) {
		f[i] = omen_rng_normal(&r);
		y[i] = omen_rng_uniform(&r) < 1 / (1 + exp(-(2 * f[i] - 1)));
	}
	assert_int_equal(omen_platt_fit(&a, &b, f, y, N), 0);
	assert_true(fabs(a - 2) < 0.1);
	assert_true(fabs(b + 1) < 0.1);
	assert_true(fabs(omen_platt_apply(a, b, 0.5) - 0.5) < 0.05);
	for (i = 0; i < N; i++)
		y[i] = 0;
	assert_int_equal(omen_platt_fit(&a, &b, f, y, N), OMEN_EINVAL);
}

/* Threshold: for probs {.9 .8 .7 .2 .1} labels {1 1 0 1 0} the best F1
 * is at t = .2 (tp 3, fp 1, fn 0: F1 = 6/7) versus t = .8 (F1 = 4/5). */
static void test_threshold_f1(void **state)
{
	double p[5] = {0.9, 0.8, 0.7, 0.2, 0.1};
	int y[5] = {1, 1, 0, 1, 0}, z[5] = {0};
	(void)state;
	assert_true(fabs(omen_threshold_max_f1(p, y, 5) - 0.2) < 1e-12);
	assert_true(fabs(omen_threshold_max_f1(p, z, 5) - 0.5) < 1e-12);
}

/* Warning curve on probs {.9 .8 .7 .2 .1}, labels {1 1 0 1 0}: share s
 * fires on the ceil(5 s) riskiest, so 10% -> {.9} (precision 1, recall
 * 1/3), 50% -> {.9 .8 .7} (2/3, 2/3), 80% -> four (3/4, 1). Worked by hand. */
static void test_warn_curve(void **state)
{
	double p[5] = {0.9, 0.8, 0.7, 0.2, 0.1}, t[4] = {0.5, 0.5, 0.5, 0.1};
	int y[5] = {1, 1, 0, 1, 0}, y2[5] = {0, 1, 1, 0, 0}, yt[4] = {1, 0, 0, 0};
	omen_warn_curve c, c2;
	omen_warn_choice ch;
	cJSON *j;
	int k;
	(void)state;
	assert_int_equal(omen_warn_curve_build(&c, p, y, 5), 0);
	assert_int_equal(c.npoints, OMEN_WARN_POINTS);
	for (k = 1; k < c.npoints; k++)
		assert_true(c.thr[k] <= c.thr[k - 1]);
	assert_int_equal(omen_warn_pick(&ch, &c, 0.10, 0), 0);
	assert_true(ch.threshold == 0.9 && fabs(ch.share - 0.2) < 1e-12);
	assert_true(fabs(ch.precision - 1) < 1e-12 && fabs(ch.recall - 1.0 / 3) < 1e-12);
	assert_int_equal(omen_warn_pick(&ch, &c, 0.5, 0), 0);
	assert_true(ch.threshold == 0.7 && fabs(ch.share - 0.6) < 1e-12);
	assert_true(fabs(ch.precision - 2.0 / 3) < 1e-12 && fabs(ch.recall - 2.0 / 3) < 1e-12);
	/* precision target 0.7: the largest share reaching it is 80% (3/4),
	 * although 60% (2/3) misses it: precision is not monotone */
	assert_int_equal(omen_warn_pick(&ch, &c, 0.1, 0.7), 0);
	assert_true(ch.threshold == 0.2 && !ch.unmet);
	assert_true(fabs(ch.precision - 0.75) < 1e-12 && fabs(ch.recall - 1) < 1e-12);
	/* shares outside (0, 1) and impossible precisions are refused */
	assert_int_equal(omen_warn_pick(&ch, &c, 0, 0), OMEN_EINVAL);
	assert_int_equal(omen_warn_pick(&ch, &c, 1, 0), OMEN_EINVAL);
	assert_int_equal(omen_warn_pick(&ch, &c, -0.1, 0), OMEN_EINVAL);
	assert_int_equal(omen_warn_pick(&ch, &c, NAN, 0), OMEN_EINVAL);
	assert_int_equal(omen_warn_pick(&ch, &c, 0.1, 1.5), OMEN_EINVAL);
	/* an explicit threshold: how often it fires */
	assert_true(fabs(omen_warn_share_at(&c, 0.7) - 0.6) < 1e-12);
	assert_true(fabs(omen_warn_share_at(&c, 0.75) - 0.4) < 1e-12);
	assert_true(omen_warn_share_at(&c, 0.95) == 0);
	/* unmet target: the most precise point (2/3 at three commits), flagged */
	assert_int_equal(omen_warn_curve_build(&c2, p, y2, 5), 0);
	assert_int_equal(omen_warn_pick(&ch, &c2, 0.1, 0.99), 0);
	assert_true(ch.unmet && ch.threshold == 0.7 && fabs(ch.precision - 2.0 / 3) < 1e-12);
	/* ties fire together: a 25% share of {.5 .5 .5 .1} fires on 75% */
	assert_int_equal(omen_warn_curve_build(&c2, t, yt, 4), 0);
	assert_int_equal(omen_warn_pick(&ch, &c2, 0.25, 0), 0);
	assert_true(ch.threshold == 0.5 && fabs(ch.share - 0.75) < 1e-12);
	/* the metadata form reads back to the same curve; a broken one is refused */
	j = omen_warn_curve_json(&c);
	assert_int_equal(omen_warn_curve_parse(&c2, j), 0);
	for (k = 0; k < c.npoints; k++)
		assert_true(c2.thr[k] == c.thr[k] && c2.fired[k] == c.fired[k] &&
			c2.precision[k] == c.precision[k] && c2.recall[k] == c.recall[k]);
	cJSON_ReplaceItemInArray(cJSON_GetObjectItemCaseSensitive(j, "threshold"), 3,
		cJSON_CreateNumber(0.95));   /* no longer non-increasing */
	assert_int_equal(omen_warn_curve_parse(&c2, j), OMEN_ECORRUPT);
	assert_int_equal(c2.npoints, 0);
	cJSON_Delete(j);
	omen_error_clear();
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_logreg_stationary),
		cmocka_unit_test(test_logreg_separable),
		cmocka_unit_test(test_platt_recovers),
		cmocka_unit_test(test_threshold_f1),
		cmocka_unit_test(test_warn_curve),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
