/* Fix-commit identification (DEVELOPERS.md "Labeller"): a message pattern, the
 * user's fix list (commit ids or issue ids, optionally with the issue's open
 * date), and explicit references to the repaired commit (Fixes:, revert
 * trailers). Keyword matching of fix messages follows Mockus & Votta (ICSM
 * 2000) and Sliwerski, Zimmermann & Zeller (MSR 2005).
 *
 * Decisions (documented in git-omen-label(1)):
 * - the default pattern matches fix words as whole words, case-insensitively:
 *   "prefix", "debugging", "default" and "fixup" do not match;
 * - an issue reference counts as a fix sign only after a closing word
 *   ("closes #12", "resolves GH-3", "fixes PROJ-9"): a bare "(#123)" is on
 *   every squash-merged pull request title, features included;
 * - "patch" is not a fix word (patch releases, "apply patch from").
 * Issue references (#123, GH-123, PROJ-123) are always extracted to match
 * the user's list of issue ids. */
#include <ctype.h>
#include <regex.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include "omen/error.h"
#include "omen/label.h"

const char omen_fix_default_pattern[] =
	"(^|[^[:alnum:]_])"
	"(fix(e[sd]|ing)?|bugs?|bugfix(es)?|hotfix(es)?|defects?|crash(e[sd]|ing)?|"
	"segfaults?|regressions?|leak(s|ed|ing)?|faults?|faulty|broken|"
	"(close[sd]?|resolve[sd]?)[[:space:]]+(#|gh-)[0-9]+)"
	"([^[:alnum:]_]|$)";

/* Upper-case tracker keys after a closing word, case-sensitive
 * ("Closes PROJ-12"); the case-insensitive pattern cannot tell PROJ-12 from
 * utf-8. */
static const char default_key_pattern[] =
	"(^|[^[:alnum:]_])([Cc]lose[sd]?|[Rr]esolve[sd]?)[[:space:]]+[A-Z][A-Z0-9]+-[0-9]+([^[:alnum:]_]|$)";

typedef struct {
	char *id;        /* commit hex prefix (lowercase) or normalised issue id */
	int64_t date;    /* issue open date, 0 = unknown */
	int is_commit;
} fix_entry;

struct omen_fixrules {
	regex_t re, key_re;
	int has_re, has_key_re;
	fix_entry *ents;     /* sorted by id */
	size_t nents, cap;
	unsigned char *hit;  /* per entry: matched a commit */
};

