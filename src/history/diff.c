/* Tree-to-tree changes and -U0 blob diffs.
 *
 * libgit2's git_diff_tree_to_tree expands unchanged subtrees; this compares
 * two trees entry by entry in git's tree order, skips entries whose ids and
 * modes are equal, descends only into differing subtrees, and diffs blob
 * pairs with git_diff_buffers (Myers with the indent heuristic and no
 * context, what `git diff -U0` does by default since git 2.14).
 * Binary detection follows git's buffer_is_binary(): a NUL byte in the first
 * 8000 bytes of either side (xdiff-interface.c). .gitattributes are not read. */
#include <stdlib.h>
#include <string.h>
#include <ctype.h>
#include <time.h>
#include "history/internal.h"
#include "omen/error.h"

#define MODE_TYPE(m) ((m) & 0170000)
#define MODE_TREE 0040000
#define MODE_LINK 0120000
#define MODE_GITLINK 0160000
#define MODE_REG 0100000
#define BINARY_PROBE 8000          /* git: FIRST_FEW_BYTES */
#define DEFAULT_MAX_BLOB (50ll << 20)

/* ---- omen_change --------------------------------------------------------- */
void omen_change_init(omen_change *c)
{
	memset(c, 0, sizeof(*c));
	omen_arena_init(&c->arena, 64 * 1024);
}

void omen_change_clear(omen_change *c)
{
	omen_arena_reset(&c->arena);
	omen_buf_clear(&c->textbuf);
	c->nfiles = c->nhunks = c->nlines = 0;
	memset(&c->commit, 0, sizeof(c->commit));
	c->text = "";
}

void omen_change_free(omen_change *c)
{
	if (!c)
		return;
	omen_arena_free(&c->arena);
	omen_buf_free(&c->textbuf);
	free(c->files);
	free(c->hunks);
	free(c->lines);
	memset(c, 0, sizeof(*c));
}

int hist_git_fail(const char *what, const char *subject)
{
	const git_error *e = git_error_last();
	return omen_error_set(OMEN_EGIT, "%s '%s': %s", what, subject,
		e && e->message ? e->message : "libgit2 error");
}

char *hist_norm_email(omen_arena *a, const char *email)
{
	const char *s = email ? email : "";
	size_t n;
	char *p;
	while (*s == ' ' || *s == '\t' || *s == '<')
		s++;
	n = strlen(s);
	while (n && (s[n - 1] == ' ' || s[n - 1] == '\t' || s[n - 1] == '>'))
		n--;
	p = omen_arena_strndup(a, s, n);
	if (p)
		for (size_t i = 0; i < n; i++)
			p[i] = (char)tolower((unsigned char)p[i]);
	return p;
}

/* ---- differ -------------------------------------------------------------- */
int hist_differ_init(hist_differ *d, git_repository *repo, const omen_walk_opts *o)
{
	memset(d, 0, sizeof(*d));
	d->repo = repo;
	d->max_blob = o && o->max_blob_bytes > 0 ? o->max_blob_bytes : DEFAULT_MAX_BLOB;
	d->detect_renames = o ? o->detect_renames >= 0 : 1;
	d->with_lines = o ? o->with_lines : 1;
	d->missing = o && o->missing_blobs ? o->missing_blobs : OMEN_MISSING_ERROR;
	d->filter = o ? o->path_filter : NULL;
	d->filter_ctx = o ? o->path_filter_ctx : NULL;
	if (git_repository_odb(&d->odb, repo) < 0)
		return hist_git_fail("cannot open object database of", git_repository_path(repo));
	git_diff_options_init(&d->dopts, GIT_DIFF_OPTIONS_VERSION);
	d->dopts.context_lines = 0;
	d->dopts.interhunk_lines = 0;
	d->dopts.flags = GIT_DIFF_FORCE_TEXT | GIT_DIFF_INDENT_HEURISTIC;
	git_oid_fromstr(&d->empty_blob, "e69de29bb2d1d6434b8b29ae775ad8c2e48c5391");
	return 0;
}

void hist_differ_free(hist_differ *d)
{
	if (!d)
		return;
	git_odb_free(d->odb);
	free(d->ents);
	omen_buf_free(&d->path);
	memset(d, 0, sizeof(*d));
}

