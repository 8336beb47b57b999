/* Settings in git config section "omen" (and core.hooksPath), read the way
 * git reads them (issue 15): once per opened repository, through git's own
 * resolver (`git config --null --get-regexp`), so that every source git
 * honours counts: the files, includeIf, GIT_CONFIG_GLOBAL/SYSTEM/NOSYSTEM,
 * GIT_CONFIG_COUNT/KEY_n/VALUE_n and `git -c` (GIT_CONFIG_PARAMETERS).
 * Without a runnable git, libgit2's config stack with the two environment
 * sources on top is the fallback. Every setting has its kind and bounds in
 * one table below; see DEVELOPERS.md, "Settings". */
#include <ctype.h>
#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include "omen/error.h"
#include "omen/history.h"
#include "internal.h"

/* One shell-quoted word as git's sq_quote writes it: 'quoted' segments and
 * backslash escapes, ended by whitespace, end of text, or (when stop_eq) an
 * unquoted '='. Returns the position after the word, NULL on bad quoting. */
static const char *sq_word(omen_buf *w, const char *p, int stop_eq, int *hit_eq)
{
	*hit_eq = 0;
	omen_buf_clear(w);
	while (*p && !isspace((unsigned char)*p)) {
		if (*p == '\'') {
			const char *q = strchr(p + 1, '\'');
			if (!q || omen_buf_put(w, p + 1, (size_t)(q - p - 1)))
				return NULL;
			p = q + 1;
		} else if (*p == '\\') {
			if (!p[1] || omen_buf_put(w, p + 1, 1))
				return NULL;
			p += 2;
		} else if (*p == '=' && stop_eq) {
			*hit_eq = 1;
			p++;
			break;  /* an empty key ("=x") still yields "" below, never NULL */
		} else {
			if (omen_buf_put(w, p, 1))
				return NULL;
			p++;
		}
	}
	if (!w->ptr && omen_buf_grow(w, 0))
		return NULL;
	return p;
}

int omen_config_parse_params(const char *text,
	int (*cb)(const char *key, const char *val, void *payload), void *payload)
{
	omen_buf k = OMEN_BUF_INIT, v = OMEN_BUF_INIT;
	const char *p = text;
	int e = 0, eq;
	while (p && *p) {
		while (isspace((unsigned char)*p))
			p++;
		if (!*p)
			break;
		if (!(p = sq_word(&k, p, 1, &eq)))
			break;
		if (eq && (!*p || isspace((unsigned char)*p))) {
			/* 'key'= alone is how git 2.31+ writes `git -c key` (no
			 * value: boolean true), unlike 'key'='' (empty string) */
			e = cb(k.ptr, NULL, payload);
		} else if (eq) {  /* 'key'='value' (git 2.31 and later) */
			if (!(p = sq_word(&v, p, 0, &eq)))
				break;
			e = cb(k.ptr, v.ptr, payload);
		} else {   /* 'key=value' or 'key' alone (boolean true) */
			char *sep = strchr(k.ptr, '=');
			if (sep)
				*sep = '\0';
			e = cb(k.ptr, sep ? sep + 1 : NULL, payload);
		}
		if (e)
			break;
	}
	omen_buf_free(&k);
	omen_buf_free(&v);
	if (!p)
		return omen_error_set(OMEN_EINVAL, "bad GIT_CONFIG_PARAMETERS: unbalanced quoting");
	return e;
}

/* ---- the settings table ------------------------------------------------ */
static const char *const on_risk_choices[] = {"warn", "block", NULL};
static const char *const on_error_choices[] = {"allow", "block", NULL};
static const char *const missing_blobs_choices[] = {"error", "skip", "fetch", NULL};

#define SIZE_MAX_G (4096LL * 1024 * 1024 * 1024)  /* 4096g */
#define STR_(x) #x
#define STR(x) STR_(x)

