/* Unit tests of the history reader (src/history/walk.c, diff.c) on the
 * fixture repositories of fixtures/build-fixtures.sh. The reference is the
 * git CLI, run through popen: per commit, files and added/deleted counts
 * equal `git show --numstat -U0 --no-renames` and the hunk headers equal its
 * -U0 patch (what `git diff -U0 <parent> <commit>` prints). Then renames,
 * file flags, walk order and ranges, and the bad inputs: shallow clone,
 * empty repository (unborn HEAD), missing objects, a file over the size
 * limit, invalid UTF-8, CRLF, staged changes. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <cmocka.h>
#include "omen/error.h"
#include "omen/history.h"

static char fx[512];      /* fixtures directory */
static char tmpdir[256];

static void sh(const char *fmt, ...)
{
	char cmd[4096];
	va_list ap;
	va_start(ap, fmt);
	vsnprintf(cmd, sizeof(cmd), fmt, ap);
	va_end(ap);
	assert_int_equal(system(cmd), 0);
}

static int setup_all(void **state)
{
	const char *root = getenv("ROOT");
	char script[600];
	(void)state;
	snprintf(tmpdir, sizeof(tmpdir), "/tmp/omen-test-history-XXXXXX");
	if (!mkdtemp(tmpdir))
		return -1;
	/* git must not see the user's configuration */
	snprintf(script, sizeof(script), "%s/home", tmpdir);
	setenv("HOME", script, 1);
	setenv("GIT_CONFIG_NOSYSTEM", "1", 1);
	setenv("GIT_CONFIG_GLOBAL", "/dev/null", 1);
	unsetenv("GIT_DIR");
	unsetenv("GIT_CONFIG_PARAMETERS");
	snprintf(fx, sizeof(fx), "%s/fx", tmpdir);
	snprintf(script, sizeof(script), "%s/fixtures/build-fixtures.sh", root ? root : ".");
	{
		char cmd[2048];
		snprintf(cmd, sizeof(cmd), "sh '%s' '%s' >/dev/null", script, fx);
		if (system(cmd) != 0)
			return -1;
	}
	git_libgit2_init();
	return 0;
}

static int teardown_all(void **state)
{
	char cmd[512];
	(void)state;
	snprintf(cmd, sizeof(cmd), "rm -rf '%s'", tmpdir);
	if (system(cmd) != 0)
		return -1;
	git_libgit2_shutdown();
	return 0;
}

static omen_repo *open_fx(const char *name)
{
	char p[700];
	omen_repo *r = NULL;
	snprintf(p, sizeof(p), "%s/%s", fx, name);
	assert_int_equal(omen_repo_open(&r, p), 0);
	return r;
}

/* ---- every commit against git show ------------------------------------- */
typedef struct {
	const char *dir;
	size_t commits, files, hunks;
	int renames;
} cmp_state;

static int cmp_commit(const omen_change *c, void *payload)
{
	cmp_state *s = payload;
	char cmd[1024], line[8192], prev_hdr[8192] = "";
	FILE *p;
	size_t nf = 0, fi = (size_t)-1, hi = 0;
	int in_num = 1, prev_deleted = 0;
	uint32_t *hseen = calloc(c->nfiles + 1, sizeof(*hseen));
	assert_non_null(hseen);
	s->commits++;
	snprintf(cmd, sizeof(cmd), "git -C '%s' -c core.quotepath=false -c diff.indentHeuristic=true "
		"show --no-renames --numstat -U0 --no-ext-diff --no-textconv --format= %s", s->dir,
		c->commit.hex);
	p = popen(cmd, "r");
	assert_non_null(p);
	while (fgets(line, sizeof(line), p)) {
		size_t len = strlen(line);
		if (len && line[len - 1] == '\n')
			line[--len] = '\0';
		if (!strncmp(line, "diff --git ", 11)) {
			in_num = 0;
			if (!(prev_deleted && !strcmp(line, prev_hdr)))
				fi++;
			snprintf(prev_hdr, sizeof(prev_hdr), "%s", line);
			prev_deleted = 0;
			continue;
		}
		if (in_num) {
			char a[32], d[32];
			const char *path;
			if (!len)
				continue;
			assert_int_equal(sscanf(line, "%31s %31s", a, d), 2);
			path = strchr(strchr(line, '\t') + 1, '\t') + 1;
			assert_true(nf < c->nfiles);
			const omen_file *f = &c->files[nf++];
			/* git prints "-  -" for binary files; omen counts 0 0 */
			assert_int_equal(f->added, strcmp(a, "-") ? (uint32_t)atoi(a) : 0);
			assert_int_equal(f->deleted, strcmp(d, "-") ? (uint32_t)atoi(d) : 0);
			assert_string_equal(path, f->new_path ? f->new_path : f->old_path);
			continue;
		}
		if (!strncmp(line, "deleted file mode", 17))
			prev_deleted = 1;
		if (!strncmp(line, "@@ -", 4)) {
			int os, ol = 1, ns, nl = 1;
			const char *q = line + 4;
			char *e;
			const omen_file *f;
			assert_true(fi < c->nfiles);
			f = &c->files[fi];
			os = (int)strtol(q, &e, 10);
			if (*e == ',')
				ol = (int)strtol(e + 1, &e, 10);
			assert_true(*e == ' ' && e[1] == '+');
			ns = (int)strtol(e + 2, &e, 10);
			if (*e == ',')
				nl = (int)strtol(e + 1, &e, 10);
			if (f->flags & OMEN_FILE_SUBMODULE)
				continue;   /* git's "Subproject commit" lines: no hunks in omen */
			assert_true(hseen[fi] < f->nhunks);
			const omen_hunk *h = &c->hunks[f->hunk_off + hseen[fi]++];
			assert_int_equal(h->old_start, os);
			assert_int_equal(h->old_lines, ol);
			assert_int_equal(h->new_start, ns);
			assert_int_equal(h->new_lines, nl);
			assert_int_equal(h->file, fi);
			assert_int_equal(h->nlines, (uint32_t)(ol + nl));
			hi++;
		}
	}
	assert_int_equal(pclose(p), 0);
	assert_int_equal(nf, c->nfiles);
	for (size_t i = 0; i < c->nfiles; i++)
		if (!(c->files[i].flags & OMEN_FILE_SUBMODULE))
			assert_int_equal(hseen[i], c->files[i].nhunks);
	/* line records: deleted first, then added, numbered inside the hunk */
	for (size_t i = 0; i < c->nhunks; i++) {
		const omen_hunk *h = &c->hunks[i];
		for (uint32_t k = 0; k < h->nlines; k++) {
			const omen_line *l = &c->lines[h->line_off + k];
			if (k < (uint32_t)h->old_lines) {
				assert_int_equal(l->origin, '-');
				assert_int_equal(l->old_lineno, h->old_start + (int32_t)k);
				assert_int_equal(l->new_lineno, -1);
			} else {
				assert_int_equal(l->origin, '+');
				assert_int_equal(l->new_lineno, h->new_start + (int32_t)(k - (uint32_t)h->old_lines));
				assert_int_equal(l->old_lineno, -1);
			}
			assert_null(memchr(omen_line_text(c, l), '\n', l->text_len));
		}
	}
	/* old_nlines: lines of the old blob, a final line without newline
	 * included (awk's NR counts the same way) */
	for (size_t i = 0; i < c->nfiles; i++) {
		const omen_file *f = &c->files[i];
		char hex[GIT_OID_HEXSZ + 1];
		long want = 0;
		if (!f->old_path || (f->flags & (OMEN_FILE_BINARY | OMEN_FILE_SUBMODULE | OMEN_FILE_TOO_LARGE)))
			continue;
		git_oid_tostr(hex, sizeof(hex), &f->old_blob);
		snprintf(cmd, sizeof(cmd), "git -C '%s' cat-file blob %s | awk 'END { print NR }'",
			s->dir, hex);
		p = popen(cmd, "r");
		assert_non_null(p);
		assert_int_equal(fscanf(p, "%ld", &want), 1);
		assert_int_equal(pclose(p), 0);
		assert_int_equal(f->old_nlines, want);
	}
	s->files += c->nfiles;
	s->hunks += hi;
	free(hseen);
	return 0;
}

