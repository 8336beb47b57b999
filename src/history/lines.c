/* Line classes of the history's text: blank lines, comment-only lines and C
 * preprocessor lines (the labeller skips blank and comment-only lines; the
 * code tokenizer in src/features/tokenize.c keeps a '#' line that is a
 * directive as code). */
#include <ctype.h>
#include <string.h>
#include "omen/history.h"

static int is_id_char(unsigned c) { return isalnum((int)c) || c == '_' || c == '$'; }

/* ---- C preprocessor lines ------------------------------------------------ */
static const char *const cpp_directives[] = {
	"include", "define", "undef", "if", "ifdef", "ifndef", "elif", "else", "endif", "pragma",
	"error", "warning", "line", "import", NULL
};

int omen_line_is_directive(const char *s, size_t n)
{
	size_t i = 0, k;
	while (i < n && (s[i] == ' ' || s[i] == '\t'))
		i++;
	for (k = 0; cpp_directives[k]; k++) {
		size_t l = strlen(cpp_directives[k]);
		if (n - i >= l && !memcmp(s + i, cpp_directives[k], l) &&
		    (n - i == l || !is_id_char((unsigned char)s[i + l])))
			return 1;
	}
	return 0;
}

/* ---- line classes -------------------------------------------------------- */
int omen_line_is_blank(const char *s, size_t n)
{
	for (size_t i = 0; i < n; i++)
		if (!strchr(" \t\r\n\v\f", s[i]) || !s[i])
			return 0;
	return 1;
}

/* A comment-only line in the common syntaxes: //, #, /ASTERISK, a leading
 * ASTERISK of a block comment's continuation, --, ;, % and <!--. Lines such
 * as "#include", "*p = 1;" and "--i;" are code. */
int omen_line_is_comment(const char *str, size_t n)
{
	const unsigned char *s = (const unsigned char *)str;
	size_t i = 0;
	while (i < n && (s[i] == ' ' || s[i] == '\t'))
		i++;
	if (i >= n)
		return 0;
	{
		const char *p = str + i;
		size_t m = n - i;
		unsigned nx = m > 1 ? s[i + 1] : 0;
		int nx_blank = m == 1 || nx == ' ' || nx == '\t' || nx == '\r';
		if (m >= 2 && p[0] == '/' && p[1] == '/')
			return 1;
		if (m >= 4 && !memcmp(p, "<!--", 4))
			return 1;
		if (m >= 2 && p[0] == '/' && p[1] == '*') {
			/* only a comment when nothing but blanks follows its end */
			for (size_t j = 2; j + 1 < m; j++)
				if (p[j] == '*' && p[j + 1] == '/')
					return omen_line_is_blank(p + j + 2, m - j - 2);
			return 1;
		}
		if (p[0] == '#')
			return !omen_line_is_directive(p + 1, m - 1) && !(m >= 2 && (p[1] == '!' || p[1] == '['));
		if (p[0] == '*')
			return nx_blank || nx == '*' || nx == '/';
		if (m >= 2 && p[0] == '-' && p[1] == '-')
			return m == 2 || p[2] == ' ' || p[2] == '\t' || p[2] == '-' || p[2] == '\r';
		if (p[0] == ';')
			return m >= 2 && (nx == ' ' || nx == ';' || nx == '\t');
		if (p[0] == '%')
			return nx_blank || nx == '%';
	}
	return 0;
}
