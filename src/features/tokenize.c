/* Language-agnostic tokenizers for code lines and commit messages (the
 * blank/comment line tests the labeller uses are in src/history/lines.c,
 * which also says what a C preprocessor line is). Rules (common practice in
 * code-token models; identifier splitting on camelCase and '_' as in
 * Hellendoorn & Devanbu, "Are deep neural networks the best choice for
 * modeling source code?", FSE 2017):
 *  - identifiers [A-Za-z_$][A-Za-z0-9_$]* (valid UTF-8 letters count as
 *    identifier bytes); emitted whole, then, when they split into two or more
 *    parts on '_' and case changes ("parseHTTPHeader" -> parse, http,
 *    header), each part lowercased;
 *  - numbers bucketed: <num0>, <num1>, <num2-9>, <num10-99>, <numbig>,
 *    <float> (a '.', or an exponent, in a decimal literal), <hex> (0x, 0b, 0o);
 *  - "..." '...' `...` and Python triple-quoted strings -> <str>;
 *  - comments // ... and / * ... * / and '#' (except C preprocessor lines such
 *    as #include, #define) -> <comment>;
 *  - operators: longest match among common multi-character operators, else
 *    one punctuation byte; whitespace and invalid UTF-8 bytes are skipped. */
#include <ctype.h>
#include <string.h>
#include "omen/features.h"
#include "omen/history.h"

static size_t utf8_len(const unsigned char *s, size_t n)
{
	unsigned c = s[0];
	size_t k, i;
	if (c < 0x80)
		return 1;
	if (c >= 0xc2 && c <= 0xdf)
		k = 2;
	else if (c >= 0xe0 && c <= 0xef)
		k = 3;
	else if (c >= 0xf0 && c <= 0xf4)
		k = 4;
	else
		return 0;
	if (n < k)
		return 0;
	for (i = 1; i < k; i++)
		if ((s[i] & 0xc0) != 0x80)
			return 0;
	if (k == 3 && c == 0xe0 && s[1] < 0xa0)
		return 0;
	if (k == 3 && c == 0xed && s[1] >= 0xa0)
		return 0;
	if (k == 4 && c == 0xf0 && s[1] < 0x90)
		return 0;
	if (k == 4 && c == 0xf4 && s[1] >= 0x90)
		return 0;
	return k;
}

static int is_id_start(unsigned c) { return isalpha((int)c) || c == '_' || c == '$'; }
static int is_id_char(unsigned c) { return isalnum((int)c) || c == '_' || c == '$'; }

/* Length of the identifier at s (ASCII and valid UTF-8 multibyte letters). */
static size_t ident_len(const unsigned char *s, size_t n)
{
	size_t i = 0;
	while (i < n) {
		if (s[i] < 0x80) {
			if (!is_id_char(s[i]))
				break;
			i++;
		} else {
			size_t k = utf8_len(s + i, n - i);
			if (!k)
				break;
			i += k;
		}
	}
	return i;
}

static void emit_lower(const char *s, size_t n, omen_token_cb cb, void *payload)
{
	char buf[128];
	if (n > sizeof(buf))
		n = sizeof(buf);
	for (size_t i = 0; i < n; i++)
		buf[i] = (char)tolower((unsigned char)s[i]);
	cb(buf, n, payload);
}

/* Splits an identifier into parts on '_' / '$' and case changes. */
static void split_ident(const char *s, size_t n, omen_token_cb cb, void *payload)
{
	size_t starts[64], ends[64], np = 0, i = 0;
	while (i < n && np < 64) {
		size_t b;
		while (i < n && (s[i] == '_' || s[i] == '$'))
			i++;
		if (i >= n)
			break;
		b = i++;
		while (i < n && s[i] != '_' && s[i] != '$') {
			unsigned char p = (unsigned char)s[i - 1], c = (unsigned char)s[i];
			unsigned char nx = i + 1 < n ? (unsigned char)s[i + 1] : 0;
			if (isupper(c) && (islower(p) || isdigit(p)))
				break;                       /* fooBar, utf8Name */
			if (isupper(c) && isupper(p) && islower(nx))
				break;                       /* HTTPServer -> HTTP|Server */
			i++;
		}
		starts[np] = b;
		ends[np++] = i;
	}
	if (np < 2)
		return;
	for (size_t k = 0; k < np; k++)
		emit_lower(s + starts[k], ends[k] - starts[k], cb, payload);
}