static const omen_setting settings_table[] = {
	{"omen.model", OMEN_SETTING_TEXT, 0, 0, NULL, "a path",
		"$GIT_DIR/omen/model.omen"},
	{"omen.labels", OMEN_SETTING_TEXT, 0, 0, NULL, "a path",
		"$GIT_DIR/omen/labels.jsonl"},
	{"omen.baseModel", OMEN_SETTING_TEXT, 0, 0, NULL, "a path", "none (train from scratch)"},
	{"omen.fixPattern", OMEN_SETTING_TEXT, 0, 0, NULL, "a regular expression",
		"the built-in fix words"},
	{"omen.fixList", OMEN_SETTING_TEXT, 0, 0, NULL, "a path", "none"},
	{"omen.window", OMEN_SETTING_INT, 0, OMEN_WINDOW_MAX_DAYS, NULL,
		"a number of days from 0 to " STR(OMEN_WINDOW_MAX_DAYS), "90"},
	{"omen.maxFixFiles", OMEN_SETTING_INT, 0, 1000000000, NULL,
		"a count from 0 (no limit) to 1000000000", "50"},
	/* the fix and tracing rules of issue 10 (src/label/run.c read_rule_config) */
	{"omen.horizon", OMEN_SETTING_INT, 0, OMEN_WINDOW_MAX_DAYS, NULL,
		"a number of days from 0 (no horizon) to " STR(OMEN_WINDOW_MAX_DAYS),
		"365 on a history of 5 years or more, else none"},
	{"omen.cosmeticPattern", OMEN_SETTING_TEXT, 0, 0, NULL, "a regular expression (empty: rule off)",
		"the built-in cosmetic words"},
	{"omen.nonCodePaths", OMEN_SETTING_TEXT, 0, 0, NULL, "a list of globs (empty: rule off)",
		"docs, tests, build and CI configuration, generated and vendored paths"},
	{"omen.closingRefs", OMEN_SETTING_BOOL, 0, 0, NULL, "true or false", "false"},
	{"omen.wholeMessage", OMEN_SETTING_BOOL, 0, 0, NULL, "true or false", "false"},
	{"omen.featureSubjects", OMEN_SETTING_BOOL, 0, 0, NULL, "true or false", "false"},
	{"omen.insertionContext", OMEN_SETTING_BOOL, 0, 0, NULL, "true or false", "true"},
	{"omen.namedDecides", OMEN_SETTING_BOOL, 0, 0, NULL, "true or false", "true"},
	{"omen.minLineShare", OMEN_SETTING_INT, 0, 100, NULL, "a percentage from 0 (off) to 100", "25"},
	{"omen.threshold", OMEN_SETTING_PROB, 0, 0, NULL, "a probability from 0 to 1",
		"the model's own"},
	{"omen.warnShare", OMEN_SETTING_SHARE, 0, 0, NULL, "a share between 0 and 1", "0.1"},
	{"omen.warnPrecision", OMEN_SETTING_SHARE, 0, 0, NULL, "a precision between 0 and 1",
		"unset (the share decides)"},
	{"omen.staleDays", OMEN_SETTING_INT, 0, OMEN_WINDOW_MAX_DAYS, NULL,
		"a number of days from 0 (off) to " STR(OMEN_WINDOW_MAX_DAYS), "90"},
	{"omen.staleCommits", OMEN_SETTING_INT, 0, 1000000000, NULL,
		"a count from 0 (off) to 1000000000", "1000"},
	{"omen.driftCommits", OMEN_SETTING_INT, 1, 100000, NULL, "a count from 1 to 100000", "300"},
	{"omen.refreshBudget", OMEN_SETTING_INT, 1, 7 * 86400, NULL,
		"a number of seconds from 1 to 604800", "3600"},
	{"omen.refreshMinLabels", OMEN_SETTING_INT, 1, 100000000, NULL,
		"a count from 1 to 100000000", "50"},
	{"omen.onRisk", OMEN_SETTING_CHOICE, 0, 0, on_risk_choices, "warn or block", "warn"},
	{"omen.onError", OMEN_SETTING_CHOICE, 0, 0, on_error_choices, "allow or block", "allow"},
	{"omen.hookTimeout", OMEN_SETTING_INT, 1, OMEN_HOOK_TIMEOUT_MAX_MS, NULL,
		"a time in milliseconds from 1 to " STR(OMEN_HOOK_TIMEOUT_MAX_MS), "3000"},
	{"omen.maxBlobBytes", OMEN_SETTING_INT, 1, SIZE_MAX_G, NULL,
		"a size in bytes from 1 to 4096g", "50m"},
	{"omen.memoryLimit", OMEN_SETTING_INT, 0, SIZE_MAX_G, NULL,
		"a size in bytes from 0 (no limit) to 4096g", "no limit"},
	{"omen.threads", OMEN_SETTING_INT, 1, OMEN_THREADS_MAX, NULL,
		"a count of threads from 1 to " STR(OMEN_THREADS_MAX), "the processors online"},
	{"omen.effortExclude", OMEN_SETTING_TEXT, 0, 0, NULL, "a list of globs",
		"common vendored and generated paths"},
	{"omen.missingBlobs", OMEN_SETTING_CHOICE, 0, 0, missing_blobs_choices,
		"error, skip or fetch", "fetch in a partial clone, else error"},
	{"core.hooksPath", OMEN_SETTING_TEXT, 0, 0, NULL, "a path", "$GIT_DIR/hooks"},
};

