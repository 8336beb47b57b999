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
#include <strings.h>
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

/* git's integer syntax (git_parse_signed: decimal, k/m/g 1024-based),
 * through a row with no bounds of its own */
static const omen_setting any_int = {"omen.test", OMEN_SETTING_INT, INT64_MIN, INT64_MAX, NULL,
	"an integer", "0"};

static void test_int_values(void **st)
{
	static const struct { const char *v; int64_t want; } ok[] = {
		{"30", 30}, {"-3", -3}, {"10k", 10240}, {"10K", 10240}, {"2m", 2097152},
		{"1g", 1073741824LL}, {"-3k", -3072}, {"9223372036854775807", INT64_MAX},
		{"8589934591g", 8589934591LL * 1073741824LL},
	};
	static const char *bad[] = {"12x", "", "k", "1.5", "10kb", "99999999999999999999",
		"8589934592g", "true"};
	char want[128];
	omen_setting_value v;
	size_t i;
	(void)st;
	for (i = 0; i < sizeof(ok) / sizeof(*ok); i++) {
		assert_int_equal(omen_setting_parse(&v, &any_int, ok[i].v), 0);
		assert_true(v.i == ok[i].want);
	}
	for (i = 0; i < sizeof(bad) / sizeof(*bad); i++) {
		assert_int_equal(omen_setting_parse(&v, &any_int, bad[i]), OMEN_EINVAL);
		snprintf(want, sizeof(want), "bad config value 'omen.test': '%s' is not an integer",
			bad[i]);
		assert_string_equal(omen_error_last(), want);
	}
	/* through the environment: key names are case-insensitive, the last
	 * occurrence wins (as git) */
	env("'omen.maxfixfiles'='1' 'OMEN.MaxFixFiles'='2'");
	{
		int64_t n = -1;
		assert_int_equal(omen_config_int(&n, NULL, "omen.maxFixFiles"), 0);
		assert_true(n == 2);
		/* a missing key leaves the default and is no error */
		n = 90;
		assert_int_equal(omen_config_int(&n, NULL, "omen.window"), 0);
		assert_true(n == 90);
	}
	unsetenv("GIT_CONFIG_PARAMETERS");
}

/* Issue 15, item 10: every setting has bounds, and the message says the
 * value as it was written. Each row here was accepted before the table. */
