/* Fuzz target: git's pre-push protocol lines (omen_prepush_parse). */
#include <stdint.h>
#include <stddef.h>
#include <string.h>
#include "omen/score.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	omen_push_list l;
	size_t i;
	if (omen_prepush_parse(&l, data, size) == 0) {
		for (i = 0; i < l.n; i++) {
			/* every parsed id is hex of a known length, refs are non-empty */
			if ((l.v[i].id_len != 40 && l.v[i].id_len != 64) ||
			    strlen(l.v[i].local_id) != (size_t)l.v[i].id_len || !l.v[i].local_ref[0])
				__builtin_trap();
		}
	}
	omen_prepush_free(&l);
	return 0;
}
