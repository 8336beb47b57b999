/* Unit tests of the labeller (src/label/): fix identification (POSIX
 * regcomp/regexec as the regex reference; trailer forms as git revert and
 * the Linux kernel's "Fixes:" convention write them), the line-origin
 * tracer on synthetic -U0 changes (hunk semantics as git diff -U0 prints
 * them: "@@ -a,b +c,d @@", an empty side starts at the line before), and
 * the label file reader with its error messages. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>
#include <cmocka.h>
#include "omen/error.h"
#include "omen/label.h"
#include "label/internal.h"
#include "label/trace.h"

/* ---- fix identification -------------------------------------------------- */
static unsigned classify(const omen_fixrules *fr, const char *msg, int *nn, char named[][OMEN_OID_HEX + 1])
{
	omen_commit c;
	char dummy[4][OMEN_OID_HEX + 1];
	int n = 0;
	memset(&c, 0, sizeof(c));
	strcpy(c.hex, "0123456789abcdef0123456789abcdef01234567");
	c.message = msg;
	c.nparents = 1;
	return omen_fix_classify(fr, &c, named ? named : dummy, 4, nn ? nn : &n);
}

static void test_default_pattern(void **state)
{
	omen_fixrules *fr;
	static const char *const yes[] = {"Fix crash on empty input", "fixes the parser", "FIXED: typo",
		"bugfix: off by one", "Memory leak in reader", "a regression from 1.5", "segfault with -n",
		"Hotfix for release", "broken link", "fixes #12", "bug #3", "fix(core): x",
		"Add fix for the crash", NULL};
	/* issue 10: a closing word with a number alone, and a subject that
	 * announces new work without "fix" or "bug", are no fix signs */
	static const char *const no[] = {"Add prefix option", "debugging output", "Use default value",
		"fixup! add thing", "Update docs (#123)", "utf-8 handling", "Prefixed names", "suffix", "",
		"closesPROJ-77 and encloses #4", "Release SHA-1 notes", "Closes #12", "resolves GH-4",
		"Closes PROJ-77", "Add crash recovery", "store: implement crash reports",
		"tests: cover the leak in the reader", NULL};
	int i;
	(void)state;
	assert_int_equal(omen_fixrules_new(&fr, NULL), 0);
	for (i = 0; yes[i]; i++) {
		if (!(classify(fr, yes[i], NULL, NULL) & OMEN_FIXBY_PATTERN))
			fail_msg("should match: '%s'", yes[i]);
	}
	for (i = 0; no[i]; i++) {
		if (classify(fr, no[i], NULL, NULL) & OMEN_FIXBY_PATTERN)
			fail_msg("should not match: '%s'", no[i]);
	}
	omen_fixrules_free(fr);
}

static unsigned classify_ex(const omen_fixrules *fr, const char *msg, omen_fix_info *info)
{
	omen_commit c;
	char named[4][OMEN_OID_HEX + 1];
	int n = 0;
	memset(&c, 0, sizeof(c));
	strcpy(c.hex, "0123456789abcdef0123456789abcdef01234567");
	c.message = msg;
	c.nparents = 1;
	return omen_fix_classify_ex(fr, &c, named, 4, &n, info);
}