static void test_bounds(void **st)
{
	static const struct { const char *key, *val, *what; } bad[] = {
		{"omen.window", "-5", "a number of days from 0 to 100000"},
		{"omen.window", "100001", "a number of days from 0 to 100000"},
		{"omen.maxBlobBytes", "-1", "a size in bytes from 1 to 4096g"},
		{"omen.maxBlobBytes", "0", "a size in bytes from 1 to 4096g"},
		{"omen.memoryLimit", "-200m", "a size in bytes from 0 (no limit) to 4096g"},
		{"omen.memoryLimit", "4097g", "a size in bytes from 0 (no limit) to 4096g"},
		{"omen.threads", "-2", "a count of threads from 1 to 64"},
		{"omen.threads", "65", "a count of threads from 1 to 64"},
		{"omen.maxFixFiles", "-1", "a count from 0 (no limit) to 1000000000"},
		/* 10^14 ms: over three thousand years */
		{"omen.hookTimeout", "100000000000000", "a time in milliseconds from 1 to 3600000"},
		{"omen.hookTimeout", "0", "a time in milliseconds from 1 to 3600000"},
		{"omen.threshold", "1.0000001", "a probability from 0 to 1"},
		{"omen.threshold", "-0.5", "a probability from 0 to 1"},
		{"omen.threshold", "nan", "a probability from 0 to 1"},
		{"omen.threshold", "1e999", "a probability from 0 to 1"},
		{"omen.onRisk", "Block", "warn or block"},
		{"omen.onError", "deny", "allow or block"},
		{"omen.warnShare", "1.5", "a share between 0 and 1"},
		{"omen.warnShare", "0", "a share between 0 and 1"},
		{"omen.warnPrecision", "1", "a precision between 0 and 1"},
		{"omen.staleDays", "-3", "a number of days from 0 (off) to 100000"},
		{"omen.refreshBudget", "0", "a number of seconds from 1 to 604800"},
	};
	static const struct { const char *key, *val; int64_t want; } ok[] = {
		{"omen.window", "0", 0}, {"omen.window", "100000", 100000},
		{"omen.maxBlobBytes", "1", 1}, {"omen.maxBlobBytes", "4096g", 4096LL << 30},
		{"omen.memoryLimit", "0", 0}, {"omen.threads", "64", 64},
		{"omen.hookTimeout", "3600000", 3600000}, {"omen.hookTimeout", "1", 1},
	};
	char text[160], want[256];
	size_t i;
	(void)st;
	for (i = 0; i < sizeof(bad) / sizeof(*bad); i++) {
		const omen_setting *row = omen_setting_find(bad[i].key);
		int64_t n = 77;
		double d = 0.5;
		int c = 7, e;
		assert_non_null(row);
		snprintf(text, sizeof(text), "'%s'='%s'", bad[i].key, bad[i].val);
		env(text);
		if (row->kind == OMEN_SETTING_INT)
			e = omen_config_int(&n, NULL, bad[i].key);
		else if (row->kind == OMEN_SETTING_PROB || row->kind == OMEN_SETTING_SHARE)
			e = omen_config_double(&d, NULL, bad[i].key);
		else
			e = omen_config_choice(&c, NULL, bad[i].key);
		assert_int_equal(e, OMEN_EINVAL);
		assert_true(n == 77 && d == 0.5 && c == 7);  /* untouched on error */
		snprintf(want, sizeof(want), "bad config value '%s': '%s' is not %s", bad[i].key,
			bad[i].val, bad[i].what);
		assert_string_equal(omen_error_last(), want);
	}
	for (i = 0; i < sizeof(ok) / sizeof(*ok); i++) {
		int64_t n = -1;
		snprintf(text, sizeof(text), "'%s'='%s'", ok[i].key, ok[i].val);
		env(text);
		assert_int_equal(omen_config_int(&n, NULL, ok[i].key), 0);
		assert_true(n == ok[i].want);
	}
	{   /* -0 is 0 with a plus sign: "risky at 0.00", never "-0.00" */
		double d = 7;
		char shown[16];
		env("'omen.threshold'='-0'");
		assert_int_equal(omen_config_double(&d, NULL, "omen.threshold"), 0);
		snprintf(shown, sizeof(shown), "%.2f", d);
		assert_string_equal(shown, "0.00");
		env("'omen.threshold'='1'");
		assert_int_equal(omen_config_double(&d, NULL, "omen.threshold"), 0);
		assert_true(d == 1);
	}
	{   /* choices are the index into the row's words */
		int c = -1;
		env("'omen.onrisk'='block' 'omen.onError'='allow'");
		assert_int_equal(omen_config_choice(&c, NULL, "omen.onRisk"), 0);
		assert_int_equal(c, 1);
		assert_int_equal(omen_config_choice(&c, NULL, "omen.onError"), 0);
		assert_int_equal(c, 0);
	}
	{   /* `git -c omen.window` (no '='): git's "missing value" */
		int64_t n = 3;
		env("'omen.window'=");
		assert_int_equal(omen_config_int(&n, NULL, "omen.window"), OMEN_EINVAL);
		assert_string_equal(omen_error_last(), "bad config value 'omen.window': no value given "
			"(a number of days from 0 to 100000)");
	}
	unsetenv("GIT_CONFIG_PARAMETERS");
}

/* The table itself: one row per key, every row with its words, bounds in
 * order, choices where it has them; keys outside it and reads of the wrong
 * kind are refused (so no setting can be read without bounds). */
