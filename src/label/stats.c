/* The labelling pass's counts: each commit's label from its traced pairs and
 * the horizon, the summary counts, and the latency quartiles. */
#include <stdlib.h>
#include "omen/error.h"
#include "omen/rank.h"
#include "label/run.h"

int lbl_count_labels(lbl_run *R)
{
	omen_label_summary *s = R->sum;
	size_t i, pi = 0;
	int64_t newest = 0, h = R->o->horizon_days * 86400;
	if (!(R->lab = malloc(R->n ? R->n : 1)))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0; i < R->n; i++)
		if (R->cs[i].time > newest)
			newest = R->cs[i].time;
	s->newest_time = newest;
	s->window_cut = newest - (h > 0 ? h : R->o->window_days * 86400);
	s->horizon_days = R->o->horizon_days;
	for (i = 0; i < R->n; i++) {
		lbl_commit *c = &R->cs[i];
		int any = 0, within = 0;
		s->commits++;
		s->merges += c->merge;
		s->boundary += c->boundary;
		if (c->is_fix) {
			s->fixes++;
			s->fixes_by_pattern += (c->fix_by & OMEN_FIXBY_PATTERN) != 0;
			s->fixes_by_list += (c->fix_by & OMEN_FIXBY_LIST) != 0;
			s->fixes_by_issue += (c->fix_by & OMEN_FIXBY_ISSUE) != 0;
			s->fixes_by_named += (c->fix_by & OMEN_FIXBY_NAMED) != 0;
		}
		while (pi < R->npairs && R->pairs[pi].ind < i)
			pi++;
		for (; pi < R->npairs && R->pairs[pi].ind == i; pi++) {
			any = 1;
			within |= h <= 0 || R->cs[R->pairs[pi].fix].time - c->time <= h;
		}
		if (c->merge || c->boundary)
			R->lab[i] = OMEN_LABEL_UNKNOWN;
		else if (within)
			R->lab[i] = OMEN_LABEL_INDUCING;
		else if (c->absent)
			R->lab[i] = OMEN_LABEL_UNKNOWN; /* its own lines are unknown: never called clean */
		else if (c->time < s->window_cut)
			R->lab[i] = OMEN_LABEL_CLEAN;
		else
			R->lab[i] = OMEN_LABEL_UNKNOWN;
		s->beyond_horizon += any && !within && !c->merge && !c->boundary;
		s->inducing += R->lab[i] == OMEN_LABEL_INDUCING;
		s->clean += R->lab[i] == OMEN_LABEL_CLEAN;
		s->unknown += R->lab[i] == OMEN_LABEL_UNKNOWN;
	}
	return 0;
}

int lbl_latency(lbl_run *R)
{
	double *d;
	size_t i, k = 0;
	if (!R->npairs)
		return 0;
	if (!(d = malloc(R->npairs * sizeof(*d))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0; i < R->npairs; i++)
		if (!i || R->pairs[i].ind != R->pairs[i - 1].ind || R->pairs[i].fix != R->pairs[i - 1].fix)
			d[k++] = (double)(R->cs[R->pairs[i].fix].time - R->cs[R->pairs[i].ind].time) / 86400.0;
	qsort(d, k, sizeof(*d), omen_cmp_double);
	R->sum->latency_days_q[0] = omen_quantile_sorted(d, k, 0.25);
	R->sum->latency_days_q[1] = omen_quantile_sorted(d, k, 0.5);
	R->sum->latency_days_q[2] = omen_quantile_sorted(d, k, 0.75);
	free(d);
	return 0;
}

