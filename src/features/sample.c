/* One commit as the model sees it (include/omen/features.h "model sample"):
 * ragged token arrays per hunk and file, message tokens, file facts and the
 * change metrics, with caps on huge commits (largest files and hunks first).
 * The same builder serves training and scoring, so there is no skew. */
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/features.h"
#include "features/internal.h"

int omen_sample_buf_new(omen_sample_buf **out)
{
	*out = calloc(1, sizeof(**out));
	return *out ? 0 : omen_error_set(OMEN_ENOMEM, "out of memory");
}

void omen_sample_buf_free(omen_sample_buf *b)
{
	if (!b)
		return;
	free(b->file_off); free(b->hunk_off); free(b->tok); free(b->tok_line); free(b->msg);
	free(b->facts); free(b->hs); free(b->paths); free(b->order); free(b->path_ptr);
	free(b->hunk_new_start); free(b->hunk_new_lines); free(b->hunk_old_start); free(b->hunk_old_lines);
	omen_buf_free(&b->names);
	free(b);
}

uint32_t omen_token_id(const char *tok, size_t len, int deleted)
{
	uint32_t h = (uint32_t)(omen_hash64(tok, len, OMEN_HASH_SEED) % (OMEN_VOCAB / 2));
	return deleted ? h + OMEN_VOCAB / 2 : h;
}

uint32_t omen_msg_token_id(const char *tok, size_t len)
{
	return (uint32_t)(omen_hash64(tok, len, OMEN_HASH_SEED) % OMEN_MSG_VOCAB);
}

typedef struct {
	omen_sample_buf *b;
	int32_t line;
	int deleted;
	int32_t limit;   /* tokens allowed in this hunk */
	int32_t count;
	int full;
	int err;
} tok_ctx;

static void on_code_token(const char *tok, size_t len, void *payload)
{
	tok_ctx *t = payload;
	omen_sample_buf *b = t->b;
	if (t->err || t->count >= t->limit) {
		t->full = 1;
		return;
	}
	if (OMEN_ARRAY_RESERVE(b->tok, b->tok_cap, (size_t)b->ntok + 1) ||
		OMEN_ARRAY_RESERVE(b->tok_line, b->tok_line_cap, (size_t)b->ntok + 1)) {
		t->err = 1;
		return;
	}
	b->tok[b->ntok] = omen_token_id(tok, len, t->deleted);
	b->tok_line[b->ntok] = t->deleted ? -t->line : t->line;
	b->ntok++;
	t->count++;
}

static void on_msg_token(const char *tok, size_t len, void *payload)
{
	tok_ctx *t = payload;
	omen_sample_buf *b = t->b;
	if (t->err || t->count >= t->limit) {
		t->full = 1;
		return;
	}
	if (OMEN_ARRAY_RESERVE(b->msg, b->msg_cap, (size_t)b->nmsg + 1)) {
		t->err = 1;
		return;
	}
	b->msg[b->nmsg++] = omen_msg_token_id(tok, len);
	t->count++;
}

/* Sort keys: size descending, index ascending (stable, deterministic). */
typedef struct { int64_t size; int32_t idx; } keyed;

static int cmp_keyed(const void *x, const void *y)
{
	const keyed *a = x, *b = y;
	if (a->size != b->size)
		return a->size > b->size ? -1 : 1;
	return a->idx < b->idx ? -1 : a->idx > b->idx;
}

static int cmp_idx(const void *x, const void *y)
{
	const keyed *a = x, *b = y;
	return a->idx < b->idx ? -1 : a->idx > b->idx;
}

/* Picks the k largest of n (by size), returned in original order in out. */
static int pick_largest(keyed *out, const int64_t *size, int n, int k)
{
	int i;
	for (i = 0; i < n; i++) {
		out[i].size = size[i];
		out[i].idx = i;
	}
	if (n > k) {
		qsort(out, (size_t)n, sizeof(*out), cmp_keyed);
		n = k;
	}
	qsort(out, (size_t)n, sizeof(*out), cmp_idx);
	return n;
}

/* A commit-wide token budget shared by its kept hunks, so that one huge
 * commit costs at most a few ordinary ones in time and memory: the limit
 * of tokens per hunk (never under 32). */
static int32_t hunk_token_limit(const omen_change *c, const keyed *fsel, int nf,
	const omen_caps *caps)
{
	int64_t kept_hunks = 0;
	int32_t limit;
	for (int i = 0; i < nf; i++) {
		int64_t nh = c->files[fsel[i].idx].nhunks;
		if (caps->max_hunks_per_file > 0 && nh > caps->max_hunks_per_file)
			nh = caps->max_hunks_per_file;
		kept_hunks += nh;
	}
	limit = caps->max_tokens_per_hunk > 0 ? caps->max_tokens_per_hunk : INT32_MAX;
	if (kept_hunks > 0 && OMEN_SAMPLE_TOKEN_BUDGET / kept_hunks < limit)
		limit = (int32_t)(OMEN_SAMPLE_TOKEN_BUDGET / kept_hunks > 32
			? OMEN_SAMPLE_TOKEN_BUDGET / kept_hunks : 32);
	return limit;
}