#define NSETTINGS (sizeof(settings_table) / sizeof(*settings_table))

const omen_setting *omen_settings_table(size_t *n)
{
	*n = NSETTINGS;
	return settings_table;
}

const omen_setting *omen_setting_find(const char *key)
{
	size_t i;
	for (i = 0; key && i < NSETTINGS; i++)
		if (!strcasecmp(settings_table[i].key, key))
			return &settings_table[i];
	return NULL;
}

static int bad_value(const omen_setting *s, const char *text)
{
	if (!text)  /* `git -c omen.window` with no '=': git calls it a missing value */
		return omen_error_set(OMEN_EINVAL, "bad config value '%s': no value given (%s)",
			s->key, s->what);
	return omen_error_set(OMEN_EINVAL, "bad config value '%s': '%s' is not %s", s->key, text,
		s->what);
}

/* git's integer: decimal, an optional k, m or g (1024-based), no blanks
 * after (git_parse_signed in git's config.c) */
static int parse_int(int64_t *out, const char *v)
{
	char *end;
	long long n, mul = 1;
	errno = 0;
	n = strtoll(v, &end, 10);
	if (end == v || errno)
		return -1;
	switch (tolower((unsigned char)*end)) {
	case 'k': mul = 1024; end++; break;
	case 'm': mul = 1024 * 1024; end++; break;
	case 'g': mul = 1024LL * 1024 * 1024; end++; break;
	}
	if (*end || n > LLONG_MAX / mul || n < LLONG_MIN / mul)
		return -1;
	*out = n * mul;
	return 0;
}

int omen_setting_parse(omen_setting_value *out, const omen_setting *s, const char *text)
{
	static const char *yes[] = {"true", "yes", "on", "1"}, *no[] = {"false", "no", "off", "0", ""};
	size_t i;
	memset(out, 0, sizeof(*out));
	out->text = text;
	switch (s->kind) {
	case OMEN_SETTING_TEXT:
		if (!text)
			return bad_value(s, text);
		return 0;
	case OMEN_SETTING_INT:
		if (!text || parse_int(&out->i, text) || out->i < s->min || out->i > s->max)
			return bad_value(s, text);
		return 0;
	case OMEN_SETTING_PROB:
	case OMEN_SETTING_SHARE: {
		char *end;
		double d;
		if (!text)
			return bad_value(s, text);
		errno = 0;
		d = strtod(text, &end);
		if (end == text || *end || errno || !(d >= 0 && d <= 1) ||
		    (s->kind == OMEN_SETTING_SHARE && !(d > 0 && d < 1)))
			return bad_value(s, text);
		out->d = d == 0 ? 0.0 : d;  /* -0 is 0: never "-0.00" on screen */
		return 0;
	}
	case OMEN_SETTING_CHOICE:
		for (i = 0; text && s->choices && s->choices[i]; i++)
			if (!strcmp(text, s->choices[i])) {
				out->choice = (int)i;
				return 0;
			}
		return bad_value(s, text);
	case OMEN_SETTING_BOOL:
		if (!text) {  /* `git -c k` alone is true, as git config --bool says */
			out->i = 1;
			return 0;
		}
		for (i = 0; i < sizeof(yes) / sizeof(*yes); i++)
			if (!strcasecmp(text, yes[i])) {
				out->i = 1;
				return 0;
			}
		for (i = 0; i < sizeof(no) / sizeof(*no); i++)
			if (!strcasecmp(text, no[i]))
				return 0;
		/* else an integer, true unless 0, as git_config_bool reads it */
		if (!parse_int(&out->i, text)) {
			out->i = out->i != 0;
			return 0;
		}
		return bad_value(s, text);
	}
	return omen_error_set(OMEN_EUSAGE, "setting '%s' has no kind", s->key);
}

