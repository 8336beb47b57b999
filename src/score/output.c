/* Score sets: their order (--sort) and their writers, JSON Lines (fields in
 * git-omen-score(1)) and SARIF 2.1.0 (OASIS Static Analysis Results
 * Interchange Format, version 2.1.0, 2020: one result per risky hunk with a
 * file and line region). */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/rank.h"
#include "omen/score.h"

const char *const omen_band_names[3] = {"low", "medium", "high"};

int omen_score_set_sort(omen_score_set *s, omen_sort_key key)
{
	double *neg;
	size_t *order = NULL, i;
	omen_score_result *v;
	int e;
	if (key == OMEN_SORT_HISTORY || s->n < 2)
		return 0;
	neg = malloc(s->n * sizeof(*neg));
	v = malloc(s->n * sizeof(*v));
	if (!neg || !v) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	/* ascending order of the negated key, ties by index: highest first,
	 * ties in history order */
	for (i = 0; i < s->n; i++) {
		const omen_score_result *r = &s->v[i];
		double lines = (double)r->la + (double)r->ld;
		neg[i] = -(key == OMEN_SORT_RISK ? (double)r->prob :
			(double)r->prob / (lines > 1 ? lines : 1));
	}
	if ((e = omen_sort_scores(&order, neg, s->n)))
		goto out;
	for (i = 0; i < s->n; i++)
		v[i] = s->v[order[i]];
	memcpy(s->v, v, s->n * sizeof(*v));
out:
	free(neg);
	free(v);
	free(order);
	return e;
}
const char *const omen_reason_names[5] = {"hunk", "large", "diffuse", "fix-history", "metric"};

void omen_score_set_init(omen_score_set *s)
{
	memset(s, 0, sizeof(*s));
	omen_arena_init(&s->arena, 16 * 1024);
	s->threshold = 0.5f;
}

void omen_score_set_free(omen_score_set *s)
{
	if (!s)
		return;
	free(s->v);
	free(s->hunks);
	omen_arena_free(&s->arena);
	s->v = NULL;
	s->hunks = NULL;
	s->n = s->cap = s->nhunks = s->hunks_cap = 0;
}

int omen_score_write_json(omen_buf *out, const omen_score_set *s, const char *model_path)
{
	size_t i, j;
	for (i = 0; i < s->n && !omen_buf_error(out); i++) {
		const omen_score_result *r = &s->v[i];
		omen_buf_puts(out, "{\"id\":");
		omen_buf_put_json_cstr(out, r->id);
		omen_buf_puts(out, ",\"staged\":");
		omen_buf_puts(out, strspn(r->id, "0") == strlen(r->id) ? "true" : "false");
		omen_buf_puts(out, ",\"summary\":");
		omen_buf_put_json_cstr(out, r->summary);
		omen_buf_printf(out, ",\"time\":%lld,\"probability\":", (long long)r->time);
		omen_buf_put_json_number(out, r->prob, 9);
		omen_buf_puts(out, ",\"logit\":");
		omen_buf_put_json_number(out, r->logit, 9);
		omen_buf_puts(out, ",\"baseline_probability\":");
		omen_buf_put_json_number(out, r->lr_prob, 9);
		omen_buf_puts(out, ",\"threshold\":");
		omen_buf_put_json_number(out, s->threshold, 9);
		omen_buf_printf(out, ",\"risky\":%s,\"band\":\"%s\",\"is_fix\":%s,\"capped\":%s",
			r->prob >= s->threshold ? "true" : "false", omen_band_names[r->band],
			r->is_fix ? "true" : "false", r->capped ? "true" : "false");
		omen_buf_printf(out, ",\"lines_added\":%d,\"lines_deleted\":%d,\"files\":%d,\"hunks\":%d",
			(int)r->la, (int)r->ld, (int)r->nfiles, (int)r->nhunks);
		omen_buf_puts(out, ",\"metrics\":{");
		for (j = 0; j < OMEN_NMETRICS; j++) {
			omen_buf_printf(out, "%s\"%s\":", j ? "," : "", omen_metric_names[j]);
			omen_buf_put_json_number(out, r->metrics[j], 9);
		}
		omen_buf_puts(out, "},\"reasons\":[");
		for (j = 0; j < (size_t)r->nreasons; j++) {
			omen_buf_printf(out, "%s{\"kind\":\"%s\",\"text\":", j ? "," : "",
				omen_reason_names[r->reasons[j].kind]);
			omen_buf_put_json_cstr(out, r->reasons[j].text);
			omen_buf_puts(out, "}");
		}
		omen_buf_puts(out, "],\"top_hunks\":[");
		for (j = 0; j < r->nhunk_scores; j++) {
			const omen_hunk_score *h = &s->hunks[r->hunk_off + j];
			omen_buf_puts(out, j ? ",{\"path\":" : "{\"path\":");
			omen_buf_put_json_cstr(out, h->path);
			omen_buf_printf(out, ",\"new_start\":%d,\"new_lines\":%d,\"old_start\":%d,"
				"\"old_lines\":%d,\"weight\":", (int)h->new_start, (int)h->new_lines,
				(int)h->old_start, (int)h->old_lines);
			omen_buf_put_json_number(out, h->weight, 9);
			omen_buf_puts(out, ",\"contribution\":");
			omen_buf_put_json_number(out, h->contrib, 9);
			omen_buf_puts(out, "}");
		}
		omen_buf_puts(out, "],\"model\":");
		omen_buf_put_json_cstr(out, model_path);
		omen_buf_puts(out, "}\n");
	}
	/* the buffer remembers its first failed append: one check for all */
	return omen_buf_error(out) ? omen_error_set(OMEN_ENOMEM, "out of memory") : 0;
}

