/* Unit tests of git config reading (src/history/config.c): the text that
 * git puts in GIT_CONFIG_PARAMETERS for `git -c k=v`, in both the format of
 * git 2.31 and later ('k'='v', 'k'= for a value-less key) and the older one
 * ('k=v', 'k'), quoting as git's sq_quote_buf() writes it ('\'' for a
 * quote, '\!' for '!'), typed values and their error messages, and the
 * fallback to the repository's config. The reference is git itself: the
 * texts below were printed by git 2.39 with
 *   git -c alias.x='!printenv GIT_CONFIG_PARAMETERS' x
 * and test_live_git asks the installed git again. */
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
#include "omen/label.h"

struct kv {
	char k[8][64];
	char v[8][64];
	int has_v[8];
	int n;
};

static int collect(const char *key, const char *val, void *payload)
{
	struct kv *p = payload;
	assert_non_null(key);
	assert_true(p->n < 8);
	snprintf(p->k[p->n], 64, "%s", key);
	p->has_v[p->n] = val != NULL;
	snprintf(p->v[p->n], 64, "%s", val ? val : "");
	p->n++;
	return 0;
}

static void parse(struct kv *out, const char *text)
{
	memset(out, 0, sizeof(*out));
	assert_int_equal(omen_config_parse_params(text, collect, out), 0);
}

/* printed by git 2.39 for:
 *   git -c "omen.a=it's !bang" -c omen.e= -c omen.b -c 'Omen.Sub sec.key=v=w' */
static const char *git239 =
	"'omen.a'='it'\\''s '\\!'bang' 'omen.e'='' 'omen.b'= 'Omen.Sub sec.key'='v=w'";

static void test_new_format(void **st)
{
	struct kv p;
	(void)st;
	parse(&p, git239);
	assert_int_equal(p.n, 4);
	assert_string_equal(p.k[0], "omen.a");
	assert_string_equal(p.v[0], "it's !bang");
	assert_string_equal(p.k[1], "omen.e");
	assert_true(p.has_v[1]);            /* 'k'='' is the empty string */
	assert_string_equal(p.v[1], "");
	assert_string_equal(p.k[2], "omen.b");
	assert_false(p.has_v[2]);           /* 'k'= alone: no value (git -c k) */
	assert_string_equal(p.k[3], "Omen.Sub sec.key");
	assert_string_equal(p.v[3], "v=w");
}

/* git before 2.31 wrote each pair as one quoted word: 'k=v', and 'k' for
 * a value-less key (sq_quote_buf of the whole -c argument) */
static void test_old_format(void **st)
{
	struct kv p;
	(void)st;
	parse(&p, "'omen.a=it'\\''s '\\!'bang' 'omen.e=' 'omen.b' 'omen.c=x=y'");
	assert_int_equal(p.n, 4);
	assert_string_equal(p.k[0], "omen.a");
	assert_string_equal(p.v[0], "it's !bang");
	assert_string_equal(p.k[1], "omen.e");
	assert_true(p.has_v[1]);
	assert_string_equal(p.v[1], "");
	assert_string_equal(p.k[2], "omen.b");
	assert_false(p.has_v[2]);
	assert_string_equal(p.k[3], "omen.c");
	assert_string_equal(p.v[3], "x=y");  /* split at the first '=' as git does */
}

static void test_quoting_edge_cases(void **st)
{
	struct kv p;
	(void)st;
	parse(&p, "  \t'omen.x'='a b'\n 'omen.y'='c'  ");
	assert_int_equal(p.n, 2);
	assert_string_equal(p.v[0], "a b");
	parse(&p, "");
	assert_int_equal(p.n, 0);
	parse(&p, "'omen.x'=''\\''' ");
	assert_string_equal(p.v[0], "'");
	/* regression: an empty unquoted key gave the callback a NULL key */
	parse(&p, "=x");
	assert_int_equal(p.n, 1);
	assert_string_equal(p.k[0], "");
	assert_string_equal(p.v[0], "x");
	memset(&p, 0, sizeof(p));
	assert_int_equal(omen_config_parse_params("'omen.x'='abc", collect, &p), OMEN_EINVAL);
	assert_string_equal(omen_error_last(), "bad GIT_CONFIG_PARAMETERS: unbalanced quoting");
	memset(&p, 0, sizeof(p));
	assert_int_equal(omen_config_parse_params("'omen.x'=abc\\", collect, &p), OMEN_EINVAL);
}

