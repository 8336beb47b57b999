/* Path-sharded label passes (issue 13): the owner map, the walk's path
 * filter, this rank's view of a change and the combining step on rank 0.
 * See label/shard.h and DEVELOPERS.md "MPI". No MPI call here: the gather
 * is omen_label_opts.gather (src/util/mpi.c under mpirun). */
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "label/shard.h"

void lbl_shard_init(lbl_shard *s, int part, int parts, int renames)
{
	memset(s, 0, sizeof(*s));
	s->part = part;
	s->parts = parts > 0 ? parts : 1;
	s->renames = renames;
}

void lbl_shard_free(lbl_shard *s)
{
	omen_strmap_free(&s->owner, NULL);
	free(s->view.files);
	memset(s, 0, sizeof(*s));
}

int lbl_shard_owner(const lbl_shard *s, const char *path)
{
	uintptr_t v = (uintptr_t)omen_strmap_get(&s->owner, path);
	if (v)
		return (int)(v - 1);
	/* FNV-1a, 64 bits: the same owner on every rank and every machine */
	uint64_t h = 1469598103934665603ULL;
	for (const unsigned char *p = (const unsigned char *)path; *p; p++)
		h = (h ^ *p) * 1099511628211ULL;
	return (int)(h % (uint64_t)s->parts);
}

int lbl_shard_set(lbl_shard *s, const char *path, int owner)
{
	if (lbl_shard_owner(s, path) == owner)
		return 0;
	if (omen_strmap_put(&s->owner, path, (void *)(uintptr_t)(owner + 1)))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	return 0;
}

int lbl_shard_mine(const lbl_shard *s, const omen_file *f)
{
	return lbl_shard_owner(s, omen_file_path(f)) == s->part;
}

int lbl_shard_filter(const char *old_path, const char *new_path, int pairing, void *ctx)
{
	lbl_shard *s = ctx;
	if (old_path && new_path) {
		int own = lbl_shard_owner(s, old_path);
		/* an exact rename: every rank sees it in its tree diff. Out of
		 * memory sticks in s->err, which the pass checks after each commit */
		if (strcmp(old_path, new_path) && !s->err && lbl_shard_set(s, new_path, own))
			s->err = OMEN_ENOMEM;
		return own == s->part;
	}
	if (pairing && s->renames)
		return 1; /* rename.c needs the lines of both sides on every rank */
	return lbl_shard_owner(s, old_path ? old_path : new_path) == s->part;
}

const omen_change *lbl_shard_view(lbl_shard *s, const omen_change *c)
{
	size_t i, k = 0;
	if (c->nfiles > s->view_cap) {
		omen_file *nf = realloc(s->view.files, c->nfiles * sizeof(*nf));
		if (!nf) {
			omen_error_set(OMEN_ENOMEM, "out of memory");
			return NULL;
		}
		s->view.files = nf;
		s->view_cap = c->nfiles;
	}
	{
		omen_file *keep = s->view.files;
		s->view = *c;
		s->view.files = keep;
	}
	for (i = 0; i < c->nfiles; i++)
		if (lbl_shard_mine(s, &c->files[i]))
			s->view.files[k++] = c->files[i];
	s->view.nfiles = k;
	return &s->view;
}

static int pair_key_cmp(const void *a, const void *b)
{
	const lbl_pair *x = a, *y = b;
	if (x->ind != y->ind)
		return x->ind < y->ind ? -1 : 1;
	if (x->fix != y->fix)
		return x->fix < y->fix ? -1 : 1;
	/* named pairs (0 lines) first, then traced ones, then dropped ones */
	int cx = !x->lines ? 0 : x->lines == LBL_PAIR_DROPPED ? 2 : 1;
	int cy = !y->lines ? 0 : y->lines == LBL_PAIR_DROPPED ? 2 : 1;
	return cx - cy;
}

