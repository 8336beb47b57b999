/* Unit tests of the change metrics (src/features/metrics.c) against a
 * hand-worked example. Definitions: Kamei et al., "A Large-Scale Empirical
 * Study of Just-in-Time Quality Assurance", IEEE TSE 39(6), 2013, Table 1,
 * with the choices written in DEVELOPERS.md ("Change metrics"): entropy
 * normalised by log2(NF), LA/LD/LT absolute line counts, LT summed over
 * files, AGE the mean over files with history in days, REXP weighting each
 * prior commit by 1/(age in years + 1).
 *
 * The example (an invented project, t0 = 2023-11-14T22:13:20Z):
 *   c1  t0        ana@x  adds src/a.c (10 lines), doc/readme.md (5)
 *   c2  t0+10d    ben@x  FIX: src/a.c +2 -1 (had 10), adds src/util/b.c (4)
 *   c3  t0+20d    ana@x  doc/readme.md +1 -1 (had 5)
 *   c4  t0+30d    ana@x  src/a.c +3 -1 (had 11), src/util/b.c +1 (had 4),
 *                        doc/readme.md -4 (had 5), adds top.txt (2)
 * Metrics of c4, by hand:
 *   NF 4; NS 3 {src, doc, <root>}; ND 4 {src, src/util, doc, <root>}
 *   LA 6, LD 5, LT 11 + 4 + 5 + 0 = 20
 *   Entropy: modified lines 4, 1, 4, 2 of 11:
 *     H = -(2 * 4/11 log2 4/11 + 1/11 log2 1/11 + 2/11 log2 2/11) = 1.8230680
 *     normalised by log2(NF) = 2: 0.9115340
 *   NDEV 2 (ana, ben); AGE (20 + 20 + 10) / 3 = 16.6667 days (top.txt is new)
 *   NUC |{c1, c2} u {c2} u {c1, c3}| = 3; EXP 2 (c1, c3)
 *   REXP 1/(30/365.25 + 1) + 1/(10/365.25 + 1) = 1.8974498
 *   SEXP 2 (c1 and c3 touched src or doc); FIX 0 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <math.h>
#include <cmocka.h>
#include "omen/error.h"
#include "omen/features.h"

#define T0 1700000000ll
#define DAYS(n) ((int64_t)(n) * 86400)

typedef struct {
	char status;
	const char *old_path, *new_path;
	uint32_t added, deleted;
	int64_t old_nlines;
} fspec;

static omen_file files_buf[8];

static void make(omen_change *c, int64_t t, const char *email, const fspec *fs, size_t n)
{
	memset(c, 0, sizeof(*c));
	c->commit.author_time = t;
	c->commit.commit_time = t;
	c->commit.author_email = email;
	c->commit.author_name = "dev";
	c->commit.message = "";
	memset(files_buf, 0, sizeof(files_buf));
	for (size_t i = 0; i < n; i++) {
		files_buf[i].status = fs[i].status;
		files_buf[i].old_path = fs[i].old_path;
		files_buf[i].new_path = fs[i].new_path;
		files_buf[i].added = fs[i].added;
		files_buf[i].deleted = fs[i].deleted;
		files_buf[i].old_nlines = fs[i].old_nlines;
	}
	c->files = files_buf;
	c->nfiles = n;
}

static void feed(omen_metrics *m, int64_t t, const char *email, const fspec *fs, size_t n, int fix)
{
	omen_change c;
	make(&c, t, email, fs, n);
	assert_int_equal(omen_metrics_update(m, &c, fix), 0);
}

static const fspec c1[] = {
	{'A', NULL, "src/a.c", 10, 0, 0}, {'A', NULL, "doc/readme.md", 5, 0, 0}};
static const fspec c2[] = {
	{'M', "src/a.c", "src/a.c", 2, 1, 10}, {'A', NULL, "src/util/b.c", 4, 0, 0}};
static const fspec c3[] = {{'M', "doc/readme.md", "doc/readme.md", 1, 1, 5}};
static const fspec c4[] = {
	{'M', "src/a.c", "src/a.c", 3, 1, 11}, {'M', "src/util/b.c", "src/util/b.c", 1, 0, 4},
	{'M', "doc/readme.md", "doc/readme.md", 0, 4, 5}, {'A', NULL, "top.txt", 2, 0, 0}};

static omen_metrics *history(void)
{
	omen_metrics *m = NULL;
	assert_int_equal(omen_metrics_new(&m), 0);
	feed(m, T0, "ana@x", c1, 2, 0);
	feed(m, T0 + DAYS(10), "ben@x", c2, 2, 1);
	feed(m, T0 + DAYS(20), "ana@x", c3, 1, 0);
	return m;
}

static void check_c4(const omen_metrics *m)
{
	omen_change c;
	double v[OMEN_NMETRICS];
	make(&c, T0 + DAYS(30), "ana@x", c4, 4);
	assert_int_equal(omen_metrics_compute(v, m, &c, 0), 0);
	assert_float_equal(v[OMEN_M_NS], 3, 1e-12);
	assert_float_equal(v[OMEN_M_ND], 4, 1e-12);
	assert_float_equal(v[OMEN_M_NF], 4, 1e-12);
	assert_float_equal(v[OMEN_M_ENTROPY], 0.9115339911, 1e-9);
	assert_float_equal(v[OMEN_M_LA], 6, 1e-12);
	assert_float_equal(v[OMEN_M_LD], 5, 1e-12);
	assert_float_equal(v[OMEN_M_LT], 20, 1e-12);
	assert_float_equal(v[OMEN_M_FIX], 0, 1e-12);
	assert_float_equal(v[OMEN_M_NDEV], 2, 1e-12);
	assert_float_equal(v[OMEN_M_AGE], 50.0 / 3.0, 1e-9);
	assert_float_equal(v[OMEN_M_NUC], 3, 1e-12);
	assert_float_equal(v[OMEN_M_EXP], 2, 1e-12);
	assert_float_equal(v[OMEN_M_REXP], 1.8974497710, 1e-9);
	assert_float_equal(v[OMEN_M_SEXP], 2, 1e-12);
	assert_int_equal(omen_metrics_compute(v, m, &c, 1), 0);
	assert_float_equal(v[OMEN_M_FIX], 1, 1e-12);
}

static void test_hand_worked(void **state)
{
	omen_metrics *m = history();
	(void)state;
	check_c4(m);
	omen_metrics_free(m);
}

static void test_first_commit_and_single_file(void **state)
{
	omen_metrics *m = NULL;
	omen_change c;
	double v[OMEN_NMETRICS];
	static const fspec one[] = {{'A', NULL, "main.c", 7, 0, 0}};
	(void)state;
	assert_int_equal(omen_metrics_new(&m), 0);
	make(&c, T0, "ana@x", one, 1);
	assert_int_equal(omen_metrics_compute(v, m, &c, 0), 0);
	/* no history: every history metric is 0; entropy 0 for one file */
	assert_float_equal(v[OMEN_M_NS], 1, 0);
	assert_float_equal(v[OMEN_M_ND], 1, 0);
	assert_float_equal(v[OMEN_M_ENTROPY], 0, 0);
	assert_float_equal(v[OMEN_M_LA], 7, 0);
	for (int k = OMEN_M_NDEV; k <= OMEN_M_SEXP; k++)
		assert_float_equal(v[k], 0, 0);
	/* strictly earlier: computing does not change the state */
	assert_int_equal(omen_metrics_compute(v, m, &c, 0), 0);
	assert_float_equal(v[OMEN_M_EXP], 0, 0);
	assert_int_equal(omen_metrics_update(m, &c, 0), 0);
	assert_int_equal(omen_metrics_compute(v, m, &c, 0), 0);
	assert_float_equal(v[OMEN_M_EXP], 1, 0);
	assert_float_equal(v[OMEN_M_NUC], 1, 0);
	omen_metrics_free(m);
	omen_metrics_free(NULL);
}

