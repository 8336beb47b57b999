/* Freshness and drift of a saved model (issue 12): how old it is, how far
 * HEAD has moved past the commit it was trained to, whether that commit is
 * in this repository at all; and the population stability index of each
 * change metric between the training slice and the last N commits, with
 * the base rate of recent labelled commits beside the training one. The
 * commits after the model's head are read from history and fed to the
 * model's saved metrics state, exactly as scoring does; the newer end of
 * the training history comes from the drift reference saved with the model
 * (src/model/drift.c). */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <cjson/cJSON.h>
#include "omen/error.h"
#include "omen/rank.h"
#include "omen/score.h"
#include "score/internal.h"

int omen_model_is_base(const omen_model *m)
{
	/* the base model (issue 11) says so in its metadata (its "base"
	 * section, as src/model/base.c writes it); it is trained on other
	 * histories, so its head is never in this repository */
	const cJSON *meta = omen_model_meta(m);
	return meta && (cJSON_IsObject(cJSON_GetObjectItemCaseSensitive(meta, "base")) ||
		cJSON_IsTrue(cJSON_GetObjectItemCaseSensitive(meta, "base_model")));
}

/* "YYYY-MM-DDTHH:MM:SSZ" as written by training; 0 when it is not that. */
static int64_t parse_iso(const char *s)
{
	struct tm tm;
	int f[6], i, k, pos = 0;
	static const int width[6] = {4, 2, 2, 2, 2, 2};
	static const char sep[6] = {'-', '-', 'T', ':', ':', 'Z'};
	if (!s || strlen(s) != 20)
		return 0;
	for (i = 0; i < 6; i++) {
		f[i] = 0;
		for (k = 0; k < width[i]; k++, pos++) {
			if (s[pos] < '0' || s[pos] > '9')
				return 0;
			f[i] = f[i] * 10 + (s[pos] - '0');
		}
		if (s[pos++] != sep[i])
			return 0;
	}
	if (f[1] < 1 || f[1] > 12 || f[2] < 1 || f[2] > 31 || f[3] > 23 || f[4] > 59 || f[5] > 60)
		return 0;
	memset(&tm, 0, sizeof(tm));
	tm.tm_year = f[0] - 1900;
	tm.tm_mon = f[1] - 1;
	tm.tm_mday = f[2];
	tm.tm_hour = f[3];
	tm.tm_min = f[4];
	tm.tm_sec = f[5];
	return (int64_t)timegm(&tm);
}

int64_t omen_model_trained_at(const omen_model *m)
{
	const cJSON *meta = omen_model_meta(m), *tr, *d;
	tr = meta ? cJSON_GetObjectItemCaseSensitive(meta, "training") : NULL;
	d = tr ? cJSON_GetObjectItemCaseSensitive(tr, "date") : NULL;
	return cJSON_IsString(d) ? parse_iso(d->valuestring) : 0;
}

/* Non-merge commits of HEAD that head does not reach, oldest first; *ids is
 * the caller's to free. */
static int list_since(git_oid **ids, size_t *n, omen_repo *r, const git_oid *head)
{
	char hide[OMEN_OID_HEX + 2];
	const char *revs[3];
	omen_walk_opts wo = OMEN_WALK_OPTS_INIT;
	hide[0] = '^';
	omen_oid_hex(hide + 1, sizeof(hide) - 1, head);
	revs[0] = "HEAD";
	revs[1] = hide;
	revs[2] = NULL;
	wo.revs = revs;
	return omen_history_list(ids, n, r, &wo);
}

/* Non-merge commits of HEAD that the model's head does not reach. */
static int count_since(int64_t *out, omen_repo *r, const git_oid *head)
{
	git_oid *ids = NULL;
	size_t n = 0;
	int e;
	if ((e = list_since(&ids, &n, r, head)))
		return e;
	free(ids);
	*out = (int64_t)n;
	return 0;
}

int omen_commits_since(int64_t *out, omen_repo *r, const char *hex)
{
	git_oid id;
	int e;
	*out = -1;
	if ((e = omen_history_resolve(&id, r, hex)))
		return e;
	return count_since(out, r, &id);
}

static int setting(int64_t *out, omen_repo *r, const char *key, int64_t def)
{
	int64_t v = def;
	int e = omen_config_int(&v, r, key);
	if (e)
		return e;
	if (v < 0)
		return omen_error_set(OMEN_EINVAL, "bad config value '%s': '%lld' is negative", key,
			(long long)v);
	*out = v;
	return 0;
}