/* Each rule of issue 10 on (the default) and off. */
static void test_rules(void **state)
{
	omen_fixrules *on, *off;
	omen_fixrule_opts o = OMEN_FIXRULE_OPTS_INIT;
	omen_fix_info in;
	static const char trailers[] = "Update the reader\n\nReported-by: Bug Hunter <b@h.example>\n"
		"Signed-off-by: Robin Quill <r@q.example>\n";
	static const char quoted[] = "Tune the cache\n\nThe report said:\n> it crashes on empty input\n";
	static const char revert[] = "Revert \"Fix crash in parser\"\n\nThis reverts commit "
		"0123456789abcdef0123456789abcdef01234567.\n";
	(void)state;
	assert_int_equal(omen_fixrules_new_opts(&on, &o), 0);
	o.closing_refs = o.whole_message = o.feature_subjects = 1;
	o.cosmetic = "";
	assert_int_equal(omen_fixrules_new_opts(&off, &o), 0);
	/* closing words */
	assert_false(classify_ex(on, "Tidy the reader (closes #12)", &in) & OMEN_FIXBY_PATTERN);
	assert_true(in.closing_only);
	assert_true(classify_ex(off, "Tidy the reader (closes #12)", &in) & OMEN_FIXBY_PATTERN);
	assert_true(classify_ex(off, "Closes PROJ-77", &in) & OMEN_FIXBY_PATTERN);
	/* only the author's description */
	assert_false(classify_ex(on, trailers, &in) & OMEN_FIXBY_PATTERN);
	assert_true(in.outside_only);
	assert_true(classify_ex(off, trailers, &in) & OMEN_FIXBY_PATTERN);
	assert_false(classify_ex(on, quoted, &in) & OMEN_FIXBY_PATTERN);
	assert_true(classify_ex(off, quoted, &in) & OMEN_FIXBY_PATTERN);
	/* a revert's quoted subject is not a fix word; the named commit still is */
	assert_int_equal(classify_ex(on, revert, &in), OMEN_FIXBY_NAMED);
	assert_int_equal(classify_ex(off, revert, &in), OMEN_FIXBY_NAMED | OMEN_FIXBY_PATTERN);
	/* a trailer that names the repaired commit counts */
	assert_int_equal(classify_ex(on, "Adjust\n\nFixes: 89abcdef0123 (\"Add y\")\nSigned-off-by: R <r@q>\n", &in),
		OMEN_FIXBY_NAMED);
	/* a quoted Fixes: line is someone else's */
	assert_int_equal(classify_ex(on, "Adjust\n\n> Fixes: 89abcdef0123\n", &in), 0);
	/* a subject announcing new work */
	assert_false(classify_ex(on, "Add crash recovery", &in) & OMEN_FIXBY_PATTERN);
	assert_true(in.feature_only);
	assert_true(classify_ex(off, "Add crash recovery", &in) & OMEN_FIXBY_PATTERN);
	/* cosmetic: recorded as a fix, flagged */
	assert_true(classify_ex(on, "Fix typo in parser.c", &in) & OMEN_FIXBY_PATTERN);
	assert_true(in.cosmetic);
	assert_true(classify_ex(on, "Fix compiler warnings in the reader", &in) && in.cosmetic);
	assert_true(classify_ex(on, "docs: fix spelling", &in) && in.cosmetic);
	assert_true(classify_ex(on, "Fix crash on a comment line", &in) && !in.cosmetic);
	assert_true(classify_ex(on, "Fix leak in reader", &in) && !in.cosmetic);
	assert_true(classify_ex(off, "Fix typo in parser.c", &in) && !in.cosmetic);
	/* a fix that names its commit is never cosmetic */
	assert_true(classify_ex(on, "Fix typo\n\nFixes: 89abcdef0123\n", &in) && !in.cosmetic);
	omen_fixrules_free(on);
	omen_fixrules_free(off);
	/* a bad cosmetic pattern */
	o.cosmetic = "typo(";
	assert_int_equal(omen_fixrules_new_opts(&off, &o), OMEN_EINVAL);
	assert_null(off);
	assert_non_null(strstr(omen_error_last(), "bad cosmetic pattern 'typo('"));
}

static void test_description(void **state)
{
	omen_buf b = OMEN_BUF_INIT;
	(void)state;
	assert_int_equal(omen_fix_description(&b, "Subject\n\nBody line.\n\nFixes: abcdef1\nAcked-by: A <a@b>\n"
		"  continued\n"), 0);
	assert_string_equal(b.ptr, "Subject\n\nBody line.\n\n");
	/* a last paragraph that is prose stays */
	assert_int_equal(omen_fix_description(&b, "Subject\n\nNote: this is prose\nand more prose\n"), 0);
	assert_string_equal(b.ptr, "Subject\n\nNote: this is prose\nand more prose\n");
	/* the subject alone is never a trailer block */
	assert_int_equal(omen_fix_description(&b, "Fixes: the parser"), 0);
	assert_string_equal(b.ptr, "Fixes: the parser");
	assert_int_equal(omen_fix_description(&b, "Revert \"Fix bug\"\n\n> quoted\nkept\n"), 0);
	assert_string_equal(b.ptr, "Revert\n\nkept\n");
	assert_int_equal(omen_fix_description(&b, "x\n\n(cherry picked from commit abcdef1)\n"), 0);
	assert_string_equal(b.ptr, "x\n\n");
	assert_int_equal(omen_fix_description(&b, NULL), 0);
	assert_string_equal(b.ptr, "");
	omen_buf_free(&b);
}

