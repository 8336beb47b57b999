/* Index over a caller's items: open addressing with linear probing in a
 * power-of-two table kept at most half full (Knuth, TAOCP vol. 3, 6.4,
 * algorithm L). It holds item indices only; the caller's array holds the
 * keys, and ops compare and hash them. */
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/util.h"

int32_t omen_index_find(const omen_index *x, const void *key, uint64_t h,
	const omen_index_ops *ops, const void *ctx)
{
	size_t k;
	if (!x->cap)
		return -1;
	for (k = (size_t)h & (x->cap - 1); x->slots[k] >= 0; k = (k + 1) & (x->cap - 1))
		if (ops->is(x->slots[k], key, ctx))
			return x->slots[k];
	return -1;
}

static void place(int32_t *slots, size_t cap, int32_t item, uint64_t h)
{
	size_t k = (size_t)h & (cap - 1);
	while (slots[k] >= 0)
		k = (k + 1) & (cap - 1);
	slots[k] = item;
}

int omen_index_add(omen_index *x, int32_t item, uint64_t h, const omen_index_ops *ops,
	const void *ctx)
{
	if ((x->n + 1) * 2 > x->cap) {
		size_t cap = x->cap ? x->cap * 2 : 1024;
		int32_t *s = malloc(cap * sizeof(*s));
		if (!s)
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		memset(s, 0xff, cap * sizeof(*s));
		for (size_t i = 0; i < x->cap; i++)
			if (x->slots[i] >= 0)
				place(s, cap, x->slots[i], ops->hash(x->slots[i], ctx));
		free(x->slots);
		x->slots = s;
		x->cap = cap;
	}
	place(x->slots, x->cap, item, h);
	x->n++;
	return 0;
}

void omen_index_free(omen_index *x)
{
	free(x->slots);
	x->slots = NULL;
	x->cap = x->n = 0;
}