static void test_table(void **st)
{
	size_t n, i, j;
	const omen_setting *t = omen_settings_table(&n);
	int64_t v = 5;
	(void)st;
	assert_true(n >= 15);
	for (i = 0; i < n; i++) {
		assert_non_null(t[i].key);
		assert_non_null(t[i].what);
		assert_non_null(t[i].def);
		assert_true(t[i].min <= t[i].max);
		assert_true((t[i].kind == OMEN_SETTING_CHOICE) == (t[i].choices != NULL));
		assert_ptr_equal(omen_setting_find(t[i].key), &t[i]);
		for (j = 0; j < i; j++)
			assert_true(strcasecmp(t[i].key, t[j].key) != 0);
	}
	assert_ptr_equal(omen_setting_find("OMEN.HOOKTIMEOUT"), omen_setting_find("omen.hookTimeout"));
	assert_null(omen_setting_find("omen.nosuchthing"));
	env("'omen.nosuchthing'='1'");
	assert_int_equal(omen_config_int(&v, NULL, "omen.nosuchthing"), OMEN_EUSAGE);
	assert_int_equal(omen_config_int(&v, NULL, "omen.threshold"), OMEN_EUSAGE);
	assert_true(v == 5);
	unsetenv("GIT_CONFIG_PARAMETERS");
}

static void test_bool_values(void **st)
{
	static const omen_setting b = {"omen.test", OMEN_SETTING_BOOL, 0, 0, NULL, "a boolean", "false"};
	static const char *yes[] = {"true", "TRUE", "yes", "on", "1"};
	static const char *no[] = {"false", "No", "off", "0", ""};
	omen_setting_value v;
	size_t i;
	(void)st;
	for (i = 0; i < 5; i++) {
		assert_int_equal(omen_setting_parse(&v, &b, yes[i]), 0);
		assert_true(v.i == 1);
		assert_int_equal(omen_setting_parse(&v, &b, no[i]), 0);
		assert_true(v.i == 0);
	}
	/* `git -c omen.x` (no '='): true, as git config --bool says */
	assert_int_equal(omen_setting_parse(&v, &b, NULL), 0);
	assert_true(v.i == 1);
	/* any other integer is a boolean to git too, true unless 0
	 * (git_config_bool; checked with `git -c a.b=2 config --bool a.b`:
	 * true, -1: true, 0k: false, 1x: fatal) */
	assert_int_equal(omen_setting_parse(&v, &b, "2"), 0);
	assert_true(v.i == 1);
	assert_int_equal(omen_setting_parse(&v, &b, "-1"), 0);
	assert_true(v.i == 1);
	assert_int_equal(omen_setting_parse(&v, &b, "0k"), 0);
	assert_true(v.i == 0);
	assert_int_equal(omen_setting_parse(&v, &b, "1x"), OMEN_EINVAL);
	assert_int_equal(omen_setting_parse(&v, &b, "maybe"), OMEN_EINVAL);
	assert_string_equal(omen_error_last(), "bad config value 'omen.test': 'maybe' is not a boolean");
}

static void test_double_and_string(void **st)
{
	double d = -1;
	char *s = NULL;
	(void)st;
	env("'omen.threshold'='0.25'");
	assert_int_equal(omen_config_double(&d, NULL, "omen.threshold"), 0);
	assert_true(d == 0.25);
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
	env("'omen.model'='unbalanced");
	assert_int_equal(omen_config_string(&s, NULL, "omen.model"), OMEN_EINVAL);
	assert_null(s);
	env("'omen.onRisk'='blocks'");  /* a choice read as text is still checked */
	assert_int_equal(omen_config_string(&s, NULL, "omen.onRisk"), OMEN_EINVAL);
	assert_null(s);
	/* a git key outside omen. is read unchecked; an omen. key must be a row */
	env("'remote.origin.url'='/srv/r.git' 'omen.nosuch'='x'");
	assert_int_equal(omen_config_string(&s, NULL, "remote.origin.url"), 0);
	assert_string_equal(s, "/srv/r.git");
	free(s);
	s = NULL;
	assert_int_equal(omen_config_string(&s, NULL, "omen.nosuch"), OMEN_EUSAGE);
	assert_null(s);
	unsetenv("GIT_CONFIG_PARAMETERS");
}