static void test_noncode_paths(void **state)
{
	omen_pathset *ps;
	static const char *const yes[] = {"docs/api.c", "README", "README.md", "man/git-x.1", "src/tests/t.c",
		"tests/unit/test_x.c", "Makefile", "src/Makefile.am", ".github/workflows/ci.yml", "vendor/lib/x.c",
		"web/app.min.js", "pkg/x_test.go", "Dockerfile", "CMakeLists.txt", "ChangeLog", NULL};
	static const char *const no[] = {"src/main.c", "lib/parse.py", "include/x.h", "src/testing.c",
		"src/contest/x.c", "web/app.js", "docsgen.c", NULL};
	int i;
	(void)state;
	assert_int_equal(omen_pathset_new(&ps, omen_noncode_default), 0);
	for (i = 0; yes[i]; i++)
		if (!omen_pathset_match(ps, yes[i]))
			fail_msg("should be non-code: '%s'", yes[i]);
	for (i = 0; no[i]; i++)
		if (omen_pathset_match(ps, no[i]))
			fail_msg("should be code: '%s'", no[i]);
	omen_pathset_free(ps);
	assert_int_equal(omen_pathset_new(&ps, " lib/*.py,  docs/ "), 0);
	assert_int_equal(omen_pathset_count(ps), 2);
	assert_true(omen_pathset_match(ps, "lib/parse.py"));
	assert_false(omen_pathset_match(ps, "src/lib/parse.py")); /* a path pattern matches the whole path */
	assert_true(omen_pathset_match(ps, "a/docs/x"));
	omen_pathset_free(ps);
	assert_int_equal(omen_pathset_new(&ps, ""), 0);
	assert_int_equal(omen_pathset_count(ps), 0);
	assert_false(omen_pathset_match(ps, "docs/x"));
	omen_pathset_free(ps);
	omen_pathset_free(NULL);
}

static void test_custom_and_bad_pattern(void **state)
{
	omen_fixrules *fr = NULL;
	(void)state;
	assert_int_equal(omen_fixrules_new(&fr, "(a|b"), OMEN_EINVAL);
	assert_null(fr);
	assert_non_null(strstr(omen_error_last(), "bad fix pattern '(a|b'"));
	assert_int_equal(omen_fixrules_new(&fr, "^repair"), 0);
	assert_true(classify(fr, "Repair the widget", NULL, NULL) & OMEN_FIXBY_PATTERN);
	assert_false(classify(fr, "Fix the widget", NULL, NULL) & OMEN_FIXBY_PATTERN);
	omen_fixrules_free(fr);
	omen_fixrules_free(NULL);
}

static void test_named(void **state)
{
	omen_fixrules *fr;
	char named[4][OMEN_OID_HEX + 1];
	int n = 0;
	(void)state;
	assert_int_equal(omen_fixrules_new(&fr, "^never$"), 0);
	assert_true(classify(fr, "Revert \"Add x\"\n\nThis reverts commit 0123456789abcdef0123456789abcdef01234567.\n",
		&n, named) & OMEN_FIXBY_NAMED);
	assert_int_equal(n, 1);
	assert_string_equal(named[0], "0123456789abcdef0123456789abcdef01234567");
	assert_true(classify(fr, "Adjust\n\nFixes: 89abcdef0123 (\"Add y\")\nFixes: 89ABCDEF0123\n", &n, named));
	assert_int_equal(n, 1); /* duplicate collapsed, lowercased */
	assert_string_equal(named[0], "89abcdef0123");
	assert_true(classify(fr, "x\n\nIntroduced by commit abcdef1\nReverts: 1234567890\n", &n, named));
	assert_int_equal(n, 2);
	/* too short, not hex, mid-line mention */
	assert_int_equal(classify(fr, "Fixes: abc12\nFixes: deadbeefz1\nsee fixes: 1234567 here", &n, named), 0);
	/* merges are never fixes */
	{
		omen_commit c;
		memset(&c, 0, sizeof(c));
		c.message = "Fixes: 1234567";
		c.nparents = 2;
		assert_int_equal(omen_fix_classify(fr, &c, named, 4, &n), 0);
	}
	omen_fixrules_free(fr);
}

