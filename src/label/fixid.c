/* Fix-commit identification (DEVELOPERS.md "Labeller"): a message pattern, the
 * user's fix list (commit ids or issue ids, optionally with the issue's open
 * date), and explicit references to the repaired commit (Fixes:, revert
 * trailers). Keyword matching of fix messages follows Mockus & Votta (ICSM
 * 2000) and Sliwerski, Zimmermann & Zeller (MSR 2005).
 *
 * Decisions (documented in git-omen-label(1)):
 * - the default pattern matches fix words as whole words, case-insensitively:
 *   "prefix", "debugging", "default" and "fixup" do not match;
 * - an issue reference is no fix sign by itself: a bare "(#123)" is on
 *   every squash-merged pull request title, and a closing word with a
 *   number ("closes #12") closes pull requests too (issue 10); "fixes #12"
 *   still matches through the fix word;
 * - only the author's description counts (issue 10): trailers, quoted text
 *   and a revert's quoted subject are left out before matching, except the
 *   trailers that name the repaired commit (Fixes: <id>);
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
	"segfaults?|regressions?|leak(s|ed|ing)?|faults?|faulty|broken)"
	"([^[:alnum:]_]|$)";

/* A closing word with an issue number ("closes #12", "resolves GH-3"):
 * a fix sign only when the closing-word rule is off (issue 10: GitHub and
 * GitLab close pull requests with the same words). */
static const char closing_pattern[] =
	"(^|[^[:alnum:]_])(close[sd]?|resolve[sd]?)[[:space:]]+(#|gh-)[0-9]+([^[:alnum:]_]|$)";

/* Cosmetic fixes (issue 10): recorded as fixes, traced nowhere. Kim,
 * Zimmermann, Pan & Whitehead (ASE 2006, from memory) showed that cosmetic
 * changes make SZZ blame innocent lines; this pattern keeps the commits
 * whose subject says the repair is cosmetic out of the tracing. Matched
 * case-insensitively against the first line of the author's description. */
const char omen_fix_default_cosmetic[] =
	"(^|[^[:alnum:]_])"
	"(typos?|spelling|misspell(ed|ings?)?|grammar|wording|whitespaces?|white[ -]space|"
	"indent(s|ed|ing|ation)?|formatting|reformat(s|ted|ting)?|lint|linter|linting|flake8|pep ?8|"
	"eslint|pylint|checkpatch|clang-format|style|stylistic|cosmetics?|"
	"warnings?|comments?|changelog|copyright)"
	"([^[:alnum:]_]|$)";

/* A subject that announces new work ("add", "implement", "support", a test
 * or a refactoring, after an optional "area: " prefix) is a fix only when
 * the description also says fix or bug: "Add crash recovery" and "Add a
 * regression test for the leak" repair nothing. Default pattern only. */
static const char feature_subject_pattern[] =
	"^[[:space:]]*([[:alnum:]_./-]+:[[:space:]]*)?"
	"(add(s|ed|ing)?|implement(s|ed|ing)?|introduce[sd]?|support(s|ed|ing)?|rework(s|ed)?|"
	"refactor(s|ed|ing)?|document(s|ed)?|tests?|benchmark(s|ed)?)([^[:alnum:]_]|$)";
static const char strong_fix_pattern[] =
	"(^|[^[:alnum:]_])(fix(e[sd]|ing)?|bugs?|bugfix(es)?|hotfix(es)?)([^[:alnum:]_]|$)";

/* A subject that names one of these is a defect repair even when it also
 * matches the cosmetic pattern ("fix crash on a comment line"). */
static const char cosmetic_veto_pattern[] =
	"(^|[^[:alnum:]_])"
	"(crash(e[sd]|ing)?|segfaults?|leak(s|ed|ing)?|overflows?|underflows?|regressions?|"
	"race|deadlocks?|hang(s|ing)?|corrupt(s|ed|ion)?|use-after-free|null|dereference)"
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
	regex_t re, key_re, close_re, cos_re, veto_re, feat_re, strong_re;
	int has_re, has_key_re, has_close_re, has_cos_re, has_veto_re, has_feat_re, has_strong_re;
	int whole_message, use_closing;
	/* closing words: classify with close_re and key_re only when
	 * use_closing; otherwise close_re counts what the rule left out */
	fix_entry *ents;     /* sorted by id */
	size_t nents, cap;
	unsigned char *hit;  /* per entry: matched a commit */
};

static int compile(regex_t *re, int *has, const char *pat, int flags, const char *what)
{
	int e = regcomp(re, pat, flags);
	if (e) {
		char msg[256];
		regerror(e, re, msg, sizeof(msg));
		return omen_error_set(OMEN_EINVAL, "bad %s '%s': %s", what, pat, msg);
	}
	*has = 1;
	return 0;
}

