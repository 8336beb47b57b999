/* Every sample of a history in contiguous arrays, oldest first, joined with
 * the labels; and its cache in $GIT_DIR/omen/dataset.cache, keyed by the
 * history it covers (the walked commit ids, the label file's bytes, the
 * caps and the format version), so a second `train` need not re-read
 * history. The cache is a local file of this machine: records are written
 * raw and the key holds their sizes; loading still checks every length
 * against the file's size, every count and offset against the columns, and
 * a CRC-32. */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include "omen/error.h"
#include "omen/features.h"
#include "omen/label.h"
#include "features/internal.h"

#define DS_MAGIC "OMENDSET"
#define DS_VERSION 2u

typedef struct {
	char id[48];
	int64_t time;
	int32_t la, ld, nfiles, nhunks, ntok, nmsg;
	int8_t label, is_fix, capped, pad;
	float metrics[OMEN_NMETRICS];
} ds_rec;

/* A growable column. */
typedef struct {
	unsigned char *p;
	size_t len, cap;   /* in elements */
	size_t elem;
} col;

enum { C_FILE_OFF, C_HUNK_OFF, C_TOK, C_TOK_LINE, C_MSG, C_FACTS, C_HNS, C_HNL, C_HOS, C_HOL,
	C_PATHOFF, C_NAMES, C_NCOLS };
static const size_t col_elem[C_NCOLS] = {4, 4, 4, 4, 4, 4, 4, 4, 4, 4, 8, 1};

struct omen_dataset {
	size_t n, cap;
	ds_rec *rec;
	omen_sample *s;
	col c[C_NCOLS];
	const char **paths;
	omen_metrics *metrics;
	size_t capped;
	size_t reused;              /* samples from the cache (omen_dataset_reused) */
	char tip[OMEN_OID_HEX + 1]; /* the commit the walk started from, "" if not one */
};

static int col_put(col *c, const void *data, size_t n)
{
	if (!n)
		return 0;
	if (c->len + n > c->cap) {
		size_t nc = c->cap ? c->cap : 1024;
		unsigned char *np;
		while (nc < c->len + n)
			nc *= 2;
		np = realloc(c->p, nc * c->elem);
		if (!np)
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		c->p = np;
		c->cap = nc;
	}
	if (data)
		memcpy(c->p + c->len * c->elem, data, n * c->elem);
	else   /* an absent optional array reads as zeros */
		memset(c->p + c->len * c->elem, 0, n * c->elem);
	c->len += n;
	return 0;
}

static int ds_new(omen_dataset **out)
{
	omen_dataset *d = calloc(1, sizeof(*d));
	int i;
	*out = d;
	if (!d)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0; i < C_NCOLS; i++)
		d->c[i].elem = col_elem[i];
	return 0;
}

void omen_dataset_free(omen_dataset *d)
{
	int i;
	if (!d)
		return;
	for (i = 0; i < C_NCOLS; i++)
		free(d->c[i].p);
	free(d->rec);
	free(d->s);
	free(d->paths);
	omen_metrics_free(d->metrics);
	free(d);
}

size_t omen_dataset_size(const omen_dataset *d) { return d ? d->n : 0; }
const omen_sample *omen_dataset_get(const omen_dataset *d, size_t i)
{
	return d && i < d->n ? &d->s[i] : NULL;
}
const omen_metrics *omen_dataset_metrics(const omen_dataset *d) { return d ? d->metrics : NULL; }
size_t omen_dataset_capped(const omen_dataset *d) { return d ? d->capped : 0; }
size_t omen_dataset_reused(const omen_dataset *d) { return d ? d->reused : 0; }
const char *omen_dataset_tip(const omen_dataset *d) { return d && d->tip[0] ? d->tip : NULL; }

/* The one commit a walk of revs starts from: HEAD, or a single revision
 * that is not a range or an exclusion; "" otherwise (or when it does not
 * resolve: the walk itself reports that). */