int hist_add_entry(hist_differ *d, omen_change *out, const char *old_path, const char *new_path,
	const git_oid *old_id, uint32_t old_mode, const git_oid *new_id, uint32_t new_mode)
{
	hist_entry *e;
	if (OMEN_ARRAY_RESERVE(d->ents, d->ents_cap, d->nents + 1) < 0)
		return OMEN_ENOMEM;
	e = &d->ents[d->nents];
	memset(e, 0, sizeof(*e));
	if (old_path && !(e->old_path = omen_arena_strndup(&out->arena, old_path, strlen(old_path))))
		return OMEN_ENOMEM;
	if (new_path) {
		if (old_path && !strcmp(old_path, new_path))
			e->new_path = e->old_path;
		else if (!(e->new_path = omen_arena_strndup(&out->arena, new_path, strlen(new_path))))
			return OMEN_ENOMEM;
	}
	if (old_id)
		git_oid_cpy(&e->old_id, old_id);
	if (new_id)
		git_oid_cpy(&e->new_id, new_id);
	e->old_mode = old_mode;
	e->new_mode = new_mode;
	d->nents++;
	return 0;
}

/* git's base_name_compare(): a tree sorts as if its name ended in '/'. */
static int entry_cmp(const git_tree_entry *a, const git_tree_entry *b)
{
	const char *na = git_tree_entry_name(a), *nb = git_tree_entry_name(b);
	size_t la = strlen(na), lb = strlen(nb), n = la < lb ? la : lb;
	int r = memcmp(na, nb, n);
	unsigned char ca, cb;
	if (r)
		return r;
	ca = na[n] ? (unsigned char)na[n] : (MODE_TYPE(git_tree_entry_filemode(a)) == MODE_TREE ? '/' : 0);
	cb = nb[n] ? (unsigned char)nb[n] : (MODE_TYPE(git_tree_entry_filemode(b)) == MODE_TREE ? '/' : 0);
	return (int)ca - (int)cb;
}

static int is_tree(const git_tree_entry *e)
{
	return MODE_TYPE(git_tree_entry_filemode(e)) == MODE_TREE;
}

static int walk_trees(hist_differ *d, omen_change *out, git_tree *a, git_tree *b);

/* One side of an entry pair (either may be NULL, not both). */
static int entry_pair(hist_differ *d, omen_change *out, const git_tree_entry *ea,
	const git_tree_entry *eb)
{
	size_t base = d->path.len;
	const char *name = git_tree_entry_name(ea ? ea : eb);
	int rc = 0;
	if (omen_buf_puts(&d->path, name) < 0)
		return OMEN_ENOMEM;
	if ((ea && is_tree(ea)) || (eb && is_tree(eb))) {
		/* same name and both trees (entry_cmp makes mixed pairs unequal) */
		git_tree *ta = NULL, *tb = NULL;
		if (ea && git_tree_lookup(&ta, d->repo, git_tree_entry_id(ea)) < 0) {
			rc = hist_git_fail("cannot read tree", d->path.ptr);
			goto out;
		}
		if (eb && git_tree_lookup(&tb, d->repo, git_tree_entry_id(eb)) < 0) {
			git_tree_free(ta);
			rc = hist_git_fail("cannot read tree", d->path.ptr);
			goto out;
		}
		if (omen_buf_put(&d->path, "/", 1) < 0) {
			rc = OMEN_ENOMEM;
		} else {
			rc = walk_trees(d, out, ta, tb);
		}
		git_tree_free(ta);
		git_tree_free(tb);
	} else {
		rc = hist_add_entry(d, out, ea ? d->path.ptr : NULL, eb ? d->path.ptr : NULL,
			ea ? git_tree_entry_id(ea) : NULL, ea ? (uint32_t)git_tree_entry_filemode(ea) : 0,
			eb ? git_tree_entry_id(eb) : NULL, eb ? (uint32_t)git_tree_entry_filemode(eb) : 0);
	}
out:
	d->path.len = base;
	if (d->path.ptr)
		d->path.ptr[base] = '\0';
	return rc;
}

static int walk_trees(hist_differ *d, omen_change *out, git_tree *a, git_tree *b)
{
	size_t na = a ? git_tree_entrycount(a) : 0, nb = b ? git_tree_entrycount(b) : 0;
	size_t i = 0, j = 0;
	int rc;
	while (i < na || j < nb) {
		const git_tree_entry *ea = i < na ? git_tree_entry_byindex(a, i) : NULL;
		const git_tree_entry *eb = j < nb ? git_tree_entry_byindex(b, j) : NULL;
		int c = !ea ? 1 : !eb ? -1 : entry_cmp(ea, eb);
		if (c < 0) {
			rc = entry_pair(d, out, ea, NULL);
			i++;
		} else if (c > 0) {
			rc = entry_pair(d, out, NULL, eb);
			j++;
		} else {
			i++, j++;
			if (git_tree_entry_filemode(ea) == git_tree_entry_filemode(eb) &&
			    git_oid_equal(git_tree_entry_id(ea), git_tree_entry_id(eb)))
				continue;
			rc = entry_pair(d, out, ea, eb);
		}
		if (rc < 0)
			return rc;
	}
	return 0;
}