/* This rank's results: counters, n, traced[n], flags[n], the pairs with lines. */
static int pack(omen_buf *b, const uint32_t *traced, const uint8_t *flags, size_t n,
	const lbl_pair *pairs, size_t npairs, const uint64_t *counters, int ncounters)
{
	size_t i, np = 0;
	int e = 0;
	for (i = 0; i < (size_t)ncounters && !e; i++)
		e = omen_buf_put_u64le(b, counters[i]);
	e = e ? e : omen_buf_put_u64le(b, n);
	for (i = 0; i < n && !e; i++)
		e = omen_buf_put_u32le(b, traced[i]);
	e = e ? e : omen_buf_put(b, flags, n);
	for (i = 0; i < npairs; i++)
		np += pairs[i].lines != 0;
	e = e ? e : omen_buf_put_u64le(b, np);
	for (i = 0; i < npairs && !e; i++)
		if (pairs[i].lines)
			e = omen_buf_put_u32le(b, pairs[i].ind) || omen_buf_put_u32le(b, pairs[i].fix) ||
				omen_buf_put_u32le(b, pairs[i].lines) ? OMEN_ENOMEM : 0;
	return e ? omen_error_set(OMEN_ENOMEM, "out of memory") : 0;
}

/* Adds one other rank's packed results into rank 0's. */
static int unpack_add(const void *data, size_t len, int rank, uint32_t *traced, uint8_t *flags,
	size_t n, lbl_pair **pairs, size_t *npairs, size_t *pairs_cap, uint64_t *counters,
	int ncounters)
{
	omen_cursor c;
	uint64_t u, m, np;
	uint32_t t, a, f, l;
	uint8_t fl;
	size_t i;
	omen_cursor_init(&c, data, len);
	for (i = 0; i < (size_t)ncounters; i++) {
		if (omen_cursor_u64le(&c, &u))
			goto bad;
		counters[i] += u;
	}
	if (omen_cursor_u64le(&c, &m) || m != n)
		goto bad;
	for (i = 0; i < n; i++) {
		if (omen_cursor_u32le(&c, &t))
			goto bad;
		traced[i] += t;
	}
	for (i = 0; i < n; i++) {
		if (omen_cursor_u8(&c, &fl))
			goto bad;
		flags[i] |= fl;
	}
	if (omen_cursor_u64le(&c, &np) || np > c.n / 12)
		goto bad;
	if (OMEN_ARRAY_RESERVE(*pairs, *pairs_cap, *npairs + (size_t)np))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0; i < (size_t)np; i++) {
		if (omen_cursor_u32le(&c, &a) || omen_cursor_u32le(&c, &f) || omen_cursor_u32le(&c, &l) ||
		    a >= n || f >= n || !l)
			goto bad;
		(*pairs)[(*npairs)++] = (lbl_pair){a, f, l};
	}
	if (c.err || c.n)
		goto bad;
	return 0;
bad:
	return omen_error_set(OMEN_ECORRUPT, "rank %d's label results are malformed", rank);
}

int lbl_shard_gather(const lbl_shard *s, const omen_label_opts *o, uint32_t *traced,
	uint8_t *flags, size_t n, lbl_pair **pairs, size_t *npairs, size_t *pairs_cap,
	uint64_t *counters, int ncounters)
{
	omen_buf b = OMEN_BUF_INIT;
	void *all = NULL;
	size_t *counts = NULL, off = 0, i, k;
	int e, r;
	if (!o->gather)
		return omen_error_set(OMEN_ERROR, "a sharded label pass needs a gather step");
	if ((e = pack(&b, traced, flags, n, *pairs, *npairs, counters, ncounters)))
		goto out;
	if (!(counts = calloc((size_t)s->parts, sizeof(*counts)))) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	if ((e = o->gather(o->gather_ctx, b.ptr, b.len, &all, counts)))
		goto out;
	if (s->part != 0)
		goto out;
	off = counts[0]; /* rank 0's own bytes come first */
	for (r = 1; r < s->parts; r++) {
		if ((e = unpack_add((const char *)all + off, counts[r], r, traced, flags, n, pairs,
				npairs, pairs_cap, counters, ncounters)))
			goto out;
		off += counts[r];
	}
	/* one traced pair per (inducing, fix), as one process makes it */
	if (*npairs) {
		qsort(*pairs, *npairs, sizeof(**pairs), pair_key_cmp);
		for (i = 1, k = 0; i < *npairs; i++) {
			lbl_pair *p = &(*pairs)[k], *q = &(*pairs)[i];
			int pd = p->lines == LBL_PAIR_DROPPED, qd = q->lines == LBL_PAIR_DROPPED;
			if (p->ind == q->ind && p->fix == q->fix && p->lines && q->lines && pd == qd)
				p->lines = pd ? p->lines : p->lines + q->lines;
			else
				(*pairs)[++k] = *q;
		}
		*npairs = k + 1;
	}
out:
	free(all);
	free(counts);
	omen_buf_free(&b);
	return e;
}