static void set_tip(omen_dataset *d, omen_repo *r, const char *const *revs)
{
	const char *spec = revs ? revs[0] : "HEAD";
	git_oid id;
	d->tip[0] = '\0';
	if (!spec || (revs && revs[1]) || spec[0] == '^' || strstr(spec, ".."))
		return;
	if (omen_history_resolve(&id, r, spec) == 0)
		omen_oid_hex(d->tip, sizeof(d->tip), &id);
	omen_error_clear();
}

static int ds_append(omen_dataset *d, const omen_sample *s)
{
	ds_rec r;
	int e = 0, i;
	if (OMEN_ARRAY_RESERVE(d->rec, d->cap, d->n + 1))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	memset(&r, 0, sizeof(r));
	memcpy(r.id, s->id, OMEN_OID_HEX + 1);
	r.time = s->time;
	r.la = s->la; r.ld = s->ld;
	r.nfiles = s->nfiles; r.nhunks = s->nhunks; r.ntok = s->ntok; r.nmsg = s->nmsg;
	r.label = s->label; r.is_fix = s->is_fix; r.capped = s->capped;
	memcpy(r.metrics, s->metrics, sizeof(r.metrics));
	if ((e = col_put(&d->c[C_FILE_OFF], s->file_off, (size_t)s->nfiles + 1)) ||
		(e = col_put(&d->c[C_HUNK_OFF], s->hunk_off, (size_t)s->nhunks + 1)) ||
		(e = col_put(&d->c[C_TOK], s->tok, (size_t)s->ntok)) ||
		(e = col_put(&d->c[C_TOK_LINE], s->tok_line, (size_t)s->ntok)) ||
		(e = col_put(&d->c[C_MSG], s->msg, (size_t)s->nmsg)) ||
		(e = col_put(&d->c[C_FACTS], s->file_facts, (size_t)s->nfiles * OMEN_NFACTS)) ||
		(e = col_put(&d->c[C_HNS], s->hunk_new_start, (size_t)s->nhunks)) ||
		(e = col_put(&d->c[C_HNL], s->hunk_new_lines, (size_t)s->nhunks)) ||
		(e = col_put(&d->c[C_HOS], s->hunk_old_start, (size_t)s->nhunks)) ||
		(e = col_put(&d->c[C_HOL], s->hunk_old_lines, (size_t)s->nhunks)))
		return e;
	for (i = 0; i < s->nfiles; i++) {
		uint64_t off = d->c[C_NAMES].len;
		const char *p = s->file_path ? s->file_path[i] : "";
		if ((e = col_put(&d->c[C_PATHOFF], &off, 1)) ||
			(e = col_put(&d->c[C_NAMES], p, strlen(p) + 1)))
			return e;
	}
	d->rec[d->n++] = r;
	d->capped += s->capped != 0;
	return 0;
}

/* Gives back what doubling left unused (up to half of every column); the
 * sample views are pointed in after this. */
static void ds_shrink(omen_dataset *d)
{
	int i;
	for (i = 0; i < C_NCOLS; i++) {
		col *c = &d->c[i];
		unsigned char *np;
		if (c->len && c->len < c->cap && (np = realloc(c->p, c->len * c->elem))) {
			c->p = np;
			c->cap = c->len;
		}
	}
}

