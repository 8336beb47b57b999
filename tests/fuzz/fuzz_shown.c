/* Fuzz target: omen_buf_put_shown, the one sanitiser for history text that
 * reaches a terminal (paths, messages, names, lines), fed arbitrary bytes.
 * The first two input bytes are the cap (little-endian, modulo 512; 0 = no
 * cap), the rest is the text.
 * Oracles: the output has no C0 byte and no DEL; it is valid UTF-8 by an
 * independent check written from RFC 3629 section 4; it holds no C1 control
 * (U+0080..U+009F) and no bidirectional formatting character; it is never
 * longer than the cap; uncapped, decoding its escapes (the C/git quoting
 * rules, written here from the C standard's escape list) gives the input back
 * byte for byte; capped, it is a cut of the uncapped output at a unit
 * boundary (its decoded text is a prefix of the input) followed by "...".
 * Corpus: fixtures/corpora/shown/. */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include "omen/util.h"

/* RFC 3629, section 4 (UTF8-octets ABNF), written out byte range by range,
 * and no control, separator or bidirectional character among the code points. */
static int rfc3629_check(const unsigned char *s, size_t n)
{
	size_t i = 0, k;
	unsigned cp;
#define TAIL(j) (i + (j) < n && s[i + (j)] >= 0x80 && s[i + (j)] <= 0xbf)
	while (i < n) {
		unsigned char c = s[i];
		if (c <= 0x7f) k = 1;
		else if (c >= 0xc2 && c <= 0xdf && TAIL(1)) k = 2;
		else if (c == 0xe0 && i + 1 < n && s[i + 1] >= 0xa0 && s[i + 1] <= 0xbf && TAIL(2)) k = 3;
		else if (((c >= 0xe1 && c <= 0xec) || c == 0xee || c == 0xef) && TAIL(1) && TAIL(2)) k = 3;
		else if (c == 0xed && i + 1 < n && s[i + 1] >= 0x80 && s[i + 1] <= 0x9f && TAIL(2)) k = 3;
		else if (c == 0xf0 && i + 1 < n && s[i + 1] >= 0x90 && s[i + 1] <= 0xbf && TAIL(2) && TAIL(3)) k = 4;
		else if (c >= 0xf1 && c <= 0xf3 && TAIL(1) && TAIL(2) && TAIL(3)) k = 4;
		else if (c == 0xf4 && i + 1 < n && s[i + 1] >= 0x80 && s[i + 1] <= 0x8f && TAIL(2) && TAIL(3)) k = 4;
		else return 0;
		cp = k == 1 ? c : k == 2 ? (c & 0x1fu) : k == 3 ? (c & 0x0fu) : (c & 0x07u);
		for (size_t j = 1; j < k; j++)
			cp = cp << 6 | (s[i + j] & 0x3fu);
		if (cp < 0x20 || cp == 0x7f || (cp >= 0x80 && cp <= 0x9f))
			return 0;   /* a control character */
		if (cp == 0x061c || cp == 0x200e || cp == 0x200f || (cp >= 0x2028 && cp <= 0x202e) ||
		    (cp >= 0x2066 && cp <= 0x2069))
			return 0;   /* a separator or bidirectional control */
		i += k;
	}
#undef TAIL
	return 1;
}

/* Decodes s[0..n) (escapes as in C: \\ \a \b \t \n \v \f \r \ooo) into out;
 * returns its length, or (size_t)-1 on a malformed escape. */
static size_t unescape(unsigned char *out, const char *s, size_t n)
{
	size_t i = 0, o = 0;
	while (i < n) {
		if (s[i] != '\\') {
			out[o++] = (unsigned char)s[i++];
			continue;
		}
		if (i + 1 >= n)
			return (size_t)-1;
		switch (s[i + 1]) {
		case '\\': out[o++] = '\\'; i += 2; continue;
		case 'a': out[o++] = '\a'; i += 2; continue;
		case 'b': out[o++] = '\b'; i += 2; continue;
		case 't': out[o++] = '\t'; i += 2; continue;
		case 'n': out[o++] = '\n'; i += 2; continue;
		case 'v': out[o++] = '\v'; i += 2; continue;
		case 'f': out[o++] = '\f'; i += 2; continue;
		case 'r': out[o++] = '\r'; i += 2; continue;
		default: break;
		}
		if (i + 3 >= n || s[i + 1] < '0' || s[i + 1] > '3' || s[i + 2] < '0' || s[i + 2] > '7' ||
		    s[i + 3] < '0' || s[i + 3] > '7')
			return (size_t)-1;
		out[o++] = (unsigned char)((s[i + 1] - '0') << 6 | (s[i + 2] - '0') << 3 | (s[i + 3] - '0'));
		i += 4;
	}
	return o;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	omen_buf full = OMEN_BUF_INIT, cut = OMEN_BUF_INIT;
	const char *text;
	unsigned char *dec = NULL;
	size_t n, max, i, d, body;
	if (size < 2)
		return 0;
	max = (size_t)(data[0] | data[1] << 8) % 512;
	text = (const char *)data + 2;
	n = size - 2;
	if (omen_buf_put(&full, "", 0) || omen_buf_put(&cut, ">", 1) ||
	    omen_buf_put_shown(&full, text, n, 0) || omen_buf_put_shown(&cut, text, n, max))
		goto out;   /* out of memory only */
	if (!(dec = malloc(full.len + 1)))
		goto out;
	for (i = 0; i < full.len; i++)
		if ((unsigned char)full.ptr[i] < 0x20 || full.ptr[i] == 0x7f)
			abort();
	if (!rfc3629_check((const unsigned char *)full.ptr, full.len) ||
	    !rfc3629_check((const unsigned char *)cut.ptr, cut.len))
		abort();
	d = unescape(dec, full.ptr, full.len);
	if (d != n || memcmp(dec, text, n))
		abort();   /* the escapes lose nothing */
	/* the capped output, after the '>' it was appended to */
	if (cut.ptr[0] != '>' || cut.len - 1 > (max ? max : (size_t)-1))
		abort();
	if (!max || full.len <= max) {
		if (cut.len - 1 != full.len || memcmp(cut.ptr + 1, full.ptr, full.len))
			abort();
	} else {
		body = cut.len - 1;
		if (max >= 3) {
			if (body < 3 || memcmp(cut.ptr + cut.len - 3, "...", 3))
				abort();
			body -= 3;
		}
		if (memcmp(cut.ptr + 1, full.ptr, body))
			abort();   /* a prefix of the uncapped text */
		d = unescape(dec, cut.ptr + 1, body);
		if (d == (size_t)-1 || d > n || memcmp(dec, text, d))
			abort();   /* cut between escapes, never inside one */
		if (!rfc3629_check((const unsigned char *)cut.ptr + 1, body))
			abort();   /* and never inside a character */
	}
out:
	free(dec);
	omen_buf_free(&full);
	omen_buf_free(&cut);
	return 0;
}