/* ---- the snapshot of what git sees ---------------------------------------- */
static int snap_add(hist_settings *s, const char *key, size_t klen, const char *val, size_t vlen)
{
	hist_setting_entry *e;
	if (OMEN_ARRAY_RESERVE(s->v, s->cap, s->n + 1))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	e = &s->v[s->n];
	e->val = NULL;
	if (!(e->key = strndup(key, klen)) || (val && !(e->val = strndup(val, vlen)))) {
		free(e->key);
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	}
	s->n++;
	return 0;
}

static int snap_add_cb(const char *key, const char *val, void *payload)
{
	return snap_add(payload, key, strlen(key), val, val ? strlen(val) : 0);
}

void hist_settings_free(hist_settings *s)
{
	size_t i;
	for (i = 0; i < s->n; i++) {
		free(s->v[i].key);
		free(s->v[i].val);
	}
	free(s->v);
	memset(s, 0, sizeof(*s));
}

/* GIT_CONFIG_COUNT with GIT_CONFIG_KEY_n / GIT_CONFIG_VALUE_n, then
 * GIT_CONFIG_PARAMETERS: git's order (git_config_from_parameters), so a
 * `git -c` wins over the count variables. Errors as git words them. */
int hist_settings_from_env(int (*cb)(const char *key, const char *val, void *payload), void *payload)
{
	const char *env = getenv("GIT_CONFIG_COUNT");
	int e;
	if (env && *env) {
		char *end, name[48];
		long n, i;
		errno = 0;
		n = strtol(env, &end, 10);
		if (*end || errno || n < 0 || n > INT_MAX)
			return omen_error_set(OMEN_EINVAL, "bogus count in GIT_CONFIG_COUNT: '%s'", env);
		for (i = 0; i < n; i++) {
			const char *k, *v;
			snprintf(name, sizeof(name), "GIT_CONFIG_KEY_%ld", i);
			if (!(k = getenv(name)) || !*k)
				return omen_error_set(OMEN_EINVAL, "missing config key %s", name);
			snprintf(name, sizeof(name), "GIT_CONFIG_VALUE_%ld", i);
			if (!(v = getenv(name)))
				return omen_error_set(OMEN_EINVAL, "missing config value %s", name);
			if ((e = cb(k, v, payload)))
				return e;
		}
	}
	env = getenv("GIT_CONFIG_PARAMETERS");
	if (env && *env)
		return omen_config_parse_params(env, cb, payload);
	return 0;
}

/* `git config --null --get-regexp` output: "key\nvalue\0" per entry, or
 * "key\0" for a key without '=' (git -c k); read through the cursor */
static int snap_parse_git(hist_settings *s, const omen_buf *out)
{
	omen_cursor c;
	omen_cursor_init(&c, out->ptr, out->len);
	while (c.n) {
		const unsigned char *z = memchr(c.p, '\0', c.n);
		const char *rec, *nl;
		size_t k;
		int e;
		if (!z)
			return omen_error_set(OMEN_ECORRUPT, "bad output from 'git config': no NUL after an entry");
		k = (size_t)(z - c.p);
		if (omen_cursor_bytes(&c, (const void **)&rec, k + 1))
			return omen_error_set(OMEN_ECORRUPT, "bad output from 'git config'");
		nl = memchr(rec, '\n', k);
		if ((nl ? (size_t)(nl - rec) : k) == 0)
			return omen_error_set(OMEN_ECORRUPT, "bad output from 'git config': empty key");
		if (nl)
			e = snap_add(s, rec, (size_t)(nl - rec), nl + 1, k - (size_t)(nl - rec) - 1);
		else
			e = snap_add(s, rec, k, NULL, 0);
		if (e)
			return e;
	}
	return 0;
}

/* The environment for the child: ours without GIT_CONFIG, which only
 * `git config` itself reads (as the one file to use) and no other git
 * command does. NULL when out of memory. */
static char **env_without_git_config(void)
{
	extern char **environ;
	size_t n = 0, k = 0;
	char **v;
	while (environ[n])
		n++;
	if (!(v = calloc(n + 1, sizeof(*v))))
		return NULL;
	for (n = 0; environ[n]; n++)
		if (strncmp(environ[n], "GIT_CONFIG=", 11))
			v[k++] = environ[n];
	return v;
}