/* Points every sample view into the columns. */
static int ds_finish(omen_dataset *d)
{
	size_t i, fo = 0, ho = 0, tk = 0, ms = 0, fi = 0, hu = 0, k, nfiles = d->c[C_PATHOFF].len;
	free(d->s);
	free(d->paths);
	d->s = calloc(d->n ? d->n : 1, sizeof(*d->s));
	d->paths = malloc((nfiles ? nfiles : 1) * sizeof(*d->paths));
	if (!d->s || !d->paths)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (k = 0; k < nfiles; k++)
		d->paths[k] = (const char *)d->c[C_NAMES].p + ((uint64_t *)d->c[C_PATHOFF].p)[k];
	for (i = 0; i < d->n; i++) {
		const ds_rec *r = &d->rec[i];
		omen_sample *s = &d->s[i];
		memcpy(s->id, r->id, OMEN_OID_HEX);
		s->id[OMEN_OID_HEX] = '\0';
		s->time = r->time;
		s->label = r->label; s->is_fix = r->is_fix; s->capped = (uint8_t)r->capped;
		s->la = r->la; s->ld = r->ld;
		memcpy(s->metrics, r->metrics, sizeof(s->metrics));
		s->nfiles = r->nfiles; s->nhunks = r->nhunks; s->ntok = r->ntok; s->nmsg = r->nmsg;
		s->file_off = (const int32_t *)d->c[C_FILE_OFF].p + fo;
		s->hunk_off = (const int32_t *)d->c[C_HUNK_OFF].p + ho;
		s->tok = (const uint32_t *)d->c[C_TOK].p + tk;
		s->tok_line = (const int32_t *)d->c[C_TOK_LINE].p + tk;
		s->msg = (const uint32_t *)d->c[C_MSG].p + ms;
		s->file_facts = (const float *)d->c[C_FACTS].p + fi * OMEN_NFACTS;
		s->hunk_new_start = (const int32_t *)d->c[C_HNS].p + hu;
		s->hunk_new_lines = (const int32_t *)d->c[C_HNL].p + hu;
		s->hunk_old_start = (const int32_t *)d->c[C_HOS].p + hu;
		s->hunk_old_lines = (const int32_t *)d->c[C_HOL].p + hu;
		s->file_path = d->paths + fi;
		fo += (size_t)r->nfiles + 1;
		ho += (size_t)r->nhunks + 1;
		tk += (size_t)r->ntok;
		ms += (size_t)r->nmsg;
		fi += (size_t)r->nfiles;
		hu += (size_t)r->nhunks;
	}
	return 0;
}

int omen_dataset_from_samples(omen_dataset **out, const omen_sample *s, size_t n)
{
	omen_dataset *d;
	size_t i;
	int e = ds_new(&d);
	*out = NULL;
	for (i = 0; !e && i < n; i++)
		e = ds_append(d, &s[i]);
	if (!e)
		e = ds_finish(d);
	if (e) {
		omen_dataset_free(d);
		return e;
	}
	*out = d;
	return 0;
}

/* ---- cache --------------------------------------------------------------- */
/* The cache key: what the samples depend on besides the history (format,
 * caps, vocabularies) first, *static_len bytes; then the history itself (the
 * walked commit ids) and the label file's bytes. A cache whose first part
 * matches can be extended (ds_extend); only a whole match is loaded as is. */
static int cache_key(omen_buf *key, size_t *static_len, const git_oid *ids, size_t n,
	const omen_dataset_opts *o, const omen_buf *labels_bytes)
{
	int e = omen_buf_printf(key, "omen dataset v%u rec%zu caps=%d,%d,%d,%d budget=%d vocab=%u,%u;",
		DS_VERSION, sizeof(ds_rec), o->caps.max_files, o->caps.max_hunks_per_file,
		o->caps.max_tokens_per_hunk, o->caps.max_msg_tokens, OMEN_SAMPLE_TOKEN_BUDGET,
		OMEN_VOCAB, OMEN_MSG_VOCAB);
	*static_len = key->len;
	if (!e)
		e = omen_buf_printf(key, " commits=%zu ids=%08x labels=%zu:%08x", n,
			omen_crc32(0, ids, n * sizeof(*ids)), labels_bytes->len,
			omen_crc32(0, labels_bytes->ptr, labels_bytes->len));
	return e;
}

/* ---- the cache file, streamed --------------------------------------------
 * Sections go straight between the file and the dataset's own arrays, with
 * the CRC-32 kept as they pass, so there is never a second copy of the
 * dataset in memory (curl's cache is 123 MB). Reading, `left` is what the
 * file holds before its CRC trailer: no length read from the file is
 * allocated or read before it is checked against that. */
typedef struct {
	FILE *fp;
	uint32_t crc;
	uint64_t left;   /* reading: bytes before the trailer not read yet */
	int err;
} cstream;

static void cs_put(cstream *s, const void *p, size_t n)
{
	if (s->err || !n)
		return;
	if (fwrite(p, 1, n, s->fp) != n)
		s->err = errno ? errno : EIO;
	else
		s->crc = omen_crc32(s->crc, p, n);
}

static void cs_put_u64(cstream *s, uint64_t v)
{
	unsigned char b[8];
	omen_le_encode(b, v, 8);
	cs_put(s, b, 8);
}