static void test_fix_list(void **state)
{
	omen_fixrules *fr;
	char path[] = "/tmp/omen-fixlist-XXXXXX";
	int fd = mkstemp(path);
	FILE *fp = fdopen(fd, "w");
	omen_commit c;
	(void)state;
	fputs("# comment line\n\n0123456789ab\n#42 2021-03-04\nPROJ-9\ngh-5 2020-01-01T10:00:00Z\nfeedface99\n", fp);
	fclose(fp);
	assert_int_equal(omen_fixrules_new(&fr, "^never$"), 0);
	assert_int_equal(omen_fixrules_load_list(fr, path), 0);
	assert_int_equal(omen_fixrules_list_size(fr), 5);
	memset(&c, 0, sizeof(c));
	c.nparents = 1;
	strcpy(c.hex, "0123456789abcdef0123456789abcdef01234567");
	c.message = "Tidy";
	assert_int_equal(omen_fix_classify(fr, &c, NULL, 0, NULL), OMEN_FIXBY_LIST);
	strcpy(c.hex, "1111111111111111111111111111111111111111");
	c.message = "Handle empty rows, see #42 and proj-9? no: PROJ-9";
	assert_int_equal(omen_fix_classify(fr, &c, NULL, 0, NULL), OMEN_FIXBY_ISSUE);
	assert_int_equal(omen_fix_issue_date(fr, &c), 1614816000); /* 2021-03-04 UTC (date -u -d) */
	c.message = "Closes GH-5";
	assert_int_equal(omen_fix_issue_date(fr, &c), 1577872800);
	c.message = "Issue #420 is another one";
	assert_int_equal(omen_fix_classify(fr, &c, NULL, 0, NULL), 0);
	/* feedface99 never matched a commit */
	assert_int_equal(omen_fixrules_unmatched(fr), 1);
	omen_fixrules_free(fr);
	fp = fopen(path, "w");
	fputs("#7 yesterday\n", fp);
	fclose(fp);
	assert_int_equal(omen_fixrules_new(&fr, NULL), 0);
	assert_int_equal(omen_fixrules_load_list(fr, path), OMEN_EINVAL);
	assert_non_null(strstr(omen_error_last(), "line 1: 'yesterday' is not a date"));
	omen_fixrules_free(fr);
	unlink(path);
	assert_int_equal(omen_fixrules_new(&fr, NULL), 0);
	assert_true(omen_fixrules_load_list(fr, "/nonexistent/omen-list") < 0);
	assert_non_null(strstr(omen_error_last(), "cannot read fix list '/nonexistent/omen-list'"));
	omen_fixrules_free(fr);
}

/* ---- synthetic changes ------------------------------------------------------ */
typedef struct {
	omen_change c;
	omen_file files[4];
	omen_hunk hunks[16];
	omen_line lines[64];
	char text[4096];
	size_t tlen;
} fake;

static void fake_init(fake *f)
{
	memset(f, 0, sizeof(*f));
	f->c.files = f->files;
	f->c.hunks = f->hunks;
	f->c.lines = f->lines;
	f->c.text = f->text;
}

static void blob(git_oid *o, int k)
{
	memset(o, 0, sizeof(*o));
	o->id[0] = (unsigned char)k;
	o->id[19] = 1;
}

static omen_file *fake_file(fake *f, const char *oldp, int oldb, const char *newp, int newb, char st)
{
	omen_file *fl = &f->files[f->c.nfiles++];
	fl->old_path = oldp;
	fl->new_path = newp;
	if (oldb)
		blob(&fl->old_blob, oldb);
	if (newb)
		blob(&fl->new_blob, newb);
	fl->status = st;
	fl->hunk_off = (uint32_t)f->c.nhunks;
	return fl;
}

/* A hunk "@@ -os,ol +ns,nl @@" with deleted texts then added texts. */
static void fake_hunk(fake *f, int os, int ol, int ns, int nl, const char *const *del, const char *const *add)
{
	omen_hunk *h = &f->hunks[f->c.nhunks++];
	int i;
	h->old_start = os;
	h->old_lines = ol;
	h->new_start = ns;
	h->new_lines = nl;
	h->line_off = (uint32_t)f->c.nlines;
	h->file = (uint32_t)(f->c.nfiles - 1);
	for (i = 0; i < ol; i++) {
		omen_line *l = &f->lines[f->c.nlines++];
		l->origin = '-';
		l->old_lineno = os + i;
		l->new_lineno = -1;
		l->text_off = (uint32_t)f->tlen;
		l->text_len = (uint32_t)strlen(del[i]);
		memcpy(f->text + f->tlen, del[i], l->text_len);
		f->tlen += l->text_len;
	}
	for (i = 0; i < nl; i++) {
		omen_line *l = &f->lines[f->c.nlines++];
		l->origin = '+';
		l->old_lineno = -1;
		l->new_lineno = ns + i;
		l->text_off = (uint32_t)f->tlen;
		l->text_len = (uint32_t)strlen(add[i]);
		memcpy(f->text + f->tlen, add[i], l->text_len);
		f->tlen += l->text_len;
	}
	h->nlines = (uint32_t)(ol + nl);
	f->files[f->c.nfiles - 1].nhunks++;
	f->files[f->c.nfiles - 1].added += (uint32_t)nl;
	f->files[f->c.nfiles - 1].deleted += (uint32_t)ol;
}

typedef struct {
	uint32_t origin[32];
	int skip[32];
	int lineno[32];
	int n;
} traced;