/* Number literal at s; returns its length and sets *tok to the bucket. */
static size_t number_len(const char *s, size_t n, const char **tok)
{
	size_t i = 0;
	int is_float = 0;
	unsigned long long v = 0;
	int big = 0;
	if (n >= 2 && s[0] == '0' && strchr("xXbBoO", s[1]) && s[1]) {
		i = 2;
		while (i < n && (isxdigit((unsigned char)s[i]) || s[i] == '_'))
			i++;
		while (i < n && strchr("uUlLn", s[i]) && s[i])
			i++;
		*tok = "<hex>";
		return i;
	}
	while (i < n && (isdigit((unsigned char)s[i]) || s[i] == '_' || s[i] == '\'')) {
		if (s[i] == '\'' && !(i + 1 < n && isdigit((unsigned char)s[i + 1])))
			break;
		if (isdigit((unsigned char)s[i])) {
			if (v > 100)
				big = 1;
			else
				v = v * 10 + (unsigned)(s[i] - '0');
		}
		i++;
	}
	if (i < n && s[i] == '.' && !(i + 1 < n && s[i + 1] == '.')) {
		is_float = 1;
		i++;
		while (i < n && (isdigit((unsigned char)s[i]) || s[i] == '_'))
			i++;
	}
	if (i < n && (s[i] == 'e' || s[i] == 'E')) {
		size_t j = i + 1;
		if (j < n && (s[j] == '+' || s[j] == '-'))
			j++;
		if (j < n && isdigit((unsigned char)s[j])) {
			is_float = 1;
			i = j;
			while (i < n && isdigit((unsigned char)s[i]))
				i++;
		}
	}
	while (i < n && s[i] && strchr("uUlLfFdDjn", s[i]))
		i++;
	if (is_float)
		*tok = "<float>";
	else if (big || v >= 100)
		*tok = "<numbig>";
	else if (v >= 10)
		*tok = "<num10-99>";
	else if (v >= 2)
		*tok = "<num2-9>";
	else if (v == 1)
		*tok = "<num1>";
	else
		*tok = "<num0>";
	return i;
}

static const char *const ops[] = {
	">>>=", "<<=", ">>=", ">>>", "...", "===", "!==", "**=", "//=", "<=>", "&&=", "||=", "?\?=", "&^=",
	"->", "=>", "::", "++", "--", "<<", ">>", "<=", ">=", "==", "!=", "&&", "||", "+=", "-=",
	"*=", "/=", "%=", "&=", "|=", "^=", "**", ":=", "<-", "?.", "??", "&^", NULL
};

/* End of a quoted literal starting at s[0] == q. */
static size_t string_len(const char *s, size_t n)
{
	char q = s[0];
	size_t i;
	if (q != '`' && n >= 3 && s[1] == q && s[2] == q) {   /* """ or ''' */
		for (i = 3; i + 2 < n; i++)
			if (s[i] == q && s[i + 1] == q && s[i + 2] == q)
				return i + 3;
		return n;
	}
	for (i = 1; i < n; i++) {
		if (s[i] == '\\' && q != '`') {
			i++;
			continue;
		}
		if (s[i] == q)
			return i + 1;
		if (s[i] == '\n' && q != '`')
			return q == '\'' ? 0 : i;   /* unterminated: ' is an operator */
	}
	return q == '\'' ? 0 : n;
}

