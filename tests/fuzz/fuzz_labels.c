/* Fuzz target: the label file reader (omen_labels_parse) on arbitrary bytes.
 * Oracles: an error is OMEN_ECORRUPT/OMEN_ENOMEM with a message naming the
 * file and a line ("bad label file 'fuzz': line N: ..."); on success every
 * record has a 40-digit lowercase id, is found again by omen_labels_get, and
 * writing the records back (lbl_write_record, the writer `git omen label`
 * uses) under the same header parses to the same records.
 * Corpus: fixtures/corpora/labels/. */
#include <ctype.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/label.h"
#include "label/internal.h"

static void check_rec(const omen_labels *l, const omen_label_rec *r)
{
	size_t i;
	if (strlen(r->id) != OMEN_OID_HEX)
		abort();
	for (i = 0; i < OMEN_OID_HEX; i++)
		if (!isxdigit((unsigned char)r->id[i]) || isupper((unsigned char)r->id[i]))
			abort();
	if (omen_labels_get(l, r->id) != r)
		abort();
	if (r->label != OMEN_LABEL_UNKNOWN && r->label != OMEN_LABEL_CLEAN &&
	    r->label != OMEN_LABEL_INDUCING)
		abort();
	for (i = 0; i < r->nfixes; i++)
		if (!r->fixes || strlen(r->fixes[i]) != OMEN_OID_HEX)
			abort();
}

static int same(const omen_label_rec *a, const omen_label_rec *b)
{
	uint32_t i;
	if (strcmp(a->id, b->id) || a->time != b->time || a->label != b->label ||
	    a->is_fix != b->is_fix || a->fix_by != b->fix_by || a->traced_lines != b->traced_lines ||
	    a->nfixes != b->nfixes || a->merge != b->merge || a->boundary != b->boundary ||
	    a->named != b->named)
		return 0;
	for (i = 0; i < a->nfixes; i++)
		if (strcmp(a->fixes[i], b->fixes[i]))
			return 0;
	return 1;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	omen_labels *l = NULL, *l2 = NULL;
	omen_buf b = OMEN_BUF_INIT;
	size_t i, n;
	int e;
	omen_error_clear();
	e = omen_labels_parse(&l, "fuzz", (const char *)data, size);
	if (e) {
		if (l)
			abort();  /* *out stays NULL on error */
		if (e == OMEN_ECORRUPT && strncmp(omen_error_last(), "bad label file 'fuzz': line ", 28))
			abort();
		if (e != OMEN_ECORRUPT && e != OMEN_ENOMEM)
			abort();
		return 0;
	}
	n = omen_labels_count(l);
	for (i = 0; i < n; i++)
		check_rec(l, omen_labels_at(l, i));
	if (omen_labels_at(l, n))
		abort();
	if (strlen(omen_labels_head(l)) > OMEN_OID_HEX)
		abort();
	/* round trip through the writer */
	omen_buf_puts(&b, lbl_labels_header(l));
	omen_buf_put(&b, "\n", 1);
	for (i = 0; i < n; i++)
		lbl_write_record(&b, omen_labels_at(l, i));
	if (omen_labels_parse(&l2, "fuzz", b.ptr, b.len))
		abort();
	if (omen_labels_count(l2) != n || strcmp(omen_labels_head(l), omen_labels_head(l2)))
		abort();
	for (i = 0; i < n; i++)
		if (!same(omen_labels_at(l, i), omen_labels_at(l2, i)))
			abort();
	omen_labels_free(l2);
	omen_labels_free(l);
	omen_buf_free(&b);
	return 0;
}