/* ---- blob diffs ---------------------------------------------------------- */
typedef struct {
	omen_change *c;
	hist_differ *d;
	uint32_t file;
	int rc;
} diff_ctx;

static int on_hunk(const git_diff_delta *delta, const git_diff_hunk *h, void *payload)
{
	diff_ctx *x = payload;
	omen_change *c = x->c;
	omen_hunk *oh;
	(void)delta;
	if (OMEN_ARRAY_RESERVE(c->hunks, c->hunks_cap, c->nhunks + 1) < 0)
		return x->rc = OMEN_ENOMEM;
	oh = &c->hunks[c->nhunks++];
	oh->old_start = h->old_start;
	oh->old_lines = h->old_lines;
	oh->new_start = h->new_start;
	oh->new_lines = h->new_lines;
	oh->line_off = (uint32_t)c->nlines;
	oh->nlines = 0;
	oh->file = x->file;
	c->files[x->file].nhunks++;
	return 0;
}

static int on_line(const git_diff_delta *delta, const git_diff_hunk *h, const git_diff_line *l,
	void *payload)
{
	diff_ctx *x = payload;
	omen_change *c = x->c;
	omen_file *f = &c->files[x->file];
	omen_line *ol;
	size_t len;
	(void)delta; (void)h;
	if (l->origin == GIT_DIFF_LINE_ADDITION)
		f->added++;
	else if (l->origin == GIT_DIFF_LINE_DELETION)
		f->deleted++;
	else
		return 0;
	if (!x->d->with_lines) {
		c->hunks[c->nhunks - 1].nlines++;
		return 0;
	}
	if (OMEN_ARRAY_RESERVE(c->lines, c->lines_cap, c->nlines + 1) < 0)
		return x->rc = OMEN_ENOMEM;
	len = l->content_len;
	if (len && l->content[len - 1] == '\n')
		len--;
	ol = &c->lines[c->nlines++];
	ol->origin = l->origin == GIT_DIFF_LINE_ADDITION ? '+' : '-';
	ol->old_lineno = l->old_lineno;
	ol->new_lineno = l->new_lineno;
	ol->text_off = (uint32_t)c->textbuf.len;
	ol->text_len = (uint32_t)len;
	if (omen_buf_put(&c->textbuf, l->content, len) < 0 || omen_buf_put(&c->textbuf, "", 1) < 0)
		return x->rc = OMEN_ENOMEM;
	c->hunks[c->nhunks - 1].nlines++;
	return 0;
}

/* Newlines in p, eight bytes at a time: a byte of v = w ^ 0x0a.. is zero
 * exactly where w has '\n', and ~(((v & 0x7f..) + 0x7f..) | v) has the high
 * bit set exactly in v's zero bytes (no false positives, unlike the usual
 * has-zero test). */
static int64_t count_lines(const char *p, size_t n)
{
	const uint64_t nl = 0x0a0a0a0a0a0a0a0aull, lo7 = 0x7f7f7f7f7f7f7f7full;
	int64_t k = 0;
	size_t i = 0;
	for (; i + 8 <= n; i += 8) {
		uint64_t w, v;
		memcpy(&w, p + i, 8);
		v = w ^ nl;
		k += __builtin_popcountll(~(((v & lo7) + lo7) | v | lo7));
	}
	for (; i < n; i++)
		k += p[i] == '\n';
	if (n && p[n - 1] != '\n')
		k++;
	return k;
}

/* An absent blob (issue 12): an error that names the setting that goes on
 * without it, or (skip and fetch) *missing set. */
static int blob_absent(hist_differ *d, const git_oid *id, const char *path, int *missing)
{
	char hex[OMEN_OID_HEX + 1];
	if (d->missing == OMEN_MISSING_SKIP || d->missing == OMEN_MISSING_FETCH) {
		*missing = 1;
		return 0;
	}
	git_oid_tostr(hex, sizeof(hex), id);
	return omen_error_set(OMEN_EGIT, "cannot read blob of '%s': object %.12s is missing; "
		"set omen.missingBlobs=skip (git config, or git -c) to go on without it", path, hex);
}

/* Loads a blob unless over the size limit (*too_large set then) or absent
 * and skipped (*missing set then). */