static void walk_vs_git(const char *name, int threads)
{
	omen_repo *r = open_fx(name);
	omen_walk_opts o = OMEN_WALK_OPTS_INIT;
	char dir[700];
	cmp_state s = {dir, 0, 0, 0, 0};
	snprintf(dir, sizeof(dir), "%s/%s", fx, name);
	o.detect_renames = -1;
	o.threads = threads;
	assert_int_equal(omen_history_walk(r, &o, cmp_commit, &s), 0);
	assert_true(s.commits > 0);
	omen_repo_free(r);
}

static void test_fixtures_vs_git(void **state)
{
	(void)state;
	walk_vs_git("history", 1);
	walk_vs_git("history", 2);
	walk_vs_git("sub", 0);
	walk_vs_git("big", 2);
}

/* ---- records -------------------------------------------------------------- */
typedef struct {
	omen_change copy_of[32];
	int n;
	char subjects[32][96];
	const omen_file *found;
	int nmerges;
	char ids[32][OMEN_OID_HEX + 1];
	uint32_t nparents[32];
	int boundary[32];
	char flags_seen[32][64][8];
} rec_state;

typedef struct {
	const char *subject;   /* first line of the message */
	const char *path;
	char status;
	unsigned flags;
	uint32_t added, deleted, nhunks;
	int checked;
} expect_file;

typedef struct {
	expect_file *e;
	size_t n;
	int commits, merges;
	int crlf_ok, latin1_msg, latin1_path;
} expect_state;

static int check_files(const omen_change *c, void *payload)
{
	expect_state *s = payload;
	const char *nl = strchr(c->commit.message, '\n');
	size_t sl = nl ? (size_t)(nl - c->commit.message) : strlen(c->commit.message);
	s->commits++;
	if (c->commit.nparents > 1)
		s->merges++;
	if (!strncmp(c->commit.message, "Caf\351 notes", 10)) {
		s->latin1_msg = !omen_utf8_valid(c->commit.message, strlen(c->commit.message));
		assert_string_equal(c->commit.author_email, "tavi@example.org");  /* " <TAVI@..> " */
	}
	if (!strncmp(c->commit.message, "Initial import", 14))
		assert_string_equal(c->commit.author_email, "rook@example.org");
	for (size_t i = 0; i < c->nfiles; i++) {
		const omen_file *f = &c->files[i];
		const char *p = f->new_path ? f->new_path : f->old_path;
		if (!strcmp(p, "na\357ve.txt"))
			s->latin1_path = 1;
		if (!strcmp(p, "win.txt") && f->nhunks) {
			const omen_hunk *h = &c->hunks[f->hunk_off];
			const omen_line *l = &c->lines[h->line_off];
			s->crlf_ok |= l->text_len > 0 && omen_line_text(c, l)[l->text_len - 1] == '\r';
		}
		for (size_t k = 0; k < s->n; k++) {
			expect_file *e = &s->e[k];
			if (strlen(e->subject) != sl || strncmp(e->subject, c->commit.message, sl) ||
			    strcmp(e->path, p))
				continue;
			assert_int_equal(f->status, e->status);
			assert_int_equal(f->flags, e->flags);
			assert_int_equal(f->added, e->added);
			assert_int_equal(f->deleted, e->deleted);
			assert_int_equal(f->nhunks, e->nhunks);
			e->checked++;
		}
	}
	return 0;
}

