/* Renames with edits. The history reader pairs renames by exact blob id
 * only; git blame (and git log -M) also follows a file that was moved and
 * edited in the same commit when at least half of it is unchanged (git's
 * default -M50% similarity). Here an added file with no origin state is
 * paired with a deleted file of the same commit when at least half of the
 * larger side's lines (whitespace ignored) occur in the other, the two blobs
 * are diffed -U0 with libgit2 (as git diff does) and the new version takes
 * the old one's origins through that diff. */
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "label/trace.h"

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

typedef struct {
	omen_file file;
	omen_hunk *hunks;
	size_t nhunks, hcap;
	omen_line *lines;
	size_t nlines, lcap;
	omen_buf text;
	int err;
} pair_diff;

static int on_hunk(const git_diff_delta *d, const git_diff_hunk *h, void *p)
{
	pair_diff *x = p;
	omen_hunk *o;
	(void)d;
	if (OMEN_ARRAY_RESERVE(x->hunks, x->hcap, x->nhunks + 1)) {
		x->err = OMEN_ENOMEM;
		return -1;
	}
	o = &x->hunks[x->nhunks++];
	o->old_start = h->old_start;
	o->old_lines = h->old_lines;
	o->new_start = h->new_start;
	o->new_lines = h->new_lines;
	o->line_off = (uint32_t)x->nlines;
	o->nlines = 0;
	o->file = 0;
	return 0;
}

static int on_line(const git_diff_delta *d, const git_diff_hunk *h, const git_diff_line *l, void *p)
{
	pair_diff *x = p;
	omen_line *o;
	size_t n = l->content_len;
	(void)d;
	(void)h;
	if (l->origin != GIT_DIFF_LINE_ADDITION && l->origin != GIT_DIFF_LINE_DELETION)
		return 0;
	if (!x->nhunks)
		return 0;
	if (n && l->content[n - 1] == '\n')
		n--;
	if (OMEN_ARRAY_RESERVE(x->lines, x->lcap, x->nlines + 1)) {
		x->err = OMEN_ENOMEM;
		return -1;
	}
	o = &x->lines[x->nlines++];
	o->origin = l->origin == GIT_DIFF_LINE_ADDITION ? '+' : '-';
	o->old_lineno = l->old_lineno;
	o->new_lineno = l->new_lineno;
	o->text_off = (uint32_t)x->text.len;
	o->text_len = (uint32_t)n;
	if (omen_buf_put(&x->text, l->content, n)) {
		x->err = OMEN_ENOMEM;
		return -1;
	}
	x->hunks[x->nhunks - 1].nlines++;
	return 0;
}

static int probe_binary(const git_blob *b)
{
	size_t n = b ? (size_t)git_blob_rawsize(b) : 0;
	return b && memchr(git_blob_rawcontent(b), 0, n > 8000 ? 8000 : n) != NULL;
}

int lbl_apply_blobs(lbl_tracer *t, git_repository *repo, const omen_file *f, uint32_t ci)
{
	git_blob *a = NULL, *b = NULL;
	git_diff_options dopts;
	pair_diff x;
	omen_change pc;
	int e = 0, has_old = f->old_path && !git_oid_is_zero(&f->old_blob);
	memset(&x, 0, sizeof(x));
	git_diff_options_init(&dopts, GIT_DIFF_OPTIONS_VERSION);
	dopts.context_lines = 0;
	dopts.interhunk_lines = 0;
	dopts.flags = GIT_DIFF_FORCE_TEXT | GIT_DIFF_INDENT_HEURISTIC;
	if ((has_old && git_blob_lookup(&a, repo, &f->old_blob)) || git_blob_lookup(&b, repo, &f->new_blob))
		goto out; /* unreadable: no version */
	if (probe_binary(a) || probe_binary(b) || (int64_t)git_blob_rawsize(b) > (50ll << 20))
		goto out; /* binary or too large: not traced, as in the history reader */
	if (git_diff_blobs(a, NULL, b, NULL, &dopts, NULL, NULL, on_hunk, on_line, &x) < 0 || x.err) {
		e = x.err ? omen_error_set(OMEN_ENOMEM, "out of memory") : 0;
		goto out;
	}
	memset(&pc, 0, sizeof(pc));
	x.file = *f;
	x.file.flags = 0;
	x.file.hunk_off = 0;
	x.file.nhunks = (uint32_t)x.nhunks;
	if (!has_old) {
		x.file.old_path = NULL;
		x.file.status = OMEN_FILE_ADDED;
	}
	pc.files = &x.file;
	pc.nfiles = 1;
	pc.hunks = x.hunks;
	pc.nhunks = x.nhunks;
	pc.lines = x.lines;
	pc.nlines = x.nlines;
	pc.text = x.text.ptr ? x.text.ptr : "";
	e = lbl_tracer_apply(t, &pc, ci);
out:
	git_blob_free(a);
	git_blob_free(b);
	free(x.hunks);
	free(x.lines);
	omen_buf_free(&x.text);
	return e;
}

static int apply_pair(lbl_tracer *t, git_repository *repo, const omen_file *df, const omen_file *af,
	uint32_t ci)
{
	omen_file f = *af;
	f.old_path = df->old_path;
	f.old_blob = df->old_blob;
	f.old_nlines = df->old_nlines;
	f.status = OMEN_FILE_RENAMED;
	return lbl_apply_blobs(t, repo, &f, ci);
}

int lbl_rename_pairs(lbl_tracer *t, git_repository *repo, const omen_change *c, uint32_t ci)
{
	size_t i, j, nd = 0;
	const unsigned skip = OMEN_FILE_BINARY | OMEN_FILE_TOO_LARGE | OMEN_FILE_SUBMODULE;
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
		    lbl_tracer_get(t, af->new_path, &af->new_blob, NULL))
			continue;
		if (!(ah = file_hashes(c, af, '+', &an))) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
		for (j = 0; j < c->nfiles; j++) {
			const omen_file *df = &c->files[j];
			size_t k, big;
			if (df->status != OMEN_FILE_DELETED || (df->flags & skip) || used[j] || !df->deleted ||
			    !lbl_tracer_get(t, df->old_path, &df->old_blob, NULL))
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
			used[bj] = 1;
			if ((e = apply_pair(t, repo, &c->files[bj], af, ci)))
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
