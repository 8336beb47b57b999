/* Growable buffers, typed arrays and arenas. */
#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/util.h"

int omen_buf_error(const omen_buf *b) { return b->err; }

/* Records the first error of b and returns it. */
static int buf_fail(omen_buf *b, int e)
{
	if (!b->err)
		b->err = e;
	return e;
}

int omen_buf_grow(omen_buf *b, size_t extra)
{
	size_t need = b->len + extra + 1, cap;
	char *p;
	if (b->err)
		return b->err;
	if (need < b->len)
		return buf_fail(b, omen_error_set(OMEN_ENOMEM, "out of memory"));
	if (need <= b->cap)
		return 0;
	cap = b->cap ? b->cap : 64;
	while (cap < need)
		cap = cap * 2 > cap ? cap * 2 : need;
	p = realloc(b->ptr, cap);
	if (!p)
		return buf_fail(b, omen_error_set(OMEN_ENOMEM, "out of memory (%zu bytes)", cap));
	p[b->len] = '\0';  /* keeps "always NUL-terminated" true for a fresh buffer */
	b->ptr = p;
	b->cap = cap;
	return 0;
}

int omen_buf_put(omen_buf *b, const void *data, size_t n)
{
	int e = omen_buf_grow(b, n);
	if (e)
		return e;
	if (n)
		memcpy(b->ptr + b->len, data, n);
	b->len += n;
	b->ptr[b->len] = '\0';
	return 0;
}

int omen_buf_puts(omen_buf *b, const char *s) { return omen_buf_put(b, s, strlen(s)); }

void omen_le_encode(unsigned char *out, uint64_t v, size_t n)
{
	for (size_t i = 0; i < n; i++)
		out[i] = (unsigned char)(v >> (8 * i));
}

int omen_buf_put_u32le(omen_buf *b, uint32_t v)
{
	unsigned char x[4];
	omen_le_encode(x, v, 4);
	return omen_buf_put(b, x, 4);
}

int omen_buf_put_u64le(omen_buf *b, uint64_t v)
{
	unsigned char x[8];
	omen_le_encode(x, v, 8);
	return omen_buf_put(b, x, 8);
}

int omen_buf_printf(omen_buf *b, const char *fmt, ...)
{
	va_list ap;
	int n, e;
	va_start(ap, fmt);
	n = vsnprintf(NULL, 0, fmt, ap);
	va_end(ap);
	if (b->err)
		return b->err;
	if (n < 0)
		return buf_fail(b, omen_error_set(OMEN_EINVAL, "bad format"));
	if ((e = omen_buf_grow(b, (size_t)n)))
		return e;
	va_start(ap, fmt);
	vsnprintf(b->ptr + b->len, (size_t)n + 1, fmt, ap);
	va_end(ap);
	b->len += (size_t)n;
	return 0;
}

/* Length of the valid UTF-8 sequence at s (n bytes left), 0 if invalid. */
static size_t utf8_seq(const unsigned char *s, size_t n)
{
	unsigned c = s[0];
	size_t len, i;
	unsigned cp;
	if (c < 0x80) return 1;
	if (c >= 0xc2 && c <= 0xdf) { len = 2; cp = c & 0x1f; }
	else if (c >= 0xe0 && c <= 0xef) { len = 3; cp = c & 0x0f; }
	else if (c >= 0xf0 && c <= 0xf4) { len = 4; cp = c & 0x07; }
	else return 0;
	if (n < len) return 0;
	for (i = 1; i < len; i++) {
		if ((s[i] & 0xc0) != 0x80) return 0;
		cp = (cp << 6) | (s[i] & 0x3f);
	}
	if ((len == 3 && cp < 0x800) || (len == 4 && (cp < 0x10000 || cp > 0x10ffff)) ||
	    (cp >= 0xd800 && cp <= 0xdfff))
		return 0;
	return len;
}

int omen_utf8_valid(const char *s, size_t n)
{
	const unsigned char *p = (const unsigned char *)s;
	size_t i = 0, k;
	while (i < n) {
		if (!(k = utf8_seq(p + i, n - i)))
			return 0;
		i += k;
	}
	return 1;
}

size_t omen_utf8_prefix(const char *s, size_t n, size_t max)
{
	const unsigned char *p = (const unsigned char *)s;
	size_t i = 0, k;
	if (n <= max)
		return n;
	while (i < n) {
		if (!(k = utf8_seq(p + i, n - i)))
			k = 1;   /* an invalid byte stands alone */
		if (i + k > max)
			break;
		i += k;
	}
	return i;
}