static void test_file_records(void **state)
{
	expect_file e[] = {
		{"Initial import", "empty.txt", 'A', 0, 0, 0, 0, 0},
		{"Add twice() and a binary blob", "data.bin", 'A', OMEN_FILE_BINARY, 0, 0, 0, 0},
		{"Rename util to helpers", "lib/helpers.py", 'R', 0, 0, 0, 0, 0},
		{"Make run.sh executable", "scripts/run.sh", 'M', OMEN_FILE_MODE_ONLY, 0, 0, 0, 0},
		{"Add a symlink and edit the CRLF file", "link.c", 'A', OMEN_FILE_SYMLINK, 1, 0, 1, 0},
		{"Add a symlink and edit the CRLF file", "win.txt", 'M', 0, 2, 1, 1, 0},
		{"Add the sub submodule, update the blob", "vendor/sub", 'A', OMEN_FILE_SUBMODULE, 1, 0, 0, 0},
		{"Add the sub submodule, update the blob", "data.bin", 'M', OMEN_FILE_BINARY, 0, 0, 0, 0},
		{"Fix crash in parse on long input", "vendor/sub", 'M', OMEN_FILE_SUBMODULE, 1, 1, 0, 0},
		{"Fix crash in parse on long input", "notes.txt", 'A', 0, 1, 0, 1, 0},
		{"Replace docs directory with a file", "docs/guide.txt", 'D', 0, 0, 2, 1, 0},
		{"Replace docs directory with a file", "docs", 'A', 0, 1, 0, 1, 0},
		{"Replace docs directory with a file", "notes.txt", 'M', 0, 1, 1, 1, 0},
		{"Turn README into a link, move helpers", "README.md", 'T', OMEN_FILE_SYMLINK, 1, 4, 2, 0},
		/* a rename with an edit is not an exact rename: delete + add */
		{"Turn README into a link, move helpers", "lib/helpers.py", 'D', 0, 0, 9, 1, 0},
		{"Turn README into a link, move helpers", "lib/mathx.py", 'A', 0, 11, 0, 1, 0},
		{"Fix twice() overflow, drop the empty file", "empty.txt", 'D', 0, 0, 0, 0, 0},
	};
	expect_state s;
	omen_repo *r = open_fx("history");
	omen_walk_opts o = OMEN_WALK_OPTS_INIT;
	(void)state;
	memset(&s, 0, sizeof(s));
	s.e = e;
	s.n = sizeof(e) / sizeof(e[0]);
	assert_int_equal(omen_history_walk(r, &o, check_files, &s), 0);
	for (size_t k = 0; k < s.n; k++) {
		if (e[k].checked != 1)
			fail_msg("expected file not seen: %s / %s", e[k].subject, e[k].path);
	}
	assert_int_equal(s.commits, 16);
	assert_int_equal(s.merges, 0);
	assert_true(s.crlf_ok);
	assert_true(s.latin1_msg);
	assert_true(s.latin1_path);
	/* with merges: 17 commits, the merge diffed against its first parent */
	memset(&s, 0, sizeof(s));
	o.include_merges = 1;
	assert_int_equal(omen_history_walk(r, &o, check_files, &s), 0);
	assert_int_equal(s.commits, 17);
	assert_int_equal(s.merges, 1);
	omen_repo_free(r);
}

/* ---- the path filter (issue 13, a sharded label pass) --------------------- */
typedef struct {
	char rows[2][64][160];   /* [0] unfiltered, [1] filtered: one row per file */
	size_t n[2];
	int pass;
	int saw_rename, saw_pairing, calls;
} filt_state;

static int keep_not_lib(const char *old_path, const char *new_path, int pairing, void *ctx)
{
	filt_state *s = ctx;
	const char *p = new_path ? new_path : old_path;
	s->calls++;
	if (old_path && new_path && !strcmp(old_path, "lib/util.py") && !strcmp(new_path, "lib/helpers.py"))
		s->saw_rename = 1;
	if (pairing && !old_path && new_path && !strcmp(new_path, "lib/mathx.py"))
		s->saw_pairing = 1;
	return strncmp(p, "lib/", 4) != 0;
}

static int filt_cb(const omen_change *c, void *payload)
{
	filt_state *s = payload;
	for (size_t i = 0; i < c->nfiles; i++) {
		const omen_file *f = &c->files[i];
		assert_true(s->n[s->pass] < 64);
		snprintf(s->rows[s->pass][s->n[s->pass]++], 160, "%.8s %s %c %u %u %u", c->commit.hex,
			omen_file_path(f), (char)f->status, f->added, f->deleted, f->nhunks);
		if (s->pass && (f->flags & OMEN_FILE_FILTERED)) {
			assert_int_equal(strncmp(omen_file_path(f), "lib/", 4), 0);
			assert_int_equal(f->added + f->deleted + f->nhunks, 0);
		} else if (s->pass) {
			assert_int_not_equal(strncmp(omen_file_path(f), "lib/", 4), 0);
		}
	}
	return 0;
}

