/* Driver for tests/ref/logreg_sklearn.py: reads "n p l2" then n rows of
 * p features and a 0/1 label from stdin, fits omen_logreg_fit and prints
 * the standardized coefficients, the intercept and one probability per row. */
#include <stdio.h>
#include <stdlib.h>
#include "omen/omen.h"

int main(void)
{
	int n, p, i, j;
	double l2, *X, *y;
	omen_logreg lr;
	if (scanf("%d %d %lf", &n, &p, &l2) != 3 || n <= 0 || p <= 0 || n > 1000000 || p > 1000)
		return 2;
	X = malloc((size_t)n * p * sizeof(double));
	y = malloc((size_t)n * sizeof(double));
	if (!X || !y)
		return 2;
	for (i = 0; i < n; i++) {
		for (j = 0; j < p; j++)
			if (scanf("%lf", &X[(size_t)i * p + j]) != 1)
				return 2;
		if (scanf("%lf", &y[i]) != 1)
			return 2;
	}
	if (omen_logreg_fit(&lr, X, y, n, p, l2)) {
		fprintf(stderr, "%s\n", omen_error_last());
		return 1;
	}
	printf("coef");
	for (j = 0; j < p; j++)
		printf(" %.12g", lr.w[j]);
	printf("\nintercept %.12g\n", lr.b);
	for (i = 0; i < n; i++)
		printf("%.12g\n", omen_logreg_predict(&lr, X + (size_t)i * p));
	omen_logreg_free(&lr);
	free(X);
	free(y);
	return 0;
}