static int stop_cb(const char *key, const char *val, void *payload)
{
	(void)key;
	(void)val;
	return ++*(int *)payload == 2 ? 5 : 0;
}

static void test_callback_stops(void **st)
{
	int calls = 0;
	(void)st;
	assert_int_equal(omen_config_parse_params("'a'='1' 'b'='2' 'c'='3'", stop_cb, &calls), 5);
	assert_int_equal(calls, 2);
}

/* ---- typed values through the environment -------------------------------- */
static void env(const char *text)
{
	assert_int_equal(setenv("GIT_CONFIG_PARAMETERS", text, 1), 0);
}

static void test_int_values(void **st)
{
	static const struct { const char *v; int64_t want; } ok[] = {
		{"30", 30}, {"-3", -3}, {"10k", 10240}, {"10K", 10240}, {"2m", 2097152},
		{"1g", 1073741824LL}, {"-3k", -3072}, {"9223372036854775807", INT64_MAX},
		{"8589934591g", 8589934591LL * 1073741824LL},
	};
	static const char *bad[] = {"12x", "", "k", "1.5", "10kb", "99999999999999999999",
		"8589934592g", "true"};
	char text[128], want[128];
	size_t i;
	int64_t v;
	(void)st;
	for (i = 0; i < sizeof(ok) / sizeof(*ok); i++) {
		snprintf(text, sizeof(text), "'omen.window'='%s'", ok[i].v);
		env(text);
		v = -1;
		assert_int_equal(omen_config_int(&v, NULL, "omen.window"), 0);
		assert_true(v == ok[i].want);
	}
	for (i = 0; i < sizeof(bad) / sizeof(*bad); i++) {
		snprintf(text, sizeof(text), "'omen.window'='%s'", bad[i]);
		env(text);
		v = 77;
		assert_int_equal(omen_config_int(&v, NULL, "omen.window"), OMEN_EINVAL);
		assert_true(v == 77);  /* untouched on error */
		snprintf(want, sizeof(want), "bad config value 'omen.window': '%s' is not an integer",
			bad[i]);
		assert_string_equal(omen_error_last(), want);
	}
	/* key names are case-insensitive; the last occurrence wins (as git) */
	env("'omen.maxfixfiles'='1' 'OMEN.MaxFixFiles'='2'");
	assert_int_equal(omen_config_int(&v, NULL, "omen.maxFixFiles"), 0);
	assert_true(v == 2);
	/* a missing key leaves the default and is no error */
	v = 90;
	assert_int_equal(omen_config_int(&v, NULL, "omen.window"), 0);
	assert_true(v == 90);
	unsetenv("GIT_CONFIG_PARAMETERS");
}

