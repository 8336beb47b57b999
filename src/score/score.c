/* The scorer: a saved model, the fix rules, and the change-metrics state
 * saved with the model, advanced over the commits after the model's head so
 * that each scored commit sees exactly the history before it, as in training
 * (same omen_sample_build, same omen_metrics_compute inside it). */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <cjson/cJSON.h>
#include "omen/base.h"
#include "omen/error.h"
#include "omen/label.h"
#include "omen/score.h"
#include "score/internal.h"

struct omen_scorer {
	omen_repo *repo;
	omen_model *model;
	omen_fixrules *rules;
	omen_buf state;          /* serialised metrics state at the model's head */
	git_oid head;
	int head_known;          /* the model's head exists in this repository */
	float threshold;
	float medium;            /* lower edge of the medium band */
	double fires;            /* share of the calibration slice at or over the threshold, NAN unknown */
	double share;            /* omen.warnShare (or the default) */
	omen_buf notices;        /* one line each, for the caller to print */
	omen_caps caps;
	double mean[OMEN_NMETRICS], scale[OMEN_NMETRICS];
	int have_std;
	double deadline;
	int detail;
	int lazy;
	int approx;              /* scoring against a state that already counts the commit */
	char *model_path;
	char *base_path;         /* no model of the repository's own: the base model used */
	size_t base_commits;     /* the commits its standardization was fitted on */
};

const omen_model *omen_scorer_model(const omen_scorer *s) { return s->model; }
float omen_scorer_threshold(const omen_scorer *s) { return s->threshold; }
double omen_scorer_fires(const omen_scorer *s) { return s->fires; }
const char *omen_scorer_notices(const omen_scorer *s) { return s->notices.len ? s->notices.ptr : NULL; }
const char *omen_scorer_model_path(const omen_scorer *s)
{
	return s->base_path ? s->base_path : s->model_path;
}
const char *omen_scorer_base_fallback(const omen_scorer *s, size_t *commits)
{
	if (commits)
		*commits = s->base_commits;
	return s->base_path;
}
omen_repo *score_repo(const omen_scorer *s) { return s->repo; }
void score_set_detail(omen_scorer *s, int detail) { s->detail = detail; }

int omen_score_model_path(char **out, omen_repo *r, const char *override)
{
	omen_buf b = OMEN_BUF_INIT;
	char *cfg = NULL;
	int e;
	*out = NULL;
	if (override && *override) {
		e = omen_buf_puts(&b, override);
	} else {
		if ((e = omen_config_string(&cfg, r, "omen.model")))
			return e;
		if (cfg && *cfg)
			e = omen_buf_puts(&b, cfg);
		else
			e = omen_buf_printf(&b, "%somen/model.omen", omen_repo_gitdir(r));
		free(cfg);
	}
	if (!e)
		*out = omen_buf_detach(&b);
	omen_buf_free(&b);
	return e;
}

int score_standardize(double z[OMEN_NMETRICS], const omen_scorer *s, const float raw[OMEN_NMETRICS])
{
	int j;
	omen_metrics_transform(z, raw);
	if (!s->have_std)
		return 0;
	for (j = 0; j < OMEN_NMETRICS; j++)
		z[j] = (z[j] - s->mean[j]) / s->scale[j];
	return 1;
}

float score_typical(const omen_scorer *s, int j)
{
	if (!s->have_std)
		return NAN;
	if (j == OMEN_M_ENTROPY || j == OMEN_M_FIX)
		return (float)s->mean[j];
	return (float)expm1(s->mean[j]);
}