size_t omen_utf8_trim(const char *s, size_t n)
{
	const unsigned char *p = (const unsigned char *)s;
	size_t j = n, need;
	while (j > 0 && n - j < 3 && (p[j - 1] & 0xc0) == 0x80)
		j--;
	if (!j)
		return n;
	j--;   /* the byte before the continuation bytes */
	need = p[j] >= 0xc2 && p[j] <= 0xdf ? 2 : p[j] >= 0xe0 && p[j] <= 0xef ? 3
		: p[j] >= 0xf0 && p[j] <= 0xf4 ? 4 : 0;
	return need && n - j < need ? j : n;
}

int omen_buf_put_json_cstr(omen_buf *b, const char *s)
{
	return omen_buf_put_json_string(b, s ? s : "", s ? strlen(s) : 0);
}

int omen_buf_put_json_number(omen_buf *b, double v, int digits)
{
	if (!isfinite(v))
		return omen_buf_puts(b, "null");
	return omen_buf_printf(b, "%.*g", digits, v);
}

int omen_buf_put_json_string(omen_buf *b, const char *s, size_t n)
{
	const unsigned char *p = (const unsigned char *)s;
	size_t i = 0, k;
	int e = omen_buf_put(b, "\"", 1);
	while (!e && i < n) {
		unsigned c = p[i];
		if (c == '"' || c == '\\') {
			char esc[2] = {'\\', (char)c};
			e = omen_buf_put(b, esc, 2); i++;
		} else if (c < 0x20) {
			switch (c) {
			case '\n': e = omen_buf_put(b, "\\n", 2); break;
			case '\t': e = omen_buf_put(b, "\\t", 2); break;
			case '\r': e = omen_buf_put(b, "\\r", 2); break;
			default: e = omen_buf_printf(b, "\\u%04x", c);
			}
			i++;
		} else if ((k = utf8_seq(p + i, n - i))) {
			e = omen_buf_put(b, p + i, k); i += k;
		} else {
			e = omen_buf_put(b, "\xef\xbf\xbd", 3); i++;
		}
	}
	return e ? e : omen_buf_put(b, "\"", 1);
}

/* ---- text shown to a person (DEVELOPERS.md "Hardening") ----------------- */
/* Whether the code point cp, valid UTF-8 of k bytes, is shown escaped: the
 * C1 controls (U+0080..U+009F, which some terminals obey like ESC
 * sequences), the line and paragraph separators U+2028/U+2029, and the
 * bidirectional formatting characters of Unicode UAX #9 (ALM, LRM, RLM,
 * LRE..RLO, LRI..PDI), which reorder what a reader sees. */
static int shown_escaped_cp(unsigned cp)
{
	return (cp >= 0x80 && cp <= 0x9f) || cp == 0x061c || cp == 0x200e || cp == 0x200f ||
		(cp >= 0x2028 && cp <= 0x202e) || (cp >= 0x2066 && cp <= 0x2069);
}

static size_t octal_esc(char *out, unsigned char c)
{
	out[0] = '\\';
	out[1] = (char)('0' + (c >> 6));
	out[2] = (char)('0' + ((c >> 3) & 7));
	out[3] = (char)('0' + (c & 7));
	return 4;
}

/* One unit of shown text at p (n > 0 bytes left): writes its shown form
 * (at most 12 bytes) to out, its length to *olen; returns the bytes of p it
 * stands for. A unit is never split by a cut. */
static size_t shown_unit(const unsigned char *p, size_t n, char out[16], size_t *olen)
{
	static const char named[] = "abtnvfr";   /* \a (7) .. \r (13), as C and git write them */
	unsigned c = p[0], cp;
	size_t k, i, o = 0;
	if (c < 0x80) {
		if (c == '\\') {
			out[0] = out[1] = '\\';
			*olen = 2;
		} else if (c >= 7 && c <= 13) {
			out[0] = '\\';
			out[1] = named[c - 7];
			*olen = 2;
		} else if (c < 0x20 || c == 0x7f) {
			*olen = octal_esc(out, (unsigned char)c);
		} else {
			out[0] = (char)c;
			*olen = 1;
		}
		return 1;
	}
	if (!(k = utf8_seq(p, n))) {
		*olen = octal_esc(out, (unsigned char)c);
		return 1;
	}
	cp = c & (k == 2 ? 0x1f : k == 3 ? 0x0f : 0x07);
	for (i = 1; i < k; i++)
		cp = (cp << 6) | (p[i] & 0x3f);
	if (shown_escaped_cp(cp)) {
		for (i = 0; i < k; i++)
			o += octal_esc(out + o, p[i]);
	} else {
		memcpy(out, p, k);
		o = k;
	}
	*olen = o;
	return k;
}

