/* The labelling pass's state, saved beside the label file so that the next
 * run walks only the new commits (DEVELOPERS.md, "Labeller"). Read through the
 * bounded cursor; a state that does not fit is not an error, the caller then
 * runs a full pass. */
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "label/run.h"

/* ---- pass state, saved beside the labels for incremental runs ----------------
 * "OMENLBS1", u32 version (2), head hex[40], u32 len + options JSON, summary
 * counters (u64 x 17), u32 n + commits {oid[20], i64 time, i64 issue date,
 * u32 traced, u32 named, u32 fix_by, u8 flags: fix, merge, boundary,
 * untraced fix, 2 bits fix scope}, u32 n + pairs {u32 x 3},
 * u32 n + tips {u32}, u32 n + versions {u64 path key, oid[20], i32 ref,
 * u32 n, u32 origins[n]}, u32 CRC-32 of all before it. Little-endian. */
static int put_version(uint64_t pkey, const git_oid *blob, const uint32_t *orig, uint32_t n,
	int32_t ref, void *p)
{
	omen_buf *b = p;
	uint32_t i;
	omen_buf_put_u64le(b, pkey);
	omen_buf_put(b, blob->id, GIT_OID_RAWSZ);
	omen_buf_put_u32le(b, (uint32_t)ref);
	omen_buf_put_u32le(b, n);
	for (i = 0; i < n; i++)
		omen_buf_put_u32le(b, orig[i]);
	return 0;
}

static size_t *counter(omen_label_summary *s, int k)
{
	size_t *c[] = {&s->fixes_add_only, &s->fixes_skipped_large, &s->traced_lines, &s->fixes_traced,
		&s->named_links, &s->untraced_missing, &s->boundary, &s->closing_only, &s->outside_only,
		&s->fixes_cosmetic, &s->fixes_noncode, &s->noncode_lines, &s->named_dropped, &s->feature_only, &s->fixes_insertion, &s->minor_dropped, NULL};
	return c[k];
}
#define STATE_COUNTERS 16

int lbl_save_state(lbl_run *R, const char *path, const char *opts, const char *head)
{
	omen_buf w = OMEN_BUF_INIT;
	size_t i;
	int e, k;
	omen_buf_put(&w, "OMENLBS1", 8);
	omen_buf_put_u32le(&w, 2);
	omen_buf_put(&w, head, OMEN_OID_HEX);
	omen_buf_put_u32le(&w, (uint32_t)strlen(opts));
	omen_buf_put(&w, opts, strlen(opts));
	for (k = 0; k < STATE_COUNTERS; k++)
		omen_buf_put_u64le(&w, *counter(R->sum, k));
	omen_buf_put_u64le(&w, (uint64_t)R->sum->shallow);
	omen_buf_put_u32le(&w, (uint32_t)R->n);
	for (i = 0; i < R->n; i++) {
		lbl_commit *c = &R->cs[i];
		unsigned char fl = (unsigned char)(c->is_fix | c->merge << 1 | c->boundary << 2 | c->skipped << 3 |
			(c->scope & 3) << 4);
		omen_buf_put(&w, R->ids[i].id, GIT_OID_RAWSZ);
		omen_buf_put_u64le(&w, (uint64_t)c->time);
		omen_buf_put_u64le(&w, (uint64_t)c->issue_date);
		omen_buf_put_u32le(&w, c->traced);
		omen_buf_put_u32le(&w, c->named);
		omen_buf_put_u32le(&w, c->fix_by);
		omen_buf_put(&w, &fl, 1);
	}
	omen_buf_put_u32le(&w, (uint32_t)R->npairs);
	for (i = 0; i < R->npairs; i++) {
		omen_buf_put_u32le(&w, R->pairs[i].ind);
		omen_buf_put_u32le(&w, R->pairs[i].fix);
		omen_buf_put_u32le(&w, R->pairs[i].lines);
	}
	omen_buf_put_u32le(&w, (uint32_t)R->ntips);
	for (i = 0; i < R->ntips; i++)
		omen_buf_put_u32le(&w, R->tips[i]);
	omen_buf_put_u32le(&w, (uint32_t)lbl_tracer_versions(R->tr));
	lbl_tracer_each(R->tr, put_version, &w);
	/* The buffer keeps its first failed append (omen_buf_error), so an
	 * out-of-memory run never writes a short state under a valid checksum. */
	if (!omen_buf_error(&w))
		omen_buf_put_u32le(&w, omen_crc32(0, w.ptr, w.len));
	if (omen_buf_error(&w)) {
		omen_buf_free(&w);
		return omen_error_set(OMEN_ENOMEM, "cannot save label state '%s': out of memory", path);
	}
	e = omen_file_write_atomic(path, w.ptr, w.len);
	omen_buf_free(&w);
	return e;
}

