/* Score set writers and the hook installer at the library level.
 * JSON Lines are parsed back with cJSON (reference: RFC 8259 via cJSON);
 * SARIF structure per the SARIF 2.1.0 standard (sections 3.13 sarifLog,
 * 3.27 result, 3.30 region: startLine >= 1, endLine >= startLine; full
 * schema validation is tests/ref/sarif_schema.sh). Hook states follow
 * githooks(5): the hook is the file "pre-push" in the hooks directory. */
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <stdint.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>
#include <cmocka.h>
#include <cjson/cJSON.h>
#include "omen/omen.h"
#include "omen/score.h"

static void add(omen_score_set *s, const char *id, float p, int nh, const char *path)
{
	omen_score_result *r;
	int j;
	assert_int_equal(OMEN_ARRAY_RESERVE(s->v, s->cap, s->n + 1), 0);
	assert_int_equal(OMEN_ARRAY_RESERVE(s->hunks, s->hunks_cap, s->nhunks + (size_t)nh), 0);
	r = &s->v[s->n++];
	memset(r, 0, sizeof(*r));
	snprintf(r->id, sizeof(r->id), "%s", id);
	r->summary = "Fix \"quoted\" thing\twith tab";
	r->prob = p;
	r->lr_prob = NAN;   /* no baseline: written as null */
	r->band = p >= s->threshold ? OMEN_BAND_HIGH : OMEN_BAND_LOW;
	r->metrics[OMEN_M_LA] = 12;
	r->nreasons = 1;
	r->reasons[0].kind = OMEN_REASON_LARGE;
	snprintf(r->reasons[0].text, sizeof(r->reasons[0].text), "large change");
	r->hunk_off = s->nhunks;
	r->nhunk_scores = (size_t)nh;
	for (j = 0; j < nh; j++) {
		omen_hunk_score *h = &s->hunks[s->nhunks++];
		memset(h, 0, sizeof(*h));
		h->path = path;
		h->new_start = j == 0 ? 10 : 0;
		h->new_lines = j == 0 ? 3 : 0;   /* j > 0: deletion at the top */
		h->weight = j == 0 ? 0.9f : 0.1f / (float)nh;
	}
}

static void test_json_lines(void **st)
{
	omen_score_set s;
	omen_buf b = OMEN_BUF_INIT;
	char *line, *save = NULL;
	int n = 0;
	(void)st;
	omen_score_set_init(&s);
	s.threshold = 0.5f;
	add(&s, "1111111111111111111111111111111111111111", 0.75f, 2, "a b/c\xff.c");
	add(&s, "0000000000000000000000000000000000000000", 0.25f, 1, "x.c");
	assert_int_equal(omen_score_write_json(&b, &s, "/m.omen"), 0);
	for (line = strtok_r(b.ptr, "\n", &save); line; line = strtok_r(NULL, "\n", &save), n++) {
		cJSON *o = cJSON_Parse(line);
		assert_non_null(o);
		assert_true(cJSON_IsBool(cJSON_GetObjectItem(o, "risky")));
		assert_int_equal(cJSON_IsTrue(cJSON_GetObjectItem(o, "risky")), n == 0);
		assert_int_equal(cJSON_IsTrue(cJSON_GetObjectItem(o, "staged")), n == 1);
		assert_true(cJSON_IsNull(cJSON_GetObjectItem(o, "baseline_probability")));
		assert_string_equal(cJSON_GetObjectItem(o, "summary")->valuestring, "Fix \"quoted\" thing\twith tab");
		assert_true(cJSON_GetObjectItem(cJSON_GetObjectItem(o, "metrics"), "la")->valuedouble == 12);
		assert_int_equal(cJSON_GetArraySize(cJSON_GetObjectItem(o, "metrics")), OMEN_NMETRICS);
		assert_string_equal(cJSON_GetObjectItem(cJSON_GetArrayItem(cJSON_GetObjectItem(o, "reasons"), 0),
			"kind")->valuestring, "large");
		/* %.9g round-trips a float */
		assert_true((float)cJSON_GetObjectItem(o, "probability")->valuedouble == s.v[n].prob);
		if (n == 0) /* invalid UTF-8 in a path becomes U+FFFD, still valid JSON */
			assert_non_null(strstr(cJSON_GetObjectItem(cJSON_GetArrayItem(cJSON_GetObjectItem(o,
				"top_hunks"), 0), "path")->valuestring, "\xef\xbf\xbd"));
		cJSON_Delete(o);
	}
	assert_int_equal(n, 2);
	omen_buf_free(&b);
	omen_score_set_free(&s);
}