static void test_rename_keeps_history(void **state)
{
	omen_metrics *m = history();
	omen_change c;
	double v[OMEN_NMETRICS];
	float ff[OMEN_NFACTS];
	static const fspec mv[] = {{'R', "src/a.c", "src/main.c", 0, 0, 11}};
	static const fspec touch[] = {{'M', "src/main.c", "src/main.c", 1, 1, 11}};
	(void)state;
	feed(m, T0 + DAYS(25), "cy@x", mv, 1, 0);
	make(&c, T0 + DAYS(30), "cy@x", touch, 1);
	assert_int_equal(omen_metrics_compute(v, m, &c, 0), 0);
	assert_float_equal(v[OMEN_M_NUC], 3, 0);      /* c1, c2, the rename */
	assert_float_equal(v[OMEN_M_NDEV], 3, 0);     /* ana, ben, cy */
	assert_float_equal(v[OMEN_M_AGE], 5, 1e-9);
	assert_float_equal(v[OMEN_M_EXP], 1, 0);
	assert_int_equal(omen_metrics_file_facts(ff, m, &c, 0), 0);
	assert_float_equal(ff[OMEN_FF_LOG_CHANGES], log1p(3), 1e-6);
	assert_float_equal(ff[OMEN_FF_LOG_FIXES], log1p(1), 1e-6);
	assert_float_equal(ff[OMEN_FF_FIX_RATIO], 1.0 / 3.0, 1e-6);
	omen_metrics_free(m);
}