/* load_state's parts read one section each from c. They return 0 when the
 * section is read, 1 when the state is not usable (a short or inconsistent
 * section), < 0 on error. */

/* The n saved commits: map[i] gets each one's place in R, old[place] = 1. */
static int load_commits(lbl_run *R, omen_cursor *c, uint32_t n, uint32_t *map, unsigned char *old)
{
	const void *p;
	uint32_t i;
	for (i = 0; i < n; i++) {
		git_oid id;
		long ni;
		uint64_t t, d;
		uint32_t tr, nm, fb;
		uint8_t fl;
		lbl_commit *cm;
		if (omen_cursor_bytes(c, &p, GIT_OID_RAWSZ))
			return 1;
		memcpy(id.id, p, GIT_OID_RAWSZ);
		if ((ni = lbl_lookup_oid(R, &id)) < 0 || omen_cursor_u64le(c, &t) || omen_cursor_u64le(c, &d) ||
		    omen_cursor_u32le(c, &tr) || omen_cursor_u32le(c, &nm) || omen_cursor_u32le(c, &fb) ||
		    omen_cursor_u8(c, &fl))
			return 1;
		map[i] = (uint32_t)ni;
		old[ni] = 1;
		cm = &R->cs[ni];
		cm->time = (int64_t)t;
		cm->issue_date = (int64_t)d;
		cm->traced = tr;
		cm->named = nm;
		cm->fix_by = fb;
		cm->is_fix = fl & 1;
		cm->merge = (fl >> 1) & 1;
		cm->boundary = (fl >> 2) & 1;
		cm->skipped = (fl >> 3) & 1;
		cm->scope = (fl >> 4) & 3;
		cm->walked = 1;
	}
	return 0;
}

/* The saved (inducing, fix, lines) pairs, their indices mapped through map. */
static int load_pairs(lbl_run *R, omen_cursor *c, uint32_t n, const uint32_t *map)
{
	uint32_t len, i;
	if (omen_cursor_u32le(c, &len))
		return 1;
	for (i = 0; i < len; i++) {
		uint32_t a, f, l;
		if (omen_cursor_u32le(c, &a) || omen_cursor_u32le(c, &f) || omen_cursor_u32le(c, &l) || a >= n || f >= n)
			return 1;
		if (OMEN_ARRAY_RESERVE(R->pairs, R->pairs_cap, R->npairs + 1))
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		R->pairs[R->npairs++] = (lbl_pair){map[a], map[f], l};
	}
	return 0;
}

/* The saved tips; every new commit's parents must be new or a saved tip.
 * Sets each old commit's pending count of children still to walk. */
static int load_tips(lbl_run *R, omen_cursor *c, uint32_t n, const uint32_t *map, unsigned char *old,
	uint32_t *newkids)
{
	uint32_t len, i;
	for (i = 0; i < R->n; i++) {
		git_commit *cm = NULL;
		unsigned j, np;
		if (old[i])
			continue;
		if (git_commit_lookup(&cm, omen_repo_git(R->repo), &R->ids[i]))
			return 1;
		np = git_commit_parentcount(cm);
		for (j = 0; j < np; j++) {
			long pi = lbl_lookup_oid(R, git_commit_parent_id(cm, j));
			if (pi >= 0 && old[pi])
				newkids[pi]++;
		}
		git_commit_free(cm);
	}
	if (omen_cursor_u32le(c, &len))
		return 1;
	for (i = 0; i < len; i++) {
		uint32_t t;
		if (omen_cursor_u32le(c, &t) || t >= n)
			return 1;
		old[map[t]] = 2; /* a saved tip */
	}
	for (i = 0; i < R->n; i++) {
		if (old[i] == 1 && newkids[i])
			return 1; /* a new branch from an old inner commit: no state for it */
		if (old[i])
			R->cs[i].pending = old[i] == 2 ? (newkids[i] ? newkids[i] : 1) : 0;
	}
	return 0;
}