int omen_freshness_check(omen_freshness *out, omen_scorer *s, int64_t now)
{
	const omen_model *m = omen_scorer_model(s);
	omen_repo *r = score_repo(s);
	const git_oid *head = score_head(s);
	int e;
	memset(out, 0, sizeof(*out));
	out->age_days = NAN;
	out->behind = -1;
	if ((e = setting(&out->stale_days, r, "omen.staleDays", OMEN_STALE_DAYS_DEFAULT)) ||
	    (e = setting(&out->stale_commits, r, "omen.staleCommits", OMEN_STALE_COMMITS_DEFAULT)))
		return e;
	out->is_base = omen_model_is_base(m);
	out->trained_at = omen_model_trained_at(m);
	if (out->trained_at)
		out->age_days = (double)(now - out->trained_at) / 86400.0;
	out->head_known = head != NULL;
	if (head) {
		if (count_since(&out->behind, r, head)) {
			omen_error_clear();   /* an unborn HEAD: nothing to count */
			out->behind = -1;
		}
	}
	if (out->stale_days && out->age_days > (double)out->stale_days)
		out->stale |= OMEN_STALE_AGE;
	if (out->stale_commits && out->behind > out->stale_commits)
		out->stale |= OMEN_STALE_BEHIND;
	if (!out->head_known && !out->is_base)
		out->stale |= OMEN_STALE_FOREIGN;
	return 0;
}

void omen_freshness_text(omen_buf *out, const omen_freshness *f)
{
	if (f->stale & OMEN_STALE_FOREIGN) {
		omen_buf_puts(out, "the model was trained on another history (its head "
			"is not in this repository); run 'git omen label' and 'git omen train' here\n");
		return;
	}
	if (!(f->stale & (OMEN_STALE_AGE | OMEN_STALE_BEHIND)))
		return;
	omen_buf_puts(out, "the model is stale: ");
	if (f->stale & OMEN_STALE_AGE)
		omen_buf_printf(out, "trained %.0f days ago (omen.staleDays %lld)", floor(f->age_days),
			(long long)f->stale_days);
	if ((f->stale & OMEN_STALE_AGE) && (f->stale & OMEN_STALE_BEHIND))
		omen_buf_puts(out, ", ");
	if (f->stale & OMEN_STALE_BEHIND)
		omen_buf_printf(out, "%lld commits behind HEAD (omen.staleCommits %lld)",
			(long long)f->behind, (long long)f->stale_commits);
	omen_buf_puts(out, "; 'git omen refresh' relabels and retrains\n");
}

int omen_scorer_check_fresh(omen_scorer *s)
{
	omen_freshness f;
	int e = omen_freshness_check(&f, s, (int64_t)time(NULL));
	if (e)
		return e;
	omen_freshness_text(score_notices(s), &f);
	return 0;
}

/* ---- drift --------------------------------------------------------------- */
typedef struct {
	double edges[OMEN_DRIFT_BINS - 1];
	int ne;
	double shares[OMEN_DRIFT_BINS];
	const char *recent;   /* digits, oldest first */
} ref_metric;

typedef struct {
	omen_scorer *s;
	omen_metrics *state;
	ref_metric *rm;
	unsigned char *ring;  /* [window * NMETRICS] bins of the newest commits read */
	size_t window, seen;
} replay;

static int on_change(const omen_change *c, void *payload)
{
	replay *p = payload;
	double v[OMEN_NMETRICS];
	int j, e, fix = score_is_fix(p->s, &c->commit);
	size_t slot = p->seen % p->window;
	if ((e = omen_metrics_compute(v, p->state, c, fix)) ||
	    (e = omen_metrics_update(p->state, c, fix)))
		return e;
	for (j = 0; j < OMEN_NMETRICS; j++)
		p->ring[slot * OMEN_NMETRICS + j] = (unsigned char)omen_drift_bin(p->rm[j].edges,
			p->rm[j].ne, (float)v[j]);
	p->seen++;
	return 0;
}

