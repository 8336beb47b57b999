/* Fuzz target: the bounded cursor (omen_cursor_*) every parser of outside
 * bytes reads through. The input drives a sequence of reads over itself:
 * each step takes one op byte, then reads. Oracles: bytes consumed plus
 * bytes left always equal the input size; returned pointers stay inside the
 * input; a read past the end fails, zeroes its output and leaves the cursor
 * failed for good; integers decode little-endian; lines never contain '\n'
 * and never end in the '\r' before it. Corpus: fixtures/corpora/cursor/. */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include "omen/util.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	omen_cursor c;
	const uint8_t *end = data + size;
	int failed = 0, steps = 0;
	omen_cursor_init(&c, data, size);
	while (steps++ < 4096) {
		size_t before = c.n, off = size - c.n;
		uint8_t op;
		int r;
		if (omen_cursor_u8(&c, &op)) {
			if (!c.err || op != 0)
				abort();
			break;
		}
		before = c.n;
		off = size - c.n;
		switch (op % 6) {
		case 0: {
			uint8_t v = 0xaa;
			r = omen_cursor_u8(&c, &v);
			if (!r && v != data[off]) abort();
			if (r && v != 0) abort();
			break;
		}
		case 1: {
			uint32_t v = 0xdeadbeef;
			r = omen_cursor_u32le(&c, &v);
			if (!r && v != ((uint32_t)data[off] | (uint32_t)data[off + 1] << 8 |
			                (uint32_t)data[off + 2] << 16 | (uint32_t)data[off + 3] << 24))
				abort();
			if (r && (v != 0 || before >= 4)) abort();
			break;
		}
		case 2: {
			uint64_t v = 1;
			size_t k;
			uint64_t want = 0;
			r = omen_cursor_u64le(&c, &v);
			if (!r) {
				for (k = 0; k < 8; k++)
					want |= (uint64_t)data[off + k] << (8 * k);
				if (v != want) abort();
			}
			if (r && (v != 0 || before >= 8)) abort();
			break;
		}
		case 3: case 4: {
			/* length from the next byte; op 4 asks for absurd sizes too */
			uint8_t lb = 0;
			const void *p = (const void *)1;
			size_t want;
			if (omen_cursor_u8(&c, &lb)) break;
			before = c.n;
			off = size - c.n;
			want = op % 6 == 3 ? lb : (lb & 1 ? SIZE_MAX - lb : (size_t)lb << 20);
			r = omen_cursor_bytes(&c, &p, want);
			if (!r && (p != data + off || (const uint8_t *)p + want > end)) abort();
			if (r && (p != NULL || want <= before)) abort();
			break;
		}
		case 5: {
			const char *l = NULL;
			size_t len = 0;
			r = omen_cursor_line(&c, &l, &len);
			if (r) {
				if ((const uint8_t *)l != data + off || (const uint8_t *)l + len > end) abort();
				if (memchr(l, '\n', len)) abort();
				if (c.n == before) abort();  /* a line always consumes */
				if (len && l[len - 1] == '\r' && (const uint8_t *)l + len < end &&
				    l[len] == '\n')
					abort();
			} else if (before != 0 && !c.err) {
				abort();  /* end of input only when nothing is left */
			}
			r = 0;
			break;
		}
		}
		if (c.n > before || size - c.n < off) abort();
		if (c.p != end - c.n) abort();
		if (r && !c.err) abort();
		if (failed && !c.err) abort();
		failed = c.err;
		if (failed) {
			uint8_t v = 9;
			if (!omen_cursor_u8(&c, &v) || v != 0) abort();  /* sticky */
			break;
		}
	}
	return 0;
}