static int load_blob(hist_differ *d, git_blob **out, const git_oid *id, const char *path,
	int *too_large, int *missing)
{
	size_t len = 0;
	git_object_t type;
	int e;
	*out = NULL;
	if ((e = git_odb_read_header(&len, &type, d->odb, id)) < 0) {
		if (e == GIT_ENOTFOUND) {
			git_error_clear();
			return blob_absent(d, id, path, missing);
		}
		return hist_git_fail("cannot read blob of", path);
	}
	if ((int64_t)len > d->max_blob) {
		*too_large = 1;
		return 0;
	}
	if ((e = git_blob_lookup(out, d->repo, id)) < 0) {
		if (e == GIT_ENOTFOUND) {
			git_error_clear();
			return blob_absent(d, id, path, missing);
		}
		return hist_git_fail("cannot read blob of", path);
	}
	return 0;
}

static int probe_binary(const git_blob *b)
{
	size_t n;
	if (!b)
		return 0;
	n = (size_t)git_blob_rawsize(b);
	if (n > BINARY_PROBE)
		n = BINARY_PROBE;
	return memchr(git_blob_rawcontent(b), 0, n) != NULL;
}

/* git_diff_buffers() hashes both buffers (SHA-1 with collision detection,
 * about a quarter of the walk's time) only to fill in the ids of the two
 * sides, which omen never reads. While hist_fake_ids is set on this thread,
 * libgit2's git_odb_hash calls (made through the PLT, so this definition in
 * the executable takes them) return distinct dummy ids instead; at all other
 * times they go to the real function. */
#include <dlfcn.h>
static _Thread_local unsigned hist_fake_ids;
int git_odb_hash(git_oid *out, const void *data, size_t len, git_object_t type);
int git_odb_hash(git_oid *out, const void *data, size_t len, git_object_t type)
{
	static int (*real)(git_oid *, const void *, size_t, git_object_t);
	if (hist_fake_ids) {
		memset(out, 0, sizeof(*out));
		out->id[0] = (unsigned char)hist_fake_ids++;
		out->id[1] = 0xfe;
		return 0;
	}
	if (!real)
		*(void **)&real = dlsym(RTLD_NEXT, "git_odb_hash");
	if (!real)
		return -1;
	return real(out, data, len, type);
}

/* git's xdiff-interface.c trim_common_tail(), which `git diff` applies when
 * there is no context (-U0): drops the common tail in 1024-byte blocks, then
 * gives back the part of the last block after its first newline. Doing the
 * same keeps the hunks identical to git's (and skips hashing that tail). */
static void trim_common_tail(const char *a, size_t *alen, const char *b, size_t *blen)
{
	const size_t blk = 1024;
	size_t trimmed = 0, recovered = 0;
	const char *ap = a + *alen, *bp = b + *blen;
	size_t smaller = *alen < *blen ? *alen : *blen;
	while (blk + trimmed <= smaller && !memcmp(ap - blk, bp - blk, blk)) {
		trimmed += blk;
		ap -= blk;
		bp -= blk;
	}
	while (recovered < trimmed)
		if (ap[recovered++] == '\n')
			break;
	*alen -= trimmed - recovered;
	*blen -= trimmed - recovered;
}

static int run_diff(hist_differ *d, omen_change *c, uint32_t fi, const git_blob *a, const git_blob *b)
{
	diff_ctx x = {c, d, fi, 0};
	const char *pa = a ? git_blob_rawcontent(a) : NULL, *pb = b ? git_blob_rawcontent(b) : NULL;
	size_t la = a ? (size_t)git_blob_rawsize(a) : 0, lb = b ? (size_t)git_blob_rawsize(b) : 0;
	int rc;
	if (pa && pb)
		trim_common_tail(pa, &la, pb, &lb);
	/* buffers, not git_diff_blobs: with blobs libgit2 looks up the diff
	 * driver in the attribute files for every pair (three stats each) */
	hist_fake_ids = 1;
	rc = git_diff_buffers(pa, la, NULL, pb, lb, NULL, &d->dopts, NULL, NULL, on_hunk, on_line, &x);
	hist_fake_ids = 0;
	if (x.rc < 0)
		return x.rc;
	if (rc < 0)
		return hist_git_fail("cannot diff", c->files[fi].new_path ? c->files[fi].new_path : c->files[fi].old_path);
	return 0;
}

