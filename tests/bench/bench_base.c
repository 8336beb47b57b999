/* The base model alone on histories it never saw (issue 11): for every
 * shard in $OMEN_BENCH_SHARDS (the leave-out list's, from
 * `fixtures/corpus/build.sh --leave-out`), the AUC on the newest 15% of its
 * labelled commits (train's test slice) of the base model in
 * $OMEN_BENCH_BASE, beside the two references measured in the same run on
 * the same slice: lines added, and logistic regression on the history's own
 * metrics fit on its older 85% (the metrics baseline `train` reports). The
 * base model uses nothing of the history but its own earlier commits'
 * metrics; its interval is the percentile bootstrap of omen_auc_bootstrap
 * (1000 resamples, seed 42). Figures only; skipped without both variables. */
#include <dirent.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "omen/base.h"
#include "omen/error.h"
#include "omen/eval.h"
#include "omen/model.h"

static double auc_of(const double *s, const int *y, size_t n)
{
	return omen_auc(s, y, n);
}

static int one(const omen_model *m, const char *path, double *sum_base, double *sum_la, int *nrow)
{
	const char *const paths[1] = {path};
	omen_corpus *c = NULL;
	const omen_shard *s;
	size_t n, nl = 0, i, nt, ntr;
	size_t *idx = NULL;
	float *z = NULL;
	double *sb = NULL, *sl = NULL, *sr = NULL, *X = NULL, *yy = NULL;
	int *y = NULL, e, pos = 0;
	omen_logreg lr;
	memset(&lr, 0, sizeof(lr));
	if ((e = omen_corpus_open(&c, paths, NULL, 1)))
		return e;
	s = omen_corpus_shard(c, 0);
	n = omen_shard_size(s);
	idx = malloc((n + 1) * sizeof(*idx));
	if (!idx) {
		e = OMEN_ENOMEM;
		goto out;
	}
	for (i = 0; i < n; i++)
		if (omen_shard_entry_at(s, i)->label >= 0)
			idx[nl++] = i;
	nt = (size_t)(nl * 0.15 + 0.5);
	ntr = nl - nt;
	z = malloc((nt + 1) * sizeof(float));
	sb = malloc((nt + 1) * sizeof(double));
	sl = malloc((nt + 1) * sizeof(double));
	sr = malloc((nt + 1) * sizeof(double));
	y = malloc((nt + 1) * sizeof(int));
	X = malloc((ntr + 1) * OMEN_NMETRICS * sizeof(double));
	yy = malloc((ntr + 1) * sizeof(double));
	if (!z || !sb || !sl || !sr || !y || !X || !yy) {
		e = OMEN_ENOMEM;
		goto out;
	}
	for (i = 0; i < ntr; i++) {
		const omen_shard_entry *en = omen_shard_entry_at(s, idx[i]);
		omen_metrics_transform(X + i * OMEN_NMETRICS, en->metrics);
		yy[i] = en->label > 0;
	}
	if ((e = omen_logreg_fit(&lr, X, yy, (int)ntr, OMEN_NMETRICS, 1.0)))
		goto out;
	if ((e = omen_base_logits(z, m, c, 0, idx + ntr, nt, 0)))
		goto out;
	for (i = 0; i < nt; i++) {
		const omen_shard_entry *en = omen_shard_entry_at(s, idx[ntr + i]);
		double t[OMEN_NMETRICS];
		sb[i] = z[i];
		sl[i] = en->metrics[OMEN_M_LA];
		omen_metrics_transform(t, en->metrics);
		sr[i] = omen_logreg_predict(&lr, t);
		y[i] = en->label > 0;
		pos += y[i];
	}
	{
		double ab = auc_of(sb, y, nt), al = auc_of(sl, y, nt), ar = auc_of(sr, y, nt), lo, hi;
		const char *b = strrchr(path, '/');
		if ((e = omen_auc_bootstrap(&lo, &hi, sb, y, nt, 1000, 42)))
			goto out;
		printf("%-28s %6zu %5d  %6.3f [%.3f-%.3f]  %6.3f  %6.3f  %+7.3f\n", b ? b + 1 : path, nt,
			pos, ab, lo, hi, al, ar, ab - (al > ar ? al : ar));
		*sum_base += ab;
		*sum_la += al;
		(*nrow)++;
	}
out:
	omen_logreg_free(&lr);
	omen_corpus_free(c);
	free(idx); free(z); free(sb); free(sl); free(sr); free(y); free(X); free(yy);
	return e;
}

static int cmp_str(const void *a, const void *b)
{
	return strcmp(*(char *const *)a, *(char *const *)b);
}

int main(void)
{
	const char *base = getenv("OMEN_BENCH_BASE"), *dir = getenv("OMEN_BENCH_SHARDS");
	omen_model *m = NULL;
	DIR *d;
	struct dirent *de;
	char *names[256];
	size_t n = 0, k;
	double sb = 0, sl = 0;
	int rows = 0, rc = 0;
	if (!base || !dir) {
		printf("bench_base: skipped (set OMEN_BENCH_BASE to a base model and OMEN_BENCH_SHARDS "
			"to a directory of leave-out shards)\n");
		return 0;
	}
	if (omen_model_load(&m, base)) {
		fprintf(stderr, "bench_base: %s\n", omen_error_last());
		return 1;
	}
	if (!(d = opendir(dir))) {
		fprintf(stderr, "bench_base: cannot read '%s'\n", dir);
		omen_model_free(m);
		return 1;
	}
	while ((de = readdir(d)) && n < 256) {
		size_t len = strlen(de->d_name);
		if (len > 6 && !strcmp(de->d_name + len - 6, ".shard") &&
			(names[n] = malloc(strlen(dir) + len + 2))) {
			sprintf(names[n], "%s/%s", dir, de->d_name);
			n++;
		}
	}
	closedir(d);
	qsort(names, n, sizeof(*names), cmp_str);
	printf("%-28s %6s %5s  %-20s  %6s  %6s  %7s\n", "history (test slice)", "n", "pos",
		"base [95% bootstrap]", "la", "lr", "lead");
	for (k = 0; k < n; k++) {
		if (one(m, names[k], &sb, &sl, &rows)) {
			fprintf(stderr, "bench_base: %s: %s\n", names[k], omen_error_last());
			rc = 1;
		}
		free(names[k]);
	}
	if (rows)
		printf("mean over %d: base %.3f, lines added %.3f (lead = base minus the better "
			"reference)\n", rows, sb / rows, sl / rows);
	omen_model_free(m);
	return rc;
}
