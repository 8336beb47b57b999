/* The model sample builder: caps (largest files and hunks first, kept in
 * their original order), the added/deleted marker on token ids, line
 * numbers, message tokens, effort counts, and the in-memory dataset. */
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <stdint.h>
#include <string.h>
#include <cmocka.h>
#include "omen/omen.h"

static const char text[] =
	"int x = 1;" "int x = 2;" "return x;"          /* a.c: 0, 10, 20 */
	"a = 1" "b = 2" "c = 3"                         /* b.py hunk 1: 29, 34, 39 */
	"d = 4" "e = 5" "f = 6" "g = 7" "h = 8" "i = 9" "j = 10"  /* b.py hunk 2: 44.. */
	"hello";                                        /* c.txt */

static omen_file files[3];
static omen_hunk hunks[4];
static omen_line lines[15];

static void make_change(omen_change *c)
{
	int i, k = 0;
	memset(c, 0, sizeof(*c));
	memset(files, 0, sizeof(files));
	memset(hunks, 0, sizeof(hunks));
	strcpy(c->commit.hex, "1111111111111111111111111111111111111111");
	c->commit.author_time = 1700000000;
	c->commit.message = "Fix the parser crash";
	files[0].old_path = "a.c"; files[0].new_path = "a.c"; files[0].status = 'M';
	files[0].hunk_off = 0; files[0].nhunks = 1; files[0].added = 2; files[0].deleted = 1;
	files[1].new_path = "b.py"; files[1].status = 'A';
	files[1].hunk_off = 1; files[1].nhunks = 2; files[1].added = 10;
	files[2].new_path = "c.txt"; files[2].status = 'A';
	files[2].hunk_off = 3; files[2].nhunks = 1; files[2].added = 1;
	/* a.c: -1 +1,2 */
	hunks[0] = (omen_hunk){1, 1, 1, 2, 0, 3, 0};
	lines[0] = (omen_line){'-', 1, -1, 0, 10};
	lines[1] = (omen_line){'+', -1, 1, 10, 10};
	lines[2] = (omen_line){'+', -1, 2, 20, 9};
	/* b.py: +1,3 and +10,7 */
	hunks[1] = (omen_hunk){0, 0, 1, 3, 3, 3, 1};
	hunks[2] = (omen_hunk){0, 0, 10, 7, 6, 7, 1};
	for (i = 0; i < 10; i++, k++)
		lines[3 + i] = (omen_line){'+', -1, i < 3 ? 1 + i : 10 + (i - 3), (uint32_t)(29 + 5 * i),
			i == 9 ? 6u : 5u};
	hunks[3] = (omen_hunk){0, 0, 1, 1, 13, 1, 2};
	lines[13] = (omen_line){'+', -1, 1, 80, 5};
	c->files = files; c->nfiles = 3;
	c->hunks = hunks; c->nhunks = 4;
	c->lines = lines; c->nlines = 14;
	c->text = text;
}

static void test_sample_caps_and_markers(void **state)
{
	omen_change c;
	omen_sample_buf *b;
	omen_sample s;
	omen_caps caps = {2, 1, 64, 64};
	int t;
	(void)state;
	make_change(&c);
	assert_int_equal(omen_sample_buf_new(&b), 0);
	assert_int_equal(omen_sample_build(&s, b, &c, NULL, 1, &caps), 0);
	/* the two largest files (a.c 3 lines, b.py 10) in their own order */
	assert_int_equal(s.nfiles, 2);
	assert_string_equal(s.file_path[0], "a.c");
	assert_string_equal(s.file_path[1], "b.py");
	assert_int_equal(s.capped, 1);
	assert_int_equal(s.is_fix, 1);
	assert_int_equal(s.label, -1);
	/* effort counts every file, capped or not (git log --numstat sums) */
	assert_int_equal(s.la, 13);
	assert_int_equal(s.ld, 1);
	/* b.py keeps its larger hunk (+10,7) only */
	assert_int_equal(s.nhunks, 2);
	assert_int_equal(s.file_off[0], 0);
	assert_int_equal(s.file_off[1], 1);
	assert_int_equal(s.file_off[2], 2);
	assert_int_equal(s.hunk_new_start[1], 10);
	assert_int_equal(s.hunk_new_lines[1], 7);
	assert_int_equal(s.hunk_old_start[0], 1);
	/* a.c: deleted-line tokens first, in the upper half, negative lines;
	 * "int" deleted and "int" added differ exactly by the marker */
	assert_true(s.hunk_off[1] > 0);
	assert_true(s.tok[0] >= OMEN_VOCAB / 2);
	assert_int_equal(s.tok_line[0], -1);
	for (t = s.hunk_off[0]; t < s.hunk_off[1]; t++) {
		if (s.tok_line[t] > 0) {
			assert_true(s.tok[t] < OMEN_VOCAB / 2);
			assert_int_equal(s.tok[t] + OMEN_VOCAB / 2, s.tok[0]);   /* "int" */
			break;
		}
		assert_true(s.tok[t] >= OMEN_VOCAB / 2);
	}
	assert_true(t < s.hunk_off[1]);
	for (t = s.hunk_off[1]; t < s.ntok; t++)
		assert_true(s.tok_line[t] >= 10 && s.tok_line[t] <= 16);
	/* message: lowercased words hashed into the message table */
	assert_true(s.nmsg >= 3);
	for (t = 0; t < s.nmsg; t++)
		assert_true(s.msg[t] < OMEN_MSG_VOCAB);
	omen_sample_buf_free(b);
	omen_sample_buf_free(NULL);
}