static int collect_cb(const omen_change *c, const omen_file *f, const omen_line *l, uint32_t origin,
	int skip, void *p)
{
	traced *t = p;
	(void)c; (void)f;
	t->origin[t->n] = origin;
	t->skip[t->n] = skip;
	t->lineno[t->n++] = l->old_lineno;
	return 0;
}

static void expect_origins(lbl_tracer *t, const char *path, int b, const uint32_t *want, uint32_t n)
{
	git_oid o;
	uint32_t got_n = 0, i;
	const uint32_t *got;
	blob(&o, b);
	got = lbl_tracer_get(t, path, &o, &got_n);
	assert_non_null(got);
	assert_int_equal(got_n, n);
	for (i = 0; i < n; i++)
		assert_int_equal(got[i], want[i]);
}

/* Commit ci of the linear history: its new versions, the references moved
 * from the old ones, and the released versions freed. */
static void advance(lbl_tracer *t, fake *f, uint32_t ci)
{
	assert_int_equal(lbl_tracer_apply(t, &f->c, ci), 0);
	lbl_tracer_step(t, &f->c);
	lbl_tracer_sweep(t);
}

static void test_tracer_origins(void **state)
{
	lbl_trace_opts o = {1, 1, 1};
	lbl_tracer *t;
	fake f;
	traced tr;
	static const char *const add1[] = {"a", "b", "c", "d"};
	static const char *const del2[] = {"b"}, *const add2[] = {"B", "B2"};
	static const char *const add3[] = {"top"};
	static const char *const del4[] = {"a", "B"}, *const add4[] = {"  a"};
	static const char *const del5[] = {"  a", "B2", "top"};
	(void)state;
	assert_int_equal(lbl_tracer_new(&t, &o), 0);
	/* commit 0 adds x.c with 4 lines: @@ -0,0 +1,4 @@ */
	fake_init(&f);
	fake_file(&f, NULL, 0, "x.c", 1, 'A');
	fake_hunk(&f, 0, 0, 1, 4, NULL, add1);
	advance(t, &f, 0);
	expect_origins(t, "x.c", 1, (const uint32_t[]){0, 0, 0, 0}, 4);
	/* commit 1 replaces line 2 by two lines: @@ -2 +2,2 @@ */
	fake_init(&f);
	fake_file(&f, "x.c", 1, "x.c", 2, 'M');
	fake_hunk(&f, 2, 1, 2, 2, del2, add2);
	advance(t, &f, 1);
	expect_origins(t, "x.c", 2, (const uint32_t[]){0, 1, 1, 0, 0}, 5);
	{ /* the old version was released */
		git_oid b1;
		blob(&b1, 1);
		assert_null(lbl_tracer_get(t, "x.c", &b1, NULL));
		assert_int_equal(lbl_tracer_versions(t), 1);
	}
	/* commit 2 inserts at the top: @@ -0,0 +1 @@ */
	fake_init(&f);
	fake_file(&f, "x.c", 2, "x.c", 3, 'M');
	fake_hunk(&f, 0, 0, 1, 1, NULL, add3);
	advance(t, &f, 2);
	expect_origins(t, "x.c", 3, (const uint32_t[]){2, 0, 1, 1, 0, 0}, 6);
	/* commit 3 re-indents "a" and deletes "B": @@ -2,2 +2 @@; the new "  a"
	 * keeps origin 0 (whitespace-only rewrite) */
	fake_init(&f);
	fake_file(&f, "x.c", 3, "x.c", 4, 'M');
	fake_hunk(&f, 2, 2, 2, 1, del4, add4);
	memset(&tr, 0, sizeof(tr));
	assert_int_equal(lbl_tracer_trace(t, &f.c, collect_cb, &tr), 0);
	assert_int_equal(tr.n, 2);
	assert_int_equal(tr.origin[0], 0);
	assert_int_equal(tr.skip[0], LBL_SKIP_WS);
	assert_int_equal(tr.origin[1], 1);
	assert_int_equal(tr.skip[1], LBL_TRACED);
	advance(t, &f, 3);
	expect_origins(t, "x.c", 4, (const uint32_t[]){2, 0, 1, 0, 0}, 5);
	/* a fix deleting lines 2,3 and 1 (as two hunks) traces to 0, 1, 2 */
	fake_init(&f);
	fake_file(&f, "x.c", 4, "x.c", 5, 'M');
	fake_hunk(&f, 1, 1, 0, 0, del5 + 2, NULL);
	fake_hunk(&f, 2, 2, 1, 0, del5, NULL);
	memset(&tr, 0, sizeof(tr));
	assert_int_equal(lbl_tracer_trace(t, &f.c, collect_cb, &tr), 0);
	assert_int_equal(tr.n, 3);
	assert_int_equal(tr.origin[0], 2);
	assert_int_equal(tr.origin[1], 0);
	assert_int_equal(tr.origin[2], 1);
	lbl_tracer_free(t);
	lbl_tracer_free(NULL);
}