/* Fills file fi from entry e. */
static int diff_entry(hist_differ *d, omen_change *c, uint32_t fi, const hist_entry *e)
{
	omen_file *f = &c->files[fi];
	uint32_t ta = MODE_TYPE(e->old_mode), tb = MODE_TYPE(e->new_mode);
	git_blob *a = NULL, *b = NULL;
	int big = 0, absent = 0, rc = 0;
	const char *path = e->new_path ? e->new_path : e->old_path;

	memset(f, 0, sizeof(*f));
	f->old_path = e->old_mode ? e->old_path : NULL;
	f->new_path = e->new_mode ? e->new_path : NULL;
	if (e->old_mode)
		git_oid_cpy(&f->old_blob, &e->old_id);
	if (e->new_mode)
		git_oid_cpy(&f->new_blob, &e->new_id);
	f->hunk_off = (uint32_t)c->nhunks;
	if (!e->old_mode)
		f->status = OMEN_FILE_ADDED;
	else if (!e->new_mode)
		f->status = OMEN_FILE_DELETED;
	else if (e->old_path != e->new_path && strcmp(e->old_path, e->new_path))
		f->status = OMEN_FILE_RENAMED;
	else if (ta != tb)
		f->status = OMEN_FILE_TYPECHANGE;
	else
		f->status = OMEN_FILE_MODIFIED;
	if (ta == MODE_LINK || tb == MODE_LINK)
		f->flags |= OMEN_FILE_SYMLINK;
	if (d->filter && !d->filter(f->old_path, f->new_path, d->pairing, d->filter_ctx)) {
		f->flags |= OMEN_FILE_FILTERED; /* another shard's file (issue 13) */
		goto out;
	}
	if (ta == MODE_GITLINK || tb == MODE_GITLINK) {
		/* git prints "Subproject commit <id>" lines: numstat counts one
		 * line per gitlink side; no hunks are produced here. */
		f->flags |= OMEN_FILE_SUBMODULE;
		if (ta == MODE_GITLINK)
			f->deleted++;
		if (tb == MODE_GITLINK)
			f->added++;
	}
	if (e->old_mode && e->new_mode && git_oid_equal(&e->old_id, &e->new_id)) {
		if (f->status != OMEN_FILE_RENAMED)
			f->flags |= OMEN_FILE_MODE_ONLY;
		if (ta != MODE_GITLINK && !(f->flags & OMEN_FILE_SUBMODULE)) {
			/* old size still wanted for LT */
			if ((rc = load_blob(d, &a, &e->old_id, path, &big, &absent)) < 0)
				goto out;
			if (absent)
				goto absent;
			if (big)
				f->flags |= OMEN_FILE_TOO_LARGE;
			else if (probe_binary(a))
				f->flags |= OMEN_FILE_BINARY;
			else
				f->old_nlines = count_lines(git_blob_rawcontent(a), (size_t)git_blob_rawsize(a));
		}
		goto out;
	}
	if (e->old_mode && ta != MODE_GITLINK &&
	    (rc = load_blob(d, &a, &e->old_id, path, &big, &absent)) < 0)
		goto out;
	if (e->new_mode && tb != MODE_GITLINK &&
	    (rc = load_blob(d, &b, &e->new_id, path, &big, &absent)) < 0)
		goto out;
	if (absent)
		goto absent;
	if (big) {
		f->flags |= OMEN_FILE_TOO_LARGE;
		goto out;
	}
	if (probe_binary(a) || probe_binary(b)) {
		f->flags |= OMEN_FILE_BINARY;
		goto out;
	}
	if (a)
		f->old_nlines = count_lines(git_blob_rawcontent(a), (size_t)git_blob_rawsize(a));
	if (f->status == OMEN_FILE_TYPECHANGE) {
		/* git shows a deletion then a creation (two hunks at most) */
		if (a && (rc = run_diff(d, c, fi, a, NULL)) < 0)
			goto out;
		if (b && (rc = run_diff(d, c, fi, NULL, b)) < 0)
			goto out;
	} else if (a || b) {
		rc = run_diff(d, c, fi, a, b);
	}
	goto out;
absent:
	/* a side cannot be read: no counts, no hunks, no line count (the
	 * labeller gives this file version no origins, DEVELOPERS.md) */
	f->flags |= OMEN_FILE_MISSING;
	f->flags &= ~(unsigned)(OMEN_FILE_TOO_LARGE | OMEN_FILE_BINARY);
	f->added = f->deleted = 0;
	f->old_nlines = 0;
	if (d->skipped)
		__atomic_add_fetch(d->skipped, 1, __ATOMIC_RELAXED);
out:
	git_blob_free(a);
	git_blob_free(b);
	return rc;
}

/* Exact renames: a deleted and an added path with the same blob id (empty
 * blobs and gitlinks excluded, as git does). Pairs in path order: the n-th
 * added path with a given id takes the n-th deleted path with it. */