/* Appends hunk h: its position (new start, new lines, old start, old lines)
 * and the tokens of its lines up to limit. *capped is set when tokens were
 * dropped. */
static int add_hunk(omen_sample_buf *b, const omen_change *c, const omen_hunk *h,
	int32_t limit, int *capped)
{
	int32_t *hs;
	tok_ctx t;
	if (OMEN_ARRAY_RESERVE(b->hs, b->hs_cap, ((size_t)b->nhunks + 1) * 4))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	hs = b->hs + (size_t)b->nhunks * 4;
	hs[0] = h->new_start; hs[1] = h->new_lines;
	hs[2] = h->old_start; hs[3] = h->old_lines;
	memset(&t, 0, sizeof(t));
	t.b = b;
	t.limit = limit;
	for (uint32_t l = 0; l < h->nlines && !t.full; l++) {
		const omen_line *ln = &c->lines[h->line_off + l];
		t.deleted = ln->origin == '-';
		t.line = t.deleted ? ln->old_lineno : ln->new_lineno;
		omen_tokenize_code(omen_line_text(c, ln), ln->text_len, on_code_token, &t);
	}
	if (t.err)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	*capped |= t.full;
	b->nhunks++;
	b->hunk_off[b->nhunks] = b->ntok;
	return 0;
}

/* Appends the i-th kept file (change index fi): its path, facts and its
 * largest hunks. sizes and hsel are scratch of at least the change's hunk
 * count. */
static int add_file(omen_sample_buf *b, const omen_change *c, const omen_metrics *m, int i,
	int fi, const omen_caps *caps, int32_t hunk_limit, int64_t *sizes, keyed *hsel, int *capped)
{
	const omen_file *f = &c->files[fi];
	int nh = (int)f->nhunks, k, kept, e;
	const char *nm = omen_file_path(f);
	b->order[i] = fi;
	b->paths[i] = b->names.len;   /* offset, turned into a pointer at the end */
	if ((e = omen_buf_put(&b->names, nm, strlen(nm) + 1)))
		return e;
	if (m) {
		if ((e = omen_metrics_file_facts(b->facts + (size_t)i * OMEN_NFACTS, m, c, (size_t)fi)))
			return e;
	} else {
		memset(b->facts + (size_t)i * OMEN_NFACTS, 0, OMEN_NFACTS * sizeof(float));
	}
	for (k = 0; k < nh; k++) {
		const omen_hunk *h = &c->hunks[f->hunk_off + k];
		sizes[k] = (int64_t)h->old_lines + h->new_lines;
	}
	kept = pick_largest(hsel, sizes, nh,
		caps->max_hunks_per_file > 0 ? caps->max_hunks_per_file : nh);
	*capped |= kept < nh;
	if (OMEN_ARRAY_RESERVE(b->hunk_off, b->hunk_off_cap, (size_t)b->nhunks + kept + 1) ||
		OMEN_ARRAY_RESERVE(b->hs, b->hs_cap, (size_t)b->nhunks + kept + 1))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (k = 0; k < kept; k++)
		if ((e = add_hunk(b, c, &c->hunks[f->hunk_off + hsel[k].idx], hunk_limit, capped)))
			return e;
	b->nfiles++;
	b->file_off[b->nfiles] = b->nhunks;
	return 0;
}

/* Points the sample at the buffer's arrays: path pointers and the hunk
 * position columns are made here from the offsets and the packed rows. */
