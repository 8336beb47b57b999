/* Effort-aware ranking scores and curves on (score, label, effort) arrays:
 * Recall@20%Effort, Effort@20%Recall, Popt and the lift curve (Kamei,
 * Shihab, Adams, Hassan, Mockus, Sinha & Ubayashi, IEEE TSE 39(6), 2013,
 * section 5; Popt after Mende & Koschke, CSMR 2010). Definitions, ties and
 * the inspection rule are stated at the top of src/eval/effort.c, which
 * computes the effort of a commit; this file only ranks arrays, so model/
 * uses it without eval/ (omen/rank.h). */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "omen/rank.h"

/* ---- inspection orders ---------------------------------------------------- */
typedef struct {
	double k1, k2;   /* sort keys, ascending */
	size_t i;
} okey;

static int cmp_okey(const void *a, const void *b)
{
	const okey *x = a, *y = b;
	if (x->k1 != y->k1)
		return x->k1 < y->k1 ? -1 : 1;
	if (x->k2 != y->k2)
		return x->k2 < y->k2 ? -1 : 1;
	return (x->i > y->i) - (x->i < y->i);
}

/* kind 0: by score (high first, ties smaller effort first); 1: optimal;
 * 2: worst. */
static size_t *inspection_order(const double *score, const int *y, const double *effort,
	size_t n, int kind)
{
	okey *k = malloc((n ? n : 1) * sizeof(*k));
	size_t *ord = malloc((n ? n : 1) * sizeof(*ord)), i;
	if (!k || !ord) {
		free(k);
		free(ord);
		return NULL;
	}
	for (i = 0; i < n; i++) {
		k[i].i = i;
		if (kind == 0) {
			k[i].k1 = -score[i];
			k[i].k2 = effort[i];
		} else if (kind == 1) {
			k[i].k1 = y[i] ? 0 : 1;
			k[i].k2 = effort[i];
		} else {
			k[i].k1 = y[i] ? 1 : 0;
			k[i].k2 = -effort[i];
		}
		if (isnan(k[i].k1))
			k[i].k1 = INFINITY;
	}
	qsort(k, n, sizeof(*k), cmp_okey);
	for (i = 0; i < n; i++)
		ord[i] = k[i].i;
	free(k);
	return ord;
}

static void totals(double *E, size_t *P, const int *y, const double *effort, size_t n)
{
	size_t i;
	*E = 0;
	*P = 0;
	for (i = 0; i < n; i++) {
		*E += effort[i];
		*P += y[i] != 0;
	}
}

/* Area under the lift chart of one order (trapezoids). */
static double lift_area(const size_t *ord, const int *y, const double *effort, size_t n,
	double E, size_t P)
{
	double x = 0, r = 0, area = 0, ce = 0;
	size_t i, found = 0;
	for (i = 0; i < n; i++) {
		double nx, nr;
		ce += effort[ord[i]];
		found += y[ord[i]] != 0;
		nx = ce / E;
		nr = (double)found / (double)P;
		area += (nx - x) * (r + nr) * 0.5;
		x = nx;
		r = nr;
	}
	return area;
}

omen_effort_scores omen_effort(const double *score, const int *y, const double *effort, size_t n)
{
	omen_effort_scores s;
	size_t *ord = NULL, *opt = NULL, *worst = NULL, P, i, found = 0, k20 = 0, f20 = 0;
	double E, ce = 0, budget;
	int in_budget = 1, got_recall = 0;
	s.recall_at_20 = s.effort_at_20 = s.popt = s.commits_at_20 = NAN;
	s.false_alarms_first = 0;
	totals(&E, &P, y, effort, n);
	if (n == 0)
		return s;
	ord = inspection_order(score, y, effort, n, 0);
	if (!ord)
		return s;
	budget = 0.2 * E;
	for (i = 0; i < n; i++) {
		size_t j = ord[i];
		ce += effort[j];
		if (in_budget && ce <= budget * (1 + 1e-12)) {
			k20 = i + 1;
			f20 += y[j] != 0;
		} else {
			in_budget = 0;
		}
		if (y[j])
			found++;
		if (!found)
			s.false_alarms_first++;
		if (!got_recall && P > 0 && (double)found >= 0.2 * (double)P) {
			got_recall = 1;
			s.effort_at_20 = E > 0 ? ce / E : NAN;
		}
	}
	if (E > 0) {   /* without any effort there is no budget to share */
		s.commits_at_20 = (double)k20 / (double)n;
		if (P > 0)
			s.recall_at_20 = (double)f20 / (double)P;
	}
	if (P > 0 && E > 0) {
		double am, ao, aw;
		opt = inspection_order(score, y, effort, n, 1);
		worst = inspection_order(score, y, effort, n, 2);
		if (opt && worst) {
			am = lift_area(ord, y, effort, n, E, P);
			ao = lift_area(opt, y, effort, n, E, P);
			aw = lift_area(worst, y, effort, n, E, P);
			s.popt = ao - aw > 0 ? 1.0 - (ao - am) / (ao - aw) : NAN;
		}
	}
	free(ord);
	free(opt);
	free(worst);
	return s;
}

size_t omen_effort_curve(double *out_x, double *out_y, const double *score,
	const int *y, const double *effort, size_t n, int order_kind)
{
	size_t *ord, P, i, found = 0;
	double E, ce = 0;
	totals(&E, &P, y, effort, n);
	if (P == 0 || E <= 0)
		return 0;
	ord = inspection_order(score, y, effort, n, order_kind);
	if (!ord)
		return 0;
	out_x[0] = 0;
	out_y[0] = 0;
	for (i = 0; i < n; i++) {
		ce += effort[ord[i]];
		found += y[ord[i]] != 0;
		out_x[i + 1] = ce / E;
		out_y[i + 1] = (double)found / (double)P;
	}
	free(ord);
	return n + 1;
}
