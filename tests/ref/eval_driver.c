/* Driver for tests/ref/eval_sklearn.py: reads "n" then n lines "prob label"
 * on stdin and prints omen's AUC, average precision, Brier, ECE and the 10
 * calibration bins (count, mean prediction, positive rate) one per line. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include "omen/omen.h"

static void num(const char *k, double v)
{
	if (isnan(v))
		printf("%s nan\n", k);
	else
		printf("%s %.17g\n", k, v);
}

int main(void)
{
	size_t n, i, bn[10];
	double *p, bp[10], bt[10];
	int *y, b;
	if (scanf("%zu", &n) != 1)
		return 2;
	p = malloc((n ? n : 1) * sizeof(*p));
	y = malloc((n ? n : 1) * sizeof(*y));
	if (!p || !y)
		return 2;
	for (i = 0; i < n; i++)
		if (scanf("%lf %d", &p[i], &y[i]) != 2)
			return 2;
	num("auc", omen_auc(p, y, n));
	num("ap", omen_average_precision(p, y, n));
	num("brier", omen_brier(p, y, n));
	num("ece", omen_ece(p, y, n, 10, bn, bp, bt));
	for (b = 0; b < 10; b++) {
		printf("bin %d %zu ", b, bn[b]);
		if (bn[b])
			printf("%.17g %.17g\n", bp[b], bt[b]);
		else
			printf("nan nan\n");
	}
	free(p);
	free(y);
	return 0;
}
