/* One-pass line-origin tracer (see trace.h). The version table is an open
 * addressing hash map with linear probing and backward-shift deletion,
 * keyed by (64-bit path hash, blob id). */
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "label/trace.h"

typedef struct {
	uint64_t pkey;      /* path hash; 0 = empty slot */
	git_oid blob;
	uint32_t *orig;
	uint32_t n;
	int32_t ref;
	int pending;        /* on the sweep list */
} lbl_version;

struct lbl_tracer {
	lbl_trace_opts o;
	lbl_version *tab;
	size_t cap, len;
	uint64_t *sweep;    /* (pkey, blob) of candidates for freeing */
	git_oid *sweep_oid;
	size_t nsweep, sweep_cap, sweep_oid_cap;
	size_t bytes, peak;
	/* scratch */
	uint32_t *tmp;
	size_t tmp_cap;
	uint64_t *hd, *ha;
	size_t hd_cap, ha_cap;
	unsigned char *used;
	size_t used_cap;
};

static uint64_t path_key(const char *path)
{
	uint64_t h = omen_hash64(path, strlen(path), 0x6c6162656cULL);
	return h ? h : 1;
}

static size_t slot_hash(uint64_t pkey, const git_oid *blob, size_t cap)
{
	uint64_t b;
	memcpy(&b, blob->id, sizeof(b));
	return (size_t)((pkey ^ (b * 0x9e3779b97f4a7c15ULL)) & (cap - 1));
}

static lbl_version *find(const lbl_tracer *t, uint64_t pkey, const git_oid *blob)
{
	size_t i;
	if (!t->cap)
		return NULL;
	for (i = slot_hash(pkey, blob, t->cap);; i = (i + 1) & (t->cap - 1)) {
		lbl_version *v = &t->tab[i];
		if (!v->pkey)
			return NULL;
		if (v->pkey == pkey && git_oid_equal(&v->blob, blob))
			return v;
	}
}

static int grow(lbl_tracer *t)
{
	size_t ncap = t->cap ? t->cap * 2 : 1024, i;
	lbl_version *nt = calloc(ncap, sizeof(*nt));
	if (!nt)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0; i < t->cap; i++) {
		lbl_version *v = &t->tab[i];
		size_t j;
		if (!v->pkey)
			continue;
		for (j = slot_hash(v->pkey, &v->blob, ncap); nt[j].pkey; j = (j + 1) & (ncap - 1))
			;
		nt[j] = *v;
	}
	free(t->tab);
	t->tab = nt;
	t->cap = ncap;
	return 0;
}

/* Inserts an empty version (must not exist). */
static lbl_version *insert(lbl_tracer *t, uint64_t pkey, const git_oid *blob)
{
	size_t i;
	if ((t->len + 1) * 4 >= t->cap * 3 && grow(t))
		return NULL;
	for (i = slot_hash(pkey, blob, t->cap); t->tab[i].pkey; i = (i + 1) & (t->cap - 1))
		;
	memset(&t->tab[i], 0, sizeof(t->tab[i]));
	t->tab[i].pkey = pkey;
	t->tab[i].blob = *blob;
	t->len++;
	return &t->tab[i];
}

static void erase(lbl_tracer *t, lbl_version *v)
{
	size_t i = (size_t)(v - t->tab), j = i;
	t->bytes -= (size_t)v->n * sizeof(uint32_t);
	free(v->orig);
	memset(v, 0, sizeof(*v));
	t->len--;
	/* backward-shift deletion */
	for (;;) {
		size_t home;
		j = (j + 1) & (t->cap - 1);
		if (!t->tab[j].pkey)
			break;
		home = slot_hash(t->tab[j].pkey, &t->tab[j].blob, t->cap);
		if ((j > i && (home <= i || home > j)) || (j < i && home <= i && home > j)) {
			t->tab[i] = t->tab[j];
			memset(&t->tab[j], 0, sizeof(t->tab[j]));
			i = j;
		}
	}
}