static void test_bool_values(void **st)
{
	static const char *yes[] = {"true", "TRUE", "yes", "on", "1"};
	static const char *no[] = {"false", "No", "off", "0", ""};
	char text[128];
	size_t i;
	int b;
	(void)st;
	for (i = 0; i < 5; i++) {
		snprintf(text, sizeof(text), "'omen.x'='%s'", yes[i]);
		env(text);
		b = -1;
		assert_int_equal(omen_config_bool(&b, NULL, "omen.x"), 0);
		assert_int_equal(b, 1);
		snprintf(text, sizeof(text), "'omen.x'='%s'", no[i]);
		env(text);
		b = -1;
		assert_int_equal(omen_config_bool(&b, NULL, "omen.x"), 0);
		assert_int_equal(b, 0);
	}
	/* `git -c omen.x` (no '='): true in both formats, as git config --bool says */
	env("'omen.x'=");
	b = -1;
	assert_int_equal(omen_config_bool(&b, NULL, "omen.x"), 0);
	assert_int_equal(b, 1);
	env("'omen.x'");
	b = -1;
	assert_int_equal(omen_config_bool(&b, NULL, "omen.x"), 0);
	assert_int_equal(b, 1);
	env("'omen.x'='maybe'");
	b = -1;
	assert_int_equal(omen_config_bool(&b, NULL, "omen.x"), OMEN_EINVAL);
	assert_int_equal(b, -1);
	assert_string_equal(omen_error_last(), "bad config value 'omen.x': 'maybe' is not a boolean");
	unsetenv("GIT_CONFIG_PARAMETERS");
}

static void test_double_and_string(void **st)
{
	double d = -1;
	char *s = NULL;
	(void)st;
	env("'omen.threshold'='0.25'");
	assert_int_equal(omen_config_double(&d, NULL, "omen.threshold"), 0);
	assert_true(d == 0.25);
	env("'omen.threshold'='nan'");
	assert_int_equal(omen_config_double(&d, NULL, "omen.threshold"), OMEN_EINVAL);
	assert_string_equal(omen_error_last(), "bad config value 'omen.threshold': 'nan' is not a number");
	env("'omen.threshold'='1e999'");
	assert_int_equal(omen_config_double(&d, NULL, "omen.threshold"), OMEN_EINVAL);
	assert_true(d == 0.25);
	env("'omen.fixpattern'='\\bfix(es|ed)?\\b'");
	assert_int_equal(omen_config_string(&s, NULL, "omen.fixPattern"), 0);
	assert_string_equal(s, "\\bfix(es|ed)?\\b");
	free(s);
	s = NULL;
	env("'omen.model'='x'");
	assert_int_equal(omen_config_string(&s, NULL, "omen.labels"), 0);
	assert_null(s);
	env("'omen.x'='unbalanced");
	assert_int_equal(omen_config_string(&s, NULL, "omen.x"), OMEN_EINVAL);
	assert_null(s);
	unsetenv("GIT_CONFIG_PARAMETERS");
}

/* ---- against the installed git -------------------------------------------- */
static int run(const char *cmd, char *out, size_t cap)
{
	FILE *fp = popen(cmd, "r");
	size_t n;
	if (!fp)
		return -1;
	n = fread(out, 1, cap - 1, fp);
	out[n] = '\0';
	while (n && (out[n - 1] == '\n'))
		out[--n] = '\0';
	return pclose(fp);
}

static void test_live_git(void **st)
{
	char text[1024];
	struct kv p;
	(void)st;
	if (system("git --version >/dev/null 2>&1") != 0) {
		skip();
		return;
	}
	/* outside any repository, no user config: git puts exactly its -c
	 * arguments into the environment of an alias it runs */
	assert_int_equal(run("cd / && HOME=/nonexistent GIT_CONFIG_NOSYSTEM=1 "
		"GIT_CONFIG_PARAMETERS= git -c \"omen.a=it's !bang\" -c omen.e= -c omen.b "
		"-c 'omen.window=3k' -c alias.x='!printenv GIT_CONFIG_PARAMETERS' x", text,
		sizeof(text)), 0);
	parse(&p, text);
	assert_int_equal(p.n, 5);
	assert_string_equal(p.k[0], "omen.a");
	assert_string_equal(p.v[0], "it's !bang");
	assert_string_equal(p.k[1], "omen.e");
	assert_true(p.has_v[1]);
	assert_string_equal(p.v[1], "");
	assert_string_equal(p.k[2], "omen.b");
	assert_false(p.has_v[2]);
	assert_string_equal(p.k[4], "alias.x");
	assert_string_equal(p.v[4], "!printenv GIT_CONFIG_PARAMETERS");
	{
		int64_t v = 0;
		int b = 0;
		env(text);
		assert_int_equal(omen_config_int(&v, NULL, "omen.window"), 0);
		assert_true(v == 3072);
		/* git config --bool omen.b prints true, omen.e prints false */
		assert_int_equal(omen_config_bool(&b, NULL, "omen.b"), 0);
		assert_int_equal(b, 1);
		assert_int_equal(omen_config_bool(&b, NULL, "omen.e"), 0);
		assert_int_equal(b, 0);
		unsetenv("GIT_CONFIG_PARAMETERS");
	}
}