static void pair_renames(hist_differ *d)
{
	for (size_t j = 0; j < d->nents; j++) {
		hist_entry *add = &d->ents[j];
		if (add->old_mode || !add->new_mode || MODE_TYPE(add->new_mode) == MODE_GITLINK ||
		    git_oid_equal(&add->new_id, &d->empty_blob))
			continue;
		for (size_t i = 0; i < d->nents; i++) {
			hist_entry *del = &d->ents[i];
			if (del->dropped || del->new_mode || !del->old_mode ||
			    MODE_TYPE(del->old_mode) == MODE_GITLINK ||
			    MODE_TYPE(del->old_mode) != MODE_TYPE(add->new_mode) ||
			    !git_oid_equal(&del->old_id, &add->new_id))
				continue;
			del->dropped = 1;
			add->old_path = del->old_path;
			add->old_mode = del->old_mode;
			git_oid_cpy(&add->old_id, &del->old_id);
			break;
		}
	}
}

int hist_diff_entries(hist_differ *d, omen_change *c)
{
	size_t n = 0;
	int rc;
	if (d->detect_renames)
		pair_renames(d);
	for (size_t i = 0; i < d->nents; i++)
		n += !d->ents[i].dropped;
	if (d->filter) {
		int add = 0, del = 0;
		for (size_t i = 0; i < d->nents; i++) {
			add |= !d->ents[i].dropped && !d->ents[i].old_mode;
			del |= !d->ents[i].dropped && !d->ents[i].new_mode;
		}
		d->pairing = add && del;
	}
	if (OMEN_ARRAY_RESERVE(c->files, c->files_cap, n ? n : 1) < 0)
		return OMEN_ENOMEM;
	c->nfiles = 0;
	for (size_t i = 0; i < d->nents; i++) {
		if (d->ents[i].dropped)
			continue;
		c->nfiles++;
		if ((rc = diff_entry(d, c, (uint32_t)(c->nfiles - 1), &d->ents[i])) < 0)
			return rc;
	}
	c->text = c->textbuf.ptr ? c->textbuf.ptr : "";
	return 0;
}

int hist_list_trees(hist_differ *d, omen_change *out, git_tree *old_tree, git_tree *new_tree)
{
	d->nents = 0;
	omen_buf_clear(&d->path);
	if (omen_buf_put(&d->path, "", 0) < 0)
		return OMEN_ENOMEM;
	return walk_trees(d, out, old_tree, new_tree);
}

int hist_diff_trees(hist_differ *d, omen_change *out, git_tree *old_tree, git_tree *new_tree)
{
	int rc;
	if ((rc = hist_list_trees(d, out, old_tree, new_tree)) < 0)
		return rc;
	return hist_diff_entries(d, out);
}

static int fill_commit(hist_differ *d, omen_change *c, git_commit *cm)
{
	omen_commit *k = &c->commit;
	const git_signature *au = git_commit_author(cm), *co = git_commit_committer(cm);
	const char *msg = git_commit_message(cm);
	git_oid *ps;
	git_oid_cpy(&k->id, git_commit_id(cm));
	git_oid_tostr(k->hex, sizeof(k->hex), &k->id);
	k->nparents = git_commit_parentcount(cm);
	ps = omen_arena_alloc(&c->arena, sizeof(git_oid) * (k->nparents ? k->nparents : 1));
	if (!ps)
		return OMEN_ENOMEM;
	for (uint32_t i = 0; i < k->nparents; i++) {
		git_oid_cpy(&ps[i], git_commit_parent_id(cm, i));
		if (!git_odb_exists(d->odb, &ps[i]))
			k->boundary = 1;
	}
	k->parents = ps;
	k->author_time = au->when.time;
	k->author_tz = au->when.offset;
	k->commit_time = co->when.time;
	k->commit_tz = co->when.offset;
	k->author_name = omen_arena_strndup(&c->arena, au->name ? au->name : "", au->name ? strlen(au->name) : 0);
	k->author_email = hist_norm_email(&c->arena, au->email);
	k->message = omen_arena_strndup(&c->arena, msg ? msg : "", msg ? strlen(msg) : 0);
	if (!k->author_name || !k->author_email || !k->message)
		return OMEN_ENOMEM;
	return 0;
}