static void test_path_filter(void **state)
{
	omen_repo *r = open_fx("history");
	omen_walk_opts o = OMEN_WALK_OPTS_INIT;
	filt_state *s = calloc(1, sizeof(*s));
	size_t i, lib = 0;
	(void)state;
	assert_non_null(s);
	assert_int_equal(omen_history_walk(r, &o, filt_cb, s), 0);
	s->pass = 1;
	o.path_filter = keep_not_lib;
	o.path_filter_ctx = s;
	o.threads = 2; /* ignored with a filter: the calls come in walk order */
	assert_int_equal(omen_history_walk(r, &o, filt_cb, s), 0);
	/* every file is still listed, in the same order; lib/ files without counts */
	assert_int_equal(s->n[0], s->n[1]);
	assert_int_equal((size_t)s->calls, s->n[1]);
	for (i = 0; i < s->n[0]; i++) {
		if (strstr(s->rows[0][i], " lib/")) {
			lib++;
			continue;
		}
		assert_string_equal(s->rows[0][i], s->rows[1][i]);
	}
	assert_true(lib >= 3);
	assert_true(s->saw_rename);  /* exact renames are paired before the filter */
	assert_true(s->saw_pairing); /* a change with both an added and a deleted file */
	free(s);
	omen_repo_free(r);
}

/* ---- order, ranges, single commits --------------------------------------- */
static void test_order_and_ranges(void **state)
{
	omen_repo *r = open_fx("history");
	omen_walk_opts o = OMEN_WALK_OPTS_INIT;
	git_oid *ids = NULL, *rev = NULL, *sub = NULL;
	size_t n = 0, nr = 0, ns = 0;
	git_oid head, h3;
	const char *range[] = {"HEAD~3..HEAD", NULL};
	const char *excl[] = {"^HEAD~3", "HEAD", NULL};
	const char *sym[] = {"main...feature", NULL};
	(void)state;
	o.include_merges = 1;
	assert_int_equal(omen_history_list(&ids, &n, r, &o), 0);
	assert_int_equal(n, 17);
	/* parents first */
	for (size_t i = 0; i < n; i++) {
		git_commit *c;
		assert_int_equal(git_commit_lookup(&c, omen_repo_git(r), &ids[i]), 0);
		for (unsigned p = 0; p < git_commit_parentcount(c); p++) {
			size_t j;
			for (j = 0; j < i; j++)
				if (git_oid_equal(&ids[j], git_commit_parent_id(c, p)))
					break;
			assert_true(j < i);
		}
		git_commit_free(c);
	}
	assert_int_equal(omen_history_resolve(&head, r, "HEAD"), 0);
	assert_true(git_oid_equal(&ids[n - 1], &head));
	o.newest_first = 1;
	assert_int_equal(omen_history_list(&rev, &nr, r, &o), 0);
	assert_int_equal(nr, n);
	for (size_t i = 0; i < n; i++)
		assert_true(git_oid_equal(&rev[i], &ids[n - 1 - i]));
	free(rev);
	rev = NULL;
	/* ranges: A..B and ^A B agree; first-parent skips the side branch */
	o = (omen_walk_opts)OMEN_WALK_OPTS_INIT;
	o.revs = range;
	assert_int_equal(omen_history_list(&sub, &ns, r, &o), 0);
	assert_int_equal(ns, 3);
	assert_int_equal(omen_history_resolve(&h3, r, "HEAD~2"), 0);
	assert_true(git_oid_equal(&sub[0], &h3));
	free(sub);
	sub = NULL;
	o.revs = excl;
	assert_int_equal(omen_history_list(&sub, &ns, r, &o), 0);
	assert_int_equal(ns, 3);
	free(sub);
	sub = NULL;
	o.revs = sym;   /* main...feature: main's commits after the fork (feature is merged: none on its side) */
	assert_int_equal(omen_history_list(&sub, &ns, r, &o), 0);
	assert_int_equal(ns, 8);
	free(sub);
	sub = NULL;
	o.revs = NULL;
	o.first_parent = 1;
	o.include_merges = 1;
	assert_int_equal(omen_history_list(&sub, &ns, r, &o), 0);
	assert_int_equal(ns, 16);   /* the feature commit is not on the first-parent line */
	free(sub);
	sub = NULL;
	o.first_parent = 0;
	o.all = 1;
	assert_int_equal(omen_history_list(&sub, &ns, r, &o), 0);
	assert_int_equal(ns, 17);
	free(sub);
	sub = NULL;
	/* since/until bound the commit time */
	o.all = 0;
	o.since = 1704096000 + 86400 * 10;
	assert_int_equal(omen_history_list(&sub, &ns, r, &o), 0);
	assert_true(ns > 0 && ns < 17);
	free(sub);
	free(ids);
	omen_repo_free(r);
}

typedef struct {
	omen_repo *r;
	int n, stop_at;
	uint64_t digest;
} digest_state;

static uint64_t change_digest(const omen_change *c)
{
	omen_buf b = OMEN_BUF_INIT;
	uint64_t h;
	omen_buf_printf(&b, "%s %u %d %lld %lld %s|%s|", c->commit.hex, c->commit.nparents,
		c->commit.boundary, (long long)c->commit.author_time, (long long)c->commit.commit_time,
		c->commit.author_email, c->commit.message);
	for (size_t i = 0; i < c->nfiles; i++) {
		const omen_file *f = &c->files[i];
		omen_buf_printf(&b, "F%c%u %s %s %u %u %u %u %lld|", f->status, f->flags,
			f->old_path ? f->old_path : "-", f->new_path ? f->new_path : "-", f->added,
			f->deleted, f->hunk_off, f->nhunks, (long long)f->old_nlines);
	}
	for (size_t i = 0; i < c->nhunks; i++)
		omen_buf_printf(&b, "H%d,%d,%d,%d,%u,%u|", c->hunks[i].old_start, c->hunks[i].old_lines,
			c->hunks[i].new_start, c->hunks[i].new_lines, c->hunks[i].line_off, c->hunks[i].nlines);
	for (size_t i = 0; i < c->nlines; i++) {
		omen_buf_printf(&b, "%c%d,%d:", c->lines[i].origin, c->lines[i].old_lineno,
			c->lines[i].new_lineno);
		omen_buf_put(&b, omen_line_text(c, &c->lines[i]), c->lines[i].text_len);
	}
	h = omen_hash64(b.ptr, b.len, 1);
	omen_buf_free(&b);
	return h;
}