int omen_fixrules_new_opts(omen_fixrules **out, const omen_fixrule_opts *o)
{
	omen_fixrules *fr;
	const char *pattern = o ? o->pattern : NULL;
	const char *cos = o && o->cosmetic ? o->cosmetic : omen_fix_default_cosmetic;
	const int ci = REG_EXTENDED | REG_ICASE | REG_NOSUB;
	int e;
	*out = NULL;
	if (!(fr = calloc(1, sizeof(*fr))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	fr->whole_message = o ? o->whole_message : 0;
	if ((e = compile(&fr->re, &fr->has_re, pattern ? pattern : omen_fix_default_pattern, ci, "fix pattern")) ||
	    (*cos && (e = compile(&fr->cos_re, &fr->has_cos_re, cos, ci, "cosmetic pattern"))))
		goto fail;
	if (*cos && (e = compile(&fr->veto_re, &fr->has_veto_re, cosmetic_veto_pattern, ci, "pattern")))
		goto fail;
	if (!pattern && (e = compile(&fr->close_re, &fr->has_close_re, closing_pattern, ci, "pattern")))
		goto fail;
	if (!pattern && !(o && o->feature_subjects) &&
	    ((e = compile(&fr->feat_re, &fr->has_feat_re, feature_subject_pattern, ci, "pattern")) ||
	     (e = compile(&fr->strong_re, &fr->has_strong_re, strong_fix_pattern, ci, "pattern"))))
		goto fail;
	fr->use_closing = !pattern && o && o->closing_refs;
	if (fr->use_closing &&
	    (e = compile(&fr->key_re, &fr->has_key_re, default_key_pattern, REG_EXTENDED | REG_NOSUB, "pattern")))
		goto fail;
	*out = fr;
	return 0;
fail:
	omen_fixrules_free(fr);
	return e;
}

int omen_fixrules_new(omen_fixrules **out, const char *pattern)
{
	omen_fixrule_opts o = OMEN_FIXRULE_OPTS_INIT;
	o.pattern = pattern;
	return omen_fixrules_new_opts(out, &o);
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
	if (fr->has_close_re)
		regfree(&fr->close_re);
	if (fr->has_cos_re)
		regfree(&fr->cos_re);
	if (fr->has_veto_re)
		regfree(&fr->veto_re);
	if (fr->has_feat_re)
		regfree(&fr->feat_re);
	if (fr->has_strong_re)
		regfree(&fr->strong_re);
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
	"broken by:", "broken by", "caused by:", "caused by", "follow-up to", "followup to", NULL
};

static void find_named(const char *msg, int skip_quoted, char named[][OMEN_OID_HEX + 1], int max_named,
	int *n_named)
{
	const char *s = msg;
	char hex[OMEN_OID_HEX + 2];
	while (*s) {
		const char *eol = strchr(s, '\n'), *p = s, *q;
		size_t k = 0;
		int f, got = 0, quoted = 0;
		if (!eol)
			eol = s + strlen(s);
		while (p < eol && (*p == ' ' || *p == '\t' || *p == '>'))
			quoted |= *p++ == '>';
		if (quoted && skip_quoted) {
			s = *eol ? eol + 1 : eol;
			continue;
		}
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

/* A trailer line: "Token: value" with a token of letters, digits and '-'
 * (git interpret-trailers), or git's "(cherry picked from commit <id>)". */
static int trailer_line(const char *s, size_t n)
{
	size_t i = 0;
	if (n >= 27 && !strncmp(s, "(cherry picked from commit ", 27))
		return 1;
	while (i < n && (isalnum((unsigned char)s[i]) || s[i] == '-'))
		i++;
	return i > 0 && i + 1 < n && s[i] == ':' && (s[i + 1] == ' ' || s[i + 1] == '\t');
}

static int blank_line(const char *s, size_t n)
{
	size_t i;
	for (i = 0; i < n; i++)
		if (!isspace((unsigned char)s[i]))
			return 0;
	return 1;
}

int omen_fix_description(omen_buf *out, const char *msg)
{
	const char *s = msg ? msg : "", *end = s + strlen(s), *p, *tb = NULL;
	const char *last_blank_end = NULL;
	int first = 1, e = 0;
	omen_buf_clear(out);
	/* the trailer block: the last paragraph (not the subject's) when every
	 * non-empty line of it is a trailer or a continuation of one */
	for (p = s; p < end;) {
		const char *eol = memchr(p, '\n', (size_t)(end - p));
		const char *next = eol ? eol + 1 : end;
		if (!eol)
			eol = end;
		if (blank_line(p, (size_t)(eol - p)) && p != s)
			last_blank_end = next;
		p = next;
	}
	if (last_blank_end && last_blank_end < end) {
		int ok = 1, any = 0;
		for (p = last_blank_end; p < end && ok;) {
			const char *eol = memchr(p, '\n', (size_t)(end - p));
			const char *next = eol ? eol + 1 : end;
			size_t n = (size_t)((eol ? eol : end) - p);
			if (blank_line(p, n))
				;
			else if (trailer_line(p, n))
				any = 1;
			else if (!(any && (*p == ' ' || *p == '\t')))
				ok = 0;
			p = next;
		}
		if (ok && any)
			tb = last_blank_end;
	}
	for (p = s; p < (tb ? tb : end);) {
		const char *eol = memchr(p, '\n', (size_t)(end - p));
		const char *next = eol ? eol + 1 : end;
		size_t n = (size_t)((eol ? eol : end) - p), k = 0;
		while (k < n && (p[k] == ' ' || p[k] == '\t'))
			k++;
		if (k < n && p[k] == '>') {
			p = next; /* quoted text */
			continue;
		}
		if (first) {
			/* a revert's (or reapply's) quoted subject: keep the verb only */
			size_t v = starts(p, "revert \"") ? 8 : starts(p, "reapply \"") ? 9 : 0;
			const char *q = v ? p + n : NULL;
			while (q && q > p + v && q[-1] != '"')
				q--;
			if (v && q > p + v) {
				e |= omen_buf_put(out, p, v - 2);
				e |= omen_buf_put(out, q, (size_t)(p + n - q));
				e |= omen_buf_put(out, "\n", 1);
				first = 0;
				p = next;
				continue;
			}
			first = 0;
		}
		e |= omen_buf_put(out, p, (size_t)(next - p));
		p = next;
	}
	if (!e && !out->ptr)
		e = omen_buf_puts(out, "");
	return e ? omen_error_set(OMEN_ENOMEM, "out of memory") : 0;
}

/* The first line of a description, NUL-terminated in buf. */
static const char *subject_of(const char *d, char *buf, size_t cap)
{
	size_t n = strcspn(d, "\n");
	if (n >= cap)
		n = cap - 1;
	memcpy(buf, d, n);
	buf[n] = '\0';
	return buf;
}

unsigned omen_fix_classify_ex(const omen_fixrules *fr, const omen_commit *c,
	char named[][OMEN_OID_HEX + 1], int max_named, int *n_named, omen_fix_info *info)
{
	unsigned by = 0;
	const char *msg = c->message ? c->message : "", *desc = msg;
	omen_buf db = OMEN_BUF_INIT;
	int dummy = 0, m_desc = 0;
	if (!n_named)
		n_named = &dummy;
	*n_named = 0;
	if (info)
		memset(info, 0, sizeof(*info));
	if (c->nparents > 1)
		return 0; /* merges are neither fixes nor candidates */
	if (!fr->whole_message && omen_fix_description(&db, msg) == 0)
		desc = db.ptr;
	omen_error_clear();
	if (fr->has_re && regexec(&fr->re, desc, 0, NULL, 0) == 0)
		m_desc = 1;
	if (fr->has_close_re && fr->use_closing && regexec(&fr->close_re, desc, 0, NULL, 0) == 0)
		m_desc = 1;
	if (fr->has_key_re && regexec(&fr->key_re, desc, 0, NULL, 0) == 0)
		m_desc = 1;
	if (m_desc && fr->has_feat_re && regexec(&fr->strong_re, desc, 0, NULL, 0) != 0) {
		char sub[512];
		if (regexec(&fr->feat_re, subject_of(desc, sub, sizeof(sub)), 0, NULL, 0) == 0) {
			m_desc = 0;
			if (info)
				info->feature_only = 1;
		}
	}
	if (m_desc)
		by |= OMEN_FIXBY_PATTERN;
	if (info && !m_desc) {
		/* what the rules left out, for the summary */
		if (desc != msg && fr->has_re && regexec(&fr->re, msg, 0, NULL, 0) == 0)
			info->outside_only = 1;
		else if (fr->has_close_re && regexec(&fr->close_re, desc, 0, NULL, 0) == 0)
			info->closing_only = 1;
	}
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
		find_named(msg, !fr->whole_message, named, max_named, n_named);
		if (*n_named)
			by |= OMEN_FIXBY_NAMED;
	}
	if (info && by && !(by & OMEN_FIXBY_NAMED) && fr->has_cos_re) {
		char sub[512];
		subject_of(desc, sub, sizeof(sub));
		/* a fix that names its commit is a repair whatever its subject */
		info->cosmetic = regexec(&fr->cos_re, sub, 0, NULL, 0) == 0 &&
			!(fr->has_veto_re && regexec(&fr->veto_re, sub, 0, NULL, 0) == 0);
	}
	omen_buf_free(&db);
	return by;
}

unsigned omen_fix_classify(const omen_fixrules *fr, const omen_commit *c,
	char named[][OMEN_OID_HEX + 1], int max_named, int *n_named)
{
	return omen_fix_classify_ex(fr, c, named, max_named, n_named, NULL);
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