/* RFC 3986 relative reference: unreserved characters and '/' stay, every
 * other byte is percent-encoded (SARIF 2.1.0 section 3.10: URIs). */
static int put_uri(omen_buf *b, const char *path)
{
	static const char hex[] = "0123456789ABCDEF";
	const unsigned char *p = (const unsigned char *)path;
	omen_buf u = OMEN_BUF_INIT;
	int e = 0;
	for (; *p && !e; p++) {
		if ((*p >= 'a' && *p <= 'z') || (*p >= 'A' && *p <= 'Z') || (*p >= '0' && *p <= '9') ||
		    *p == '-' || *p == '.' || *p == '_' || *p == '~' || *p == '/') {
			e = omen_buf_put(&u, p, 1);
		} else {
			char t[3] = {'%', hex[*p >> 4], hex[*p & 15]};
			e = omen_buf_put(&u, t, 3);
		}
	}
	if (!e)
		e = omen_buf_put_json_cstr(b, u.ptr ? u.ptr : "");
	omen_buf_free(&u);
	return e;
}

#define SARIF_RULE "omen/risky-change"

int omen_score_write_sarif(omen_buf *out, const omen_score_set *s, const char *tool_version)
{
	size_t i, j, nres = 0;
	int e = 0;
	omen_buf_puts(out,
		"{\n  \"$schema\": \"https://json.schemastore.org/sarif-2.1.0.json\",\n"
		"  \"version\": \"2.1.0\",\n  \"runs\": [\n    {\n      \"tool\": {\n"
		"        \"driver\": {\n          \"name\": \"git-omen\",\n          \"version\": ");
	omen_buf_put_json_cstr(out, tool_version);
	omen_buf_puts(out, ",\n          \"rules\": [\n            {\n"
		"              \"id\": \"" SARIF_RULE "\",\n"
		"              \"name\": \"RiskyChange\",\n"
		"              \"shortDescription\": {\"text\": \"A commit that is likely to need a follow-up fix (advisory)\"},\n"
		"              \"fullDescription\": {\"text\": \"The commit's calibrated probability of later needing a fix, "
		"learned from this repository's own history, is at or above the threshold. The result marks the hunks "
		"the model attended to most. Scores are advisory: review and test these hunks with extra care.\"},\n"
		"              \"defaultConfiguration\": {\"level\": \"warning\"}\n"
		"            }\n          ]\n        }\n      },\n      \"results\": [");
	for (i = 0; i < s->n && !e; i++) {
		const omen_score_result *r = &s->v[i];
		size_t nh = r->nhunk_scores, taken = 0;
		if (r->prob < s->threshold || nh == 0)
			continue;
		for (j = 0; j < nh && taken < 5 && !e; j++) {
			const omen_hunk_score *h = &s->hunks[r->hunk_off + j];
			int32_t start, end;
			char shortid[11];
			if (j > 0 && h->weight < 0.5f / (float)nh)
				break;
			if (!h->path || !*h->path)
				continue;
			start = h->new_lines > 0 ? h->new_start : (h->new_start > 0 ? h->new_start : 1);
			if (start < 1)
				start = 1;
			end = h->new_lines > 0 ? start + h->new_lines - 1 : start;
			memcpy(shortid, r->id, 10);
			shortid[10] = '\0';
			omen_buf_puts(out, nres ? ",\n        {\n" : "\n        {\n");
			omen_buf_puts(out, "          \"ruleId\": \"" SARIF_RULE "\",\n"
				"          \"ruleIndex\": 0,\n          \"level\": \"warning\",\n"
				"          \"message\": {\"text\": ");
			{
				omen_buf m = OMEN_BUF_INIT;
				omen_buf_printf(&m, "commit %s has risk %.2f (%s; threshold %.2f; advisory): "
					"this hunk carries %.0f%% of the model's attention%s%s",
					strspn(r->id, "0") == strlen(r->id) ? "(staged)" : shortid, r->prob,
					omen_band_names[r->band], s->threshold, 100.0 * h->weight,
					r->summary && *r->summary ? " - " : "", r->summary ? r->summary : "");
				if (!(e = omen_buf_error(&m)))
					omen_buf_put_json_cstr(out, m.ptr);
				omen_buf_free(&m);
			}
			omen_buf_puts(out, "},\n          \"locations\": [\n            {\n"
				"              \"physicalLocation\": {\n"
				"                \"artifactLocation\": {\"uri\": ");
			if (!e)
				e = put_uri(out, h->path);
			omen_buf_printf(out, "},\n                \"region\": {\"startLine\": %d, \"endLine\": %d}\n"
				"              }\n            }\n          ],\n",
				(int)start, (int)end);
			omen_buf_puts(out, "          \"partialFingerprints\": {\"omenCommitHunk/v1\": ");
			{
				omen_buf fp = OMEN_BUF_INIT;
				omen_buf_printf(&fp, "%s:%s:%d", r->id, h->path, (int)h->new_start);
				if (!(e = omen_buf_error(&fp)))
					omen_buf_put_json_cstr(out, fp.ptr);
				omen_buf_free(&fp);
			}
			omen_buf_puts(out, "},\n          \"properties\": {\"commit\": ");
			omen_buf_put_json_cstr(out, r->id);
			omen_buf_puts(out, ", \"probability\": ");
			omen_buf_put_json_number(out, r->prob, 9);
			omen_buf_puts(out, ", \"attention\": ");
			omen_buf_put_json_number(out, h->weight, 9);
			omen_buf_puts(out, ", \"advisory\": true}\n        }");
			nres++;
			taken++;
		}
	}
	omen_buf_puts(out, nres ? "\n      ]\n    }\n  ]\n}\n" : "]\n    }\n  ]\n}\n");
	/* out remembers its first failed append; e holds a failure of the
	 * message, fingerprint or URI built beside it */
	return e || omen_buf_error(out) ? omen_error_set(OMEN_ENOMEM, "out of memory") : 0;
}

const char *omen_warn_rate_text(char *buf, size_t n, double share)
{
	if (!(share >= 0))
		snprintf(buf, n, "an unknown share of commits");
	else if (share < 0.001)
		snprintf(buf, n, "almost no commits");
	else if (share > 0.75)
		snprintf(buf, n, "almost every commit");
	else
		snprintf(buf, n, "about 1 in %.0f commits", 1.0 / share < 2 ? 2 : round(1.0 / share));
	return buf;
}
