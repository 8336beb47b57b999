/* Writes SARIF and JSON Lines for a synthetic score set (no model needed):
 * risky and quiet commits, a staged change, a deletion-only hunk, a path with
 * spaces and non-ASCII bytes. tests/ref/sarif_schema.sh validates the SARIF
 * against the published SARIF 2.1.0 schema.
 * usage: sarif_synth sarif|json|empty */
#include <stdio.h>
#include <string.h>
#include "omen/omen.h"
#include "omen/score.h"

static void add(omen_score_set *s, const char *id, const char *summary, float p, int nh,
	const char *const *paths)
{
	omen_score_result *r;
	int j;
	OMEN_ARRAY_RESERVE(s->v, s->cap, s->n + 1);
	OMEN_ARRAY_RESERVE(s->hunks, s->hunks_cap, s->nhunks + (size_t)nh);
	r = &s->v[s->n++];
	memset(r, 0, sizeof(*r));
	snprintf(r->id, sizeof(r->id), "%s", id);
	r->summary = summary;
	r->prob = p;
	r->logit = p;
	r->band = p >= s->threshold ? OMEN_BAND_HIGH : OMEN_BAND_LOW;
	r->la = 10 * nh;
	r->nfiles = nh;
	r->nhunks = nh;
	r->nreasons = 1;
	r->reasons[0].kind = OMEN_REASON_HUNK;
	snprintf(r->reasons[0].text, sizeof(r->reasons[0].text), "%s:3-9", paths[0]);
	r->hunk_off = s->nhunks;
	r->nhunk_scores = (size_t)nh;
	for (j = 0; j < nh; j++) {
		omen_hunk_score *h = &s->hunks[s->nhunks++];
		memset(h, 0, sizeof(*h));
		h->path = paths[j];
		h->new_start = j == 1 ? 0 : 3 + j;   /* j == 1: deletion at the top of the file */
		h->new_lines = j == 1 ? 0 : 7;
		h->old_start = 3;
		h->old_lines = 2;
		h->weight = 1.0f / (float)(j + 1) / 2.0f;
		h->contrib = 0.1f;
	}
}

int main(int argc, char **argv)
{
	static const char *const p1[] = {"src/net/conn.c", "src/old.c", "docs/read me.md"};
	static const char *const p2[] = {"lib/caf\xc3\xa9.py"};
	omen_score_set s;
	omen_buf b = OMEN_BUF_INIT;
	const char *what = argc > 1 ? argv[1] : "sarif";
	omen_score_set_init(&s);
	s.threshold = 0.4f;
	if (strcmp(what, "empty")) {
		add(&s, "3f1c2a9b0d4e5f60718293a4b5c6d7e8f9012345", "Rework \"connection\" retry loop", 0.81f, 3, p1);
		add(&s, "0123456789abcdef0123456789abcdef01234567", "Tidy comments", 0.05f, 1, p2);
		add(&s, "0000000000000000000000000000000000000000", "", 0.55f, 1, p2);
	}
	if (!strcmp(what, "json"))
		omen_score_write_json(&b, &s, "/tmp/model.omen");
	else
		omen_score_write_sarif(&b, &s, OMEN_VERSION);
	fwrite(b.ptr, 1, b.len, stdout);
	omen_buf_free(&b);
	omen_score_set_free(&s);
	return 0;
}