static int digest_cb(const omen_change *c, void *payload)
{
	digest_state *s = payload;
	omen_change one;
	s->digest = s->digest * 31 + change_digest(c);
	/* omen_history_change gives the same record as the walk */
	omen_change_init(&one);
	assert_int_equal(omen_history_change(&one, s->r, &c->commit.id, NULL), 0);
	assert_true(change_digest(&one) == change_digest(c));
	omen_change_free(&one);
	if (++s->n == s->stop_at)
		return 7;
	return 0;
}

static void test_threads_and_stop(void **state)
{
	omen_repo *r = open_fx("history");
	omen_walk_opts o = OMEN_WALK_OPTS_INIT;
	digest_state a = {r, 0, 0, 0}, b = {r, 0, 0, 0}, c = {r, 0, 3, 0};
	(void)state;
	o.threads = 1;
	assert_int_equal(omen_history_walk(r, &o, digest_cb, &a), 0);
	o.threads = 2;
	assert_int_equal(omen_history_walk(r, &o, digest_cb, &b), 0);
	assert_int_equal(a.n, 16);
	assert_true(a.digest == b.digest);
	/* a non-zero callback result stops the walk and is returned */
	assert_int_equal(omen_history_walk(r, &o, digest_cb, &c), 7);
	assert_int_equal(c.n, 3);
	omen_repo_free(r);
}

/* ---- bad input -------------------------------------------------------------- */
typedef struct {
	int n, boundary, added_only;
} shallow_state;

static int shallow_cb(const omen_change *c, void *payload)
{
	shallow_state *s = payload;
	s->n++;
	if (c->commit.boundary) {
		s->boundary++;
		s->added_only = 1;
		for (size_t i = 0; i < c->nfiles; i++)
			if (c->files[i].status != OMEN_FILE_ADDED)
				s->added_only = 0;
		assert_int_equal(c->commit.nparents, 1);   /* the missing parent is kept */
	}
	return 0;
}

static void test_shallow(void **state)
{
	omen_repo *r = open_fx("shallow");
	omen_walk_opts o = OMEN_WALK_OPTS_INIT;
	shallow_state s = {0, 0, 0};
	(void)state;
	assert_int_equal(omen_repo_is_shallow(r), 1);
	assert_int_equal(omen_history_walk(r, &o, shallow_cb, &s), 0);
	assert_int_equal(s.n, 3);
	assert_int_equal(s.boundary, 1);
	assert_true(s.added_only);
	omen_repo_free(r);
}

static int count_cb(const omen_change *c, void *payload)
{
	(void)c;
	(*(int *)payload)++;
	return 0;
}

static void test_empty_and_unknown(void **state)
{
	omen_repo *r = open_fx("empty");
	git_oid id;
	int n = 0;
	const char *revs[] = {"no-such-branch", NULL};
	omen_walk_opts o = OMEN_WALK_OPTS_INIT;
	(void)state;
	assert_int_equal(omen_history_walk(r, NULL, count_cb, &n), OMEN_ENOTFOUND);
	assert_string_equal(omen_error_last(), "cannot resolve 'HEAD': branch 'main' has no commits yet");
	o.all = 1;
	assert_int_equal(omen_history_walk(r, &o, count_cb, &n), OMEN_ENOTFOUND);
	assert_string_equal(omen_error_last(), "cannot walk '--all': repository has no commits");
	assert_int_equal(n, 0);
	omen_repo_free(r);
	r = open_fx("history");
	assert_int_equal(omen_history_resolve(&id, r, "no-such-branch"), OMEN_ENOTFOUND);
	assert_non_null(strstr(omen_error_last(), "cannot resolve 'no-such-branch'"));
	o = (omen_walk_opts)OMEN_WALK_OPTS_INIT;
	o.revs = revs;
	assert_int_equal(omen_history_walk(r, &o, count_cb, &n), OMEN_ENOTFOUND);
	assert_int_equal(omen_history_resolve(&id, r, "HEAD:src/main.c"), OMEN_EINVAL);
	assert_string_equal(omen_error_last(), "cannot resolve 'HEAD:src/main.c': not a commit");
	omen_repo_free(r);
}

typedef struct {
	int commits, flagged, bad;
} missing_state;

static int missing_cb(const omen_change *c, void *payload)
{
	missing_state *m = payload;
	m->commits++;
	for (size_t i = 0; i < c->nfiles; i++) {
		const omen_file *f = &c->files[i];
		if (!(f->flags & OMEN_FILE_MISSING))
			continue;
		m->flagged++;
		if (f->nhunks || f->added || f->deleted || f->old_nlines || strcmp(omen_file_path(f), "src/main.c"))
			m->bad++;
	}
	return 0;
}