static void test_repo_config_fallback(void **st)
{
	char dir[] = "/tmp/omen-test-config-XXXXXX", cmd[512];
	omen_repo *r = NULL;
	int64_t v = 0;
	(void)st;
	if (system("git --version >/dev/null 2>&1") != 0) {
		skip();
		return;
	}
	assert_non_null(mkdtemp(dir));
	snprintf(cmd, sizeof(cmd), "git init -q '%s' && git -C '%s' config omen.window 2k && "
		"git -C '%s' config omen.maxFixFiles oops", dir, dir, dir);
	assert_int_equal(system(cmd), 0);
	unsetenv("GIT_CONFIG_PARAMETERS");
	assert_int_equal(omen_repo_open(&r, dir), 0);
	assert_int_equal(omen_config_int(&v, r, "omen.window"), 0);
	assert_true(v == 2048);
	assert_int_equal(omen_config_int(&v, r, "omen.maxFixFiles"), OMEN_EINVAL);
	assert_string_equal(omen_error_last(),
		"bad config value 'omen.maxFixFiles': 'oops' is not an integer");
	env("'omen.window'='7'");  /* git -c wins over the repository */
	assert_int_equal(omen_config_int(&v, r, "omen.window"), 0);
	assert_true(v == 7);
	unsetenv("GIT_CONFIG_PARAMETERS");
	/* the label file: omen.labels when set and not empty, else the default */
	{
		char *p = NULL, want[256];
		int configured = -1;
		snprintf(want, sizeof(want), "%s/.git/omen/labels.jsonl", dir);
		assert_int_equal(omen_labels_path(&p, r, &configured), 0);
		assert_string_equal(p, want);
		assert_int_equal(configured, 0);
		free(p);
		env("'omen.labels'=''");
		assert_int_equal(omen_labels_path(&p, r, &configured), 0);
		assert_string_equal(p, want);
		assert_int_equal(configured, 0);
		free(p);
		env("'omen.labels'='/srv/l.jsonl'");
		assert_int_equal(omen_labels_path(&p, r, NULL), 0);
		assert_string_equal(p, "/srv/l.jsonl");
		free(p);
		assert_int_equal(omen_labels_path(&p, r, &configured), 0);
		assert_int_equal(configured, 1);
		free(p);
		unsetenv("GIT_CONFIG_PARAMETERS");
	}
	omen_repo_free(r);
	snprintf(cmd, sizeof(cmd), "rm -rf '%s'", dir);
	assert_int_equal(system(cmd), 0);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_new_format),
		cmocka_unit_test(test_old_format),
		cmocka_unit_test(test_quoting_edge_cases),
		cmocka_unit_test(test_callback_stops),
		cmocka_unit_test(test_int_values),
		cmocka_unit_test(test_bool_values),
		cmocka_unit_test(test_double_and_string),
		cmocka_unit_test(test_live_git),
		cmocka_unit_test(test_repo_config_fallback),
	};
	int rc;
	git_libgit2_init();  /* as main() does for every command */
	rc = cmocka_run_group_tests_name("config", tests, NULL, NULL);
	git_libgit2_shutdown();
	return rc;
}