static int cs_get(cstream *s, void *p, size_t n)
{
	if (s->err || n > s->left || (n && fread(p, 1, n, s->fp) != n)) {
		s->err = 1;
		return -1;
	}
	s->crc = omen_crc32(s->crc, p, n);
	s->left -= n;
	return 0;
}

static int cs_get_u64(cstream *s, uint64_t *v)
{
	unsigned char b[8];
	omen_cursor c;
	if (cs_get(s, b, 8))
		return -1;
	omen_cursor_init(&c, b, 8);
	return omen_cursor_u64le(&c, v);
}

static int cache_write(const omen_dataset *d, const char *path, const omen_buf *key)
{
	omen_buf ms = OMEN_BUF_INIT;
	omen_atomic_file f;
	cstream s;
	unsigned char tail[4];
	int e, i;
	if (d->metrics && (e = omen_metrics_save(d->metrics, &ms)))
		goto out;
	if ((e = omen_atomic_open(&f, path)))
		goto out;
	memset(&s, 0, sizeof(s));
	s.fp = f.fp;
	cs_put(&s, DS_MAGIC, 8);
	cs_put_u64(&s, DS_VERSION);
	cs_put_u64(&s, key->len);
	cs_put(&s, key->ptr, key->len);
	cs_put_u64(&s, d->n);
	cs_put(&s, d->rec, d->n * sizeof(ds_rec));
	for (i = 0; i < C_NCOLS; i++) {
		cs_put_u64(&s, d->c[i].len);
		cs_put(&s, d->c[i].p, d->c[i].len * d->c[i].elem);
	}
	cs_put_u64(&s, ms.len);
	cs_put(&s, ms.ptr, ms.len);
	omen_le_encode(tail, s.crc, 4);
	if (!s.err && fwrite(tail, 1, 4, f.fp) != 4)
		s.err = errno ? errno : EIO;
	if (s.err) {
		omen_atomic_abort(&f);
		e = omen_error_set(OMEN_EIO, "cannot write '%s': %s", path, strerror(s.err));
		goto out;
	}
	e = omen_atomic_commit(&f);
out:
	omen_buf_free(&ms);
	return e;
}

/* Every count and offset of the records must agree with the columns. */
static int cache_consistent(omen_dataset *d)
{
	size_t j, fo = 0, ho = 0, tk = 0, ms = 0, fi = 0, hu = 0;
	for (j = 0; j < d->n; j++) {
		const ds_rec *r = &d->rec[j];
		const int32_t *fof, *hof;
		int32_t q;
		if (r->nfiles < 0 || r->nhunks < 0 || r->ntok < 0 || r->nmsg < 0)
			return 0;
		if (fo + r->nfiles + 1 > d->c[C_FILE_OFF].len || ho + r->nhunks + 1 > d->c[C_HUNK_OFF].len ||
			tk + r->ntok > d->c[C_TOK].len || ms + r->nmsg > d->c[C_MSG].len ||
			fi + r->nfiles > d->c[C_PATHOFF].len || hu + r->nhunks > d->c[C_HNS].len)
			return 0;
		fof = (const int32_t *)d->c[C_FILE_OFF].p + fo;
		hof = (const int32_t *)d->c[C_HUNK_OFF].p + ho;
		if (fof[0] != 0 || fof[r->nfiles] != r->nhunks || hof[0] != 0 || hof[r->nhunks] != r->ntok)
			return 0;
		for (q = 0; q < r->nfiles; q++)
			if (fof[q + 1] < fof[q])
				return 0;
		for (q = 0; q < r->nhunks; q++)
			if (hof[q + 1] < hof[q])
				return 0;
		fo += (size_t)r->nfiles + 1; ho += (size_t)r->nhunks + 1; tk += (size_t)r->ntok;
		ms += (size_t)r->nmsg; fi += (size_t)r->nfiles; hu += (size_t)r->nhunks;
		d->capped += r->capped != 0;
	}
	if (fo != d->c[C_FILE_OFF].len || ho != d->c[C_HUNK_OFF].len || tk != d->c[C_TOK].len ||
		tk != d->c[C_TOK_LINE].len || ms != d->c[C_MSG].len || fi * OMEN_NFACTS != d->c[C_FACTS].len ||
		fi != d->c[C_PATHOFF].len || hu != d->c[C_HNS].len || hu != d->c[C_HNL].len ||
		hu != d->c[C_HOS].len || hu != d->c[C_HOL].len)
		return 0;
	for (j = 0; j < fi; j++)
		if (((const uint64_t *)d->c[C_PATHOFF].p)[j] >= d->c[C_NAMES].len)
			return 0;
	return !d->c[C_NAMES].len || d->c[C_NAMES].p[d->c[C_NAMES].len - 1] == '\0';
}