int hist_diff_commit(hist_differ *d, omen_change *out, const git_oid *id)
{
	git_commit *cm = NULL, *parent = NULL;
	git_tree *ta = NULL, *tb = NULL;
	char hex[OMEN_OID_HEX + 1];
	int rc;
	omen_change_clear(out);
	git_oid_tostr(hex, sizeof(hex), id);
	if (git_commit_lookup(&cm, d->repo, id) < 0) {
		rc = hist_git_fail("cannot read commit", hex);
		goto out;
	}
	if ((rc = fill_commit(d, out, cm)) < 0)
		goto out;
	if (out->commit.nparents && git_odb_exists(d->odb, &out->commit.parents[0])) {
		if (git_commit_parent(&parent, cm, 0) < 0 || git_commit_tree(&ta, parent) < 0) {
			rc = hist_git_fail("cannot read parent of commit", hex);
			goto out;
		}
	}
	if (git_commit_tree(&tb, cm) < 0) {
		rc = hist_git_fail("cannot read tree of commit", hex);
		goto out;
	}
	rc = hist_diff_trees(d, out, ta, tb);
out:
	git_tree_free(ta);
	git_tree_free(tb);
	git_commit_free(parent);
	git_commit_free(cm);
	return rc;
}

/* ---- staged changes ------------------------------------------------------ */
int omen_history_staged(omen_change *out, omen_repo *r, const omen_walk_opts *o)
{
	git_repository *repo = omen_repo_git(r);
	hist_differ d;
	git_index *index = NULL;
	git_diff *diff = NULL;
	git_commit *head = NULL;
	git_tree *tree = NULL;
	git_signature *sig = NULL;
	git_diff_options dopts;
	git_oid head_id;
	int rc, have_d = 0, unborn = git_repository_head_unborn(repo) == 1;
	omen_commit *k = &out->commit;
	git_oid *ps;

	omen_walk_opts ro;
	omen_change_clear(out);
	if ((rc = hist_resolve_opts(&ro, r, o)) < 0)
		return rc;
	o = &ro;
	if (git_repository_is_bare(repo)) {
		rc = omen_error_set(OMEN_EUSAGE, "cannot read staged changes of '%s': bare repository",
			omen_repo_gitdir(r));
		goto out;
	}
	if ((rc = hist_differ_init(&d, repo, o)) < 0)
		goto out;
	have_d = 1;
	if (!unborn) {
		if (git_reference_name_to_id(&head_id, repo, "HEAD") < 0 ||
		    git_commit_lookup(&head, repo, &head_id) < 0 || git_commit_tree(&tree, head) < 0) {
			rc = hist_git_fail("cannot read", "HEAD");
			goto out;
		}
	}
	if (git_repository_index(&index, repo) < 0) {
		rc = hist_git_fail("cannot read index of", omen_repo_gitdir(r));
		goto out;
	}
	git_diff_options_init(&dopts, GIT_DIFF_OPTIONS_VERSION);
	dopts.flags = GIT_DIFF_INCLUDE_TYPECHANGE;
	if (git_diff_tree_to_index(&diff, repo, tree, index, &dopts) < 0) {
		rc = hist_git_fail("cannot compare index with", "HEAD");
		goto out;
	}
	d.nents = 0;
	for (size_t i = 0; i < git_diff_num_deltas(diff); i++) {
		const git_diff_delta *dl = git_diff_get_delta(diff, i);
		int has_old = dl->status != GIT_DELTA_ADDED, has_new = dl->status != GIT_DELTA_DELETED;
		if ((rc = hist_add_entry(&d, out, has_old ? dl->old_file.path : NULL,
			has_new ? dl->new_file.path : NULL, &dl->old_file.id,
			has_old ? (uint32_t)dl->old_file.mode : 0, &dl->new_file.id,
			has_new ? (uint32_t)dl->new_file.mode : 0)) < 0)
			goto out;
	}
	if ((rc = hist_diff_entries(&d, out)) < 0)
		goto out;
	/* the commit that would be made: zero id, configured identity, now */
	memset(&k->id, 0, sizeof(k->id));
	memset(k->hex, '0', OMEN_OID_HEX);
	k->hex[OMEN_OID_HEX] = '\0';
	ps = omen_arena_alloc(&out->arena, sizeof(git_oid));
	if (!ps) {
		rc = OMEN_ENOMEM;
		goto out;
	}
	if (!unborn)
		git_oid_cpy(ps, &head_id);
	k->parents = ps;
	k->nparents = unborn ? 0 : 1;
	if (git_signature_default(&sig, repo) == 0) {
		k->author_name = omen_arena_strndup(&out->arena, sig->name, strlen(sig->name));
		k->author_email = hist_norm_email(&out->arena, sig->email);
		k->author_time = k->commit_time = sig->when.time;
		k->author_tz = k->commit_tz = sig->when.offset;
	} else {
		git_error_clear();
		k->author_name = "";
		k->author_email = "";
		k->author_time = k->commit_time = (int64_t)time(NULL);
	}
	k->message = "";
	if (!k->author_name || !k->author_email)
		rc = OMEN_ENOMEM;
out:
	if (have_d)
		hist_differ_free(&d);
	git_signature_free(sig);
	git_diff_free(diff);
	git_index_free(index);
	git_tree_free(tree);
	git_commit_free(head);
	return rc;
}