static void test_tracer_skips_and_rename(void **state)
{
	lbl_trace_opts o = {1, 1, 0};
	lbl_tracer *t;
	fake f;
	traced tr;
	static const char *const add1[] = {"int x;", "", "   ", "// note", "#include <a.h>", "# note", " * more"};
	(void)state;
	assert_int_equal(lbl_tracer_new(&t, &o), 0);
	fake_init(&f);
	fake_file(&f, NULL, 0, "y.c", 1, 'A');
	fake_hunk(&f, 0, 0, 1, 7, NULL, add1);
	advance(t, &f, 0);
	/* exact rename, no hunks: origins carried to the new path */
	fake_init(&f);
	fake_file(&f, "y.c", 1, "z.c", 1, 'R');
	advance(t, &f, 1);
	expect_origins(t, "z.c", 1, (const uint32_t[]){0, 0, 0, 0, 0, 0, 0}, 7);
	/* deleting every line: blank and comment lines are marked skipped */
	fake_init(&f);
	fake_file(&f, "z.c", 1, NULL, 0, 'D');
	fake_hunk(&f, 1, 7, 0, 0, add1, NULL);
	memset(&tr, 0, sizeof(tr));
	assert_int_equal(lbl_tracer_trace(t, &f.c, collect_cb, &tr), 0);
	assert_int_equal(tr.n, 7);
	assert_int_equal(tr.skip[0], LBL_TRACED);
	assert_int_equal(tr.skip[1], LBL_SKIP_BLANK);
	assert_int_equal(tr.skip[2], LBL_SKIP_BLANK);
	assert_int_equal(tr.skip[3], LBL_SKIP_COMMENT);
	assert_int_equal(tr.skip[4], LBL_TRACED); /* preprocessor directive is code */
	assert_int_equal(tr.skip[5], LBL_SKIP_COMMENT);
	assert_int_equal(tr.skip[6], LBL_SKIP_COMMENT);
	/* a version never seen: no state */
	fake_init(&f);
	fake_file(&f, "w.c", 9, "w.c", 10, 'M');
	fake_hunk(&f, 1, 1, 1, 0, add1, NULL);
	memset(&tr, 0, sizeof(tr));
	assert_int_equal(lbl_tracer_trace(t, &f.c, collect_cb, &tr), 0);
	assert_int_equal(tr.skip[0], LBL_SKIP_NOSTATE);
	assert_int_equal(tr.origin[0], LBL_NONE);
	lbl_tracer_free(t);
}

static void test_comment_lines(void **state)
{
	(void)state;
	assert_true(omen_line_is_comment("  // x", 6));
	assert_true(omen_line_is_comment("/* x */", 7));
	assert_true(omen_line_is_comment(" *", 2));
	assert_true(omen_line_is_comment("-- sql", 6));
	assert_true(omen_line_is_comment("; lisp", 6));
	/* a shebang is code: a fix may well change the interpreter */
	assert_false(omen_line_is_comment("#!/bin/sh", 9));
	assert_false(omen_line_is_comment("*p = 1;", 7));
	assert_false(omen_line_is_comment("--i;", 4));
	assert_false(omen_line_is_comment("#define X 1", 11));
	assert_false(omen_line_is_comment("#  if X", 7));
	assert_false(omen_line_is_comment("x = 1; // y", 11));
	assert_true(omen_line_is_blank(" \t\r", 3));
	assert_false(omen_line_is_blank(" x", 2));
}

/* ---- label file -------------------------------------------------------------- */
static const char good[] =
	"{\"omen_labels\":1,\"head\":\"1111111111111111111111111111111111111111\",\"summary\":{}}\n"
	"{\"id\":\"aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa\",\"time\":100,\"label\":\"inducing\",\"lines\":3,"
	"\"fixes\":[\"bbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbb\"],\"fix\":false,\"fix_by\":[],\"future\":1}\n"
	"{\"id\":\"bbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbb\",\"time\":200,\"label\":\"unknown\",\"fix\":true,"
	"\"fix_by\":[\"pattern\",\"named\"],\"merge\":false}\n";

