/* Unit tests of the code and message tokenizers and the blank/comment line
 * tests (src/features/tokenize.c, src/history/lines.c) on C, Python, JavaScript and Go snippets.
 * Expected token streams are written out by hand from the rules in
 * include/omen/features.h and omen/history.h; identifier splitting on camelCase and '_' is
 * common practice in code-token models (e.g. Hellendoorn & Devanbu, FSE 2017). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>
#include <cmocka.h>
#include "omen/features.h"
#include "omen/history.h"

typedef struct {
	char s[4096];
	size_t n;
	int count;
} toks;

static void collect(const char *t, size_t n, void *payload)
{
	toks *k = payload;
	assert_true(n > 0);
	assert_true(k->n + n + 2 < sizeof(k->s));
	if (k->n)
		k->s[k->n++] = ' ';
	memcpy(k->s + k->n, t, n);
	k->n += n;
	k->s[k->n] = '\0';
	k->count++;
}

static const char *code(const char *src)
{
	static toks k;
	memset(&k, 0, sizeof(k));
	omen_tokenize_code(src, strlen(src), collect, &k);
	return k.s;
}

static const char *msg(const char *src)
{
	static toks k;
	memset(&k, 0, sizeof(k));
	omen_tokenize_message(src, strlen(src), collect, &k);
	return k.s;
}

static void test_c(void **state)
{
	(void)state;
	assert_string_equal(code("if (buf_len >= 0x10) return parseHTTPHeader(p->next, 3.5f);"),
		"if ( buf_len buf len >= <hex> ) return parseHTTPHeader parse http header "
		"( p -> next , <float> ) ;");
	assert_string_equal(code("#include <stdio.h>"), "# include < stdio . h >");
	assert_string_equal(code("x += 1; /* one */ y = 'c'; // done"),
		"x += <num1> ; <comment> y = <str> ; <comment>");
	assert_string_equal(code("char *s = \"a \\\" b\"; n = 0; m = 42; k = 7; big = 1000UL;"),
		"char * s = <str> ; n = <num0> ; m = <num10-99> ; k = <num2-9> ; big = <numbig> ;");
	assert_string_equal(code("a<<=b>>2...c"), "a <<= b >> <num2-9> ... c");
	assert_string_equal(code("1e10 .5 2.0"), "<float> <float> <float>");
}

static void test_python(void **state)
{
	(void)state;
	assert_string_equal(code("def get_user_id(self):  # cache it"),
		"def get_user_id get user id ( self ) : <comment>");
	assert_string_equal(code("s = '''multi\nline''' + f\"x{y}\""), "s = <str> + f <str>");
	assert_string_equal(code("x //= 2 ** n"), "x <comment>");   /* '//' reads as a comment */
	assert_string_equal(code("return a if b is not None else 0"),
		"return a if b is not None else <num0>");
}

static void test_javascript(void **state)
{
	(void)state;
	assert_string_equal(code("const fooBar = a?.b ?? `tmpl ${x}`;"),
		"const fooBar foo bar = a ?. b ?? <str> ;");
	assert_string_equal(code("if (x === y && z !== w) { $el.on('click', () => {}); }"),
		"if ( x === y && z !== w ) { $el . on ( <str> , ( ) => { } ) ; }");
	assert_string_equal(code("let n = 1_000_000n;"), "let n = <numbig> ;");
}

static void test_go(void **state)
{
	(void)state;
	assert_string_equal(code("func (s *Server) ServeHTTP(w http.ResponseWriter, r *http.Request) {"),
		"func ( s * Server ) ServeHTTP serve http ( w http . ResponseWriter response writer , "
		"r * http . Request ) {");
	assert_string_equal(code("x := <-ch; y &^= 0b101; raw := `a\\nb`"),
		"x := <- ch ; y &^= <hex> ; raw := <str>");
}

static void test_bad_bytes(void **state)
{
	toks k;
	(void)state;
	/* invalid UTF-8 bytes are skipped; valid multibyte letters stay in identifiers */
	assert_string_equal(code("caf\xc3\xa9 = na\xefve"), "caf\xc3\xa9 = na ve");
	assert_string_equal(code("\xff\xfe\x80"), "");
	/* unterminated literals and comments end at the end of the input */
	assert_string_equal(code("s = \"open"), "s = <str>");
	assert_string_equal(code("/* open"), "<comment>");
	assert_string_equal(code("it's"), "it ' s");
	memset(&k, 0, sizeof(k));
	omen_tokenize_code("", 0, collect, &k);
	assert_int_equal(k.count, 0);
	/* length bound: no read past n */
	memset(&k, 0, sizeof(k));
	omen_tokenize_code("abc\"def", 4, collect, &k);
	assert_string_equal(k.s, "abc <str>");
}

static void test_message(void **state)
{
	(void)state;
	assert_string_equal(msg("Fix crash in Parser (#123), see https://example.org/x?y=1 and 1a2b3c4d"),
		"fix crash in parser <issue> see <url> and <sha>");
	assert_string_equal(msg("Revert 3 of 42 changes; deadbeef stays, 0123456789abcdef0123456789abcdef01234567"),
		"revert <num2-9> of <num10-99> changes deadbeef stays <sha>");
	assert_string_equal(msg("Caf\xe9 na\xc3\xafve_thing"), "caf na\xc3\xafve thing");
}

static void test_blank_comment(void **state)
{
	(void)state;
	assert_true(omen_line_is_blank("", 0));
	assert_true(omen_line_is_blank(" \t\r", 3));
	assert_false(omen_line_is_blank(" x", 2));
	static const char *const comments[] = {
		"// c", "  # python", "/* block */", " * continuation", " */", "-- sql", "; ini",
		"% tex", "<!-- html -->", "/* open", "#", "*", NULL
	};
	static const char *const code_lines[] = {
		"#include <x.h>", "  #define X 1", "*p = 1;", "--i;", "x = 1; // trailing",
		"/* a */ int b;", "%d", "", "   ", "#!/bin/sh", ";", NULL
	};
	for (int i = 0; comments[i]; i++)
		assert_true(omen_line_is_comment(comments[i], strlen(comments[i])));
	for (int i = 0; code_lines[i]; i++)
		assert_false(omen_line_is_comment(code_lines[i], strlen(code_lines[i])));
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_c),
		cmocka_unit_test(test_python),
		cmocka_unit_test(test_javascript),
		cmocka_unit_test(test_go),
		cmocka_unit_test(test_bad_bytes),
		cmocka_unit_test(test_message),
		cmocka_unit_test(test_blank_comment),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