static int sweep_add(lbl_tracer *t, lbl_version *v)
{
	if (v->pending)
		return 0;
	if (OMEN_ARRAY_RESERVE(t->sweep, t->sweep_cap, t->nsweep + 1) ||
	    OMEN_ARRAY_RESERVE(t->sweep_oid, t->sweep_oid_cap, t->nsweep + 1))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	t->sweep[t->nsweep] = v->pkey;
	t->sweep_oid[t->nsweep++] = v->blob;
	v->pending = 1;
	return 0;
}

int lbl_tracer_new(lbl_tracer **out, const lbl_trace_opts *o)
{
	lbl_tracer *t = calloc(1, sizeof(*t));
	*out = NULL;
	if (!t)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	t->o = *o;
	*out = t;
	return 0;
}

void lbl_tracer_free(lbl_tracer *t)
{
	size_t i;
	if (!t)
		return;
	for (i = 0; i < t->cap; i++)
		free(t->tab[i].orig);
	free(t->tab);
	free(t->sweep);
	free(t->sweep_oid);
	free(t->tmp);
	free(t->hd);
	free(t->ha);
	free(t->used);
	free(t);
}

const uint32_t *lbl_tracer_get(const lbl_tracer *t, const char *path, const git_oid *blob,
	uint32_t *nlines)
{
	lbl_version *v = find(t, path_key(path), blob);
	if (nlines)
		*nlines = v ? v->n : 0;
	return v ? (v->orig ? v->orig : (const uint32_t *)"") : NULL;
}

void lbl_tracer_ref(lbl_tracer *t, const char *path, const git_oid *blob, int delta)
{
	lbl_version *v = find(t, path_key(path), blob);
	if (!v)
		return;
	v->ref += delta;
	if (v->ref <= 0)
		sweep_add(t, v);
}

void lbl_tracer_sweep(lbl_tracer *t)
{
	size_t i;
	for (i = 0; i < t->nsweep; i++) {
		lbl_version *v = find(t, t->sweep[i], &t->sweep_oid[i]);
		if (!v)
			continue;
		v->pending = 0;
		if (v->ref <= 0)
			erase(t, v);
	}
	t->nsweep = 0;
}

int lbl_tracer_each(const lbl_tracer *t, lbl_version_cb cb, void *payload)
{
	size_t i;
	int e;
	for (i = 0; i < t->cap; i++)
		if (t->tab[i].pkey && t->tab[i].ref > 0 &&
		    (e = cb(t->tab[i].pkey, &t->tab[i].blob, t->tab[i].orig, t->tab[i].n, t->tab[i].ref, payload)))
			return e;
	return 0;
}

int lbl_tracer_put(lbl_tracer *t, uint64_t pkey, const git_oid *blob, uint32_t *orig, uint32_t n, int32_t ref)
{
	lbl_version *v;
	if (!pkey || find(t, pkey, blob)) {
		free(orig);
		return omen_error_set(OMEN_ECORRUPT, "duplicate file version in saved state");
	}
	if (!(v = insert(t, pkey, blob))) {
		free(orig);
		return OMEN_ENOMEM;
	}
	v->orig = orig;
	v->n = n;
	v->ref = ref;
	t->bytes += (size_t)n * sizeof(uint32_t);
	if (t->bytes > t->peak)
		t->peak = t->bytes;
	return 0;
}

size_t lbl_tracer_versions(const lbl_tracer *t) { return t->len; }
size_t lbl_tracer_bytes(const lbl_tracer *t) { return t->bytes; }
size_t lbl_tracer_peak_bytes(const lbl_tracer *t) { return t->peak; }

/* Files without lines to trace; a file with an absent blob (skipped, issue
 * 12) gets no new version, so its lines have unknown origins from there on,
 * except those later commits add. */
static int skipped_file(const omen_file *f)
{
	return (f->flags & (OMEN_FILE_BINARY | OMEN_FILE_TOO_LARGE | OMEN_FILE_SUBMODULE |
		OMEN_FILE_MISSING)) != 0;
}