static void test_sample_token_caps(void **state)
{
	omen_change c;
	omen_sample_buf *b;
	omen_sample s, u;
	omen_caps caps = {8, 8, 4, 2}, none = {0, 0, 0, 0};
	uint32_t first[4];
	int h;
	(void)state;
	make_change(&c);
	assert_int_equal(omen_sample_buf_new(&b), 0);
	assert_int_equal(omen_sample_build(&s, b, &c, NULL, 0, &caps), 0);
	assert_int_equal(s.nfiles, 3);
	assert_int_equal(s.nhunks, 4);
	for (h = 0; h < s.nhunks; h++)
		assert_true(s.hunk_off[h + 1] - s.hunk_off[h] <= 4);
	assert_int_equal(s.nmsg, 2);
	assert_int_equal(s.capped, 1);
	memcpy(first, s.tok, sizeof(first));
	/* no caps (0 = none): nothing dropped, same ids (hashing is stable) */
	assert_int_equal(omen_sample_build(&u, b, &c, NULL, 0, &none), 0);
	assert_int_equal(u.capped, 0);
	assert_true(u.ntok > s.ntok);
	assert_memory_equal(u.tok, first, sizeof(first));
	omen_sample_buf_free(b);
}

static void test_dataset_from_samples(void **state)
{
	omen_change c;
	omen_sample_buf *b;
	omen_sample s[2];
	omen_dataset *d;
	omen_caps caps = OMEN_CAPS_DEFAULT;
	omen_sample_buf *b2;
	const omen_sample *g;
	(void)state;
	make_change(&c);
	assert_int_equal(omen_sample_buf_new(&b), 0);
	assert_int_equal(omen_sample_buf_new(&b2), 0);
	assert_int_equal(omen_sample_build(&s[0], b, &c, NULL, 0, &caps), 0);
	c.nfiles = 1;   /* a second, smaller commit */
	c.commit.hex[0] = '2';
	assert_int_equal(omen_sample_build(&s[1], b2, &c, NULL, 0, &caps), 0);
	s[0].label = 1;
	s[1].label = 0;
	assert_int_equal(omen_dataset_from_samples(&d, s, 2), 0);
	assert_int_equal(omen_dataset_size(d), 2);
	assert_null(omen_dataset_get(d, 2));
	assert_null(omen_dataset_metrics(d));
	g = omen_dataset_get(d, 1);
	assert_int_equal(g->label, 0);
	assert_int_equal(g->nfiles, 1);
	assert_int_equal(g->ntok, s[1].ntok);
	assert_memory_equal(g->tok, s[1].tok, (size_t)s[1].ntok * 4);
	assert_string_equal(g->file_path[0], "a.c");
	assert_int_equal(g->id[0], '2');
	g = omen_dataset_get(d, 0);
	assert_int_equal(g->nhunks, s[0].nhunks);
	assert_memory_equal(g->hunk_off, s[0].hunk_off, (size_t)(s[0].nhunks + 1) * 4);
	assert_string_equal(g->file_path[2], "c.txt");
	omen_dataset_free(d);
	omen_dataset_free(NULL);
	omen_sample_buf_free(b);
	omen_sample_buf_free(b2);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_sample_caps_and_markers),
		cmocka_unit_test(test_sample_token_caps),
		cmocka_unit_test(test_dataset_from_samples),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