static void test_missing_object(void **state)
{
	char dir[700], hex[64];
	omen_repo *r;
	omen_walk_opts o = OMEN_WALK_OPTS_INIT;
	int n = 0;
	FILE *p;
	(void)state;
	snprintf(dir, sizeof(dir), "%s/missing", tmpdir);
	sh("cp -r '%s/history' '%s'", fx, dir);
	/* drop the blob of src/main.c at HEAD (a loose object in the fixture) */
	{
		char cmd[1024];
		snprintf(cmd, sizeof(cmd), "git -C '%s' rev-parse HEAD:src/main.c", dir);
		p = popen(cmd, "r");
		assert_non_null(p);
		assert_non_null(fgets(hex, sizeof(hex), p));
		pclose(p);
		hex[40] = '\0';
	}
	sh("rm -f '%s/.git/objects/%.2s/%s'", dir, hex, hex + 2);
	assert_int_equal(omen_repo_open(&r, dir), 0);
	for (int t = 1; t <= 2; t++) {
		o.threads = t;
		n = 0;
		assert_int_equal(omen_history_walk(r, &o, count_cb, &n), OMEN_EGIT);
		assert_non_null(strstr(omen_error_last(), "cannot read blob of 'src/main.c'"));
		/* the error names the setting that goes on without the blob */
		assert_non_null(strstr(omen_error_last(), "omen.missingBlobs=skip"));
		assert_null(strchr(omen_error_last(), '\n'));
	}
	/* skipping: every file change that reads the blob (as git's raw diff
	 * lists them, old or new side) is flagged, without counts or hunks,
	 * and everything else is walked */
	{
		char cmd[1024];
		int want = 0, commits = 0;
		snprintf(cmd, sizeof(cmd), "git -C '%s' log --raw --no-abbrev --format= | grep -c %s", dir, hex);
		p = popen(cmd, "r");
		assert_non_null(p);
		assert_int_equal(fscanf(p, "%d", &want), 1);
		pclose(p);
		snprintf(cmd, sizeof(cmd), "git -C '%s' rev-list --no-merges --count HEAD", dir);
		p = popen(cmd, "r");
		assert_non_null(p);
		assert_int_equal(fscanf(p, "%d", &commits), 1);
		pclose(p);
		assert_true(want >= 1);
		o.missing_blobs = OMEN_MISSING_SKIP;
		for (int t = 1; t <= 2; t++) {
			missing_state ms = {0, 0, 0};
			size_t before = omen_repo_blob_stats(r)->skipped_files;
			o.threads = t;
			assert_int_equal(omen_history_walk(r, &o, missing_cb, &ms), 0);
			assert_int_equal(ms.commits, commits);
			assert_int_equal(ms.flagged, want);
			assert_int_equal(ms.bad, 0);
			assert_int_equal(omen_repo_blob_stats(r)->skipped_files - before, (size_t)want);
		}
		/* fetch on a clone without a promisor remote: one notice, then
		 * the same skip */
		o.missing_blobs = OMEN_MISSING_FETCH;
		{
			missing_state ms = {0, 0, 0};
			assert_int_equal(omen_history_walk(r, &o, missing_cb, &ms), 0);
			assert_int_equal(ms.flagged, want);
			assert_non_null(strstr(omen_repo_blob_stats(r)->notice, "no usable promisor remote to fetch 1 absent blob from; skipping it"));
			assert_int_equal(omen_repo_blob_stats(r)->wanted, 1);
			assert_int_equal(omen_repo_blob_stats(r)->fetched, 0);
			assert_int_equal(omen_repo_blob_stats(r)->partial, 0);
		}
	}
	omen_repo_free(r);
	/* the setting, and a bad value of it */
	setenv("GIT_CONFIG_PARAMETERS", "'omen.missingblobs'='skip'", 1);
	assert_int_equal(omen_repo_open(&r, dir), 0);
	o = (omen_walk_opts)OMEN_WALK_OPTS_INIT;
	n = 0;
	assert_int_equal(omen_history_walk(r, &o, count_cb, &n), 0);
	omen_repo_free(r);
	setenv("GIT_CONFIG_PARAMETERS", "'omen.missingblobs'='later'", 1);
	assert_int_equal(omen_repo_open(&r, dir), 0);
	assert_int_equal(omen_history_walk(r, &o, count_cb, &n), OMEN_EINVAL);
	assert_string_equal(omen_error_last(),
		"bad config value 'omen.missingBlobs': 'later' is not error, skip or fetch");
	unsetenv("GIT_CONFIG_PARAMETERS");
	omen_repo_free(r);
}

typedef struct {
	int large, hunks_of_large;
} big_state;

static int big_cb(const omen_change *c, void *payload)
{
	big_state *s = payload;
	for (size_t i = 0; i < c->nfiles; i++)
		if (c->files[i].flags & OMEN_FILE_TOO_LARGE) {
			s->large++;
			s->hunks_of_large += (int)c->files[i].nhunks + (int)c->files[i].added;
			assert_string_equal(c->files[i].new_path, "src/generated.txt");
		}
	return 0;
}

