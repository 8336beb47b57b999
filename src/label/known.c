/* Labels as known at a time t (issue 16): the one rule that every training
 * slice uses, so that no training label, validation label, calibration or
 * threshold depends on a fix made after the slice's cut. It restates the
 * labeller's own rule (DESIGN.md "Labels" step 4, see DEVELOPERS.md
 * "Labels") with "now" replaced by t: someone labelling the history at t
 * would have seen only the fixes dated before t, and would have called
 * clean only what was older than the window then. This is the usual
 * guard against label leakage in time-aware defect prediction (e.g. Tan,
 * Tan, Dara & Mayeux, ICSE 2015, on "online" change classification; the
 * latency of fixes makes it matter: Cabral et al., ICSE 2019). */
#include <stdlib.h>
#include <string.h>
#include "omen/label.h"
#include "omen/error.h"

#define DAY 86400

int omen_label_at(int label_now, int64_t time, int64_t first_fix, int64_t t,
	int64_t window_days, int64_t horizon_days)
{
	int64_t w = horizon_days > 0 ? horizon_days : window_days;
	if (label_now < 0)
		return OMEN_LABEL_UNKNOWN;   /* merge, boundary, young: unknown at any t */
	if (label_now > 0 && first_fix == INT64_MIN)
		return OMEN_LABEL_INDUCING;  /* no fix times: counts as known throughout */
	if (first_fix != INT64_MAX && first_fix != INT64_MIN && first_fix < t &&
	    (horizon_days <= 0 || first_fix - time <= horizon_days * DAY))
		return OMEN_LABEL_INDUCING;
	if (time < t - w * DAY)
		return OMEN_LABEL_CLEAN;
	return OMEN_LABEL_UNKNOWN;
}

int omen_label_clock_alloc(omen_label_clock *c, size_t n)
{
	size_t i;
	memset(c, 0, sizeof(*c));
	c->time = malloc((n ? n : 1) * sizeof(*c->time));
	c->label = malloc(n ? n : 1);
	c->first_fix = malloc((n ? n : 1) * sizeof(*c->first_fix));
	if (!c->time || !c->label || !c->first_fix) {
		omen_label_clock_free(c);
		return omen_error_set(OMEN_ENOMEM, "cannot hold the label times of %zu commits: "
			"out of memory", n);
	}
	for (i = 0; i < n; i++) {
		c->time[i] = 0;
		c->label[i] = OMEN_LABEL_UNKNOWN;
		c->first_fix[i] = INT64_MAX;
	}
	c->n = n;
	c->window_days = OMEN_WINDOW_DAYS;
	return 0;
}

int omen_label_clock_known(omen_label_clock *c, const int64_t *time, const int8_t *label,
	size_t n)
{
	size_t i;
	int e;
	if ((e = omen_label_clock_alloc(c, n)) < 0)
		return e;
	for (i = 0; i < n; i++) {
		c->time[i] = time[i];
		c->label[i] = label[i];
		c->first_fix[i] = label[i] > 0 ? INT64_MIN : INT64_MAX;
	}
	return 0;
}

void omen_label_clock_free(omen_label_clock *c)
{
	if (!c)
		return;
	free(c->time);
	free(c->label);
	free(c->first_fix);
	memset(c, 0, sizeof(*c));
}

int64_t omen_label_clock_window(const omen_label_clock *c)
{
	return c->horizon_days > 0 ? c->horizon_days : c->window_days;
}

void omen_label_clock_at(int8_t *out, const omen_label_clock *c, int64_t t)
{
	size_t i;
	for (i = 0; i < c->n; i++)
		out[i] = (int8_t)omen_label_at(c->label[i], c->time[i], c->first_fix[i], t,
			c->window_days, c->horizon_days);
}