int omen_buf_put_shown(omen_buf *b, const char *s, size_t n, size_t max)
{
	const unsigned char *p = (const unsigned char *)(s ? s : "");
	char u[16];
	size_t i, k, ulen, total = 0, budget, used = 0;
	int e = 0;
	if (!s)
		n = 0;
	for (i = 0; i < n; i += k) {
		k = shown_unit(p + i, n - i, u, &ulen);
		total += ulen;
	}
	if (max && total > max)
		budget = max >= 3 ? max - 3 : max;
	else
		budget = total;
	if ((e = omen_buf_grow(b, budget + 3)))
		return e;
	for (i = 0; i < n; i += k) {
		k = shown_unit(p + i, n - i, u, &ulen);
		if (used + ulen > budget)
			break;
		memcpy(b->ptr + b->len, u, ulen);
		b->len += ulen;
		used += ulen;
	}
	if (budget < total && max >= 3) {
		memcpy(b->ptr + b->len, "...", 3);
		b->len += 3;
	}
	b->ptr[b->len] = '\0';
	return 0;
}

int omen_buf_puts_shown(omen_buf *b, const char *s, size_t max)
{
	return omen_buf_put_shown(b, s, s ? strlen(s) : 0, max);
}

void omen_buf_clear(omen_buf *b) { b->len = 0; b->err = 0; if (b->ptr) b->ptr[0] = '\0'; }
void omen_buf_free(omen_buf *b) { free(b->ptr); b->ptr = NULL; b->len = b->cap = 0; b->err = 0; }
char *omen_buf_detach(omen_buf *b)
{
	char *p = b->ptr;
	if (!p) p = calloc(1, 1);
	b->ptr = NULL; b->len = b->cap = 0; b->err = 0;
	return p;
}

int omen_array_reserve(void **ptr, size_t *cap, size_t need, size_t elem)
{
	size_t c = *cap ? *cap : 16;
	void *p;
	if (need <= *cap)
		return 0;
	while (c < need)
		c = c <= SIZE_MAX / 2 ? c * 2 : need;  /* never wraps to 0 */
	if (c > SIZE_MAX / elem)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	p = realloc(*ptr, c * elem);
	if (!p)
		return omen_error_set(OMEN_ENOMEM, "out of memory (%zu bytes)", c * elem);
	*ptr = p;
	*cap = c;
	return 0;
}

/* ---- arena --------------------------------------------------------------- */
struct omen_arena_block {
	omen_arena_block *next;
	size_t size, used;
	_Alignas(16) unsigned char data[];
};

void omen_arena_init(omen_arena *a, size_t block_size)
{
	a->head = NULL;
	a->block_size = block_size ? block_size : 64 * 1024;
	a->total = 0;
}

void *omen_arena_alloc(omen_arena *a, size_t n)
{
	omen_arena_block *b = a->head;
	size_t need = (n + 15) & ~(size_t)15;
	if (n > SIZE_MAX / 2) {  /* (n + 15) and the block header would wrap */
		omen_error_set(OMEN_ENOMEM, "out of memory (%zu bytes)", n);
		return NULL;
	}
	if (!b || b->size - b->used < need) {
		size_t sz = need > a->block_size ? need : a->block_size;
		b = malloc(sizeof(*b) + sz);
		if (!b) {
			omen_error_set(OMEN_ENOMEM, "out of memory (%zu bytes)", sz);
			return NULL;
		}
		b->size = sz;
		b->used = 0;
		b->next = a->head;
		a->head = b;
	}
	void *p = b->data + b->used;
	b->used += need;
	a->total += need;
	return p;
}

char *omen_arena_strndup(omen_arena *a, const char *s, size_t n)
{
	char *p = omen_arena_alloc(a, n + 1);
	if (p) {
		memcpy(p, s, n);
		p[n] = '\0';
	}
	return p;
}

void omen_arena_reset(omen_arena *a)
{
	omen_arena_block *b = a->head, *keep = NULL;
	while (b) {
		omen_arena_block *next = b->next;
		if (!next) keep = b; else free(b);
		b = next;
	}
	if (keep) keep->used = 0, keep->next = NULL;
	a->head = keep;
	a->total = 0;
}

void omen_arena_free(omen_arena *a)
{
	omen_arena_block *b = a->head;
	while (b) {
		omen_arena_block *next = b->next;
		free(b);
		b = next;
	}
	a->head = NULL;
	a->total = 0;
}