static void test_too_large(void **state)
{
	omen_repo *r = open_fx("big");
	omen_walk_opts o = OMEN_WALK_OPTS_INIT;
	big_state s = {0, 0};
	(void)state;
	/* default limit (50 MiB): read */
	assert_int_equal(omen_history_walk(r, &o, big_cb, &s), 0);
	assert_int_equal(s.large, 0);
	o.max_blob_bytes = 1 << 20;
	assert_int_equal(omen_history_walk(r, &o, big_cb, &s), 0);
	assert_int_equal(s.large, 1);
	assert_int_equal(s.hunks_of_large, 0);
	/* the same through omen.maxBlobBytes (git -c); settings are read when
	 * the repository is opened */
	o.max_blob_bytes = 0;
	s.large = 0;
	setenv("GIT_CONFIG_PARAMETERS", "'omen.maxblobbytes'='1m'", 1);
	omen_repo_free(r);
	r = open_fx("big");
	assert_int_equal(omen_history_walk(r, &o, big_cb, &s), 0);
	assert_int_equal(s.large, 1);
	setenv("GIT_CONFIG_PARAMETERS", "'omen.maxBlobBytes'='lots'", 1);
	omen_repo_free(r);
	r = open_fx("big");
	assert_int_equal(omen_history_walk(r, &o, big_cb, &s), OMEN_EINVAL);
	unsetenv("GIT_CONFIG_PARAMETERS");
	omen_repo_free(r);
}

static void test_staged(void **state)
{
	char dir[700];
	omen_repo *r;
	omen_change c;
	(void)state;
	snprintf(dir, sizeof(dir), "%s/staged", tmpdir);
	sh("git clone -q '%s/history' '%s' && cd '%s' && printf 'int x;\\n' >> src/main.c && "
		"printf 'new\\n' > added.txt && git add src/main.c added.txt && "
		"printf 'unstaged\\n' >> added.txt", fx, dir, dir);
	assert_int_equal(omen_repo_open(&r, dir), 0);
	omen_change_init(&c);
	assert_int_equal(omen_history_staged(&c, r, NULL), 0);
	assert_int_equal(c.nfiles, 2);
	assert_string_equal(c.files[0].new_path, "added.txt");
	assert_int_equal(c.files[0].status, 'A');
	assert_int_equal(c.files[0].added, 1);   /* the staged content, not the worktree */
	assert_string_equal(c.files[1].new_path, "src/main.c");
	assert_int_equal(c.files[1].added, 1);
	assert_int_equal(c.files[1].nhunks, 1);
	assert_string_equal(c.commit.hex, "0000000000000000000000000000000000000000");
	assert_int_equal(c.commit.nparents, 1);
	omen_repo_free(r);
	/* unborn HEAD: against nothing */
	snprintf(dir, sizeof(dir), "%s/staged-empty", tmpdir);
	sh("git -c init.defaultBranch=main init -q '%s' && cd '%s' && printf 'a\\nb\\n' > f.txt && "
		"git add f.txt", dir, dir);
	assert_int_equal(omen_repo_open(&r, dir), 0);
	assert_int_equal(omen_history_staged(&c, r, NULL), 0);
	assert_int_equal(c.nfiles, 1);
	assert_int_equal(c.files[0].added, 2);
	assert_int_equal(c.commit.nparents, 0);
	omen_change_free(&c);
	omen_change_free(&c);   /* free twice is harmless (reset to empty) */
	omen_repo_free(r);
	omen_repo_free(NULL);
}

/* ---- one blob pair ------------------------------------------------------- */
typedef struct {
	omen_repo *r;
	omen_change d;
	int pairs, added, binary;
} pair_state;

/* Every regular text file of every commit diffed again as a lone blob pair
 * must give the walk's hunks and lines exactly: there is one diff. */
static int pair_cb(const omen_change *c, void *payload)
{
	pair_state *s = payload;
	for (size_t i = 0; i < c->nfiles; i++) {
		const omen_file *f = &c->files[i], *g;
		if (!f->new_path || (f->flags & (OMEN_FILE_SUBMODULE | OMEN_FILE_SYMLINK)) ||
		    f->status == OMEN_FILE_TYPECHANGE)
			continue;
		assert_int_equal(omen_history_diff_blobs(&s->d, s->r, f->old_path,
			f->old_path ? &f->old_blob : NULL, f->new_path, &f->new_blob, NULL), 0);
		assert_int_equal(s->d.nfiles, 1);
		g = &s->d.files[0];
		assert_int_equal(g->status, f->status);
		assert_int_equal(g->flags & (OMEN_FILE_BINARY | OMEN_FILE_TOO_LARGE),
			f->flags & (OMEN_FILE_BINARY | OMEN_FILE_TOO_LARGE));
		assert_int_equal(g->added, f->added);
		assert_int_equal(g->deleted, f->deleted);
		assert_true(g->old_nlines == f->old_nlines);
		assert_int_equal(g->nhunks, f->nhunks);
		for (uint32_t h = 0; h < f->nhunks; h++) {
			const omen_hunk *a = &c->hunks[f->hunk_off + h], *b = &s->d.hunks[g->hunk_off + h];
			assert_int_equal(a->old_start, b->old_start);
			assert_int_equal(a->old_lines, b->old_lines);
			assert_int_equal(a->new_start, b->new_start);
			assert_int_equal(a->new_lines, b->new_lines);
			assert_int_equal(a->nlines, b->nlines);
			for (uint32_t k = 0; k < a->nlines; k++) {
				const omen_line *la = &c->lines[a->line_off + k], *lb = &s->d.lines[b->line_off + k];
				assert_int_equal(la->origin, lb->origin);
				assert_int_equal(la->old_lineno, lb->old_lineno);
				assert_int_equal(la->new_lineno, lb->new_lineno);
				assert_int_equal(la->text_len, lb->text_len);
				assert_memory_equal(omen_line_text(c, la), omen_line_text(&s->d, lb), la->text_len);
			}
		}
		s->pairs++;
		s->added += f->status == OMEN_FILE_ADDED;
		s->binary += (f->flags & OMEN_FILE_BINARY) != 0;
	}
	return 0;
}