static void test_labels_parse(void **state)
{
	omen_labels *l;
	const omen_label_rec *r;
	omen_buf b = OMEN_BUF_INIT;
	(void)state;
	assert_int_equal(omen_labels_parse(&l, "x.jsonl", good, strlen(good)), 0);
	assert_int_equal(omen_labels_count(l), 2);
	assert_string_equal(omen_labels_head(l), "1111111111111111111111111111111111111111");
	r = omen_labels_get(l, "aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa");
	assert_non_null(r);
	assert_int_equal(r->label, OMEN_LABEL_INDUCING);
	assert_int_equal(r->traced_lines, 3);
	assert_int_equal(r->nfixes, 1);
	assert_string_equal(r->fixes[0], "bbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbbb");
	r = omen_labels_at(l, 1);
	assert_int_equal(r->is_fix, 1);
	assert_int_equal(r->fix_by, OMEN_FIXBY_PATTERN | OMEN_FIXBY_NAMED);
	assert_null(omen_labels_get(l, "cccccccccccccccccccccccccccccccccccccccc"));
	/* round trip through the writer */
	assert_int_equal(lbl_write_record(&b, omen_labels_at(l, 0)), 0);
	assert_non_null(strstr(b.ptr, "\"label\":\"inducing\",\"lines\":3,\"fixes\":[\"bbbb"));
	omen_buf_free(&b);
	omen_labels_free(l);
	omen_labels_free(NULL);
}

static void expect_bad(const char *data, const char *msg)
{
	omen_labels *l = (omen_labels *)1;
	assert_int_equal(omen_labels_parse(&l, "p.jsonl", data, strlen(data)), OMEN_ECORRUPT);
	assert_null(l);
	if (!strstr(omen_error_last(), msg))
		fail_msg("got '%s', want '%s'", omen_error_last(), msg);
}

/* issue 10: "fix_scope" round trip, and the header's horizon read alone */
static void test_labels_scope_horizon(void **state)
{
	static const char hdr[] = "{\"omen_labels\":1,\"head\":\"\",\"options\":{\"horizon_days\":365}}\n";
	omen_label_rec rec;
	omen_labels *l;
	omen_buf b = OMEN_BUF_INIT;
	char path[] = "/tmp/omen-test-label-XXXXXX";
	FILE *fp;
	int fd;
	(void)state;
	memset(&rec, 0, sizeof(rec));
	strcpy(rec.id, "aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa");
	rec.is_fix = 1;
	rec.fix_scope = OMEN_FIXSCOPE_NONCODE;
	assert_int_equal(omen_buf_puts(&b, hdr), 0);
	assert_int_equal(lbl_write_record(&b, &rec), 0);
	assert_non_null(strstr(b.ptr, "\"fix_scope\":\"non-code\""));
	assert_int_equal(omen_labels_parse(&l, "x.jsonl", b.ptr, b.len), 0);
	assert_int_equal(omen_labels_get(l, rec.id)->fix_scope, OMEN_FIXSCOPE_NONCODE);
	omen_labels_free(l);
	/* not a fix: no scope written */
	rec.is_fix = 0;
	omen_buf_clear(&b);
	assert_int_equal(lbl_write_record(&b, &rec), 0);
	assert_null(strstr(b.ptr, "fix_scope"));
	/* the horizon from the header line */
	assert_true((fd = mkstemp(path)) >= 0);
	assert_non_null(fp = fdopen(fd, "w"));
	fputs(hdr, fp);
	fclose(fp);
	assert_int_equal(omen_labels_file_horizon(path), 365);
	unlink(path);
	assert_int_equal(omen_labels_file_horizon(path), 0);
	assert_int_equal(omen_labels_file_horizon(NULL), 0);
	omen_buf_free(&b);
}

/* Counts in a label header are outside bytes: one outside 0 to 2^53 (the
 * integers a double holds exactly) is ignored, never converted
 * (a conversion out of range is undefined behaviour in C11 6.3.1.4). */
static void test_labels_brief_counts(void **state)
{
	static const char data[] =
		"{\"omen_labels\":1,\"summary\":{\"commits\":1e19,\"inducing\":-3,"
		"\"clean\":1e300,\"unknown\":7}}\n";
	char path[] = "/tmp/omen-test-brief-XXXXXX";
	omen_labels_brief br;
	FILE *fp;
	int fd;
	(void)state;
	assert_true((fd = mkstemp(path)) >= 0);
	assert_non_null(fp = fdopen(fd, "w"));
	fputs(data, fp);
	fclose(fp);
	assert_int_equal(omen_labels_brief_read(&br, path, 10), 0);
	unlink(path);
	assert_true(br.commits == 0);
	assert_true(br.inducing == 0);
	assert_true(br.clean == 0);
	assert_true(br.unknown == 7);
	/* a FIFO is no label file: refused, not waited on (the alarm turns a
	 * wait into a failed test; nothing is timed) */
	assert_int_equal(mkfifo(path, 0600), 0);
	alarm(60);
	assert_int_equal(omen_labels_brief_read(&br, path, 10), OMEN_EINVAL);
	assert_int_equal(omen_labels_file_horizon(path), 0);
	alarm(0);
	unlink(path);
}