static void read_meta(omen_scorer *s)
{
	const cJSON *meta = omen_model_meta(s->model), *st, *mm, *ms, *caps, *v;
	omen_caps def = OMEN_CAPS_DEFAULT;
	int j;
	s->caps = def;
	if (!meta)
		return;
	st = cJSON_GetObjectItemCaseSensitive(meta, "standardize");
	mm = st ? cJSON_GetObjectItemCaseSensitive(st, "metric_mean") : NULL;
	ms = st ? cJSON_GetObjectItemCaseSensitive(st, "metric_scale") : NULL;
	if (cJSON_IsArray(mm) && cJSON_IsArray(ms) && cJSON_GetArraySize(mm) == OMEN_NMETRICS &&
	    cJSON_GetArraySize(ms) == OMEN_NMETRICS) {
		s->have_std = 1;
		for (j = 0; j < OMEN_NMETRICS; j++) {
			s->mean[j] = cJSON_GetArrayItem(mm, j)->valuedouble;
			s->scale[j] = cJSON_GetArrayItem(ms, j)->valuedouble;
			if (!(s->scale[j] > 0) || !isfinite(s->mean[j]))
				s->have_std = 0;
		}
	}
	caps = cJSON_GetObjectItemCaseSensitive(meta, "caps");
	if (cJSON_IsObject(caps)) {
#define CAP(field) \
		v = cJSON_GetObjectItemCaseSensitive(caps, #field); \
		if (cJSON_IsNumber(v) && v->valuedouble >= 1 && v->valuedouble < 1e7) \
			s->caps.field = (int32_t)v->valuedouble;
		CAP(max_files)
		CAP(max_hunks_per_file)
		CAP(max_tokens_per_hunk)
		CAP(max_msg_tokens)
#undef CAP
	}
}

/* No model of the repository's own at the default path (issue 11): the base
 * model (omen.baseModel, else the installed one), standardized on this
 * repository's commits as train does for a young repository, with the
 * metrics state at its tip. A model path named by --model or omen.model
 * that is missing stays an error, and so does a base model that does not
 * load (checked as strictly as any model file). */
static int base_fallback(omen_scorer *s, omen_repo *r, const omen_score_opts *o)
{
	omen_dataset_opts dopt;
	omen_dataset *ds = NULL;
	omen_model *base = NULL;
	char *cfg = NULL;
	int64_t lim = 0;
	int e, configured;
	if (o->model_path && *o->model_path)
		goto missing;
	if ((e = omen_config_string(&cfg, r, "omen.model")))
		return e;
	if (cfg && *cfg) {
		free(cfg);
		goto missing;
	}
	free(cfg);
	if ((e = omen_base_model_path(&s->base_path, &configured, r)))
		return e;
	if (!s->base_path)
		goto missing;
	if ((e = omen_config_int(&lim, r, "omen.memoryLimit")))
		return e;
	if ((e = omen_model_load_max(&base, s->base_path, lim))) {
		char why[512];   /* omen_error_set must not read its own buffer */
		snprintf(why, sizeof(why), "%s", omen_error_last());
		return omen_error_set(e, "cannot use base model '%s': %s", s->base_path, why);
	}
	memset(&dopt, 0, sizeof(dopt));
	dopt.caps = omen_model_caps(base);
	dopt.labels_optional = 1;
	dopt.max_bytes = lim;
	if ((e = omen_dataset_build(&ds, r, &dopt)))
		goto out;
	if ((e = omen_model_adopt_base(&s->model, base, ds)))
		goto out;
	s->base_commits = omen_dataset_size(ds);
out:
	omen_dataset_free(ds);
	omen_model_free(base);
	return e;
missing:
	return omen_error_set(OMEN_ENOTFOUND, "no model at '%s': run 'git omen train' first",
		s->model_path);
}

int omen_warn_config(double *share, double *precision, omen_repo *r)
{
	double v = NAN;
	int e;
	*share = OMEN_WARN_SHARE_DEFAULT;
	*precision = -1;
	if ((e = omen_config_double(&v, r, "omen.warnShare")))
		return e;
	if (!isnan(v)) {
		if (!(v > 0 && v < 1))
			return omen_error_set(OMEN_EINVAL, "bad config value 'omen.warnShare': '%g' is not "
				"a share between 0 and 1", v);
		*share = v;
	}
	v = NAN;
	if ((e = omen_config_double(&v, r, "omen.warnPrecision")))
		return e;
	if (!isnan(v)) {
		if (!(v > 0 && v < 1))
			return omen_error_set(OMEN_EINVAL, "bad config value 'omen.warnPrecision': '%g' is not "
				"a precision between 0 and 1", v);
		*precision = v;
	}
	return 0;
}

/* The warning budget (issue 12): unless a threshold was given, the
 * model's warning curve turns omen.warnShare (or omen.warnPrecision) into
 * the threshold; the medium band is the next two shares' worth (it fires
 * on three times the share in all). Without a curve (an older model) the
 * model's threshold stays and medium starts at half of it. */
static int warn_budget(omen_scorer *s, omen_repo *r, int explicit_thr)
{
	omen_warn_curve wc;
	omen_warn_choice ch;
	double prec;
	int e;
	s->fires = NAN;
	s->medium = s->threshold / 2;
	if ((e = omen_warn_config(&s->share, &prec, r)))
		return e;
	if (omen_model_warn_curve(&wc, s->model)) {
		omen_error_clear();
		return 0;
	}
	if (!explicit_thr) {
		if ((e = omen_warn_pick(&ch, &wc, s->share, prec)))
			return e;
		s->threshold = (float)ch.threshold;
		if (ch.unmet)
			omen_buf_printf(&s->notices, "the precision target %g "
				"(omen.warnPrecision) is out of reach on the model's calibration slice; "
				"warning on the riskiest %.0f%% of commits instead (precision %.2f there)\n",
				prec, 100.0 * ch.share, ch.precision);
	}
	s->fires = omen_warn_share_at(&wc, s->threshold);
	{
		double m3 = 3 * (s->fires > 0 ? s->fires : s->share);
		if (m3 < 0.99 && omen_warn_pick(&ch, &wc, m3, 0) == 0 && ch.threshold < s->threshold)
			s->medium = (float)ch.threshold;
		else
			omen_error_clear();
	}
	return 0;
}

int omen_scorer_open(omen_scorer **out, omen_repo *r, const omen_score_opts *o)
{
	static const omen_score_opts defaults = OMEN_SCORE_OPTS_INIT;
	omen_scorer *s;
	char *pat = NULL, *list = NULL;
	struct stat stt;
	double thr = -1;
	int e;

	*out = NULL;
	if (!o)
		o = &defaults;
	if (!(s = calloc(1, sizeof(*s))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	s->repo = r;
	s->deadline = o->deadline;
	s->detail = o->detail;
	s->lazy = o->lazy;
	if ((e = omen_score_model_path(&s->model_path, r, o->model_path)))
		goto out;
	{
		int64_t lim = 0;   /* omen.memoryLimit bounds the model read too */
		if ((e = omen_config_int(&lim, r, "omen.memoryLimit")))
			goto out;
		if (stat(s->model_path, &stt) != 0) {
			if ((e = base_fallback(s, r, o)))
				goto out;
		} else if ((e = omen_model_load_max(&s->model, s->model_path, lim))) {
			goto out;
		}
	}
	read_meta(s);
	if ((e = omen_config_string(&pat, r, "omen.fixPattern")) ||
	    (e = omen_fixrules_new(&s->rules, pat && *pat ? pat : NULL)))
		goto out;
	if ((e = omen_config_string(&list, r, "omen.fixList")))
		goto out;
	if (list && *list && (e = omen_fixrules_load_list(s->rules, list)))
		goto out;
	if (omen_model_metrics_state(s->model)) {
		if ((e = omen_metrics_save(omen_model_metrics_state(s->model), &s->state)))
			goto out;
	}
	if (omen_model_head(s->model) && *omen_model_head(s->model)) {
		if (omen_history_resolve(&s->head, r, omen_model_head(s->model)) == 0)
			s->head_known = 1;
		else
			omen_error_clear();
	}
	s->threshold = omen_model_threshold(s->model);
	if (o->threshold >= 0) {
		s->threshold = (float)o->threshold;
	} else {
		/* bounds and the message with the value as written: the
		 * settings table (omen_setting_parse) */
		if ((e = omen_config_double(&thr, r, "omen.threshold")))
			goto out;
		if (thr >= 0)
			s->threshold = (float)thr;
	}
	if (!(s->threshold >= 0 && s->threshold <= 1)) {  /* only the model's own can be */
		e = omen_error_set(OMEN_ECORRUPT, "bad model '%s': its threshold %g is not a probability",
			s->model_path, (double)s->threshold);
		goto out;
	}
	if ((e = warn_budget(s, r, o->threshold >= 0 || thr >= 0)))
		goto out;
	if (s->threshold == 0)
		s->threshold = 0.0f;  /* -0 is shown as 0.00, never -0.00 */
	*out = s;
	s = NULL;
out:
	free(pat);
	free(list);
	omen_scorer_free(s);
	return e;
}

void omen_scorer_free(omen_scorer *s)
{
	if (!s)
		return;
	omen_model_free(s->model);
	omen_fixrules_free(s->rules);
	omen_buf_free(&s->state);
	omen_buf_free(&s->notices);
	free(s->model_path);
	free(s->base_path);
	free(s);
}

/* A fresh copy of the metrics state at the model's head. */
static int state_clone(omen_metrics **out, const omen_scorer *s);
int score_state_clone(omen_metrics **out, const omen_scorer *s) { return state_clone(out, s); }
const git_oid *score_head(const omen_scorer *s) { return s->head_known ? &s->head : NULL; }
omen_buf *score_notices(omen_scorer *s) { return &s->notices; }

static int state_clone(omen_metrics **out, const omen_scorer *s)
{
	if (!s->state.len)
		return omen_metrics_new(out);
	return omen_metrics_load(out, s->state.ptr, s->state.len);
}

int score_is_fix(const omen_scorer *s, const omen_commit *c)
{
	char named[8][OMEN_OID_HEX + 1];
	int nn = 0;
	return omen_fix_classify(s->rules, c, named, 8, &nn) != 0;
}

/* ---- reasons ------------------------------------------------------------- */
static void add_reason(omen_score_result *r, omen_reason *cand, int *nc, int kind,
	double strength, const char *fmt, ...) OMEN_PRINTF(6, 7);

static void add_reason(omen_score_result *r, omen_reason *cand, int *nc, int kind,
	double strength, const char *fmt, ...)
{
	va_list ap;
	omen_reason *x;
	(void)r;
	if (*nc >= 8)
		return;
	x = &cand[(*nc)++];
	x->kind = kind;
	x->strength = strength;
	va_start(ap, fmt);
	vsnprintf(x->text, sizeof(x->text), fmt, ap);
	va_end(ap);
}

/* "path:lines" in buf; a path too long for it is cut between characters
 * (120 bytes and "...") so the line numbers stay. */
static void range_text(char *buf, size_t n, const omen_hunk_score *h)
{
	size_t plen = strlen(h->path), cut = omen_utf8_prefix(h->path, plen, 120);
	int pl = (int)cut;
	const char *more = cut < plen ? "..." : "";
	if (h->new_lines > 1)
		snprintf(buf, n, "%.*s%s:%d-%d", pl, h->path, more, (int)h->new_start,
			(int)(h->new_start + h->new_lines - 1));
	else if (h->new_lines == 1)
		snprintf(buf, n, "%.*s%s:%d", pl, h->path, more, (int)h->new_start);
	else
		snprintf(buf, n, "%.*s%s:%d (deleted lines)", pl, h->path, more,
			(int)(h->new_start > 0 ? h->new_start : 1));
}

static const char *metric_phrase(int j)
{
	switch (j) {
	case OMEN_M_NS: return "subsystems touched";
	case OMEN_M_ND: return "directories touched";
	case OMEN_M_NF: return "files touched";
	case OMEN_M_ENTROPY: return "spread of the change across files";
	case OMEN_M_LA: return "lines added";
	case OMEN_M_LD: return "lines deleted";
	case OMEN_M_LT: return "size of the touched files";
	case OMEN_M_FIX: return "fix commit";
	case OMEN_M_NDEV: return "developers who changed these files";
	case OMEN_M_AGE: return "days since these files last changed";
	case OMEN_M_NUC: return "unique prior changes of these files";
	case OMEN_M_EXP: return "author's prior commits";
	case OMEN_M_REXP: return "author's recent experience";
	case OMEN_M_SEXP: return "author's commits in this subsystem";
	}
	return "metric";
}

void score_reasons(omen_score_result *r, const omen_scorer *s, const omen_sample *sm,
	const omen_explain *ex, const omen_hunk_score *top)
{
	omen_reason cand[8];
	int nc = 0, i, j, best_fix = -1;
	double z[OMEN_NMETRICS], best_ratio = 0, fixes_best = 0, changes_best = 0;
	char where[160];

	if (top) {
		range_text(where, sizeof(where), top);
		add_reason(r, cand, &nc, OMEN_REASON_HUNK, 1.0 + 2.0 * top->weight,
			"%s: %s (%.0f%%)", ex ? "most attention" : "largest hunk", where, 100.0 * top->weight);
	}
	if (score_standardize(z, s, r->metrics)) {
		double zl = z[OMEN_M_LA] > z[OMEN_M_LD] ? z[OMEN_M_LA] : z[OMEN_M_LD];
		double typ = (double)score_typical(s, OMEN_M_LA) + score_typical(s, OMEN_M_LD);
		double zd = z[OMEN_M_NF];
		int dj = OMEN_M_NF;
		if (zl >= 1.5) {
			if (typ >= 1)
				add_reason(r, cand, &nc, OMEN_REASON_LARGE, zl,
					"large change: +%d -%d lines, %.1fx the typical %.0f", (int)r->la, (int)r->ld,
					(r->la + r->ld) / typ, typ);
			else
				add_reason(r, cand, &nc, OMEN_REASON_LARGE, zl, "large change: +%d -%d lines",
					(int)r->la, (int)r->ld);
		}
		if (z[OMEN_M_ND] > zd) { zd = z[OMEN_M_ND]; dj = OMEN_M_ND; }
		if (z[OMEN_M_NS] > zd) { zd = z[OMEN_M_NS]; dj = OMEN_M_NS; }
		if (z[OMEN_M_ENTROPY] > zd && r->metrics[OMEN_M_NF] > 2) { zd = z[OMEN_M_ENTROPY]; dj = OMEN_M_ENTROPY; }
		if (zd >= 1.5) {
			if (dj == OMEN_M_ENTROPY)
				add_reason(r, cand, &nc, OMEN_REASON_DIFFUSE, zd,
					"diffuse change: spread evenly over %d files (entropy %.2f, typical %.2f)",
					(int)r->metrics[OMEN_M_NF], (double)r->metrics[OMEN_M_ENTROPY],
					(double)score_typical(s, OMEN_M_ENTROPY));
			else
				add_reason(r, cand, &nc, OMEN_REASON_DIFFUSE, zd,
					"diffuse change: %.0f %s, typical %.1f", (double)r->metrics[dj], metric_phrase(dj),
					(double)score_typical(s, dj));
		}
		/* the metric (other than size and spread) with the largest push up */
		{
			int bj = -1;
			double bz = 0;
			for (j = 0; j < OMEN_NMETRICS; j++) {
				double push = ex ? ex->metric_contrib[j] : 0;
				if (j == OMEN_M_LA || j == OMEN_M_LD || j == OMEN_M_NF || j == OMEN_M_ND ||
				    j == OMEN_M_NS || j == OMEN_M_ENTROPY || j == OMEN_M_FIX)
					continue;
				if (fabs(z[j]) >= 2.0 && push > 0 && fabs(z[j]) > bz) {
					bz = fabs(z[j]);
					bj = j;
				}
			}
			/* not when the state already counts this commit (and later
			 * ones): history-based metrics would mislead */
			if (bj >= 0 && !s->approx)
				add_reason(r, cand, &nc, OMEN_REASON_METRIC, bz * 0.9,
					"unusual %s: %.0f, typical %.1f", metric_phrase(bj), (double)r->metrics[bj],
					(double)score_typical(s, bj));
		}
	}
	for (i = 0; sm && !s->approx && i < sm->nfiles; i++) {
		const float *ff = sm->file_facts + (size_t)i * OMEN_NFACTS;
		double fixes = expm1(ff[OMEN_FF_LOG_FIXES]), changes = expm1(ff[OMEN_FF_LOG_CHANGES]);
		double ratio = ff[OMEN_FF_FIX_RATIO];
		if (fixes >= 1.5 && ratio >= 0.25 && ratio * log1p(fixes) > best_ratio) {
			best_ratio = ratio * log1p(fixes);
			best_fix = i;
			fixes_best = fixes;
			changes_best = changes;
		}
	}
	if (best_fix >= 0)
		add_reason(r, cand, &nc, OMEN_REASON_FIX_HISTORY, 1.0 + best_ratio,
			"history of fixes: %s needed %.0f fixes in %.0f prior changes",
			sm->file_path[best_fix], fixes_best, changes_best);
	/* the two strongest, strongest first */
	r->nreasons = 0;
	for (i = 0; i < 2; i++) {
		int b = -1;
		for (j = 0; j < nc; j++)
			if (cand[j].strength >= 1.0 && (b < 0 || cand[j].strength > cand[b].strength))
				b = j;
		if (b < 0)
			break;
		r->reasons[r->nreasons++] = cand[b];
		cand[b].strength = -1;
	}
}

/* ---- one commit ---------------------------------------------------------- */
static int cmp_hunk_weight(const void *a, const void *b)
{
	const omen_hunk_score *x = a, *y = b;
	return x->weight < y->weight ? 1 : x->weight > y->weight ? -1 : 0;
}

static const char *summary_of(omen_arena *a, const char *msg)
{
	size_t n = 0, i;
	char *p;
	if (!msg)
		msg = "";
	while (msg[n] && msg[n] != '\n')
		n++;
	n = omen_utf8_prefix(msg, n, 200);   /* never half a character */
	if (!(p = omen_arena_strndup(a, msg, n)))
		return "";
	for (i = 0; i < n; i++)
		if ((unsigned char)p[i] < 0x20 || p[i] == 0x7f)
			p[i] = ' ';
	return p;
}

/* Scores the sample sm of the change c (its commit and file flags give the
 * summary and the skipped files) into set. */
static int score_sample(omen_score_set *set, const omen_scorer *s, const omen_change *c,
	const omen_sample *smp, omen_explain *ex)
{
	const omen_sample sm = *smp;
	const int is_fix = sm.is_fix;
	omen_score_result *r;
	size_t first, k, keep;
	double total;
	int e, f, h;

	if (OMEN_ARRAY_RESERVE(set->v, set->cap, set->n + 1) ||
	    OMEN_ARRAY_RESERVE(set->hunks, set->hunks_cap, set->nhunks + (size_t)sm.nhunks + 1))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	r = &set->v[set->n];
	memset(r, 0, sizeof(*r));
	if (s->lazy && !s->detail) {
		/* the forward pass alone; the backward pass for attention and
		 * gradients only when the commit will be reported */
		if ((e = omen_model_predict(&r->prob, &r->logit, s->model, &sm, NULL)))
			return omen_error_wrap(e, "cannot score '%.12s'", c->commit.hex);
		if (r->prob < s->threshold)
			ex = NULL;
	}
	if (ex && (e = omen_model_predict(&r->prob, &r->logit, s->model, &sm, ex)))
		return omen_error_wrap(e, "cannot score '%.12s'", c->commit.hex);
	r->lr_prob = omen_model_predict_lr(s->model, &sm);
	memcpy(r->id, c->commit.hex, sizeof(r->id));
	r->summary = summary_of(&set->arena, c->commit.message);
	r->time = c->commit.author_time;
	r->is_fix = is_fix;
	r->capped = sm.capped;
	r->la = sm.la;
	r->ld = sm.ld;
	r->nfiles = (int32_t)c->nfiles;
	r->nhunks = (int32_t)c->nhunks;
	memcpy(r->metrics, sm.metrics, sizeof(r->metrics));
	for (k = 0; k < c->nfiles; k++) {
		const omen_file *cf = &c->files[k];
		if (!(cf->flags & OMEN_FILE_TOO_LARGE))
			continue;
		if (!r->nskipped++) {
			const char *p = cf->new_path ? cf->new_path : cf->old_path ? cf->old_path : "";
			r->skipped_path = omen_arena_strndup(&set->arena, p, strlen(p));
		}
	}
	r->band = r->prob >= s->threshold ? OMEN_BAND_HIGH :
		r->prob >= s->medium ? OMEN_BAND_MEDIUM : OMEN_BAND_LOW;
	first = set->nhunks;
	total = 0;
	for (h = 0; h < sm.nhunks; h++)
		total += (double)sm.hunk_new_lines[h] + sm.hunk_old_lines[h];
	for (f = 0; f < sm.nfiles; f++) {
		const char *path = omen_arena_strndup(&set->arena, sm.file_path[f], strlen(sm.file_path[f]));
		if (!path)
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		for (h = sm.file_off[f]; h < sm.file_off[f + 1]; h++) {
			omen_hunk_score *hs = &set->hunks[set->nhunks++];
			hs->path = path;
			hs->new_start = sm.hunk_new_start[h];
			hs->new_lines = sm.hunk_new_lines[h];
			hs->old_start = sm.hunk_old_start[h];
			hs->old_lines = sm.hunk_old_lines[h];
			if (ex && f < ex->nfiles && h < ex->nhunks) {
				hs->weight = ex->file_attn[f] * ex->hunk_attn[h];
				hs->contrib = ex->hunk_contrib[h];
			} else {
				/* no attention computed: share of the lines changed */
				hs->weight = total > 0 ? (float)((hs->new_lines + hs->old_lines) / total) :
					1.0f / (float)sm.nhunks;
				hs->contrib = 0;
			}
		}
	}
	k = set->nhunks - first;
	qsort(set->hunks + first, k, sizeof(*set->hunks), cmp_hunk_weight);
	keep = s->detail ? k : (k < 3 ? k : 3);
	set->nhunks = first + keep;
	r->hunk_off = first;
	r->nhunk_scores = keep;
	score_reasons(r, s, &sm, ex, keep ? &set->hunks[first] : NULL);
	set->n++;
	return 0;
}

int score_one(omen_score_set *set, const omen_scorer *s, const omen_change *c,
	const omen_metrics *state, int is_fix, omen_sample_buf *sb, omen_explain *ex,
	omen_sample *out_sample)
{
	omen_sample sm;
	int e;
	if ((e = omen_sample_build(&sm, sb, c, state, is_fix, &s->caps)))
		return omen_error_wrap(e, "cannot build the sample of '%.12s'", c->commit.hex);
	if ((e = score_sample(set, s, c, &sm, ex)))
		return e;
	if (out_sample)
		*out_sample = sm;
	return 0;
}

/* ---- walking ------------------------------------------------------------- */
typedef struct {
	omen_scorer *s;
	omen_score_set *set;
	omen_metrics *state;
	const git_oid *ids;
	size_t n;
	omen_index idx;          /* ids -> position (find_id) */
	unsigned char *done;
	omen_sample_buf *sb;
	omen_explain ex;
	omen_labels *labels;     /* replay: is_fix as training saw it */
	omen_progress prog;      /* on a terminal, not in the hook */
	uint64_t walked;
	score_visit_fn visit;
	void *payload;
} walk_ctx;

/* ---- the scored ids: an index, so a replay of the whole history looks each
 * walked commit up in constant time ------------------------------------------ */
static uint64_t oid_key_hash(const git_oid *id)
{
	uint64_t h;
	memcpy(&h, id->id, sizeof(h));
	return h;
}

static uint64_t id_hash(int32_t v, const void *ctx)
{
	return oid_key_hash(&((const walk_ctx *)ctx)->ids[v]);
}

static int id_is(int32_t v, const void *key, const void *ctx)
{
	return omen_oid_equal(&((const walk_ctx *)ctx)->ids[v], key);
}

static const omen_index_ops id_ops = {id_hash, id_is};

/* Indexes w->ids; a repeated id keeps its first position. */
static int index_ids(walk_ctx *w)
{
	for (size_t i = 0; i < w->n; i++) {
		uint64_t h = oid_key_hash(&w->ids[i]);
		if (omen_index_find(&w->idx, &w->ids[i], h, &id_ops, w) < 0 &&
			omen_index_add(&w->idx, (int32_t)i, h, &id_ops, w) < 0)
			return OMEN_ENOMEM;
	}
	return 0;
}

/* Position of id among the scored ids (its first), else -1. */
static int find_id(const walk_ctx *w, const git_oid *id)
{
	return omen_index_find(&w->idx, id, oid_key_hash(id), &id_ops, w);
}

static int past_deadline(walk_ctx *w)
{
	if (w->s->deadline > 0 && omen_now() > w->s->deadline) {
		w->set->stopped = 1;
		return omen_error_set(OMEN_ELIMIT, "scoring stopped at the time limit");
	}
	return 0;
}

static int on_change(const omen_change *c, void *payload)
{
	walk_ctx *w = payload;
	const omen_label_rec *lr;
	int is_fix, k, e;
	if ((e = past_deadline(w)))
		return e;
	lr = w->labels ? omen_labels_get(w->labels, c->commit.hex) : NULL;
	is_fix = lr ? lr->is_fix != 0 : score_is_fix(w->s, &c->commit);
	k = find_id(w, &c->commit.id);
	if (k >= 0 && !w->done[k]) {
		omen_sample sm;
		w->done[k] = 1;
		if ((e = score_one(w->set, w->s, c, w->state, is_fix, w->sb, &w->ex, &sm)))
			return e;
		if (w->visit && (e = w->visit(w->payload, c, &sm, &w->ex, &w->set->v[w->set->n - 1])))
			return e;
	}
	if (w->prog.enabled) {
		char extra[64];
		snprintf(extra, sizeof(extra), "commits read, %zu of %zu scored", w->set->n, w->n);
		omen_progress_update(&w->prog, ++w->walked, extra);
	}
	return omen_metrics_update(w->state, c, is_fix);
}

static int push_hex(char **revs, size_t *nr, const char *prefix, const git_oid *id)
{
	char hex[GIT_OID_HEXSZ + 2];
	size_t k = strlen(prefix);
	memcpy(hex, prefix, k);
	omen_oid_hex(hex + k, sizeof(hex) - k, id);
	if (!(revs[(*nr)++] = strdup(hex)))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	return 0;
}

void score_load_labels(omen_labels **out, omen_repo *r)
{
	char *path = NULL;
	*out = NULL;
	int64_t lim = 0;
	if (omen_config_int(&lim, r, "omen.memoryLimit") || omen_labels_path(&path, r, NULL) ||
	    omen_labels_load_max(out, path, lim))
		*out = NULL;
	omen_error_clear();
	free(path);
}

/* Merges are never scored: one left over needs no replay. */
static int is_merge(omen_repo *r, const git_oid *id)
{
	size_t np;
	return omen_history_parent_count(&np, r, id) == 0 && np > 1;
}

/* 2a. commits of the training history: their samples, built when training
 * read the history, are in the dataset cache, keyed by the history up to
 * the model's head, the labels and the caps. When that cache is there,
 * score from it (the same samples training saw) and read only each scored
 * commit's own diff, instead of replaying the whole history. A missing or
 * stale cache is not an error: the replay below covers what is left. */
static int score_cached(walk_ctx *w, const omen_walk_opts *wo)
{
	omen_dataset_opts dopt;
	omen_dataset *ds = NULL;
	omen_change c;
	char head[GIT_OID_HEXSZ + 1];
	const char *revs[2] = {head, NULL};
	size_t i, nd;
	int e = 0, k;

	memset(&dopt, 0, sizeof(dopt));
	omen_oid_hex(head, sizeof(head), &w->s->head);
	dopt.revs = revs;
	dopt.caps = w->s->caps;
	dopt.use_cache = 1;
	dopt.cache_only = 1;
	if (omen_dataset_build(&ds, w->s->repo, &dopt))
		ds = NULL;
	omen_error_clear();
	if (!ds)
		return 0;
	omen_change_init(&c);
	nd = omen_dataset_size(ds);
	for (i = 0; i < nd && !e; i++) {
		const omen_sample *sm = omen_dataset_get(ds, i);
		git_oid id;
		if (omen_oid_parse(&id, sm->id) || (k = find_id(w, &id)) < 0 || w->done[k])
			continue;
		if ((e = past_deadline(w)) || (e = omen_history_change(&c, w->s->repo, &id, wo)))
			break;
		w->done[k] = 1;
		if (!(e = score_sample(w->set, w->s, &c, sm, &w->ex))) {
			w->set->from_cache++;
			if (w->visit)
				e = w->visit(w->payload, &c, sm, &w->ex, &w->set->v[w->set->n - 1]);
		}
		omen_change_clear(&c);
	}
	omen_change_free(&c);
	omen_dataset_free(ds);
	return e;
}

int score_walk(omen_score_set *set, omen_scorer *s, const git_oid *ids, size_t n,
	score_visit_fn visit, void *payload)
{
	walk_ctx w;
	omen_walk_opts wo = OMEN_WALK_OPTS_INIT;
	char **revs = NULL;
	size_t i, nr = 0, left = 0;
	int e = 0;

	memset(&w, 0, sizeof(w));
	set->threshold = s->threshold;
	w.s = s;
	w.set = set;
	w.ids = ids;
	w.n = n;
	w.visit = visit;
	w.payload = payload;
	if (n == 0)
		return 0;
	if (!(w.done = calloc(n, 1)) || !(revs = calloc(n + 2, sizeof(*revs)))) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	if ((e = index_ids(&w)))
		goto out;
	if ((e = omen_sample_buf_new(&w.sb)))
		goto out;
	/* absent blobs of a partial clone (issue 12): the scored commits' in
	 * one batch, not one fetch per commit; the hook never waits on a
	 * fetch and reads what is there */
	if (s->lazy)
		wo.missing_blobs = OMEN_MISSING_SKIP;
	else if ((e = omen_history_prefetch(s->repo, &wo, ids, n)))
		goto out;
	if (!s->lazy)
		omen_progress_start(&w.prog, "score", 0);
	if (s->head_known) {
		/* 1. every commit after the model's head up to the scored ones,
		 * oldest first, from the state saved at the head: each feeds the
		 * state, the scored ones are scored first */
		if ((e = state_clone(&w.state, s)))
			goto out;
		for (i = 0; i < n && !e; i++)
			e = push_hex(revs, &nr, "", &ids[i]);
		if (e || (e = push_hex(revs, &nr, "^", &s->head)))
			goto out;
		wo.revs = (const char *const *)revs;
		if ((e = omen_history_walk(s->repo, &wo, on_change, &w)))
			goto out;
		omen_metrics_free(w.state);
		w.state = NULL;
	}
	for (i = 0; i < n; i++)
		left += !w.done[i];
	if (left && !s->lazy && s->head_known) {
		if ((e = score_cached(&w, &wo)))
			goto out;
		for (left = 0, i = 0; i < n; i++)
			left += !w.done[i] && !is_merge(s->repo, &ids[i]);
	}
	if (left && s->lazy) {
		/* 2'. the hook has no time for a replay: score them one by one
		 * against the saved state (which already counts them: advisory
		 * and fast rather than exact) */
		omen_change c;
		omen_change_init(&c);
		if ((e = state_clone(&w.state, s)))
			goto out;
		for (i = 0; i < n && !e; i++) {
			if (w.done[i])
				continue;
			if ((e = past_deadline(&w)) || (e = omen_history_change(&c, s->repo, &ids[i], &wo)))
				break;
			if (c.commit.nparents <= 1) {
				w.done[i] = 1;
				s->approx = 1;
				e = score_one(set, s, &c, w.state, score_is_fix(s, &c.commit), w.sb, &w.ex, NULL);
				s->approx = 0;
			}
			omen_change_clear(&c);
		}
		omen_change_free(&c);
		if (e)
			goto out;
	} else if (left) {
		/* 2. commits at or before the model's head (or a head this
		 * repository lacks): the saved state already holds them and what
		 * came after, so replay the history from its start as training
		 * did, with the labels' fix flags, and score them on the way */
		for (i = 0; i < nr; i++) {
			free(revs[i]);
			revs[i] = NULL;
		}
		nr = 0;
		if (s->head_known) {
			e = push_hex(revs, &nr, "", &s->head);
		} else {
			for (i = 0; i < n && !e; i++)
				if (!w.done[i])
					e = push_hex(revs, &nr, "", &ids[i]);
		}
		if (e || (e = omen_metrics_new(&w.state)))
			goto out;
		score_load_labels(&w.labels, s->repo);
		wo.revs = (const char *const *)revs;
		if ((e = omen_history_walk(s->repo, &wo, on_change, &w)))
			goto out;
	}
	/* what is still not done is a merge (not scored) */
out:
	if (w.prog.enabled)
		omen_progress_end(&w.prog);
	for (i = 0; i < nr; i++)
		free(revs[i]);
	free(revs);
	free(w.done);
	omen_index_free(&w.idx);
	omen_sample_buf_free(w.sb);
	omen_metrics_free(w.state);
	omen_labels_free(w.labels);
	omen_explain_free(&w.ex);
	return e;
}

int omen_scorer_commits(omen_score_set *out, omen_scorer *s, const git_oid *ids, size_t n)
{
	return score_walk(out, s, ids, n, NULL, NULL);
}

static int feed_only(const omen_change *c, void *payload)
{
	walk_ctx *w = payload;
	int e;
	if ((e = past_deadline(w)))
		return e;
	return omen_metrics_update(w->state, c, score_is_fix(w->s, &c->commit));
}

int omen_scorer_staged(omen_score_set *out, omen_scorer *s, const char *msg)
{
	walk_ctx w;
	omen_walk_opts wo = OMEN_WALK_OPTS_INIT;
	omen_change c;
	git_oid headid;
	char hex[GIT_OID_HEXSZ + 2], *revs[3] = {NULL, NULL, NULL};
	int e, is_fix, have_head;

	memset(&w, 0, sizeof(w));
	omen_change_init(&c);
	out->threshold = s->threshold;
	w.s = s;
	w.set = out;
	if ((e = omen_sample_buf_new(&w.sb)) || (e = state_clone(&w.state, s)))
		goto out;
	have_head = omen_history_resolve(&headid, s->repo, "HEAD") == 0;
	if (!have_head)
		omen_error_clear();
	if (have_head && s->head_known && !omen_oid_equal(&headid, &s->head)) {
		revs[0] = "HEAD";
		hex[0] = '^';
		omen_oid_hex(hex + 1, sizeof(hex) - 1, &s->head);
		revs[1] = hex;
		wo.revs = (const char *const *)revs;
		if ((e = omen_history_walk(s->repo, &wo, feed_only, &w)))
			goto out;
	}
	if ((e = omen_history_staged(&c, s->repo, &wo)))
		goto out;
	c.commit.message = msg ? msg : "";
	is_fix = score_is_fix(s, &c.commit);
	e = score_one(out, s, &c, w.state, is_fix, w.sb, &w.ex, NULL);
out:
	omen_change_free(&c);
	omen_sample_buf_free(w.sb);
	omen_metrics_free(w.state);
	omen_explain_free(&w.ex);
	return e;
}