/* The tracer's saved line versions, their origins mapped through map. */
static int load_versions(lbl_run *R, omen_cursor *c, uint32_t n, const uint32_t *map)
{
	const void *p;
	uint32_t len, i;
	if (omen_cursor_u32le(c, &len))
		return 1;
	for (i = 0; i < len; i++) {
		uint64_t pkey;
		git_oid blob;
		uint32_t ref, nl, j, *orig;
		int e;
		if (omen_cursor_u64le(c, &pkey) || omen_cursor_bytes(c, &p, GIT_OID_RAWSZ))
			return 1;
		memcpy(blob.id, p, GIT_OID_RAWSZ);
		if (omen_cursor_u32le(c, &ref) || omen_cursor_u32le(c, &nl) || (size_t)nl * 4 > c->n)
			return 1;
		if (!(orig = malloc(((size_t)nl + 1) * sizeof(*orig))))
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		for (j = 0; j < nl; j++) {
			uint32_t o;
			omen_cursor_u32le(c, &o);
			orig[j] = o < n ? map[o] : LBL_NONE;
		}
		if ((e = lbl_tracer_put(R->tr, pkey, &blob, orig, nl, (int32_t)ref)))
			return e;
	}
	return 0;
}

/* Restores the state saved by the previous run when it covers exactly the
 * labelled head with the same options and every new commit's old parents
 * are saved tips. Returns 1 when restored, 0 when not usable (then the
 * caller runs a full pass on a fresh tracer), < 0 on error. */
int lbl_load_state(lbl_run *R, const char *path, const char *opts)
{
	omen_buf b = OMEN_BUF_INIT;
	omen_cursor c;
	const void *p;
	uint32_t ver, len, n, k, crc, *map = NULL, *newkids = NULL;
	uint64_t u;
	unsigned char *old = NULL;
	int rc = 0, e;
	if (!*R->old_head || omen_file_read(&b, path, 0)) {
		omen_error_clear();
		return 0;
	}
	omen_cursor_init(&c, b.ptr, b.len);
	if (b.len < 12 || omen_cursor_tail_u32le(&c, &crc) || omen_crc32(0, b.ptr, c.n) != crc)
		goto out;
	if (omen_cursor_bytes(&c, &p, 8) || memcmp(p, "OMENLBS1", 8) || omen_cursor_u32le(&c, &ver) || ver != 2 ||
	    omen_cursor_bytes(&c, &p, OMEN_OID_HEX) || memcmp(p, R->old_head, OMEN_OID_HEX) ||
	    omen_cursor_u32le(&c, &len) || omen_cursor_bytes(&c, &p, len) || len != strlen(opts) ||
	    memcmp(p, opts, len))
		goto out;
	for (k = 0; k < STATE_COUNTERS; k++) {
		if (omen_cursor_u64le(&c, &u))
			goto out;
		*counter(R->sum, (int)k) = (size_t)u;
	}
	if (omen_cursor_u64le(&c, &u))
		goto out;
	R->sum->shallow = u != 0;
	/* (a count over R->n reads as out of memory, as it always has) */
	if (omen_cursor_u32le(&c, &n) || n > R->n || !(map = malloc(((size_t)n + 1) * sizeof(*map))) ||
	    !(old = calloc(R->n + 1, 1)) || !(newkids = calloc(R->n + 1, sizeof(*newkids)))) {
		rc = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	if ((e = load_commits(R, &c, n, map, old)) || (e = load_pairs(R, &c, n, map)) ||
	    (e = load_tips(R, &c, n, map, old, newkids)) || (e = load_versions(R, &c, n, map))) {
		if (e < 0)
			rc = e;
		goto out;
	}
	if (c.err || c.n)
		goto out;
	rc = 1;
out:
	free(map);
	free(old);
	free(newkids);
	omen_buf_free(&b);
	return rc;
}

