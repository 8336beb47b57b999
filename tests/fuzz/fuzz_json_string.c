/* Fuzz target: omen_buf_put_json_string (what every JSON, JSON Lines and
 * SARIF writer uses for paths, messages and names) fed arbitrary bytes.
 * Oracles: the output parses with cJSON as one string (RFC 8259); the
 * output text and the decoded string are valid UTF-8 by an independent
 * check written from RFC 3629 section 4 (no overlongs, no surrogates, max
 * U+10FFFF); no raw control character survives; valid UTF-8 input
 * round-trips byte for byte (up to a NUL, where cJSON's C string ends).
 * Corpus: fixtures/corpora/json_string/. */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>
#include "omen/util.h"

/* RFC 3629, section 4 (UTF8-octets ABNF), written out byte range by range. */
static int rfc3629_valid(const unsigned char *s, size_t n)
{
	size_t i = 0;
#define TAIL(k) (i + (k) < n && s[i + (k)] >= 0x80 && s[i + (k)] <= 0xbf)
	while (i < n) {
		unsigned char c = s[i];
		if (c <= 0x7f) { i += 1; continue; }
		if (c >= 0xc2 && c <= 0xdf && TAIL(1)) { i += 2; continue; }
		if (c == 0xe0 && i + 1 < n && s[i + 1] >= 0xa0 && s[i + 1] <= 0xbf && TAIL(2)) { i += 3; continue; }
		if (((c >= 0xe1 && c <= 0xec) || c == 0xee || c == 0xef) && TAIL(1) && TAIL(2)) { i += 3; continue; }
		if (c == 0xed && i + 1 < n && s[i + 1] >= 0x80 && s[i + 1] <= 0x9f && TAIL(2)) { i += 3; continue; }
		if (c == 0xf0 && i + 1 < n && s[i + 1] >= 0x90 && s[i + 1] <= 0xbf && TAIL(2) && TAIL(3)) { i += 4; continue; }
		if (c >= 0xf1 && c <= 0xf3 && TAIL(1) && TAIL(2) && TAIL(3)) { i += 4; continue; }
		if (c == 0xf4 && i + 1 < n && s[i + 1] >= 0x80 && s[i + 1] <= 0x8f && TAIL(2) && TAIL(3)) { i += 4; continue; }
		return 0;
	}
#undef TAIL
	return 1;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	omen_buf b = OMEN_BUF_INIT;
	cJSON *j;
	const char *nul;
	size_t i, plen;
	if (omen_buf_put(&b, "[", 1) || omen_buf_put_json_string(&b, (const char *)data, size) ||
	    omen_buf_put(&b, "]", 1)) {
		omen_buf_free(&b);
		return 0;  /* out of memory only */
	}
	for (i = 0; i < b.len; i++)
		if ((unsigned char)b.ptr[i] < 0x20)
			abort();  /* raw control characters are not allowed in JSON strings */
	if (!rfc3629_valid((const unsigned char *)b.ptr, b.len))
		abort();
	j = cJSON_ParseWithLength(b.ptr, b.len);
	if (!j || !cJSON_IsArray(j) || cJSON_GetArraySize(j) != 1 ||
	    !cJSON_IsString(cJSON_GetArrayItem(j, 0)))
		abort();
	{
		const char *dec = cJSON_GetArrayItem(j, 0)->valuestring;
		size_t dlen = strlen(dec);
		if (!rfc3629_valid((const unsigned char *)dec, dlen))
			abort();
		if (rfc3629_valid(data, size) != omen_utf8_valid((const char *)data, size))
			abort();  /* the library's validator agrees with RFC 3629 */
		if (rfc3629_valid(data, size)) {
			nul = memchr(data, 0, size);
			plen = nul ? (size_t)(nul - (const char *)data) : size;
			if (dlen != plen || memcmp(dec, data, plen))
				abort();
		}
	}
	cJSON_Delete(j);
	omen_buf_free(&b);
	return 0;
}