static void test_diff_blobs(void **state)
{
	omen_repo *r = open_fx("history");
	omen_walk_opts o = OMEN_WALK_OPTS_INIT;
	pair_state s;
	git_oid missing;
	(void)state;
	memset(&s, 0, sizeof(s));
	s.r = r;
	omen_change_init(&s.d);
	assert_int_equal(omen_history_walk(r, &o, pair_cb, &s), 0);
	assert_true(s.pairs > 10);
	assert_true(s.added > 0);
	assert_true(s.binary > 0);
	git_oid_fromstr(&missing, "0123456789abcdef0123456789abcdef01234567");
	/* no side, or a side without its path */
	assert_int_equal(omen_history_diff_blobs(&s.d, r, NULL, NULL, NULL, NULL, NULL), OMEN_EINVAL);
	assert_int_equal(omen_history_diff_blobs(&s.d, r, "a", &missing, NULL, &missing, NULL),
		OMEN_EINVAL);
	/* a blob that is not there */
	assert_int_equal(omen_history_diff_blobs(&s.d, r, NULL, NULL, "gone.txt", &missing, NULL),
		OMEN_EGIT);
	assert_non_null(strstr(omen_error_last(), "cannot read blob of 'gone.txt'"));
	assert_null(strchr(omen_error_last(), '\n'));
	omen_change_free(&s.d);
	omen_repo_free(r);
}

/* omen_history_tree_files against `git diff-tree -r --no-renames --raw
 * <first parent> <commit>` (a side is a file unless absent or a submodule),
 * for every commit of the main fixture, its merge included. */
static int cmp_line(const void *a, const void *b)
{
	return strcmp(*(char *const *)a, *(char *const *)b);
}

static void test_tree_files(void **state)
{
	omen_repo *r = open_fx("history");
	omen_change c;
	char cmd[1024], line[4096], *want[256], *got[256];
	FILE *p, *revs;
	size_t nw, ng, i, commits = 0, merges = 0;
	git_oid id, parent;
	(void)state;
	omen_change_init(&c);
	snprintf(cmd, sizeof(cmd), "git -C '%s/history' rev-list --parents HEAD", fx);
	assert_non_null(revs = popen(cmd, "r"));
	while (fgets(line, sizeof(line), revs)) {
		char hex[41], phex[41] = "";
		int np = sscanf(line, "%40s %40s", hex, phex) - 1;
		merges += strlen(line) > 2 * 41 + 1;
		commits++;
		git_oid_fromstr(&id, hex);
		if (np > 0)
			git_oid_fromstr(&parent, phex);
		assert_int_equal(omen_history_tree_files(&c, r, np > 0 ? &parent : NULL, &id), 0);
		for (ng = 0; ng < c.nfiles; ng++) {
			const omen_file *f = &c.files[ng];
			char buf[1100];
			assert_true(ng < 256);
			assert_int_equal(f->nhunks, 0);
			snprintf(buf, sizeof(buf), "%c\t%s", f->status == OMEN_FILE_ADDED ? 'A' :
				f->status == OMEN_FILE_DELETED ? 'D' : 'M',
				f->new_path ? f->new_path : f->old_path);
			got[ng] = strdup(buf);
		}
		snprintf(cmd, sizeof(cmd), "git -C '%s/history' -c core.quotepath=false diff-tree -r "
			"--no-renames --raw --no-abbrev %s %s %s", fx, np > 0 ? "" : "--root",
			np > 0 ? phex : "", hex);
		assert_non_null(p = popen(cmd, "r"));
		for (nw = 0; fgets(line, sizeof(line), p);) {
			/* ":<old mode> <new mode> <old id> <new id> <status>\t<path>"; a side
			 * is a file unless absent (000000) or a submodule (160000) */
			char om[8], nm[8], *path = strchr(line, '\t'), buf[1100];
			int ho, hn;
			if (line[0] != ':' || !path)
				continue;   /* --root prints the commit id first */
			line[strcspn(line, "\n")] = '\0';
			assert_int_equal(sscanf(line, ":%7s %7s", om, nm), 2);
			ho = strcmp(om, "000000") && strcmp(om, "160000");
			hn = strcmp(nm, "000000") && strcmp(nm, "160000");
			if (!ho && !hn)
				continue;
			snprintf(buf, sizeof(buf), "%c\t%s", !ho ? 'A' : !hn ? 'D' : 'M', path + 1);
			assert_true(nw < 256);
			want[nw++] = strdup(buf);
		}
		assert_int_equal(pclose(p), 0);
		qsort(got, ng, sizeof(*got), cmp_line);
		qsort(want, nw, sizeof(*want), cmp_line);
		assert_int_equal(ng, nw);
		for (i = 0; i < ng; i++) {
			assert_string_equal(got[i], want[i]);
			free(got[i]);
			free(want[i]);
		}
	}
	pclose(revs);
	assert_true(commits > 10);
	assert_int_equal(merges, 1);
	omen_change_free(&c);
	omen_repo_free(r);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_fixtures_vs_git),
		cmocka_unit_test(test_file_records),
		cmocka_unit_test(test_path_filter),
		cmocka_unit_test(test_order_and_ranges),
		cmocka_unit_test(test_threads_and_stop),
		cmocka_unit_test(test_shallow),
		cmocka_unit_test(test_empty_and_unknown),
		cmocka_unit_test(test_missing_object),
		cmocka_unit_test(test_too_large),
		cmocka_unit_test(test_staged),
		cmocka_unit_test(test_diff_blobs),
		cmocka_unit_test(test_tree_files),
	};
	return cmocka_run_group_tests(tests, setup_all, teardown_all);
}