static int snap_load_git(hist_settings *s, const char *gitdir, int *ran)
{
	omen_buf arg = OMEN_BUF_INIT, out = OMEN_BUF_INIT, err = OMEN_BUF_INIT;
	char **envp = NULL, line[256];
	const char *argv[7];
	int e, st = -1;
	*ran = 0;
	if ((e = omen_buf_printf(&arg, "--git-dir=%s", gitdir)))
		goto out;
	if (!(envp = env_without_git_config())) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	argv[0] = "git";
	argv[1] = arg.ptr;
	argv[2] = "config";
	argv[3] = "--null";
	argv[4] = "--get-regexp";
	argv[5] = "^omen\\.|^core\\.hookspath$";
	argv[6] = NULL;
	e = hist_git_run_env(&st, &out, &err, argv, envp, HIST_SETTINGS_MAX_BYTES, -1);
	if (e == OMEN_ENOTFOUND) {
		omen_error_clear();
		e = 0;
		goto out;   /* no git: the caller falls back to libgit2 */
	}
	if (e)
		goto out;
	*ran = 1;
	if (st == 1 && !out.len)
		goto out;   /* no key matched */
	if (st != 0) {
		hist_git_first_line(line, sizeof(line), &err);
		e = omen_error_set(OMEN_EINVAL, "cannot read the git configuration: %s",
			*line ? line : "'git config' failed");
		goto out;
	}
	e = snap_parse_git(s, &out);
out:
	free(envp);
	omen_buf_free(&arg);
	omen_buf_free(&out);
	omen_buf_free(&err);
	return e;
}

/* No git to ask: every table key from libgit2's stack (local, global, XDG,
 * system; the value git_config_get_string_buf picks), then the two
 * environment sources, which libgit2 does not read. */
static int snap_load_libgit2(hist_settings *s, git_repository *repo)
{
	git_config *cfg = NULL;
	size_t i;
	int e = 0;
	if (git_repository_config_snapshot(&cfg, repo) == 0) {
		for (i = 0; i < NSETTINGS && !e; i++) {
			git_buf gb = {0};
			if (git_config_get_string_buf(&gb, cfg, settings_table[i].key) == 0)
				e = snap_add(s, settings_table[i].key, strlen(settings_table[i].key),
					gb.ptr ? gb.ptr : "", gb.ptr ? strlen(gb.ptr) : 0);
			git_buf_dispose(&gb);
		}
		git_config_free(cfg);
	}
	git_error_clear();
	if (!e)
		e = hist_settings_from_env(snap_add_cb, s);
	return e;
}

int hist_settings_load(hist_settings *s, git_repository *repo)
{
	int e, ran = 0;
	memset(s, 0, sizeof(*s));
	e = snap_load_git(s, git_repository_path(repo), &ran);
	if (!e && !ran)
		e = snap_load_libgit2(s, repo);
	if (e) {
		hist_settings_free(s);
		return e;
	}
	s->from_git = ran;
	return 0;
}

const char *omen_config_next_unknown(omen_repo *r, size_t *pos)
{
	const hist_settings *s = hist_repo_settings(r);
	while (*pos < s->n) {
		const char *k = s->v[(*pos)++].key;
		size_t j;
		if (strncasecmp(k, "omen.", 5) || omen_setting_find(k))
			continue;
		for (j = 0; j + 1 < *pos; j++)   /* each name once */
			if (!strcasecmp(s->v[j].key, k))
				break;
		if (j + 1 == *pos)
			return k;
	}
	return NULL;
}

/* ---- typed reads ----------------------------------------------------------- */
struct lookup {
	const char *key;
	char *val;      /* last match wins, as in git */
	int found, has_val;
};

static int lookup_cb(const char *key, const char *val, void *payload)
{
	struct lookup *l = payload;
	if (strcasecmp(key, l->key))
		return 0;
	free(l->val);
	l->val = NULL;
	if (val && !(l->val = strdup(val)))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	l->found = 1;
	l->has_val = val != NULL;
	return 0;
}

/* Raw value of key: 1 when found (*out malloc'd, NULL for a key without a
 * value), 0 when not, < 0 on error. With a repository, its snapshot; without
 * one, the environment only (what `git -c` and the count variables set). */