/* GIT_CONFIG_COUNT/KEY_n/VALUE_n (git 2.31+): read before
 * GIT_CONFIG_PARAMETERS, so `git -c` wins; errors worded as git 2.39 words
 * them ("missing config key GIT_CONFIG_KEY_1", "bogus count in
 * GIT_CONFIG_COUNT"), checked with
 *   GIT_CONFIG_COUNT=2 GIT_CONFIG_KEY_0=omen.a GIT_CONFIG_VALUE_0=x git config omen.a */
static void test_count_env(void **st)
{
	char *s = NULL;
	(void)st;
	unsetenv("GIT_CONFIG_PARAMETERS");
	setenv("GIT_CONFIG_COUNT", "2", 1);
	setenv("GIT_CONFIG_KEY_0", "omen.onRisk", 1);
	setenv("GIT_CONFIG_VALUE_0", "block", 1);
	setenv("GIT_CONFIG_KEY_1", "omen.model", 1);
	setenv("GIT_CONFIG_VALUE_1", "/srv/m.omen", 1);
	assert_int_equal(omen_config_string(&s, NULL, "omen.onRisk"), 0);
	assert_string_equal(s, "block");
	assert_int_equal(omen_config_string(&s, NULL, "omen.model"), 0);
	assert_string_equal(s, "/srv/m.omen");
	env("'omen.model'='/from/dash-c'");
	assert_int_equal(omen_config_string(&s, NULL, "omen.model"), 0);
	assert_string_equal(s, "/from/dash-c");
	unsetenv("GIT_CONFIG_PARAMETERS");
	setenv("GIT_CONFIG_COUNT", "3", 1);
	assert_int_equal(omen_config_string(&s, NULL, "omen.model"), OMEN_EINVAL);
	assert_string_equal(omen_error_last(), "missing config key GIT_CONFIG_KEY_2");
	setenv("GIT_CONFIG_COUNT", "x", 1);
	assert_int_equal(omen_config_string(&s, NULL, "omen.model"), OMEN_EINVAL);
	assert_string_equal(omen_error_last(), "bogus count in GIT_CONFIG_COUNT: 'x'");
	setenv("GIT_CONFIG_COUNT", "1", 1);
	unsetenv("GIT_CONFIG_VALUE_0");
	assert_int_equal(omen_config_string(&s, NULL, "omen.model"), OMEN_EINVAL);
	assert_string_equal(omen_error_last(), "missing config value GIT_CONFIG_VALUE_0");
	free(s);
	unsetenv("GIT_CONFIG_COUNT");
	unsetenv("GIT_CONFIG_KEY_0");
	unsetenv("GIT_CONFIG_KEY_1");
	unsetenv("GIT_CONFIG_VALUE_1");
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
		env(text);
		assert_int_equal(omen_config_int(&v, NULL, "omen.window"), 0);
		assert_true(v == 3072);
		unsetenv("GIT_CONFIG_PARAMETERS");
	}
}

/* What `git config --get key` prints in dir (the reference), "" when
 * unset. */
static void git_get(char *out, size_t cap, const char *dir, const char *key)
{
	char cmd[512];
	snprintf(cmd, sizeof(cmd), "git -C '%s' config --get '%s' 2>/dev/null", dir, key);
	run(cmd, out, cap);
}

static void reopen(omen_repo **r, const char *dir)
{
	omen_repo_free(*r);
	*r = NULL;
	assert_int_equal(omen_repo_open(r, dir), 0);
}

/* Issue 15, item 4: every source of settings git 2.39 reads, one key per
 * source, each compared with what `git config --get` says in the same
 * environment: GIT_CONFIG_SYSTEM, GIT_CONFIG_GLOBAL, the repository's file,
 * an includeIf "gitdir:" include, GIT_CONFIG_COUNT and `git -c`
 * (GIT_CONFIG_PARAMETERS), and the order among them (system < global <
 * local < count < -c). Before, only the local file and -c were seen. */
