/* Pre-push protocol parser. Reference: githooks(5), "pre-push": lines
 * "<local ref> SP <local object name> SP <remote ref> SP <remote object name> LF",
 * an all-zero remote name for a new ref, "(delete)" and an all-zero local
 * name for a deletion; object names are 40 hex digits with SHA-1 and 64 with
 * SHA-256 (git hash-function-transition.txt). */
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <stdint.h>
#include <string.h>
#include <cmocka.h>
#include "omen/omen.h"
#include "omen/score.h"

#define A40 "1111111111111111111111111111111111111111"
#define B40 "2222222222222222222222222222222222222222"
#define Z40 "0000000000000000000000000000000000000000"
#define A64 "aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa"
#define Z64 "0000000000000000000000000000000000000000000000000000000000000000"

static int parse(omen_push_list *l, const char *s)
{
	return omen_prepush_parse(l, s, strlen(s));
}

static void test_update_and_new(void **st)
{
	omen_push_list l;
	(void)st;
	assert_int_equal(parse(&l, "refs/heads/main " A40 " refs/heads/main " B40 "\n"
		"refs/heads/topic " A40 " refs/heads/topic " Z40 "\n"), 0);
	assert_int_equal(l.n, 2);
	assert_string_equal(l.v[0].local_ref, "refs/heads/main");
	assert_string_equal(l.v[0].remote_ref, "refs/heads/main");
	assert_string_equal(l.v[0].local_id, A40);
	assert_string_equal(l.v[0].remote_id, B40);
	assert_int_equal(l.v[0].id_len, 40);
	assert_false(l.v[0].is_new);
	assert_false(l.v[0].is_delete);
	assert_true(l.v[1].is_new);
	assert_false(l.v[1].is_delete);
	omen_prepush_free(&l);
}

static void test_delete(void **st)
{
	omen_push_list l;
	(void)st;
	assert_int_equal(parse(&l, "(delete) " Z40 " refs/heads/old " B40 "\n"), 0);
	assert_int_equal(l.n, 1);
	assert_true(l.v[0].is_delete);
	assert_false(l.v[0].is_new);
	assert_string_equal(l.v[0].local_ref, "(delete)");
	omen_prepush_free(&l);
}

static void test_sha256(void **st)
{
	omen_push_list l;
	(void)st;
	assert_int_equal(parse(&l, "refs/tags/v1 " A64 " refs/tags/v1 " Z64), 0); /* no final LF */
	assert_int_equal(l.n, 1);
	assert_int_equal(l.v[0].id_len, 64);
	assert_true(l.v[0].is_new);
	omen_prepush_free(&l);
}

static void test_empty_crlf_uppercase(void **st)
{
	omen_push_list l;
	(void)st;
	assert_int_equal(parse(&l, ""), 0);
	assert_int_equal(l.n, 0);
	omen_prepush_free(&l);
	assert_int_equal(parse(&l, "HEAD AAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAAA refs/heads/x " Z40 "\r\n\n"), 0);
	assert_int_equal(l.n, 1);
	assert_string_equal(l.v[0].local_id, "aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa");
	omen_prepush_free(&l);
}

static void expect_bad(const char *in, size_t n, const char *msg_part)
{
	omen_push_list l;
	if (n == (size_t)-1)
		n = strlen(in);
	assert_int_equal(omen_prepush_parse(&l, in, n), OMEN_EINVAL);
	assert_int_equal(l.n, 0);
	assert_non_null(strstr(omen_error_last(), "bad pre-push input"));
	if (msg_part && !strstr(omen_error_last(), msg_part))
		fail_msg("message '%s' lacks '%s'", omen_error_last(), msg_part);
	assert_null(strchr(omen_error_last(), '\n'));  /* one line */
	omen_prepush_free(&l);
}

static void test_garbage(void **st)
{
	static const char nul[] = "refs/heads/a " A40 "\0 refs/heads/a " B40 "\n";
	(void)st;
	expect_bad("hello world\n", (size_t)-1, "line 1: expected 4 fields, got 2");
	expect_bad("refs/heads/a " A40 " refs/heads/a " B40 " extra\n", (size_t)-1, "got more");
	expect_bad("refs/heads/a 12345 refs/heads/a " B40 "\n", (size_t)-1, "local id");
	expect_bad("refs/heads/a " A40 " refs/heads/a " A64 "\n", (size_t)-1,
		"differ in length");
	expect_bad("refs/heads/a " A40 " refs/heads/a " B40 "\nx y\n", (size_t)-1,
		"line 2");
	expect_bad("refs/heads/a  " A40 " refs/heads/a " B40 "\n", (size_t)-1,
		"expected 4 fields");
	expect_bad("refs/heads/a " "g111111111111111111111111111111111111111" " r " B40, 13 + 40 + 3 + 40,
		"local id");
	expect_bad("refs/\x01 " A40 " r " B40, (size_t)-1, "control character");
	expect_bad(nul, sizeof(nul) - 1, "NUL");
}

static void test_long_ref(void **st)
{
	char *s = malloc(OMEN_PREPUSH_MAX_REF + 200);
	size_t n;
	(void)st;
	memset(s, 'r', OMEN_PREPUSH_MAX_REF + 1);
	n = OMEN_PREPUSH_MAX_REF + 1;
	memcpy(s + n, " " A40 " x " B40, 1 + 40 + 3 + 40);
	n += 1 + 40 + 3 + 40;
	expect_bad(s, n, "too long");
	free(s);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_update_and_new),
		cmocka_unit_test(test_delete),
		cmocka_unit_test(test_sha256),
		cmocka_unit_test(test_empty_crlf_uppercase),
		cmocka_unit_test(test_garbage),
		cmocka_unit_test(test_long_ref),
	};
	return cmocka_run_group_tests_name("prepush", tests, NULL, NULL);
}