static void test_sarif(void **st)
{
	omen_score_set s;
	omen_buf b = OMEN_BUF_INIT;
	cJSON *o, *res, *r;
	(void)st;
	omen_score_set_init(&s);
	s.threshold = 0.5f;
	add(&s, "2222222222222222222222222222222222222222", 0.9f, 3, "src/a b.c");
	add(&s, "3333333333333333333333333333333333333333", 0.1f, 2, "quiet.c");
	assert_int_equal(omen_score_write_sarif(&b, &s, "9.9"), 0);
	assert_non_null(o = cJSON_Parse(b.ptr));
	assert_string_equal(cJSON_GetObjectItem(o, "version")->valuestring, "2.1.0");
	res = cJSON_GetObjectItem(cJSON_GetArrayItem(cJSON_GetObjectItem(o, "runs"), 0), "results");
	/* the risky commit's top hunk, and its small hunks only when they carry
	 * at least half an equal share (0.1/3 < 0.5/3): one result; none for
	 * the quiet commit */
	assert_int_equal(cJSON_GetArraySize(res), 1);
	r = cJSON_GetArrayItem(res, 0);
	assert_string_equal(cJSON_GetObjectItem(r, "level")->valuestring, "warning");
	{
		cJSON *pl = cJSON_GetObjectItem(cJSON_GetArrayItem(cJSON_GetObjectItem(r, "locations"), 0),
			"physicalLocation");
		cJSON *reg = cJSON_GetObjectItem(pl, "region");
		assert_string_equal(cJSON_GetObjectItem(cJSON_GetObjectItem(pl, "artifactLocation"), "uri")->valuestring,
			"src/a%20b.c");
		assert_int_equal(cJSON_GetObjectItem(reg, "startLine")->valueint, 10);
		assert_int_equal(cJSON_GetObjectItem(reg, "endLine")->valueint, 12);
	}
	assert_non_null(strstr(cJSON_GetObjectItem(cJSON_GetObjectItem(r, "message"), "text")->valuestring,
		"advisory"));
	cJSON_Delete(o);
	omen_buf_free(&b);
	/* equal shares: every hunk qualifies, deletions get line 1 */
	s.hunks[1].weight = s.hunks[2].weight = s.hunks[0].weight = 1.0f / 3;
	assert_int_equal(omen_score_write_sarif(&b, &s, "9.9"), 0);
	assert_non_null(o = cJSON_Parse(b.ptr));
	res = cJSON_GetObjectItem(cJSON_GetArrayItem(cJSON_GetObjectItem(o, "runs"), 0), "results");
	assert_int_equal(cJSON_GetArraySize(res), 3);
	r = cJSON_GetObjectItem(cJSON_GetObjectItem(cJSON_GetArrayItem(cJSON_GetObjectItem(cJSON_GetArrayItem(res, 2),
		"locations"), 0), "physicalLocation"), "region");
	assert_int_equal(cJSON_GetObjectItem(r, "startLine")->valueint, 1);
	assert_int_equal(cJSON_GetObjectItem(r, "endLine")->valueint, 1);
	cJSON_Delete(o);
	omen_buf_free(&b);
	omen_score_set_free(&s);
}

/* ---- hook installer ------------------------------------------------------ */
static char tdir[256];

static void put(const char *name, const char *text, int mode)
{
	char p[512];
	FILE *fp;
	snprintf(p, sizeof(p), "%s/%s", tdir, name);
	assert_non_null(fp = fopen(p, "wb"));
	fputs(text, fp);
	fclose(fp);
	chmod(p, (mode_t)mode);
}

static char *get(const char *name)
{
	static char buf[8192];
	char p[512];
	FILE *fp;
	size_t n;
	snprintf(p, sizeof(p), "%s/%s", tdir, name);
	if (!(fp = fopen(p, "rb")))
		return NULL;
	n = fread(buf, 1, sizeof(buf) - 1, fp);
	buf[n] = '\0';
	fclose(fp);
	return buf;
}

/* --sort: risk and per-line orders, ties in history order, each result
 * still pointing at its own hunks. */