/* Returns 1 when the cache matched and *out was loaded, 0 when it did not
 * match, is unreadable or cannot be held in memory (then it is simply
 * rebuilt). With match_len > 0 only the key's first match_len bytes must
 * match (a cache of other commits or labels, to extend). */
static int cache_read(omen_dataset **out, const char *path, const omen_buf *key, size_t match_len)
{
	omen_dataset *d = NULL;
	cstream s;
	struct stat st;
	unsigned char *buf = NULL, magic[8], tail[4];
	uint64_t v, n;
	uint32_t stored;
	omen_cursor tc;
	int ok = 0, i;
	*out = NULL;
	memset(&s, 0, sizeof(s));
	/* a regular file only (a FIFO planted there must not hang the read);
	 * its size is bounded below by check_limit once it is decoded */
	if (omen_file_open_read(&s.fp, NULL, path, SIZE_MAX) || fstat(fileno(s.fp), &st) || st.st_size < 12) {
		omen_error_clear();
		goto out;
	}
	s.left = (uint64_t)st.st_size - 4;
	if (!match_len)
		match_len = key->len;
	if (cs_get(&s, magic, 8) || memcmp(magic, DS_MAGIC, 8) ||
		cs_get_u64(&s, &v) || v != DS_VERSION || cs_get_u64(&s, &v) || v < match_len ||
		v > s.left || (match_len == key->len && v != key->len))
		goto out;
	if (!(buf = malloc((size_t)v)) || cs_get(&s, buf, (size_t)v) ||
		memcmp(buf, key->ptr, match_len))
		goto out;
	if (ds_new(&d) || cs_get_u64(&s, &n) || n > s.left / sizeof(ds_rec))
		goto out;
	if (n && !(d->rec = malloc((size_t)n * sizeof(ds_rec))))
		goto out;
	d->n = d->cap = (size_t)n;
	if (cs_get(&s, d->rec, (size_t)n * sizeof(ds_rec)))
		goto out;
	for (i = 0; i < C_NCOLS; i++) {
		col *c = &d->c[i];
		if (cs_get_u64(&s, &v) || v > s.left / c->elem)
			goto out;
		if (v && !(c->p = malloc((size_t)v * c->elem)))
			goto out;
		c->len = c->cap = (size_t)v;
		if (cs_get(&s, c->p, c->len * c->elem))
			goto out;
	}
	/* the metrics state fills what is left before the trailer */
	free(buf);
	buf = NULL;
	if (cs_get_u64(&s, &v) || v != s.left || !(buf = malloc(v ? (size_t)v : 1)) ||
		cs_get(&s, buf, (size_t)v))
		goto out;
	omen_cursor_init(&tc, tail, 4);
	if (fread(tail, 1, 4, s.fp) != 4 || omen_cursor_u32le(&tc, &stored) || stored != s.crc)
		goto out;
	if (!cache_consistent(d) || (v && omen_metrics_load(&d->metrics, buf, (size_t)v)) ||
		ds_finish(d))
		goto out;
	d->reused = d->n;
	*out = d;
	d = NULL;
	ok = 1;
out:
	if (s.fp)
		fclose(s.fp);
	free(buf);
	omen_dataset_free(d);
	omen_error_clear();
	return ok;
}

/* What omen.memoryLimit weighs: the bytes the finished dataset holds, that
 * is its records, the sample views and path pointers ds_finish adds, and the
 * contents (lengths, not capacities) of every column. It is a function of the
 * dataset alone, so the same history weighs the same built or loaded from
 * the cache, and a build that stayed under the limit loads under it too. */
