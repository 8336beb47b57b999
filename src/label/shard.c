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
	/* named pairs (0 lines) before traced ones */
	return (x->lines != 0) - (y->lines != 0);
}

/* Appends the pairs with lines of p[0..np) to b: u64 count, then u32
 * inducing, fix, lines each. */
static int pack_pairs(omen_buf *b, const lbl_pair *p, size_t np)
{
	size_t i, m = 0;
	int e;
	for (i = 0; i < np; i++)
		m += p[i].lines != 0;
	e = omen_buf_put_u64le(b, m);
	for (i = 0; i < np && !e; i++)
		if (p[i].lines)
			e = omen_buf_put_u32le(b, p[i].ind) || omen_buf_put_u32le(b, p[i].fix) ||
				omen_buf_put_u32le(b, p[i].lines) ? OMEN_ENOMEM : 0;
	return e;
}

/* This rank's results: counters, n, flags[n], the traced candidates, the
 * insertion candidates. */
static int pack(omen_buf *b, const lbl_shard_part *in)
{
	size_t i;
	int e = 0;
	for (i = 0; i < LBL_SHARD_COUNTERS && !e; i++)
		e = omen_buf_put_u64le(b, in->counters[i]);
	e = e ? e : omen_buf_put_u64le(b, in->n);
	e = e ? e : omen_buf_put(b, in->flags, in->n);
	e = e ? e : pack_pairs(b, *in->pairs, *in->npairs);
	e = e ? e : pack_pairs(b, *in->ins, *in->nins);
	return e ? omen_error_set(OMEN_ENOMEM, "out of memory") : 0;
}

/* Reads one packed pair list (indices below n, lines > 0) onto *p. 0, 1
 * when malformed, or OMEN_ENOMEM. */
static int unpack_pairs(omen_cursor *c, size_t n, lbl_pair **p, size_t *np, size_t *cap)
{
	uint64_t m;
	uint32_t a, f, l;
	size_t i;
	if (omen_cursor_u64le(c, &m) || m > c->n / 12)
		return 1;
	if (OMEN_ARRAY_RESERVE(*p, *cap, *np + (size_t)m))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0; i < (size_t)m; i++) {
		if (omen_cursor_u32le(c, &a) || omen_cursor_u32le(c, &f) || omen_cursor_u32le(c, &l) ||
		    a >= n || f >= n || !l)
			return 1;
		(*p)[(*np)++] = (lbl_pair){a, f, l};
	}
	return 0;
}

/* Adds one other rank's packed results into rank 0's. */
static int unpack_add(const void *data, size_t len, int rank, lbl_shard_part *io)
{
	omen_cursor c;
	uint64_t u, m;
	uint8_t fl;
	size_t i;
	int e;
	omen_cursor_init(&c, data, len);
	for (i = 0; i < LBL_SHARD_COUNTERS; i++) {
		if (omen_cursor_u64le(&c, &u))
			goto bad;
		io->counters[i] += u;
	}
	if (omen_cursor_u64le(&c, &m) || m != io->n)
		goto bad;
	for (i = 0; i < io->n; i++) {
		if (omen_cursor_u8(&c, &fl))
			goto bad;
		io->flags[i] |= fl;
	}
	if ((e = unpack_pairs(&c, io->n, io->pairs, io->npairs, io->pairs_cap)) ||
	    (e = unpack_pairs(&c, io->n, io->ins, io->nins, io->ins_cap)))
		return e < 0 ? e : omen_error_set(OMEN_ECORRUPT, "rank %d's label results are malformed", rank);
	if (c.err || c.n)
		goto bad;
	return 0;
bad:
	return omen_error_set(OMEN_ECORRUPT, "rank %d's label results are malformed", rank);
}

/* Sorts p by (inducing, fix), named pairs first, and sums the lines of the
 * traced pairs of one (inducing, fix): one pair, as one process makes it. */
static void merge_pairs(lbl_pair *p, size_t *np)
{
	size_t i, k;
	if (!*np)
		return;
	qsort(p, *np, sizeof(*p), pair_key_cmp);
	for (i = 1, k = 0; i < *np; i++) {
		if (p[k].ind == p[i].ind && p[k].fix == p[i].fix && p[k].lines && p[i].lines)
			p[k].lines += p[i].lines;
		else
			p[++k] = p[i];
	}
	*np = k + 1;
}

int lbl_shard_gather(const lbl_shard *s, const omen_label_opts *o, lbl_shard_part *io)
{
	omen_buf b = OMEN_BUF_INIT;
	void *all = NULL;
	size_t *counts = NULL, off = 0;
	int e, r;
	if (!o->gather)
		return omen_error_set(OMEN_ERROR, "a sharded label pass needs a gather step");
	if ((e = pack(&b, io)))
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
		if ((e = unpack_add((const char *)all + off, counts[r], r, io)))
			goto out;
		off += counts[r];
	}
	merge_pairs(*io->pairs, io->npairs);
	merge_pairs(*io->ins, io->nins);
out:
	free(all);
	free(counts);
	omen_buf_free(&b);
	return e;
}
