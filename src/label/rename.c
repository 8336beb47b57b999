/* Renames with edits. The history reader pairs renames by exact blob id
 * only; git blame (and git log -M) also follows a file that was moved and
 * edited in the same commit when at least half of it is unchanged (git's
 * default -M50% similarity). Here an added file with no origin state is
 * paired with a deleted file of the same commit when at least half of the
 * larger side's lines (whitespace ignored) occur in the other, the two blobs
 * are diffed -U0 by the history reader (omen_history_diff_blobs, the diff of
 * the walk itself) and the new version takes the old one's origins through
 * that diff. */
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "label/trace.h"
#include "label/shard.h"

static uint64_t line_hash(const char *s, size_t n)
{
	uint64_t h = 1469598103934665603ULL;
	size_t i;
	for (i = 0; i < n; i++) {
		unsigned char ch = (unsigned char)s[i];
		if (ch == ' ' || ch == '\t' || ch == '\r')
			continue;
		h = (h ^ ch) * 1099511628211ULL;
	}
	return h;
}

static int u64_cmp(const void *a, const void *b)
{
	uint64_t x = *(const uint64_t *)a, y = *(const uint64_t *)b;
	return x < y ? -1 : x > y;
}

/* Hashes of a file's lines of one origin ('-' or '+'), sorted. */
static uint64_t *file_hashes(const omen_change *c, const omen_file *f, char origin, size_t *n)
{
	size_t cap = 0, k = 0;
	uint32_t hi, li;
	uint64_t *v = NULL;
	for (hi = 0; hi < f->nhunks; hi++)
		cap += c->hunks[f->hunk_off + hi].nlines;
	if (!(v = malloc((cap ? cap : 1) * sizeof(*v))))
		return NULL;
	for (hi = 0; hi < f->nhunks; hi++) {
		const omen_hunk *h = &c->hunks[f->hunk_off + hi];
		for (li = 0; li < h->nlines; li++) {
			const omen_line *l = &c->lines[h->line_off + li];
			if (l->origin == origin)
				v[k++] = line_hash(omen_line_text(c, l), l->text_len);
		}
	}
	qsort(v, k, sizeof(*v), u64_cmp);
	*n = k;
	return v;
}

static size_t common(const uint64_t *a, size_t na, const uint64_t *b, size_t nb)
{
	size_t i = 0, j = 0, k = 0;
	while (i < na && j < nb) {
		if (a[i] == b[j]) {
			k++;
			i++;
			j++;
		} else if (a[i] < b[j]) {
			i++;
		} else {
			j++;
		}
	}
	return k;
}

int lbl_apply_blobs(lbl_tracer *t, omen_repo *r, const omen_file *f, uint32_t ci)
{
	omen_walk_opts wo = OMEN_WALK_OPTS_INIT;
	omen_change dc;
	omen_file *df;
	uint32_t nh;
	int e, has_old = f->old_path && !git_oid_is_zero(&f->old_blob);
	omen_change_init(&dc);
	e = omen_history_diff_blobs(&dc, r, has_old ? f->old_path : NULL,
		has_old ? &f->old_blob : NULL, f->new_path, &f->new_blob, &wo);
	if (e == OMEN_EGIT) {
		omen_error_clear();  /* unreadable: no version */
		e = 0;
		goto out;
	}
	if (e)
		goto out;
	df = &dc.files[0];
	if (df->flags & (OMEN_FILE_BINARY | OMEN_FILE_TOO_LARGE | OMEN_FILE_MISSING))
		goto out; /* not traced, as in the walk */
	/* the caller's view of the file (status, old side, old line count)
	 * with the hunks of the diff */
	nh = df->nhunks;
	*df = *f;
	df->flags = 0;
	df->hunk_off = 0;
	df->nhunks = nh;
	if (!has_old) {
		df->old_path = NULL;
		df->status = OMEN_FILE_ADDED;
	}
	e = lbl_tracer_apply(t, &dc, ci);
out:
	omen_change_free(&dc);
	return e;
}

static int apply_pair(lbl_tracer *t, omen_repo *r, const omen_file *df, const omen_file *af,
	uint32_t ci)
{
	omen_file f = *af;
	f.old_path = df->old_path;
	f.old_blob = df->old_blob;
	f.old_nlines = df->old_nlines;
	f.status = OMEN_FILE_RENAMED;
	return lbl_apply_blobs(t, r, &f, ci);
}

int lbl_rename_pairs(lbl_tracer *t, omen_repo *r, const omen_change *c, uint32_t ci,
	lbl_shard *sh)
{
	size_t i, j, nd = 0;
	const unsigned skip = OMEN_FILE_BINARY | OMEN_FILE_TOO_LARGE | OMEN_FILE_SUBMODULE |
		OMEN_FILE_MISSING;
	unsigned char *used = NULL;
	uint64_t **dh = NULL;
	size_t *dn = NULL;
	int e = 0;
	for (i = 0; i < c->nfiles; i++)
		nd += c->files[i].status == OMEN_FILE_DELETED && !(c->files[i].flags & skip);
	if (!nd)
		return 0;
	if (!(used = calloc(c->nfiles, 1)) || !(dh = calloc(c->nfiles, sizeof(*dh))) ||
	    !(dn = calloc(c->nfiles, sizeof(*dn)))) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	for (i = 0; i < c->nfiles; i++) {
		const omen_file *af = &c->files[i];
		uint64_t *ah;
		size_t an, best = 0;
		long bj = -1;
		if (af->status != OMEN_FILE_ADDED || (af->flags & skip) || !af->added ||
		    (!sh && lbl_tracer_get(t, af->new_path, &af->new_blob, NULL)))
			continue;
		if (!(ah = file_hashes(c, af, '+', &an))) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
		for (j = 0; j < c->nfiles; j++) {
			const omen_file *df = &c->files[j];
			size_t k, big;
			if (df->status != OMEN_FILE_DELETED || (df->flags & skip) || used[j] || !df->deleted ||
			    (!sh && !lbl_tracer_get(t, df->old_path, &df->old_blob, NULL)))
				continue;
			if (!dh[j] && !(dh[j] = file_hashes(c, df, '-', &dn[j]))) {
				free(ah);
				e = omen_error_set(OMEN_ENOMEM, "out of memory");
				goto out;
			}
			k = common(ah, an, dh[j], dn[j]);
			big = an > dn[j] ? an : dn[j];
			if (k * 2 >= big && k > best) {
				best = k;
				bj = (long)j;
			}
		}
		free(ah);
		if (bj >= 0) {
			int own = sh ? lbl_shard_owner(sh, c->files[bj].old_path) : 0;
			used[bj] = 1;
			if (sh && (e = lbl_shard_set(sh, af->new_path, own)))
				goto out;
			if ((!sh || own == sh->part) && (e = apply_pair(t, r, &c->files[bj], af, ci)))
				goto out;
		}
	}
out:
	if (dh)
		for (i = 0; i < c->nfiles; i++)
			free(dh[i]);
	free(dh);
	free(dn);
	free(used);
	return e;
}