static void test_sort(void **st)
{
	omen_score_set s;
	static const float p[5] = {0.2f, 0.8f, 0.2f, 0.5f, 0.8f};
	static const int32_t la[5] = {10, 100, 0, 4, 400};
	static const char *const rank_risk = "14302", *const rank_line = "23014";
	char id[41];
	size_t i;
	int k;
	(void)st;
	for (k = 0; k < 3; k++) {
		omen_score_set_init(&s);
		s.threshold = 0.5f;
		for (i = 0; i < 5; i++) {
			char path[8];
			snprintf(id, sizeof(id), "%040zu", i);
			snprintf(path, sizeof(path), "f%zu.c", i);
			add(&s, id, p[i], (int)i + 1, strdup(path));
			s.v[i].la = la[i];
			s.v[i].ld = i == 2 ? 1 : 0;
		}
		/* per line: 0.02, 0.008, 0.2, 0.125, 0.002 */
		assert_int_equal(omen_score_set_sort(&s, k == 0 ? OMEN_SORT_HISTORY :
			k == 1 ? OMEN_SORT_RISK : OMEN_SORT_PER_LINE), 0);
		for (i = 0; i < 5; i++) {
			size_t was = k == 0 ? i : (size_t)((k == 1 ? rank_risk : rank_line)[i] - '0');
			const omen_hunk_score *h = &s.hunks[s.v[i].hunk_off];
			char want[8];
			snprintf(id, sizeof(id), "%040zu", was);
			assert_string_equal(s.v[i].id, id);
			assert_int_equal(s.v[i].nhunk_scores, was + 1);
			snprintf(want, sizeof(want), "f%zu.c", was);
			assert_string_equal(h->path, want);
		}
		for (i = 0; i < s.nhunks; i++)
			if (i == 0 || s.hunks[i].path != s.hunks[i - 1].path)
				free((char *)s.hunks[i].path);
		omen_score_set_free(&s);
	}
}

static void test_hook_states(void **st)
{
	int s;
	char sub[300];
	(void)st;
	snprintf(tdir, sizeof(tdir), "%s/omen-hook-XXXXXX", getenv("TMPDIR") ? getenv("TMPDIR") : "/tmp");
	assert_non_null(mkdtemp(tdir));
	/* absent; the directory itself is created on install */
	snprintf(sub, sizeof(sub), "%s/hooks", tdir);
	assert_int_equal(omen_hook_status(&s, sub), 0);
	assert_int_equal(s, OMEN_HOOK_ABSENT);
	assert_int_equal(omen_hook_install(&s, sub), 0);
	assert_int_equal(s, OMEN_HOOK_OURS);
	strcat(tdir, "/hooks");
	assert_string_equal(get("pre-push"), omen_hook_shim);
	assert_non_null(strstr(omen_hook_shim, "\n" OMEN_HOOK_MARK "\n"));
	assert_int_equal(omen_hook_uninstall(&s, tdir), 0);
	assert_int_equal(s, OMEN_HOOK_ABSENT);
	assert_null(get("pre-push"));
	/* foreign -> chained -> restored */
	put("pre-push", "#!/bin/sh\necho mine\n", 0700);
	assert_int_equal(omen_hook_status(&s, tdir), 0);
	assert_int_equal(s, OMEN_HOOK_FOREIGN);
	assert_int_equal(omen_hook_install(&s, tdir), 0);
	assert_int_equal(s, OMEN_HOOK_CHAINED);
	assert_string_equal(get(OMEN_HOOK_CHAINED_NAME), "#!/bin/sh\necho mine\n");
	assert_int_equal(omen_hook_uninstall(&s, tdir), 0);
	assert_int_equal(s, OMEN_HOOK_FOREIGN);
	assert_string_equal(get("pre-push"), "#!/bin/sh\necho mine\n");
	assert_null(get(OMEN_HOOK_CHAINED_NAME));
	/* a foreign hook is never removed */
	assert_int_equal(omen_hook_uninstall(&s, tdir), OMEN_EUSAGE);
	assert_non_null(strstr(omen_error_last(), "is not omen's"));
	/* a leftover chained file blocks chaining instead of being overwritten */
	put(OMEN_HOOK_CHAINED_NAME, "old\n", 0600);
	assert_int_equal(omen_hook_install(&s, tdir), OMEN_EUSAGE);
	assert_non_null(strstr(omen_error_last(), "in the way"));
	assert_string_equal(get("pre-push"), "#!/bin/sh\necho mine\n");
	assert_string_equal(get(OMEN_HOOK_CHAINED_NAME), "old\n");
	{
		char cmd[600];
		*strrchr(tdir, '/') = '\0';
		snprintf(cmd, sizeof(cmd), "rm -rf '%s'", tdir);
		assert_int_equal(system(cmd), 0);
	}
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_json_lines),
		cmocka_unit_test(test_sarif),
		cmocka_unit_test(test_sort),
		cmocka_unit_test(test_hook_states),
	};
	return cmocka_run_group_tests_name("score_output", tests, NULL, NULL);
}
