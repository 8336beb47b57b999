/* Fuzz target: the JSON Lines and SARIF 2.1.0 writers of `git omen score`
 * (omen_score_write_json, omen_score_write_sarif) fed odd strings and
 * numbers. The input is split at NUL bytes: the first piece is a commit
 * summary, the next ones file paths of hunks, a reason text, the model path
 * and the tool version; 4-byte groups of the last piece become the floats
 * (probability, logit, weights), so NaN and infinities occur. Oracles: the
 * JSON output is one JSON object per commit line and the SARIF output one
 * JSON document (both parsed with cJSON, RFC 8259), both valid UTF-8 with no
 * raw control bytes, and a valid UTF-8 summary comes back unchanged.
 * Corpus: fixtures/corpora/writers/. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>
#include "omen/score.h"

#define MAXP 8

static int text_ok(const char *s, size_t n)
{
	size_t i;
	for (i = 0; i < n; i++)
		if ((unsigned char)s[i] < 0x20 && s[i] != '\n')
			return 0;
	return omen_utf8_valid(s, n);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	char *copy = malloc(size + 1), *piece[MAXP + 4];
	size_t np = 0, i, k, nfl = 0;
	float fl[16] = {0.5f, 0.0f, 1.0f, 0.25f};
	omen_score_set set;
	omen_score_result *r;
	omen_buf js = OMEN_BUF_INIT, sa = OMEN_BUF_INIT;
	cJSON *j;
	if (!copy)
		return 0;
	memcpy(copy, data, size);
	copy[size] = '\0';
	piece[np++] = copy;
	for (i = 0; i < size && np < MAXP + 4; i++)
		if (copy[i] == '\0')
			piece[np++] = copy + i + 1;
	{
		const unsigned char *last = (const unsigned char *)piece[np - 1];
		size_t left = size - (size_t)((const char *)last - copy);
		for (k = 0; k + 4 <= left && nfl < 16; k += 4, nfl++)
			memcpy(&fl[nfl], last + k, 4);
	}

	omen_score_set_init(&set);
	set.threshold = fl[3];
	if (!(set.v = calloc(2, sizeof(*set.v))) || !(set.hunks = calloc(MAXP, sizeof(*set.hunks))))
		goto out;
	set.n = set.cap = 2;
	set.hunks_cap = MAXP;
	for (k = 0; k < 2; k++) {
		r = &set.v[k];
		memset(r->id, k ? '0' : 'a', OMEN_OID_HEX);  /* the second is "staged" */
		r->summary = piece[0];
		r->time = 1704096000;
		r->prob = fl[0];
		r->logit = fl[1];
		r->lr_prob = fl[2];
		r->band = (int)(data[0] % 3);
		r->capped = (int)k;
		r->la = 3, r->ld = 1, r->nfiles = 2;
		r->nreasons = 1;
		r->reasons[0].kind = (int)(data[0] % 5);
		r->reasons[0].strength = 1;
		snprintf(r->reasons[0].text, sizeof(r->reasons[0].text), "%s", np > 2 ? piece[2] : "");
		r->hunk_off = 0;
		r->nhunk_scores = np > 1 ? np - 1 : 0;
		if (r->nhunk_scores > MAXP)
			r->nhunk_scores = MAXP;
	}
	for (i = 0; i < set.v[0].nhunk_scores; i++) {
		omen_hunk_score *h = &set.hunks[i];
		h->path = piece[i + 1];
		h->new_start = (int32_t)(i * 7 + 1);
		h->new_lines = (int32_t)i;
		h->old_start = (int32_t)i;
		h->old_lines = 1;
		h->weight = fl[4 + (i % 12)];
		h->contrib = fl[(i + 1) % 16];
	}
	set.nhunks = set.v[0].nhunk_scores;

	if (omen_score_write_json(&js, &set, np > 3 ? piece[3] : "model.omen") == 0) {
		const char *p = js.ptr ? js.ptr : "", *nl;
		size_t lines = 0;
		if (!text_ok(p, js.len))
			abort();
		while (*p) {
			nl = strchr(p, '\n');
			if (!nl)
				abort();  /* every record ends its line */
			j = cJSON_ParseWithLength(p, (size_t)(nl - p));
			if (!j || !cJSON_IsObject(j))
				abort();
			if (omen_utf8_valid(piece[0], strlen(piece[0]))) {
				const cJSON *s = cJSON_GetObjectItemCaseSensitive(j, "summary");
				if (!cJSON_IsString(s) || strcmp(s->valuestring, piece[0]))
					abort();
			}
			cJSON_Delete(j);
			lines++;
			p = nl + 1;
		}
		if (lines != set.n)
			abort();
	}
	if (omen_score_write_sarif(&sa, &set, np > 4 ? piece[4] : "0.1") == 0) {
		if (!text_ok(sa.ptr ? sa.ptr : "", sa.len))
			abort();
		j = cJSON_ParseWithLength(sa.ptr ? sa.ptr : "", sa.len);
		if (!j || !cJSON_IsObject(j))
			abort();
		{
			const cJSON *v = cJSON_GetObjectItemCaseSensitive(j, "version");
			if (!cJSON_IsString(v) || strcmp(v->valuestring, "2.1.0"))
				abort();
		}
		cJSON_Delete(j);
	}
out:
	omen_buf_free(&js);
	omen_buf_free(&sa);
	omen_score_set_free(&set);
	free(copy);
	return 0;
}