static size_t ds_bytes(const omen_dataset *d)
{
	size_t b = d->n * (sizeof(ds_rec) + sizeof(omen_sample)) +
		d->c[C_PATHOFF].len * sizeof(const char *);
	for (int i = 0; i < C_NCOLS; i++)
		b += d->c[i].len * d->c[i].elem;
	return b;
}

/* OMEN_ELIMIT when d weighs more than max_bytes (0 or less: no limit). */
static int check_limit(const omen_dataset *d, int64_t max_bytes, const char *what)
{
	size_t b;
	if (max_bytes <= 0 || (b = ds_bytes(d)) <= (size_t)max_bytes)
		return 0;
	return omen_error_set(OMEN_ELIMIT, "cannot %s dataset: %zu bytes after %zu commits is over "
		"the memory limit of %lld bytes (omen.memoryLimit)", what, b, d->n, (long long)max_bytes);
}

/* ---- building from history ----------------------------------------------- */
typedef struct {
	omen_dataset *d;
	omen_labels *labels;
	omen_metrics *m;
	omen_sample_buf *sb;
	const omen_caps *caps;
	int64_t max_bytes;
	omen_progress prog;
	size_t done;
	int err;
} build_ctx;

static int on_change(const omen_change *c, void *payload)
{
	build_ctx *x = payload;
	const omen_label_rec *lr = x->labels ? omen_labels_get(x->labels, c->commit.hex) : NULL;
	int is_fix = lr ? lr->is_fix != 0 : 0, e;
	omen_sample s;
	if ((e = omen_sample_build(&s, x->sb, c, x->m, is_fix, x->caps)))
		goto fail;
	s.label = (int8_t)(lr ? lr->label : -1);
	if ((e = ds_append(x->d, &s)))
		goto fail;
	if ((e = omen_metrics_update(x->m, c, is_fix)))
		goto fail;
	if ((e = check_limit(x->d, x->max_bytes, "build")))
		goto fail;
	x->done++;
	omen_progress_update(&x->prog, x->done, NULL);
	return 0;
fail:
	x->err = e;
	return 1;
}

/* A cache of an older state of the history, in x->d, made into the dataset
 * of ids[0..n): when its records are the first of ids (the history only
 * grew) and every one is a fix exactly when the new labels say so (the
 * metrics depend on that), the labels are joined again and only the new
 * commits are read, from the cache's metrics state. Returns 1 when that was
 * done, 0 when it does not apply (x->d is then of no use), negative on an
 * error of reading the new commits. */
static int ds_extend(build_ctx *x, omen_repo *r, const omen_walk_opts *wo, const git_oid *ids,
	size_t n)
{
	omen_dataset *d = x->d;
	size_t i, old = d->n;
	char hex[OMEN_OID_HEX + 1];
	int e;
	if (old > n || !d->metrics)
		return 0;
	for (i = 0; i < old; i++) {
		ds_rec *q = &d->rec[i];
		const omen_label_rec *lr;
		omen_oid_hex(hex, sizeof(hex), &ids[i]);
		if (memcmp(q->id, hex, OMEN_OID_HEX + 1))
			return 0;
		lr = x->labels ? omen_labels_get(x->labels, hex) : NULL;
		if ((lr ? lr->is_fix != 0 : 0) != q->is_fix)
			return 0;
		q->label = (int8_t)(lr ? lr->label : -1);
	}
	x->m = d->metrics;
	d->metrics = NULL;
	d->reused = old;
	x->done = old;
	e = omen_history_walk_ids(r, wo, ids + old, n - old, on_change, x);
	if (x->err)
		e = x->err;
	return e ? e : 1;
}

