/* Binary heap of int32 items over a caller's array, ordered by a caller's
 * relation (the textbook sift-up and sift-down, e.g. Cormen et al.,
 * "Introduction to Algorithms", chapter 6). One copy for every priority
 * queue in the program: the revision walk's date queue and its
 * topological order. */
#include "omen/util.h"

void omen_heap_push(int32_t *h, size_t n, int32_t v, omen_heap_before_fn before, const void *ctx)
{
	size_t i = n;
	h[i] = v;
	while (i && before(h[i], h[(i - 1) / 2], ctx)) {
		int32_t t = h[i];
		h[i] = h[(i - 1) / 2];
		h[(i - 1) / 2] = t;
		i = (i - 1) / 2;
	}
}

int32_t omen_heap_pop(int32_t *h, size_t n, omen_heap_before_fn before, const void *ctx)
{
	int32_t top = h[0];
	size_t i = 0;
	h[0] = h[--n];
	for (;;) {
		size_t a = 2 * i + 1, b = a + 1, m = i;
		int32_t t;
		if (a < n && before(h[a], h[m], ctx))
			m = a;
		if (b < n && before(h[b], h[m], ctx))
			m = b;
		if (m == i)
			break;
		t = h[i];
		h[i] = h[m];
		h[m] = t;
		i = m;
	}
	return top;
}
