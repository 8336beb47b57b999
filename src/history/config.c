/* Settings in git config section "omen". `git -c k=v` reaches us only as
 * GIT_CONFIG_PARAMETERS (libgit2 does not read it), so that is consulted
 * first, then the repository's config stack (local, global, system). */
#include <ctype.h>
#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include "omen/error.h"
#include "omen/history.h"

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

struct lookup {
	const char *key;
	char *val;      /* last match wins, as in git */
	int found, is_bool_true;
};

static int lookup_cb(const char *key, const char *val, void *payload)
{
	struct lookup *l = payload;
	if (strcasecmp(key, l->key))
		return 0;
	free(l->val);
	l->val = strdup(val ? val : "true");
	if (!l->val)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	l->found = 1;
	l->is_bool_true = val == NULL;
	return 0;
}

/* Raw value of key: *out malloc'd, 1 when found, 0 when not, < 0 error. */
static int config_raw(char **out, omen_repo *r, const char *key)
{
	struct lookup l = {key, NULL, 0, 0};
	const char *env = getenv("GIT_CONFIG_PARAMETERS");
	git_config *cfg = NULL;
	git_buf gb = {0};
	int e;
	*out = NULL;
	if (env && *env) {
		if ((e = omen_config_parse_params(env, lookup_cb, &l)) < 0) {
			free(l.val);
			return e;
		}
		if (l.found) {
			*out = l.val;
			return 1;
		}
	}
	if (!r)
		return 0;
	if (git_repository_config_snapshot(&cfg, omen_repo_git(r)))
		return 0;  /* no readable config: defaults apply */
	e = git_config_get_string_buf(&gb, cfg, key);
	git_config_free(cfg);
	if (e) {
		git_buf_dispose(&gb);
		return 0;
	}
	*out = strdup(gb.ptr ? gb.ptr : "");
	git_buf_dispose(&gb);
	if (!*out)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	return 1;
}

int omen_config_string(char **out, omen_repo *r, const char *key)
{
	char *v;
	int e = config_raw(&v, r, key);
	if (e <= 0)
		return e;
	free(*out);
	*out = v;
	return 0;
}

static int bad_value(const char *key, const char *val, const char *what)
{
	return omen_error_set(OMEN_EINVAL, "bad config value '%s': '%s' is not %s", key, val, what);
}

int omen_config_int(int64_t *out, omen_repo *r, const char *key)
{
	char *v, *end;
	long long n, mul = 1;
	int e = config_raw(&v, r, key);
	if (e <= 0)
		return e;
	errno = 0;
	n = strtoll(v, &end, 10);
	if (end == v || errno) {
		e = bad_value(key, v, "an integer");
		goto out;
	}
	switch (tolower((unsigned char)*end)) {
	case 'k': mul = 1024; end++; break;
	case 'm': mul = 1024 * 1024; end++; break;
	case 'g': mul = 1024LL * 1024 * 1024; end++; break;
	}
	if (*end || n > LLONG_MAX / mul || n < LLONG_MIN / mul) {
		e = bad_value(key, v, "an integer");
		goto out;
	}
	*out = n * mul;
	e = 0;
out:
	free(v);
	return e;
}

int omen_config_double(double *out, omen_repo *r, const char *key)
{
	char *v, *end;
	double d;
	int e = config_raw(&v, r, key);
	if (e <= 0)
		return e;
	errno = 0;
	d = strtod(v, &end);
	if (end == v || *end || errno || !isfinite(d))
		e = bad_value(key, v, "a number");
	else
		*out = d, e = 0;
	free(v);
	return e;
}

int omen_config_bool(int *out, omen_repo *r, const char *key)
{
	static const char *yes[] = {"true", "yes", "on", "1"}, *no[] = {"false", "no", "off", "0", ""};
	char *v;
	size_t i;
	int e = config_raw(&v, r, key);
	if (e <= 0)
		return e;
	e = bad_value(key, v, "a boolean");
	for (i = 0; i < sizeof(yes) / sizeof(*yes); i++)
		if (!strcasecmp(v, yes[i]))
			*out = 1, e = 0;
	for (i = 0; i < sizeof(no) / sizeof(*no); i++)
		if (!strcasecmp(v, no[i]))
			*out = 0, e = 0;
	if (e)
		omen_error_set(OMEN_EINVAL, "bad config value '%s': '%s' is not a boolean", key, v);
	free(v);
	return e;
}