static int config_raw(char **out, int *has_val, omen_repo *r, const char *key)
{
	struct lookup l = {key, NULL, 0, 0};
	*out = NULL;
	*has_val = 0;
	if (r) {
		const hist_settings *s = hist_repo_settings(r);
		size_t i = s->n;
		while (i-- > 0) {
			if (strcasecmp(s->v[i].key, key))
				continue;
			if (s->v[i].val && !(*out = strdup(s->v[i].val)))
				return omen_error_set(OMEN_ENOMEM, "out of memory");
			*has_val = s->v[i].val != NULL;
			return 1;
		}
		return 0;
	}
	if (hist_settings_from_env(lookup_cb, &l) < 0) {
		free(l.val);
		return omen_error_code();
	}
	*out = l.val;
	*has_val = l.has_val;
	return l.found;
}

/* Reads key and checks it against its row: 1 with *val filled (its text
 * malloc'd in *text), 0 when not set, < 0 on a bad value or a key that is
 * not in the table or not of that kind. */
static int config_get(omen_setting_value *val, char **text, omen_repo *r, const char *key,
	omen_setting_kind kind)
{
	const omen_setting *s = omen_setting_find(key);
	int e, has;
	*text = NULL;
	if (!s)
		return omen_error_set(OMEN_EUSAGE, "no setting '%s' in the settings table", key);
	if (s->kind != kind)
		return omen_error_set(OMEN_EUSAGE, "setting '%s' is read as another kind", key);
	if ((e = config_raw(text, &has, r, key)) <= 0)
		return e;
	if ((e = omen_setting_parse(val, s, has ? *text : NULL))) {
		free(*text);
		*text = NULL;
		return e;
	}
	return 1;
}

/* A git key that is not an omen setting (remote.<name>.url,
 * extensions.partialClone): the environment's pairs, then libgit2's stack,
 * as every key was read before the settings table. */
static int config_git_other(char **out, omen_repo *r, const char *key)
{
	struct lookup l = {key, NULL, 0, 0};
	git_config *cfg = NULL;
	git_buf gb = {0};
	int e;
	if (hist_settings_from_env(lookup_cb, &l) < 0) {
		free(l.val);
		return omen_error_code();
	}
	if (l.found) {
		if (!l.has_val && !(l.val = strdup("true")))
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		free(*out);
		*out = l.val;
		return 0;
	}
	if (!r || git_repository_config_snapshot(&cfg, omen_repo_git(r))) {
		git_error_clear();
		return 0;
	}
	e = git_config_get_string_buf(&gb, cfg, key);
	git_config_free(cfg);
	git_error_clear();
	if (!e) {
		char *v = strdup(gb.ptr ? gb.ptr : "");
		if (!v) {
			git_buf_dispose(&gb);
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		}
		free(*out);
		*out = v;
	}
	git_buf_dispose(&gb);
	return 0;
}

int omen_config_string(char **out, omen_repo *r, const char *key)
{
	const omen_setting *s = omen_setting_find(key);
	omen_setting_value v;
	char *t;
	int e;
	if (!s && strncasecmp(key, "omen.", 5))
		return config_git_other(out, r, key);
	e = config_get(&v, &t, r, key, s && s->kind == OMEN_SETTING_CHOICE ?
		OMEN_SETTING_CHOICE : OMEN_SETTING_TEXT);
	if (e <= 0)
		return e;
	free(*out);
	*out = t;
	return 0;
}

int omen_config_choice(int *out, omen_repo *r, const char *key)
{
	omen_setting_value v;
	char *t;
	int e = config_get(&v, &t, r, key, OMEN_SETTING_CHOICE);
	if (e <= 0)
		return e;
	free(t);
	*out = v.choice;
	return 0;
}

int omen_config_int(int64_t *out, omen_repo *r, const char *key)
{
	omen_setting_value v;
	char *t;
	int e = config_get(&v, &t, r, key, OMEN_SETTING_INT);
	if (e <= 0)
		return e;
	free(t);
	*out = v.i;
	return 0;
}

int omen_config_double(double *out, omen_repo *r, const char *key)
{
	const omen_setting *row = omen_setting_find(key);
	omen_setting_value v;
	char *t;
	int e = config_get(&v, &t, r, key, row && row->kind == OMEN_SETTING_SHARE ?
		OMEN_SETTING_SHARE : OMEN_SETTING_PROB);
	if (e <= 0)
		return e;
	free(t);
	*out = v.d;
	return 0;
}

int omen_config_bool(int *out, omen_repo *r, const char *key)
{
	omen_setting_value v;
	char *t;
	int e = config_get(&v, &t, r, key, OMEN_SETTING_BOOL);
	if (e <= 0)
		return e;
	free(t);
	*out = (int)v.i;
	return 0;
}
