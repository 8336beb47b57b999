/* Benchmark of the evaluation metrics on 1e6 synthetic commits: AUC, AP,
 * Brier, ECE, effort-aware metrics, ROC curve and bootstrap resamples.
 * Prints figures only; asserts no time. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include "omen/omen.h"

#define N 1000000

int main(void)
{
	double *p = malloc(N * sizeof(*p)), *e = malloc(N * sizeof(*e));
	double *fx = malloc((N + 1) * sizeof(double)), *fy = malloc((N + 1) * sizeof(double));
	int *y = malloc(N * sizeof(*y));
	omen_rng r;
	size_t i;
	double t, v, lo, hi;
	omen_effort_scores es;
	if (!p || !e || !y || !fx || !fy)
		return 1;
	omen_rng_seed(&r, 1);
	for (i = 0; i < N; i++) {
		y[i] = omen_rng_uniform(&r) < 0.15;
		p[i] = 1 / (1 + exp(-(omen_rng_normal(&r) + (y[i] ? 1.0 : 0.0) - 2)));
		/* ties: a third of the scores rounded to 2 decimals */
		if (i % 3 == 0)
			p[i] = round(p[i] * 100) / 100;
		e[i] = floor(exp(3 + 1.5 * omen_rng_normal(&r)));
	}
	t = omen_now(); v = omen_auc(p, y, N);
	printf("auc            n=%d  %.3f s  (%.4f)\n", N, omen_now() - t, v);
	t = omen_now(); v = omen_average_precision(p, y, N);
	printf("ap             n=%d  %.3f s  (%.4f)\n", N, omen_now() - t, v);
	t = omen_now(); v = omen_brier(p, y, N);
	printf("brier          n=%d  %.3f s  (%.4f)\n", N, omen_now() - t, v);
	t = omen_now(); v = omen_ece(p, y, N, 10, NULL, NULL, NULL);
	printf("ece (10 bins)  n=%d  %.3f s  (%.4f)\n", N, omen_now() - t, v);
	t = omen_now(); es = omen_effort(p, y, e, N);
	printf("effort metrics n=%d  %.3f s  (recall@20%%effort %.4f popt %.4f)\n", N,
		omen_now() - t, es.recall_at_20, es.popt);
	t = omen_now(); i = omen_roc_curve(fx, fy, p, y, N);
	printf("roc curve      n=%d  %.3f s  (%zu points)\n", N, omen_now() - t, i);
	t = omen_now();
	omen_auc_bootstrap(&lo, &hi, p, y, N, 100, 7);
	printf("auc bootstrap  n=%d  %.3f s for 100 resamples ([%.4f, %.4f])\n", N,
		omen_now() - t, lo, hi);
	free(p); free(e); free(y); free(fx); free(fy);
	return 0;
}