static int set_views(omen_sample *out, omen_sample_buf *b, int capped)
{
	int i;
	if (OMEN_ARRAY_RESERVE(b->path_ptr, b->path_ptr_cap, (size_t)b->nfiles + 1))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0; i < b->nfiles; i++)
		b->path_ptr[i] = b->names.ptr + b->paths[i];
	if (OMEN_ARRAY_RESERVE(b->hunk_new_start, b->hunk_new_start_cap, (size_t)b->nhunks + 1) ||
		OMEN_ARRAY_RESERVE(b->hunk_new_lines, b->hunk_new_lines_cap, (size_t)b->nhunks + 1) ||
		OMEN_ARRAY_RESERVE(b->hunk_old_start, b->hunk_old_start_cap, (size_t)b->nhunks + 1) ||
		OMEN_ARRAY_RESERVE(b->hunk_old_lines, b->hunk_old_lines_cap, (size_t)b->nhunks + 1))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0; i < b->nhunks; i++) {
		b->hunk_new_start[i] = b->hs[(size_t)i * 4];
		b->hunk_new_lines[i] = b->hs[(size_t)i * 4 + 1];
		b->hunk_old_start[i] = b->hs[(size_t)i * 4 + 2];
		b->hunk_old_lines[i] = b->hs[(size_t)i * 4 + 3];
	}
	out->capped = (uint8_t)capped;
	out->nfiles = b->nfiles;
	out->nhunks = b->nhunks;
	out->ntok = b->ntok;
	out->nmsg = b->nmsg;
	out->file_off = b->file_off;
	out->hunk_off = b->hunk_off;
	out->tok = b->tok;
	out->tok_line = b->tok_line;
	out->msg = b->msg;
	out->file_facts = b->facts;
	out->hunk_new_start = b->hunk_new_start;
	out->hunk_new_lines = b->hunk_new_lines;
	out->hunk_old_start = b->hunk_old_start;
	out->hunk_old_lines = b->hunk_old_lines;
	out->file_path = (const char *const *)b->path_ptr;
	return 0;
}

int omen_sample_build(omen_sample *out, omen_sample_buf *b, const omen_change *c,
	const omen_metrics *m, int is_fix, const omen_caps *caps)
{
	omen_caps dc = OMEN_CAPS_DEFAULT;
	double met[OMEN_NMETRICS];
	int64_t *sizes = NULL;
	keyed *fsel = NULL, *hsel = NULL;
	int e = 0, nf, i, j, nfile = (int)c->nfiles, capped = 0;
	size_t need;
	int32_t hunk_limit;
	tok_ctx t;

	if (!caps)
		caps = &dc;
	memset(out, 0, sizeof(*out));
	b->nfiles = b->nhunks = b->ntok = b->nmsg = 0;
	omen_buf_clear(&b->names);
	memcpy(out->id, c->commit.hex, sizeof(out->id));
	out->id[OMEN_OID_HEX] = '\0';
	out->time = c->commit.author_time;
	out->label = -1;
	out->is_fix = (int8_t)(is_fix != 0);

	need = c->nfiles > c->nhunks ? c->nfiles : c->nhunks;
	sizes = malloc((need + 1) * sizeof(*sizes));
	fsel = malloc((c->nfiles + 1) * sizeof(*fsel));
	hsel = malloc((c->nhunks + 1) * sizeof(*hsel));
	if (!sizes || !fsel || !hsel) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	for (i = 0; i < nfile; i++) {
		out->la += (int32_t)c->files[i].added;
		out->ld += (int32_t)c->files[i].deleted;
		sizes[i] = (int64_t)c->files[i].added + c->files[i].deleted;
	}
	nf = pick_largest(fsel, sizes, nfile, caps->max_files > 0 ? caps->max_files : nfile);
	capped |= nf < nfile;

	if (OMEN_ARRAY_RESERVE(b->file_off, b->file_off_cap, (size_t)nf + 1) ||
		OMEN_ARRAY_RESERVE(b->facts, b->facts_cap, (size_t)(nf ? nf : 1) * OMEN_NFACTS) ||
		OMEN_ARRAY_RESERVE(b->paths, b->paths_cap, (size_t)nf + 1) ||
		OMEN_ARRAY_RESERVE(b->order, b->order_cap, (size_t)nf + 1)) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	if (OMEN_ARRAY_RESERVE(b->hunk_off, b->hunk_off_cap, 1)) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	b->file_off[0] = 0;
	b->hunk_off[0] = 0;
	hunk_limit = hunk_token_limit(c, fsel, nf, caps);
	for (i = 0; i < nf; i++)
		if ((e = add_file(b, c, m, i, fsel[i].idx, caps, hunk_limit, sizes, hsel, &capped)))
			goto out;
	memset(&t, 0, sizeof(t));
	t.b = b;
	t.limit = caps->max_msg_tokens > 0 ? caps->max_msg_tokens : INT32_MAX;
	if (c->commit.message)
		omen_tokenize_message(c->commit.message, strlen(c->commit.message), on_msg_token, &t);
	if (t.err) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	/* message truncation is not a cap worth reporting: long messages are
	 * mostly boilerplate */
	if (m) {
		if ((e = omen_metrics_compute(met, m, c, is_fix)))
			goto out;
		for (j = 0; j < OMEN_NMETRICS; j++)
			out->metrics[j] = (float)met[j];
	}
	e = set_views(out, b, capped);
out:
	free(sizes);
	free(fsel);
	free(hsel);
	return e;
}