static void test_file_facts(void **state)
{
	omen_metrics *m = history();
	omen_change c;
	float ff[OMEN_NFACTS], fg[OMEN_NFACTS];
	(void)state;
	make(&c, T0 + DAYS(30), "ana@x", c4, 4);
	assert_int_equal(omen_metrics_file_facts(ff, m, &c, 0), 0);   /* src/a.c */
	assert_float_equal(ff[OMEN_FF_LOG_CHANGES], 1.0986123, 1e-6); /* log1p(2) */
	assert_float_equal(ff[OMEN_FF_LOG_FIXES], 0.6931472, 1e-6);   /* log1p(1) */
	assert_float_equal(ff[OMEN_FF_FIX_RATIO], 0.5, 1e-6);
	assert_float_equal(ff[OMEN_FF_LOG_AGE_DAYS], 3.0445224, 1e-6); /* log1p(20) */
	assert_float_equal(ff[OMEN_FF_LOG_NDEV], 1.0986123, 1e-6);
	assert_float_equal(ff[OMEN_FF_NEW_FILE], 0, 0);
	assert_float_equal(ff[OMEN_FF_LOG_SIZE], 2.4849066, 1e-6);    /* log1p(11) */
	assert_true(ff[OMEN_FF_EXT_HASH] >= 0 && ff[OMEN_FF_EXT_HASH] < OMEN_EXT_BUCKETS);
	assert_int_equal(omen_metrics_file_facts(fg, m, &c, 1), 0);   /* src/util/b.c: same ext */
	assert_float_equal(fg[OMEN_FF_EXT_HASH], ff[OMEN_FF_EXT_HASH], 0);
	assert_int_equal(omen_metrics_file_facts(fg, m, &c, 3), 0);   /* top.txt: new */
	assert_float_equal(fg[OMEN_FF_NEW_FILE], 1, 0);
	assert_float_equal(fg[OMEN_FF_LOG_CHANGES], 0, 0);
	assert_int_equal(omen_metrics_file_facts(fg, m, &c, 4), OMEN_EINVAL);
	omen_metrics_free(m);
}

static void test_save_load(void **state)
{
	omen_metrics *m = history(), *l = NULL;
	omen_buf b = OMEN_BUF_INIT, b2 = OMEN_BUF_INIT;
	(void)state;
	assert_int_equal(omen_metrics_save(m, &b), 0);
	assert_int_equal(omen_metrics_load(&l, b.ptr, b.len), 0);
	check_c4(l);
	/* saving the loaded state gives the same bytes */
	assert_int_equal(omen_metrics_save(l, &b2), 0);
	assert_int_equal(b2.len, b.len);
	assert_memory_equal(b2.ptr, b.ptr, b.len);
	omen_metrics_free(l);
	omen_metrics_free(m);
	omen_buf_free(&b);
	omen_buf_free(&b2);
}

static void test_load_corrupt(void **state)
{
	omen_metrics *m = history(), *l = NULL;
	omen_buf b = OMEN_BUF_INIT;
	unsigned char *copy;
	(void)state;
	assert_int_equal(omen_metrics_save(m, &b), 0);
	copy = malloc(b.len);
	/* every truncation fails cleanly */
	for (size_t n = 0; n < b.len; n++) {
		assert_int_equal(omen_metrics_load(&l, b.ptr, n), OMEN_ECORRUPT);
		assert_null(l);
	}
	/* a flipped byte fails the checksum */
	memcpy(copy, b.ptr, b.len);
	copy[b.len / 2] ^= 0x40;
	assert_int_equal(omen_metrics_load(&l, copy, b.len), OMEN_ECORRUPT);
	assert_non_null(strstr(omen_error_last(), "checksum"));
	/* flipped bytes with a recomputed checksum: either loads or fails, never crashes */
	for (size_t i = 4; i + 4 < b.len; i++) {
		uint32_t crc;
		memcpy(copy, b.ptr, b.len);
		copy[i] ^= 0xff;
		crc = omen_crc32(0, copy, b.len - 4);
		copy[b.len - 4] = (unsigned char)crc;
		copy[b.len - 3] = (unsigned char)(crc >> 8);
		copy[b.len - 2] = (unsigned char)(crc >> 16);
		copy[b.len - 1] = (unsigned char)(crc >> 24);
		int rc = omen_metrics_load(&l, copy, b.len);
		assert_true(rc == 0 || rc == OMEN_ECORRUPT || rc == OMEN_ENOMEM);
		omen_metrics_free(l);
		l = NULL;
	}
	assert_int_equal(omen_metrics_load(&l, "XXXX", 4), OMEN_ECORRUPT);
	free(copy);
	omen_buf_free(&b);
	omen_metrics_free(m);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_hand_worked),
		cmocka_unit_test(test_first_commit_and_single_file),
		cmocka_unit_test(test_rename_keeps_history),
		cmocka_unit_test(test_file_facts),
		cmocka_unit_test(test_save_load),
		cmocka_unit_test(test_load_corrupt),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
