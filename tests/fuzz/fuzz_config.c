/* Fuzz target: GIT_CONFIG_PARAMETERS parsing (omen_config_parse_params) and
 * the typed value readers (omen_config_int/double/choice/string) on arbitrary
 * bytes, and every row of the settings table on the bytes as one value: a
 * value accepted is within the row's bounds (a probability in [0, 1] and
 * never -0, a choice one of its words).
 * Oracle: every pair the parser returns, quoted again the way git's
 * sq_quote_buf() writes it ('k'='v', with ' and ! escaped as '\'' and '\!',
 * a value-less key as 'k'=), parses back to the same pairs (git's own
 * reader, config.c parse_config_env_list, accepts that text). Errors must
 * carry a message. Corpus: fixtures/corpora/config/. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/history.h"

struct pairs {
	char **k, **v;  /* v[i] NULL = value-less key */
	size_t n, cap;
	int oom;
};

static char *dup_or_null(const char *s)
{
	return s ? strdup(s) : NULL;
}

static int collect(const char *key, const char *val, void *payload)
{
	struct pairs *p = payload;
	if (!key)
		abort();  /* the contract: key is never NULL */
	if (p->n == p->cap) {
		size_t c = p->cap ? p->cap * 2 : 8;
		char **k = realloc(p->k, c * sizeof(*k)), **v;
		if (!k) { p->oom = 1; return -1; }
		p->k = k;
		if (!(v = realloc(p->v, c * sizeof(*v)))) { p->oom = 1; return -1; }
		p->v = v;
		p->cap = c;
	}
	p->k[p->n] = strdup(key);
	p->v[p->n] = dup_or_null(val);
	p->n++;
	return 0;
}

static void pairs_free(struct pairs *p)
{
	size_t i;
	for (i = 0; i < p->n; i++) {
		free(p->k[i]);
		free(p->v[i]);
	}
	free(p->k);
	free(p->v);
	memset(p, 0, sizeof(*p));
}

/* git's sq_quote_buf(): '...' with ' -> '\'' and ! -> '\!' */
static void sq_quote(omen_buf *b, const char *s)
{
	omen_buf_put(b, "'", 1);
	for (; *s; s++) {
		if (*s == '\'' || *s == '!') {
			omen_buf_put(b, "'\\", 2);
			omen_buf_put(b, s, 1);
			omen_buf_put(b, "'", 1);
		} else {
			omen_buf_put(b, s, 1);
		}
	}
	omen_buf_put(b, "'", 1);
}

static void check_roundtrip(const struct pairs *a)
{
	omen_buf t = OMEN_BUF_INIT;
	struct pairs b = {0};
	size_t i;
	for (i = 0; i < a->n; i++) {
		if (i)
			omen_buf_put(&t, " ", 1);
		sq_quote(&t, a->k[i]);
		omen_buf_put(&t, "=", 1);
		if (a->v[i])
			sq_quote(&t, a->v[i]);
	}
	if (omen_buf_grow(&t, 0))
		abort();
	if (omen_config_parse_params(t.ptr, collect, &b) != 0 || b.oom)
		abort();  /* git-quoted text must always parse */
	if (b.n != a->n)
		abort();
	for (i = 0; i < a->n; i++) {
		if (strcmp(a->k[i], b.k[i]))
			abort();
		if (!a->v[i] != !b.v[i] || (a->v[i] && strcmp(a->v[i], b.v[i])))
			abort();
	}
	pairs_free(&b);
	omen_buf_free(&t);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	char *text = malloc(size + 1), *envs;
	struct pairs p = {0};
	int64_t iv = -7;
	int bv = -7;
	double dv = -7;
	int e;
	if (!text)
		return 0;
	memcpy(text, data, size);
	text[size] = '\0';

	omen_error_clear();
	e = omen_config_parse_params(text, collect, &p);
	if (e < 0 && !p.oom && !omen_error_last()[0])
		abort();  /* every error carries a message */
	if (e == 0 && !p.oom)
		check_roundtrip(&p);
	pairs_free(&p);

	/* The typed readers, with the bytes as the environment (no repository).
	 * On error the output keeps the caller's default. */
	/* putenv with our own block, removed again below: setenv would leak a
	 * copy per call in glibc and grow the fuzzer's memory */
	envs = malloc(size + sizeof("GIT_CONFIG_PARAMETERS="));
	if (!envs) {
		free(text);
		return 0;
	}
	memcpy(envs, "GIT_CONFIG_PARAMETERS=", sizeof("GIT_CONFIG_PARAMETERS=") - 1);
	memcpy(envs + sizeof("GIT_CONFIG_PARAMETERS=") - 1, text, size + 1);
	putenv(envs);
	if (omen_config_int(&iv, NULL, "omen.window") < 0 && iv != -7)
		abort();
	if (iv != -7 && (iv < 0 || iv > OMEN_WINDOW_MAX_DAYS))
		abort();
	if (omen_config_choice(&bv, NULL, "omen.onRisk") < 0 && bv != -7)
		abort();
	if (bv != -7 && bv != 0 && bv != 1)
		abort();
	if (omen_config_double(&dv, NULL, "omen.threshold") < 0 && dv != -7)
		abort();
	if (dv != -7 && (!(dv >= 0 && dv <= 1) || (dv == 0 && signbit(dv))))
		abort();
	{
		char *s = NULL;
		if (omen_config_string(&s, NULL, "omen.model") == 0)
			free(s);
	}
	{
		size_t nrows, i;
		const omen_setting *t = omen_settings_table(&nrows);
		for (i = 0; i < nrows; i++) {
			omen_setting_value v;
			omen_error_clear();
			if (omen_setting_parse(&v, &t[i], text) < 0) {
				if (!omen_error_last()[0])
					abort();
				continue;
			}
			if (t[i].kind == OMEN_SETTING_INT && (v.i < t[i].min || v.i > t[i].max))
				abort();
			if (t[i].kind == OMEN_SETTING_PROB && (!(v.d >= 0 && v.d <= 1) || signbit(v.d)))
				abort();
			if (t[i].kind == OMEN_SETTING_SHARE && !(v.d > 0 && v.d < 1))
				abort();
			if (t[i].kind == OMEN_SETTING_CHOICE && strcmp(t[i].choices[v.choice], text))
				abort();
		}
	}
	unsetenv("GIT_CONFIG_PARAMETERS");
	free(envs);
	free(text);
	return 0;
}