/* Hash of a line with all whitespace removed (0 when nothing is left). */
static uint64_t ws_hash(const char *s, size_t n)
{
	uint64_t h = 1469598103934665603ULL;
	size_t i, k = 0;
	for (i = 0; i < n; i++) {
		unsigned char ch = (unsigned char)s[i];
		if (ch == ' ' || ch == '\t' || ch == '\r' || ch == '\f' || ch == '\v')
			continue;
		h = (h ^ ch) * 1099511628211ULL;
		k++;
	}
	return k ? (h | 1) : 0;
}

/* For hunk h: t->hd[i] (deleted) and t->ha[j] (added) whitespace hashes;
 * t->used marks deleted lines paired with an added one. Pairs in order:
 * each added line takes the first unpaired deleted line with equal text
 * (whitespace ignored). match[j] = deleted index or -1 (in t->tmp). */
static int ws_pair(lbl_tracer *t, const omen_change *c, const omen_hunk *h,
	uint32_t nd, uint32_t na, int32_t **match)
{
	uint32_t i, j;
	if (OMEN_ARRAY_RESERVE(t->hd, t->hd_cap, nd + 1) || OMEN_ARRAY_RESERVE(t->ha, t->ha_cap, na + 1) ||
	    OMEN_ARRAY_RESERVE(t->used, t->used_cap, nd + 1) ||
	    OMEN_ARRAY_RESERVE(t->tmp, t->tmp_cap, (size_t)na + 1))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0; i < nd; i++) {
		const omen_line *l = &c->lines[h->line_off + i];
		t->hd[i] = ws_hash(omen_line_text(c, l), l->text_len);
		t->used[i] = 0;
	}
	for (j = 0; j < na; j++) {
		const omen_line *l = &c->lines[h->line_off + nd + j];
		t->ha[j] = ws_hash(omen_line_text(c, l), l->text_len);
		t->tmp[j] = UINT32_MAX;
	}
	/* bounded work on huge hunks: pair only within a window */
	for (j = 0; j < na; j++) {
		uint32_t lo = 0, hi = nd;
		if (!t->ha[j])
			continue;
		if ((uint64_t)nd * na > 4000000u) {
			lo = j > 2000 ? j - 2000 : 0;
			hi = j + 2000 < nd ? j + 2000 : nd;
		}
		for (i = lo; i < hi; i++) {
			if (!t->used[i] && t->hd[i] == t->ha[j]) {
				t->used[i] = 1;
				t->tmp[j] = i;
				break;
			}
		}
	}
	*match = (int32_t *)t->tmp;
	return 0;
}

int lbl_tracer_trace(lbl_tracer *t, const omen_change *c, lbl_line_cb cb, void *payload)
{
	size_t fi;
	int e;
	for (fi = 0; fi < c->nfiles; fi++) {
		const omen_file *f = &c->files[fi];
		const uint32_t *orig = NULL;
		uint32_t n = 0, hi;
		if (!f->old_path || skipped_file(f) || f->status == OMEN_FILE_ADDED)
			continue;
		orig = lbl_tracer_get(t, f->old_path, &f->old_blob, &n);
		for (hi = 0; hi < f->nhunks; hi++) {
			const omen_hunk *h = &c->hunks[f->hunk_off + hi];
			uint32_t nd = (uint32_t)(h->old_lines > 0 ? h->old_lines : 0), k;
			uint32_t na = h->nlines > nd ? h->nlines - nd : 0;
			int32_t *match = NULL;
			if (!nd)
				continue;
			if (t->o.ws_keeps_origin && na && (e = ws_pair(t, c, h, nd, na, &match)))
				return e;
			for (k = 0; k < nd && k < h->nlines; k++) {
				const omen_line *l = &c->lines[h->line_off + k];
				const char *s = omen_line_text(c, l);
				uint32_t origin = LBL_NONE;
				int skip = LBL_TRACED;
				if (orig && l->old_lineno >= 1 && (uint32_t)l->old_lineno <= n)
					origin = orig[l->old_lineno - 1];
				if (t->o.skip_blank && omen_line_is_blank(s, l->text_len))
					skip = LBL_SKIP_BLANK;
				else if (t->o.skip_comments && omen_line_is_comment(s, l->text_len))
					skip = LBL_SKIP_COMMENT;
				else if (match && t->used[k])
					skip = LBL_SKIP_WS;
				else if (origin == LBL_NONE)
					skip = LBL_SKIP_NOSTATE;
				if ((e = cb(c, f, l, origin, skip, payload)))
					return e;
			}
		}
	}
	return 0;
}