void omen_tokenize_code(const char *str, size_t n, omen_token_cb cb, void *payload)
{
	const unsigned char *s = (const unsigned char *)str;
	size_t i = 0;
	while (i < n) {
		unsigned c = s[i];
		if (c == ' ' || c == '\t' || c == '\r' || c == '\n' || c == '\v' || c == '\f') {
			i++;
			continue;
		}
		if (c >= 0x80) {
			size_t k = utf8_len(s + i, n - i);
			if (!k) {           /* invalid byte: skipped */
				i++;
				continue;
			}
		}
		if (is_id_start(c) || c >= 0x80) {
			size_t k = ident_len(s + i, n - i);
			if (!k) {
				i++;
				continue;
			}
			cb(str + i, k, payload);
			split_ident(str + i, k, cb, payload);
			i += k;
			continue;
		}
		if (isdigit((int)c) || (c == '.' && i + 1 < n && isdigit(s[i + 1]))) {
			const char *tok = "<num0>";
			size_t k = number_len(str + i, n - i, &tok);
			cb(tok, strlen(tok), payload);
			i += k ? k : 1;
			continue;
		}
		if (c == '/' && i + 1 < n && s[i + 1] == '/') {
			while (i < n && s[i] != '\n')
				i++;
			cb("<comment>", 9, payload);
			continue;
		}
		if (c == '/' && i + 1 < n && s[i + 1] == '*') {
			const char *e = NULL;
			for (size_t j = i + 2; j + 1 < n; j++)
				if (s[j] == '*' && s[j + 1] == '/') {
					e = str + j + 2;
					break;
				}
			i = e ? (size_t)(e - str) : n;
			cb("<comment>", 9, payload);
			continue;
		}
		if (c == '#' && !omen_line_is_directive(str + i + 1, n - i - 1) &&
		    !(i + 1 < n && (s[i + 1] == '[' || s[i + 1] == '!'))) {
			while (i < n && s[i] != '\n')
				i++;
			cb("<comment>", 9, payload);
			continue;
		}
		if (c == '"' || c == '\'' || c == '`') {
			size_t k = string_len(str + i, n - i);
			if (k) {
				cb("<str>", 5, payload);
				i += k;
				continue;
			}
		}
		{
			size_t k;
			for (k = 0; ops[k]; k++) {
				size_t l = strlen(ops[k]);
				if (n - i >= l && !memcmp(str + i, ops[k], l))
					break;
			}
			if (ops[k]) {
				size_t l = strlen(ops[k]);
				cb(str + i, l, payload);
				i += l;
			} else {
				if (c >= 0x20 && c < 0x7f)
					cb(str + i, 1, payload);
				i++;
			}
		}
	}
}

/* ---- messages ------------------------------------------------------------ */
static int word_byte(const unsigned char *s, size_t n, size_t *k)
{
	if (s[0] < 0x80) {
		*k = 1;
		return isalnum((int)s[0]);
	}
	*k = utf8_len(s, n);
	if (!*k) {
		*k = 1;
		return 0;
	}
	return 1;
}

void omen_tokenize_message(const char *str, size_t n, omen_token_cb cb, void *payload)
{
	const unsigned char *s = (const unsigned char *)str;
	size_t i = 0;
	while (i < n) {
		size_t k;
		if ((n - i >= 7 && !strncmp(str + i, "http://", 7)) ||
		    (n - i >= 8 && !strncmp(str + i, "https://", 8)) ||
		    (n - i >= 4 && !strncmp(str + i, "www.", 4) && (i == 0 || isspace(s[i - 1])))) {
			while (i < n && !isspace(s[i]) && s[i] != '>' && s[i] != ')')
				i++;
			cb("<url>", 5, payload);
			continue;
		}
		if (s[i] == '#' && i + 1 < n && isdigit(s[i + 1])) {
			i++;
			while (i < n && isdigit(s[i]))
				i++;
			cb("<issue>", 7, payload);
			continue;
		}
		if (!word_byte(s + i, n - i, &k)) {
			i += k;
			continue;
		}
		{
			size_t b = i, digits = 0, hexletters = 0, other = 0;
			while (i < n && word_byte(s + i, n - i, &k)) {
				if (isdigit(s[i]))
					digits++;
				else if (strchr("abcdefABCDEF", s[i]) && s[i])
					hexletters++;
				else
					other++;
				i += k;
			}
			size_t len = i - b;
			if (!other && !hexletters) {
				const char *tok = "<num0>";
				number_len(str + b, len, &tok);
				cb(tok, strlen(tok), payload);
			} else if (!other && digits && hexletters && len >= 7 && len <= 40) {
				cb("<sha>", 5, payload);
			} else {
				char buf[128];
				size_t m = len < sizeof(buf) ? len : sizeof(buf);
				for (size_t j = 0; j < m; j++)
					buf[j] = (char)tolower(s[b + j]);
				cb(buf, m, payload);
			}
		}
	}
}