int omen_fixrules_new(omen_fixrules **out, const char *pattern)
{
	omen_fixrules *fr;
	int e;
	*out = NULL;
	if (!(fr = calloc(1, sizeof(*fr))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	e = regcomp(&fr->re, pattern ? pattern : omen_fix_default_pattern,
		REG_EXTENDED | REG_ICASE | REG_NOSUB);
	if (e) {
		char msg[256];
		regerror(e, &fr->re, msg, sizeof(msg));
		free(fr);
		return omen_error_set(OMEN_EINVAL, "bad fix pattern '%s': %s", pattern ? pattern : "", msg);
	}
	fr->has_re = 1;
	if (!pattern) {
		if (regcomp(&fr->key_re, default_key_pattern, REG_EXTENDED | REG_NOSUB)) {
			omen_fixrules_free(fr);
			return omen_error_set(OMEN_ERROR, "cannot compile the default issue-key pattern");
		}
		fr->has_key_re = 1;
	}
	*out = fr;
	return 0;
}

void omen_fixrules_free(omen_fixrules *fr)
{
	size_t i;
	if (!fr)
		return;
	if (fr->has_re)
		regfree(&fr->re);
	if (fr->has_key_re)
		regfree(&fr->key_re);
	for (i = 0; i < fr->nents; i++)
		free(fr->ents[i].id);
	free(fr->ents);
	free(fr->hit);
	free(fr);
}

static int is_hex(int ch) { return isxdigit((unsigned char)ch) != 0; }
static int is_word(int ch) { return isalnum((unsigned char)ch) || ch == '_'; }

/* Normalises an issue id: "#12" and "gh-12" -> "#12", keys upper-cased. */
static void norm_issue(char *dst, size_t cap, const char *s, size_t n)
{
	size_t i, k = 0;
	if (n > 3 && (s[0] == 'g' || s[0] == 'G') && (s[1] == 'h' || s[1] == 'H') && s[2] == '-') {
		s += 3;
		n -= 3;
		if (k + 1 < cap)
			dst[k++] = '#';
	}
	for (i = 0; i < n && k + 1 < cap; i++)
		dst[k++] = (char)toupper((unsigned char)s[i]);
	dst[k] = '\0';
}

/* "YYYY-MM-DD" with optional "THH:MM[:SS]" and "Z": seconds UTC, -1 if bad. */
static int64_t parse_date(const char *s, size_t n)
{
	struct tm tm;
	char buf[32];
	int y, mo, d, h = 0, mi = 0, sec = 0, k;
	if (n >= sizeof(buf))
		return -1;
	memcpy(buf, s, n);
	buf[n] = '\0';
	k = sscanf(buf, "%4d-%2d-%2d%*[T ]%2d:%2d:%2d", &y, &mo, &d, &h, &mi, &sec);
	if (k < 3 || y < 1970 || mo < 1 || mo > 12 || d < 1 || d > 31)
		return -1;
	memset(&tm, 0, sizeof(tm));
	tm.tm_year = y - 1900;
	tm.tm_mon = mo - 1;
	tm.tm_mday = d;
	tm.tm_hour = h;
	tm.tm_min = mi;
	tm.tm_sec = sec;
	return (int64_t)timegm(&tm);
}

static int ent_cmp(const void *a, const void *b)
{
	return strcmp(((const fix_entry *)a)->id, ((const fix_entry *)b)->id);
}

int omen_fixrules_load_list(omen_fixrules *fr, const char *path)
{
	omen_buf data = OMEN_BUF_INIT;
	omen_cursor cur;
	const char *line;
	size_t len, lineno = 0;
	int e;
	if ((e = omen_file_read(&data, path, 256u << 20)))
		return omen_error_wrap(e, "cannot read fix list '%s'", path);
	omen_cursor_init(&cur, data.ptr, data.len);
	while (omen_cursor_line(&cur, &line, &len)) {
		size_t i = 0, a, b;
		fix_entry ent;
		char idbuf[128];
		lineno++;
		while (i < len && isspace((unsigned char)line[i]))
			i++;
		if (i == len || (line[i] == '#' && (i + 1 == len || !isdigit((unsigned char)line[i + 1]))))
			continue; /* blank or comment ("# text"; "#12" is an issue id) */
		a = i;
		while (i < len && !isspace((unsigned char)line[i]))
			i++;
		b = i;
		memset(&ent, 0, sizeof(ent));
		if (b - a >= sizeof(idbuf)) {
			e = omen_error_set(OMEN_EINVAL, "bad fix list '%s': line %zu: id too long", path, lineno);
			goto out;
		}
		{
			size_t j, hex = 1;
			for (j = a; j < b; j++)
				if (!is_hex(line[j]))
					hex = 0;
			if (hex && b - a >= 7 && b - a <= OMEN_OID_HEX) {
				for (j = a; j < b; j++)
					idbuf[j - a] = (char)tolower((unsigned char)line[j]);
				idbuf[b - a] = '\0';
				ent.is_commit = 1;
			} else {
				norm_issue(idbuf, sizeof(idbuf), line + a, b - a);
			}
		}
		while (i < len && isspace((unsigned char)line[i]))
			i++;
		if (i < len) {
			size_t c = i;
			while (c < len && !isspace((unsigned char)line[c]))
				c++;
			ent.date = parse_date(line + i, c - i);
			if (ent.date < 0) {
				e = omen_error_set(OMEN_EINVAL, "bad fix list '%s': line %zu: '%.*s' is not a date (YYYY-MM-DD)",
					path, lineno, (int)(c - i), line + i);
				goto out;
			}
		}
		if (!(ent.id = strdup(idbuf)) || OMEN_ARRAY_RESERVE(fr->ents, fr->cap, fr->nents + 1)) {
			free(ent.id);
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
		fr->ents[fr->nents++] = ent;
	}
	if (fr->nents)
		qsort(fr->ents, fr->nents, sizeof(*fr->ents), ent_cmp);
	free(fr->hit);
	if (!(fr->hit = calloc(fr->nents ? fr->nents : 1, 1))) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	e = 0;
out:
	omen_buf_free(&data);
	return e;
}

size_t omen_fixrules_list_size(const omen_fixrules *fr) { return fr ? fr->nents : 0; }

size_t omen_fixrules_unmatched(const omen_fixrules *fr)
{
	size_t i, n = 0;
	if (!fr || !fr->hit)
		return 0;
	for (i = 0; i < fr->nents; i++)
		n += !fr->hit[i];
	return n;
}

/* Index of the listed commit prefix that hex starts with, or -1. */
static long find_commit(const omen_fixrules *fr, const char *hex)
{
	size_t lo = 0, hi = fr->nents;
	long i;
	while (lo < hi) {
		size_t mid = (lo + hi) / 2;
		if (strcmp(fr->ents[mid].id, hex) <= 0)
			lo = mid + 1;
		else
			hi = mid;
	}
	for (i = (long)lo - 1; i >= 0 && !strncmp(fr->ents[i].id, hex, 7); i--)
		if (fr->ents[i].is_commit && !strncmp(fr->ents[i].id, hex, strlen(fr->ents[i].id)))
			return i;
	return -1;
}

static long find_issue(const omen_fixrules *fr, const char *id)
{
	size_t lo = 0, hi = fr->nents;
	while (lo < hi) {
		size_t mid = (lo + hi) / 2;
		int c = strcmp(fr->ents[mid].id, id);
		if (!c)
			return fr->ents[mid].is_commit ? -1 : (long)mid;
		if (c < 0)
			lo = mid + 1;
		else
			hi = mid;
	}
	return -1;
}

/* Calls fn for each issue reference in msg: "#123", "GH-123", "KEY-123". */
static void each_issue_ref(const char *msg, void (*fn)(const char *id, void *p), void *p)
{
	const char *s = msg;
	char id[64];
	for (; *s; s++) {
		const char *st = s, *e;
		if (s > msg && is_word(s[-1]))
			continue;
		if (*s == '#') {
			e = s + 1;
			while (isdigit((unsigned char)*e))
				e++;
			if (e == s + 1 || is_word(*e) || e - st > 20)
				continue;
		} else if (isupper((unsigned char)*s) || ((*s == 'g' || *s == 'G') && (s[1] == 'h' || s[1] == 'H'))) {
			e = s;
			while (isupper((unsigned char)*e) || isdigit((unsigned char)*e) || ((s[0] == 'g' || s[0] == 'G') && e < s + 2))
				e++;
			if (e - s < 2 || *e != '-' || !isdigit((unsigned char)e[1]))
				continue;
			e++;
			while (isdigit((unsigned char)*e))
				e++;
			if (is_word(*e) || e - st > 40)
				continue;
		} else {
			continue;
		}
		norm_issue(id, sizeof(id), st, (size_t)(e - st));
		fn(id, p);
		s = e - 1;
	}
}

typedef struct {
	const omen_fixrules *fr;
	int found;
	int64_t date;
} issue_acc;

static void issue_hit(const char *id, void *p)
{
	issue_acc *a = p;
	long i = find_issue(a->fr, id);
	if (i < 0)
		return;
	a->found = 1;
	a->fr->hit[i] = 1;
	if (a->fr->ents[i].date && (!a->date || a->fr->ents[i].date < a->date))
		a->date = a->fr->ents[i].date;
}

/* Case-insensitive prefix match; returns the length matched or 0. */
static size_t starts(const char *s, const char *pre)
{
	size_t i;
	for (i = 0; pre[i]; i++)
		if (tolower((unsigned char)s[i]) != pre[i])
			return 0;
	return i;
}

/* Reads a commit id at s (after optional spaces and "commit "). */
static size_t read_hex(const char *s, char *out)
{
	size_t i = 0, k;
	while (s[i] == ' ' || s[i] == '\t')
		i++;
	if ((k = starts(s + i, "commit ")))
		i += k;
	while (s[i] == ' ' || s[i] == '\t')
		i++;
	for (k = 0; is_hex(s[i + k]) && k <= OMEN_OID_HEX; k++)
		;
	if (k < 7 || k > OMEN_OID_HEX || is_word(s[i + k]))
		return 0;
	for (size_t j = 0; j < k; j++)
		out[j] = (char)tolower((unsigned char)s[i + j]);
	out[k] = '\0';
	return k;
}

/* Trailer forms that name the repaired commit, matched at a line start
 * (after spaces), case-insensitively. "this reverts commit" may appear
 * anywhere in a line (git revert writes it mid-sentence when edited). */
static const char *const named_forms[] = {
	"fixes:", "fixes commit", "fix:", "reverts:", "reverts", "revert commit", "reverting commit",
	"introduced by:", "introduced by", "introduced in", "regressed by:", "regressed by",
	"broken by:", "broken by", "caused by:", "caused by", NULL
};

static void find_named(const char *msg, char named[][OMEN_OID_HEX + 1], int max_named, int *n_named)
{
	const char *s = msg;
	char hex[OMEN_OID_HEX + 2];
	while (*s) {
		const char *eol = strchr(s, '\n'), *p = s, *q;
		size_t k = 0;
		int f, got = 0;
		if (!eol)
			eol = s + strlen(s);
		while (p < eol && (*p == ' ' || *p == '\t' || *p == '>'))
			p++;
		for (f = 0; named_forms[f] && !got; f++) {
			if ((k = starts(p, named_forms[f])) && (p[k] == ' ' || p[k] == '\t' || p[k] == ':' ||
			    named_forms[f][k - 1] == ':' || is_hex(p[k]))) {
				if (p[k] == ':')
					k++;
				got = read_hex(p + k, hex) > 0;
			}
		}
		for (q = s; !got && q < eol; q++)
			if ((k = starts(q, "reverts commit ")) && (q == s || !is_word(q[-1])))
				got = read_hex(q + k, hex) > 0;
		if (got && *n_named < max_named) {
			int dup = 0, i;
			for (i = 0; i < *n_named; i++)
				dup |= !strcmp(named[i], hex);
			if (!dup)
				strcpy(named[(*n_named)++], hex);
		}
		s = *eol ? eol + 1 : eol;
	}
}

unsigned omen_fix_classify(const omen_fixrules *fr, const omen_commit *c,
	char named[][OMEN_OID_HEX + 1], int max_named, int *n_named)
{
	unsigned by = 0;
	const char *msg = c->message ? c->message : "";
	int dummy = 0;
	if (!n_named)
		n_named = &dummy;
	*n_named = 0;
	if (c->nparents > 1)
		return 0; /* merges are neither fixes nor candidates */
	if (fr->has_re && regexec(&fr->re, msg, 0, NULL, 0) == 0)
		by |= OMEN_FIXBY_PATTERN;
	if (fr->has_key_re && regexec(&fr->key_re, msg, 0, NULL, 0) == 0)
		by |= OMEN_FIXBY_PATTERN;
	if (fr->nents) {
		long i = find_commit(fr, c->hex);
		issue_acc a = {fr, 0, 0};
		if (i >= 0) {
			by |= OMEN_FIXBY_LIST;
			fr->hit[i] = 1;
		}
		each_issue_ref(msg, issue_hit, &a);
		if (a.found)
			by |= OMEN_FIXBY_ISSUE;
	}
	if (named && max_named > 0) {
		find_named(msg, named, max_named, n_named);
		if (*n_named)
			by |= OMEN_FIXBY_NAMED;
	}
	return by;
}

int64_t omen_fix_issue_date(const omen_fixrules *fr, const omen_commit *c)
{
	issue_acc a = {fr, 0, 0};
	long i;
	if (!fr || !fr->nents)
		return 0;
	i = find_commit(fr, c->hex);
	if (i >= 0 && fr->ents[i].date)
		a.date = fr->ents[i].date;
	each_issue_ref(c->message ? c->message : "", issue_hit, &a);
	return a.date;
}
