/* Fuzz target: the code and message tokenizers (omen_tokenize_code,
 * omen_tokenize_message) and the line classifiers, on arbitrary bytes.
 * The first input byte picks the tokenizer; the rest is the text. Oracles:
 * every token is non-empty, at most as long
 * as the input or one of the fixed markers ("<str>", "<numbig>" ...), valid
 * UTF-8 (invalid bytes are skipped, never emitted), free of whitespace and
 * NUL; the count stays linear in the input (an identifier yields itself plus
 * at most one part per byte); the same input gives the same tokens twice.
 * Corpus: fixtures/corpora/tokenize/. */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include "omen/features.h"
#include "omen/history.h"

struct acc {
	size_t n, bytes, limit;
	uint64_t h;
};

static void on_token(const char *tok, size_t len, void *payload)
{
	struct acc *a = payload;
	size_t i;
	if (!tok || len == 0)
		abort();
	if (len > a->limit && !(tok[0] == '<' && len <= 12))
		abort();
	if (!omen_utf8_valid(tok, len))
		abort();
	for (i = 0; i < len; i++)
		if (tok[i] == '\0' || tok[i] == ' ' || tok[i] == '\n' || tok[i] == '\t' || tok[i] == '\r')
			abort();
	a->n++;
	a->bytes += len;
	a->h = omen_hash64(tok, len, a->h);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	struct acc a = {0, 0, 0, 1}, b = {0, 0, 0, 1};
	const char *s;
	char *copy;
	int mode;
	if (size < 1)
		return 0;
	mode = data[0] & 1;
	/* an exact-size copy: reads past the end are caught by the sanitizers */
	size--;
	if (!(copy = malloc(size ? size : 1)))
		return 0;
	memcpy(copy, data + 1, size);
	s = copy;
	a.limit = b.limit = size;
	if (mode == 0) {
		omen_tokenize_code(s, size, on_token, &a);
		omen_tokenize_code(s, size, on_token, &b);
	} else {
		omen_tokenize_message(s, size, on_token, &a);
		omen_tokenize_message(s, size, on_token, &b);
	}
	if (a.n != b.n || a.h != b.h)
		abort();  /* deterministic */
	if (a.n > 2 * size + 1)
		abort();  /* linear */
	{
		int blank = omen_line_is_blank(s, size), comment = omen_line_is_comment(s, size);
		if ((blank != 0 && blank != 1) || (comment != 0 && comment != 1))
			abort();
		if (blank && mode == 0 && a.n)
			abort();  /* a blank line has no code tokens */
	}
	free(copy);
	return 0;
}
