/* The drift reference saved with the model (issue 12): for each change
 * metric, the decile cut points of the training slice and the share of it
 * in each bin, the training base rate, and the bin of each of the newest
 * commits the model saw, so that `git omen health` can compare the last N
 * commits with the training slice by the population stability index
 * without reading the history again. Deciles of the expected sample as bin
 * edges and PSI itself follow common credit-scoring practice (no single
 * paper; see omen_psi in src/util/rank.c). */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/rank.h"
#include "omen/model.h"
#include "model/internal.h"

static int cmp_float(const void *a, const void *b)
{
	float x = *(const float *)a, y = *(const float *)b;
	return x < y ? -1 : x > y;
}

int omen_drift_edges(double *edges, const float *v, size_t n)
{
	float *s;
	int k, ne = 0;
	if (!n)
		return 0;
	if (!(s = malloc(n * sizeof(float))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	memcpy(s, v, n * sizeof(float));
	qsort(s, n, sizeof(float), cmp_float);
	for (k = 1; k < OMEN_DRIFT_BINS; k++) {
		/* the k/10 quantile, lower order statistic */
		size_t at = (size_t)((double)k * (double)n / OMEN_DRIFT_BINS);
		double e;
		if (at >= n) at = n - 1;
		e = s[at];
		if (e >= s[n - 1])
			break;   /* an edge at the maximum leaves an empty top bin */
		if (!ne || e > edges[ne - 1])
			edges[ne++] = e;
	}
	free(s);
	return ne;
}

int omen_drift_bin(const double *edges, int ne, double x)
{
	int b = 0;
	while (b < ne && x > edges[b])
		b++;
	return b;
}

cJSON *omen_drift_ref_json(const omen_dataset *ds, const size_t *train_idx, size_t n_train,
	size_t recent)
{
	size_t n = omen_dataset_size(ds), i, pos = 0, from;
	cJSON *o = NULL, *ms;
	float *v = NULL;
	char *digits = NULL;
	int j;
	if (!n_train || !(v = malloc(n_train * sizeof(float))))
		return NULL;
	if (recent > n)
		recent = n;
	from = n - recent;
	if (!(digits = malloc(recent + 1)))
		goto fail;
	o = cJSON_CreateObject();
	for (i = 0; i < n_train; i++)
		pos += omen_dataset_get(ds, train_idx[i])->label > 0;
	cJSON_AddNumberToObject(o, "n_train", (double)n_train);
	cJSON_AddNumberToObject(o, "base_rate", (double)pos / (double)n_train);
	cJSON_AddNumberToObject(o, "recent", (double)recent);
	ms = cJSON_AddObjectToObject(o, "metrics");
	for (j = 0; j < OMEN_NMETRICS; j++) {
		double edges[OMEN_DRIFT_BINS - 1], cnt[OMEN_DRIFT_BINS] = {0};
		cJSON *m = cJSON_CreateObject(), *ea = cJSON_CreateArray(), *sa = cJSON_CreateArray();
		int ne, b;
		for (i = 0; i < n_train; i++)
			v[i] = omen_dataset_get(ds, train_idx[i])->metrics[j];
		if ((ne = omen_drift_edges(edges, v, n_train)) < 0) {
			cJSON_Delete(m); cJSON_Delete(ea); cJSON_Delete(sa);
			goto fail;
		}
		for (i = 0; i < n_train; i++)
			cnt[omen_drift_bin(edges, ne, v[i])]++;
		for (b = 0; b < ne; b++)
			cJSON_AddItemToArray(ea, cJSON_CreateNumber(edges[b]));
		for (b = 0; b <= ne; b++)
			cJSON_AddItemToArray(sa, cJSON_CreateNumber(cnt[b] / (double)n_train));
		for (i = 0; i < recent; i++)
			digits[i] = (char)('0' + omen_drift_bin(edges, ne,
				omen_dataset_get(ds, from + i)->metrics[j]));
		digits[recent] = 0;
		cJSON_AddItemToObject(m, "edges", ea);
		cJSON_AddItemToObject(m, "shares", sa);
		cJSON_AddStringToObject(m, "recent_bins", digits);
		cJSON_AddItemToObject(ms, omen_metric_names[j], m);
	}
	free(v);
	free(digits);
	return o;
fail:
	free(v);
	free(digits);
	cJSON_Delete(o);
	return NULL;
}