static void test_labels_bad(void **state)
{
	(void)state;
	expect_bad("", "bad label file 'p.jsonl': line 1: empty file");
	expect_bad("{\"id\":\"x\"}\n", "bad label file 'p.jsonl': line 1: missing header");
	expect_bad("{\"omen_labels\":2}\n", "line 1: unsupported version 2");
	expect_bad("{\"omen_labels\":1}\n{\"id\":\"aaaa\",\"time\":1,\"label\":\"clean\"}\n",
		"bad label file 'p.jsonl': line 2: \"id\" is not a 40-digit commit id");
	expect_bad("{\"omen_labels\":1}\n{\"id\":\"aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa\",\"time\":1,\"label\":\"maybe\"}\n",
		"line 2: \"label\" is not inducing, clean or unknown");
	expect_bad("{\"omen_labels\":1}\n{\"id\":\"aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa\",\"time\":1,\"label\":\"clean\"}\n{broken\n",
		"line 3: not a JSON object");
	expect_bad("{\"omen_labels\":1}\n{\"id\":\"aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa\",\"time\":1,\"label\":\"clean\"}\n"
		"{\"id\":\"aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa\",\"time\":1,\"label\":\"clean\"}\n",
		"line 3: commit 'aaaaaaaaaaaa' listed twice");
	expect_bad("{\"omen_labels\":1}\n{\"id\":\"aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa\",\"time\":\"x\",\"label\":\"clean\"}\n",
		"line 2: \"time\" is not a number");
	expect_bad("{\"omen_labels\":1}\n{\"id\":\"aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa\",\"time\":1,\"label\":\"clean\",\"fixes\":[3]}\n",
		"line 2: \"fixes\" holds something other than a commit id");
}

/* The rule a label file was made with (issue 16): window and horizon from
 * the header's "options", defaults when absent, bad values rejected. */
static void test_labels_rule(void **state)
{
	static const char *const bad[] = {
		"{\"omen_labels\":1,\"options\":{\"window_days\":-3}}\n",
		"{\"omen_labels\":1,\"options\":{\"window_days\":\"90\"}}\n",
		"{\"omen_labels\":1,\"options\":{\"horizon_days\":1.5}}\n",
		"{\"omen_labels\":1,\"options\":[]}\n",
	};
	const char *h = "{\"omen_labels\":1,\"options\":{\"window_days\":60,\"horizon_days\":365}}\n";
	const char *none = "{\"omen_labels\":1}\n";
	omen_labels *l = NULL;
	int64_t w, hz;
	size_t i;
	(void)state;
	assert_int_equal(omen_labels_parse(&l, "h.jsonl", h, strlen(h)), 0);
	omen_labels_rule(l, &w, &hz);
	assert_true(w == 60 && hz == 365);
	omen_labels_free(l);
	assert_int_equal(omen_labels_parse(&l, "n.jsonl", none, strlen(none)), 0);
	omen_labels_rule(l, &w, &hz);
	assert_true(w == 90 && hz == 0);
	omen_labels_free(l);
	for (i = 0; i < sizeof(bad) / sizeof(bad[0]); i++) {
		l = NULL;
		assert_int_equal(omen_labels_parse(&l, "b.jsonl", bad[i], strlen(bad[i])), OMEN_ECORRUPT);
		assert_non_null(strstr(omen_error_last(), "bad label file 'b.jsonl': line 1: bad \""));
		omen_labels_free(l);
	}
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_default_pattern),
		cmocka_unit_test(test_custom_and_bad_pattern),
		cmocka_unit_test(test_rules),
		cmocka_unit_test(test_description),
		cmocka_unit_test(test_noncode_paths),
		cmocka_unit_test(test_named),
		cmocka_unit_test(test_fix_list),
		cmocka_unit_test(test_tracer_origins),
		cmocka_unit_test(test_tracer_skips_and_rename),
		cmocka_unit_test(test_comment_lines),
		cmocka_unit_test(test_labels_parse),
		cmocka_unit_test(test_labels_scope_horizon),
		cmocka_unit_test(test_labels_bad),
		cmocka_unit_test(test_labels_brief_counts),
		cmocka_unit_test(test_labels_rule),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