static int read_ref(ref_metric *rm, double *base, size_t *ntrain, size_t *nrecent, const cJSON *dr)
{
	const cJSON *ms, *v;
	int j;
	v = cJSON_GetObjectItemCaseSensitive(dr, "n_train");
	*ntrain = cJSON_IsNumber(v) && v->valuedouble >= 0 && v->valuedouble <= 9007199254740992.0 ?
		(size_t)v->valuedouble : 0;
	v = cJSON_GetObjectItemCaseSensitive(dr, "base_rate");
	*base = cJSON_IsNumber(v) ? v->valuedouble : NAN;
	ms = cJSON_GetObjectItemCaseSensitive(dr, "metrics");
	*nrecent = (size_t)-1;
	for (j = 0; j < OMEN_NMETRICS; j++) {
		const cJSON *m = cJSON_GetObjectItemCaseSensitive(ms, omen_metric_names[j]);
		const cJSON *ea = cJSON_GetObjectItemCaseSensitive(m, "edges");
		const cJSON *sa = cJSON_GetObjectItemCaseSensitive(m, "shares");
		const cJSON *rb = cJSON_GetObjectItemCaseSensitive(m, "recent_bins");
		int k, ne = cJSON_GetArraySize(ea);
		size_t len, i;
		if (!cJSON_IsArray(ea) || !cJSON_IsArray(sa) || !cJSON_IsString(rb) ||
		    ne > OMEN_DRIFT_BINS - 1 || cJSON_GetArraySize(sa) != ne + 1)
			return -1;
		rm[j].ne = ne;
		for (k = 0; k < ne; k++) {
			v = cJSON_GetArrayItem(ea, k);
			if (!cJSON_IsNumber(v) || (k && v->valuedouble <= rm[j].edges[k - 1]))
				return -1;
			rm[j].edges[k] = v->valuedouble;
		}
		for (k = 0; k <= ne; k++) {
			v = cJSON_GetArrayItem(sa, k);
			if (!cJSON_IsNumber(v) || !(v->valuedouble >= 0 && v->valuedouble <= 1))
				return -1;
			rm[j].shares[k] = v->valuedouble;
		}
		len = strlen(rb->valuestring);
		for (i = 0; i < len; i++)
			if (rb->valuestring[i] < '0' || rb->valuestring[i] > '0' + ne)
				return -1;
		if (*nrecent != (size_t)-1 && len != *nrecent)
			return -1;
		*nrecent = len;
		rm[j].recent = rb->valuestring;
	}
	return 0;
}

int omen_drift_measure(omen_drift *out, omen_scorer *s, const omen_labels_brief *labels,
	size_t window, size_t max_replay)
{
	const cJSON *meta = omen_model_meta(omen_scorer_model(s)), *dr;
	ref_metric rm[OMEN_NMETRICS];
	replay p;
	omen_repo *r = score_repo(s);
	const git_oid *head = score_head(s);
	git_oid *ids = NULL;
	size_t n = 0, nrecent, i, take_old, take_new;
	int e = 0, j;

	memset(out, 0, sizeof(*out));
	memset(&p, 0, sizeof(p));
	out->base_train = out->base_recent = NAN;
	for (j = 0; j < OMEN_NMETRICS; j++)
		out->psi[j] = NAN;
	if (window < 1)
		return omen_error_set(OMEN_EINVAL, "bad drift window: %zu commits", window);
	/* base rate of the newest labelled commits, from the label file */
	if (labels && labels->recent) {
		out->recent_labelled = labels->recent;
		out->base_recent = (double)labels->recent_inducing / (double)labels->recent;
	}
	dr = meta ? cJSON_GetObjectItemCaseSensitive(meta, "drift") : NULL;
	if (!cJSON_IsObject(dr))
		return 0;   /* a model from before issue 12 */
	if (read_ref(rm, &out->base_train, &out->n_train, &nrecent, dr))
		return omen_error_set(OMEN_ECORRUPT, "bad drift reference in the model metadata");
	out->have = 1;
	/* the commits after the model's head, fed to its metrics state */
	if (head) {
		if ((e = list_since(&ids, &n, r, head))) {
			omen_error_clear();
			e = 0;
			n = 0;
		}
		if (n > max_replay) {
			out->replay_skipped = n;
			n = 0;
		}
		if (n) {
			omen_walk_opts wo = OMEN_WALK_OPTS_INIT;
			p.s = s;
			p.rm = rm;
			p.window = window;
			if (!(p.ring = malloc(window * OMEN_NMETRICS))) {
				e = omen_error_set(OMEN_ENOMEM, "out of memory");
				goto out;
			}
			if ((e = score_state_clone(&p.state, s)))
				goto out;
			wo.revs = NULL;
			wo.with_lines = 0;
			if ((e = omen_history_walk_ids(r, &wo, ids, n, on_change, &p)))
				goto out;
		}
	}
	take_new = p.seen < window ? p.seen : window;
	take_old = window - take_new;
	if (take_old > nrecent)
		take_old = nrecent;
	out->window = take_new + take_old;
	out->from_history = take_new;
	if (!out->window)
		goto out;
	for (j = 0; j < OMEN_NMETRICS; j++) {
		double cnt[OMEN_DRIFT_BINS] = {0};
		for (i = nrecent - take_old; i < nrecent; i++)
			cnt[rm[j].recent[i] - '0']++;
		for (i = p.seen - take_new; i < p.seen; i++)
			cnt[p.ring[(i % window) * OMEN_NMETRICS + j]]++;
		for (i = 0; i <= (size_t)rm[j].ne; i++)
			cnt[i] /= (double)out->window;
		out->psi[j] = omen_psi(rm[j].shares, cnt, rm[j].ne + 1);
	}
out:
	omen_metrics_free(p.state);
	free(p.ring);
	free(ids);
	return e;
}