int omen_dataset_build(omen_dataset **out, omen_repo *r, const omen_dataset_opts *o)
{
	omen_buf lb = OMEN_BUF_INIT, key = OMEN_BUF_INIT;
	char *labels_path = NULL, *cache_path = NULL;
	omen_walk_opts wo = OMEN_WALK_OPTS_INIT;
	git_oid *ids = NULL;
	size_t nids = 0, static_len = 0;
	build_ctx x;
	int e, extended = 0;

	*out = NULL;
	memset(&x, 0, sizeof(x));
	if (o->labels_path) {
		if (!(labels_path = strdup(o->labels_path))) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
	} else if ((e = omen_labels_path(&labels_path, r, NULL))) {
		goto out;
	}
	/* omen.memoryLimit bounds the label file too (issue 15, item 7) */
	if ((e = omen_file_read(&lb, labels_path, o->max_bytes > 0 && (uint64_t)o->max_bytes < OMEN_READ_MAX
			? (size_t)o->max_bytes : 0))) {
		if (e == OMEN_ENOTFOUND && o->labels_optional) {
			omen_error_clear();
			e = 0;
		} else if (e == OMEN_ENOTFOUND)
			e = omen_error_set(e, "cannot read labels '%s': no such file (run 'git omen label')",
				labels_path);
		else if (e == OMEN_ELIMIT && o->max_bytes > 0 && (uint64_t)o->max_bytes < OMEN_READ_MAX)
			e = omen_error_set(e, "cannot read labels '%s': larger than the memory limit of %lld "
				"bytes (omen.memoryLimit)", labels_path, (long long)o->max_bytes);
		if (e)
			goto out;
	}
	wo.revs = o->revs;
	wo.with_lines = 1;
	if ((e = omen_history_list(&ids, &nids, r, &wo)))
		goto out;
	if (o->use_cache) {
		if ((e = omen_repo_omen_path(&cache_path, r, "dataset.cache")) ||
			(e = cache_key(&key, &static_len, ids, nids, o, &lb)))
			goto out;
		if (cache_read(out, cache_path, &key, 0)) {
			if ((e = check_limit(*out, o->max_bytes, "load"))) {
				omen_dataset_free(*out);
				*out = NULL;
			} else {
				set_tip(*out, r, o->revs);
			}
			goto out;
		}
		if (o->cache_only) {
			e = omen_error_set(OMEN_ENOTFOUND, "no dataset cache for this history and labels");
			goto out;
		}
	}
	if ((lb.len || !o->labels_optional) && (e = omen_labels_parse(&x.labels, labels_path, lb.ptr, lb.len)))
		goto out;
	omen_buf_free(&lb);
	if ((e = omen_sample_buf_new(&x.sb)))
		goto out;
	x.caps = &o->caps;
	x.max_bytes = o->max_bytes;
	omen_progress_start(&x.prog, "features", omen_labels_count(x.labels));
	if (o->use_cache && cache_read(&x.d, cache_path, &key, static_len)) {
		if ((extended = ds_extend(&x, r, &wo, ids, nids)) < 0) {
			e = extended;
			goto out;
		}
		if (!extended) {   /* of no use: build it all */
			omen_dataset_free(x.d);
			omen_metrics_free(x.m);
			x.d = NULL;
			x.m = NULL;
			x.done = 0;
		}
	}
	if (!extended) {
		if ((e = ds_new(&x.d)) || (e = omen_metrics_new(&x.m)))
			goto out;
		e = omen_history_walk_ids(r, &wo, ids, nids, on_change, &x);
		if (x.err)
			e = x.err;
	}
	omen_progress_end(&x.prog);
	if (!e && extended)   /* a cache that matched whole was weighed when loaded */
		e = check_limit(x.d, o->max_bytes, "load");
	if (e)
		goto out;
	x.d->metrics = x.m;
	x.m = NULL;
	set_tip(x.d, r, o->revs);
	ds_shrink(x.d);
	if ((e = ds_finish(x.d)))
		goto out;
	if (o->use_cache && cache_path) {
		/* a cache that cannot be written is not an error for the caller */
		if (cache_write(x.d, cache_path, &key))
			omen_error_clear();
	}
	*out = x.d;
	x.d = NULL;
out:
	omen_dataset_free(x.d);
	omen_metrics_free(x.m);
	omen_sample_buf_free(x.sb);
	omen_labels_free(x.labels);
	omen_buf_free(&lb);
	omen_buf_free(&key);
	free(ids);
	free(labels_path);
	free(cache_path);
	return e;
}