static void test_repo_sources(void **st)
{
	static const char *keys[] = {"omen.model", "omen.labels", "omen.fixPattern", "omen.fixList",
		"omen.effortExclude", "core.hooksPath", "omen.onRisk"};
	static const char *want[] = {"/param/model", "/count/labels", "from-include", "/sys/list",
		"glob/*", "/param/hooks", "block"};
	char dir[] = "/tmp/omen-test-config-XXXXXX", cmd[2048], f[4][300], ref[512];
	char *saved_path = getenv("PATH") ? strdup(getenv("PATH")) : NULL;
	omen_repo *r = NULL;
	int64_t v = 0;
	size_t i;
	(void)st;
	if (system("git --version >/dev/null 2>&1") != 0) {
		skip();
		return;
	}
	assert_non_null(mkdtemp(dir));
	snprintf(f[0], sizeof(f[0]), "%s/system.cfg", dir);
	snprintf(f[1], sizeof(f[1]), "%s/global.cfg", dir);
	snprintf(f[2], sizeof(f[2]), "%s/inc.cfg", dir);
	snprintf(cmd, sizeof(cmd),
		"git init -q '%s/w' && git -C '%s/w' config omen.window 2k && "
		"git -C '%s/w' config omen.maxFixFiles oops && "
		"git -C '%s/w' config omen.model /local/model && "
		"git -C '%s/w' config 'includeIf.gitdir:%s/w/.git.path' '%s' && "
		"git config -f '%s' omen.fixPattern from-include && "
		"git config -f '%s' omen.fixList /sys/list && git config -f '%s' omen.model /sys/model && "
		"git config -f '%s' omen.effortExclude 'glob/*' && git config -f '%s' omen.model /global/model",
		dir, dir, dir, dir, dir, dir, f[2], f[2], f[0], f[0], f[1], f[1]);
	assert_int_equal(system(cmd), 0);
	snprintf(f[3], sizeof(f[3]), "%s/w", dir);
	unsetenv("GIT_CONFIG_NOSYSTEM");
	setenv("GIT_CONFIG_SYSTEM", f[0], 1);
	setenv("GIT_CONFIG_GLOBAL", f[1], 1);
	setenv("GIT_CONFIG_COUNT", "2", 1);
	setenv("GIT_CONFIG_KEY_0", "omen.labels", 1);
	setenv("GIT_CONFIG_VALUE_0", "/count/labels", 1);
	setenv("GIT_CONFIG_KEY_1", "omen.onRisk", 1);
	setenv("GIT_CONFIG_VALUE_1", "block", 1);
	env("'omen.model'='/param/model' 'core.hooksPath'='/param/hooks'");
	setenv("GIT_CONFIG", f[0], 1);  /* read by `git config` alone: must not count */

	reopen(&r, f[3]);
	for (i = 0; i < sizeof(keys) / sizeof(*keys); i++) {
		char *val = NULL;
		unsetenv("GIT_CONFIG");
		git_get(ref, sizeof(ref), f[3], keys[i]);
		assert_string_equal(ref, want[i]);   /* git itself says so */
		assert_int_equal(omen_config_string(&val, r, keys[i]), 0);
		assert_non_null(val);
		assert_string_equal(val, ref);
		free(val);
	}
	assert_int_equal(omen_config_int(&v, r, "omen.window"), 0);
	assert_true(v == 2048);
	assert_int_equal(omen_config_int(&v, r, "omen.maxFixFiles"), OMEN_EINVAL);
	assert_string_equal(omen_error_last(),
		"bad config value 'omen.maxFixFiles': 'oops' is not a count from 0 (no limit) to 1000000000");

	/* no git on PATH: libgit2's stack with the environment on top still
	 * gives the repository's file, the count variables and -c */
	setenv("PATH", "/nonexistent-omen-test", 1);
	reopen(&r, f[3]);
	{
		char *val = NULL;
		assert_int_equal(omen_config_string(&val, r, "omen.model"), 0);
		assert_string_equal(val, "/param/model");
		assert_int_equal(omen_config_string(&val, r, "omen.labels"), 0);
		assert_string_equal(val, "/count/labels");
		free(val);
		assert_int_equal(omen_config_int(&v, r, "omen.window"), 0);
		assert_true(v == 2048);
	}
	if (saved_path)
		setenv("PATH", saved_path, 1);
	free(saved_path);
	unsetenv("GIT_CONFIG_SYSTEM");
	unsetenv("GIT_CONFIG_GLOBAL");
	unsetenv("GIT_CONFIG_COUNT");
	unsetenv("GIT_CONFIG_KEY_0");
	unsetenv("GIT_CONFIG_VALUE_0");
	unsetenv("GIT_CONFIG_KEY_1");
	unsetenv("GIT_CONFIG_VALUE_1");
	unsetenv("GIT_CONFIG_PARAMETERS");

	/* a broken file that only git reads (libgit2 does not know
	 * GIT_CONFIG_GLOBAL): git's own message, first line, one line */
	snprintf(cmd, sizeof(cmd), "printf '[omen\\n' > '%s'", f[1]);
	assert_int_equal(system(cmd), 0);
	setenv("GIT_CONFIG_GLOBAL", f[1], 1);
	omen_repo_free(r);
	r = NULL;
	assert_int_equal(omen_repo_open(&r, f[3]), OMEN_EINVAL);
	assert_non_null(strstr(omen_error_last(), "cannot read the git configuration: bad config line 1"));
	assert_null(strchr(omen_error_last(), '\n'));
	unsetenv("GIT_CONFIG_GLOBAL");

	/* the label file: omen.labels when set and not empty, else the default */
	snprintf(cmd, sizeof(cmd), "git init -q '%s/l'", dir);
	assert_int_equal(system(cmd), 0);
	snprintf(f[3], sizeof(f[3]), "%s/l", dir);
	{
		char *p = NULL, lw[400];
		int configured = -1;
		snprintf(lw, sizeof(lw), "%s/.git/omen/labels.jsonl", f[3]);
		reopen(&r, f[3]);
		assert_int_equal(omen_labels_path(&p, r, &configured), 0);
		assert_string_equal(p, lw);
		assert_int_equal(configured, 0);
		free(p);
		env("'omen.labels'=''");
		reopen(&r, f[3]);
		assert_int_equal(omen_labels_path(&p, r, &configured), 0);
		assert_string_equal(p, lw);
		assert_int_equal(configured, 0);
		free(p);
		{   /* keys that are no setting: each once, known ones never */
			size_t pos = 0;
			const char *k;
			env("'omen.onRsik'='block' 'omen.window'='3' 'OMEN.onrsik'='x' 'core.bare'='false'");
			reopen(&r, f[3]);
			assert_non_null(k = omen_config_next_unknown(r, &pos));
			assert_int_equal(strcasecmp(k, "omen.onrsik"), 0);
			assert_null(omen_config_next_unknown(r, &pos));
		}
		env("'omen.labels'='/srv/l.jsonl'");
		reopen(&r, f[3]);
		assert_int_equal(omen_labels_path(&p, r, &configured), 0);
		assert_string_equal(p, "/srv/l.jsonl");
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
		cmocka_unit_test(test_bounds),
		cmocka_unit_test(test_table),
		cmocka_unit_test(test_bool_values),
		cmocka_unit_test(test_count_env),
		cmocka_unit_test(test_double_and_string),
		cmocka_unit_test(test_live_git),
		cmocka_unit_test(test_repo_sources),
	};
	int rc;
	git_libgit2_init();  /* as main() does for every command */
	rc = cmocka_run_group_tests_name("config", tests, NULL, NULL);
	git_libgit2_shutdown();
	return rc;
}