/* ---- one blob pair ------------------------------------------------------- */
int omen_history_diff_blobs(omen_change *out, omen_repo *r, const char *old_path,
	const git_oid *old_blob, const char *new_path, const git_oid *new_blob,
	const omen_walk_opts *o)
{
	omen_walk_opts ro;
	hist_differ d;
	int rc, has_old = old_blob && !git_oid_is_zero(old_blob);
	int has_new = new_blob && !git_oid_is_zero(new_blob);
	omen_change_clear(out);
	if ((!has_old && !has_new) || (has_old && !old_path) || (has_new && !new_path))
		return omen_error_set(OMEN_EINVAL, "cannot diff blobs: a side without a blob or a path");
	if ((rc = hist_resolve_opts(&ro, r, o)) < 0)
		return rc;
	if ((rc = hist_differ_init(&d, omen_repo_git(r), &ro)) < 0)
		return rc;
	d.skipped = &hist_repo_stats(r)->skipped_files;
	/* one regular-file entry through the same path as a commit's files,
	 * so a pair diffs exactly as the walk would diff it */
	rc = hist_add_entry(&d, out, has_old ? old_path : NULL, has_new ? new_path : NULL,
		has_old ? old_blob : NULL, has_old ? MODE_REG | 0644 : 0,
		has_new ? new_blob : NULL, has_new ? MODE_REG | 0644 : 0);
	if (rc >= 0)
		rc = hist_diff_entries(&d, out);
	hist_differ_free(&d);
	return rc;
}

/* ---- changed files of two commits, without blob diffs -------------------- */
static int commit_tree(git_tree **out, git_repository *repo, const git_oid *id)
{
	git_commit *cm = NULL;
	char hex[GIT_OID_HEXSZ + 1];
	*out = NULL;
	if (!id)
		return 0;
	if (git_commit_lookup(&cm, repo, id) < 0 || git_commit_tree(out, cm) < 0) {
		git_commit_free(cm);
		git_oid_tostr(hex, sizeof(hex), id);
		return hist_git_fail("cannot read the tree of commit", hex);
	}
	git_commit_free(cm);
	return 0;
}

int omen_history_tree_files(omen_change *out, omen_repo *r, const git_oid *old_commit,
	const git_oid *new_commit)
{
	hist_differ d;
	git_tree *ta = NULL, *tb = NULL;
	int rc;
	omen_change_clear(out);
	if ((rc = hist_differ_init(&d, omen_repo_git(r), NULL)) < 0)
		return rc;
	if ((rc = commit_tree(&ta, d.repo, old_commit)) < 0 ||
		(rc = commit_tree(&tb, d.repo, new_commit)) < 0 ||
		(rc = hist_list_trees(&d, out, ta, tb)) < 0)
		goto out;
	if (OMEN_ARRAY_RESERVE(out->files, out->files_cap, d.nents ? d.nents : 1) < 0) {
		rc = OMEN_ENOMEM;
		goto out;
	}
	for (size_t i = 0; i < d.nents; i++) {
		const hist_entry *e = &d.ents[i];
		omen_file *f = &out->files[out->nfiles];
		/* a submodule side is no file: absent, as a directory would be */
		int has_old = e->old_mode && MODE_TYPE(e->old_mode) != MODE_GITLINK;
		int has_new = e->new_mode && MODE_TYPE(e->new_mode) != MODE_GITLINK;
		if (!has_old && !has_new)
			continue;
		memset(f, 0, sizeof(*f));
		if (has_old) {
			f->old_path = e->old_path;
			git_oid_cpy(&f->old_blob, &e->old_id);
		}
		if (has_new) {
			f->new_path = e->new_path;
			git_oid_cpy(&f->new_blob, &e->new_id);
		}
		f->status = !has_old ? OMEN_FILE_ADDED : !has_new ? OMEN_FILE_DELETED : OMEN_FILE_MODIFIED;
		out->nfiles++;
	}
	out->text = out->textbuf.ptr ? out->textbuf.ptr : "";
out:
	git_tree_free(ta);
	git_tree_free(tb);
	hist_differ_free(&d);
	return rc;
}