static int apply_file(lbl_tracer *t, const omen_change *c, const omen_file *f, uint32_t ci)
{
	const uint32_t *old = NULL;
	uint32_t nold = 0, hi, pos = 0, k;
	size_t nnew = 0, cap;
	uint64_t pkey;
	lbl_version *v;
	uint32_t *dst;
	if (!f->new_path || skipped_file(f) || f->status == OMEN_FILE_DELETED)
		return 0;
	pkey = path_key(f->new_path);
	if (find(t, pkey, &f->new_blob))
		return 0; /* same version already held (revert to it, merge of it) */
	if (f->old_path && f->status != OMEN_FILE_ADDED) {
		old = lbl_tracer_get(t, f->old_path, &f->old_blob, &nold);
		if (!old)
			nold = f->old_nlines > 0 ? (uint32_t)f->old_nlines : 0;
	}
	cap = (size_t)nold + 1;
	for (hi = 0; hi < f->nhunks; hi++)
		cap += (size_t)(c->hunks[f->hunk_off + hi].new_lines > 0 ? c->hunks[f->hunk_off + hi].new_lines : 0);
	if (!(dst = malloc(cap * sizeof(*dst))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (hi = 0; hi < f->nhunks; hi++) {
		const omen_hunk *h = &c->hunks[f->hunk_off + hi];
		uint32_t nd = (uint32_t)(h->old_lines > 0 ? h->old_lines : 0);
		uint32_t na = (uint32_t)(h->new_lines > 0 ? h->new_lines : 0);
		uint32_t start = nd ? (uint32_t)(h->old_start - 1) : (uint32_t)(h->old_start > 0 ? h->old_start : 0);
		int32_t *match = NULL;
		int e;
		if (start > nold)
			start = nold;
		for (; pos < start; pos++)
			dst[nnew++] = old ? old[pos] : LBL_NONE;
		if (t->o.ws_keeps_origin && nd && na && h->nlines >= nd + na &&
		    (e = ws_pair(t, c, h, nd, na, &match))) {
			free(dst);
			return e;
		}
		for (k = 0; k < na; k++) {
			uint32_t o = ci;
			if (match && ((uint32_t *)match)[k] != UINT32_MAX) {
				uint32_t di = ((uint32_t *)match)[k];
				o = old && start + di < nold ? old[start + di] : LBL_NONE;
				if (o == LBL_NONE)
					o = ci;
			}
			dst[nnew++] = o;
		}
		pos = start + nd;
		if (pos > nold)
			pos = nold;
	}
	for (; pos < nold; pos++)
		dst[nnew++] = old ? old[pos] : LBL_NONE;
	if (!(v = insert(t, pkey, &f->new_blob))) {
		free(dst);
		return OMEN_ENOMEM;
	}
	v->orig = dst;
	v->n = (uint32_t)nnew;
	t->bytes += nnew * sizeof(uint32_t);
	if (t->bytes > t->peak)
		t->peak = t->bytes;
	return sweep_add(t, v);
}

int lbl_tracer_apply(lbl_tracer *t, const omen_change *c, uint32_t ci)
{
	size_t fi;
	int e;
	for (fi = 0; fi < c->nfiles; fi++)
		if ((e = apply_file(t, c, &c->files[fi], ci)))
			return e;
	return 0;
}

void lbl_tracer_step(lbl_tracer *t, const omen_change *c)
{
	size_t fi;
	for (fi = 0; fi < c->nfiles; fi++) {
		const omen_file *f = &c->files[fi];
		if (f->new_path && f->status != OMEN_FILE_DELETED)
			lbl_tracer_ref(t, f->new_path, &f->new_blob, +1);
	}
	for (fi = 0; fi < c->nfiles; fi++) {
		const omen_file *f = &c->files[fi];
		if (f->old_path && f->status != OMEN_FILE_ADDED)
			lbl_tracer_ref(t, f->old_path, &f->old_blob, -1);
	}
}
