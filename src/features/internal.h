/* Internals shared by sample.c and dataset.c. */
#ifndef OMEN_FEATURES_INTERNAL_H
#define OMEN_FEATURES_INTERNAL_H

#include "omen/features.h"

struct omen_sample_buf {
	int32_t *file_off; size_t file_off_cap;
	int32_t *hunk_off; size_t hunk_off_cap;
	uint32_t *tok; size_t tok_cap;
	int32_t *tok_line; size_t tok_line_cap;
	uint32_t *msg; size_t msg_cap;
	float *facts; size_t facts_cap;
	int32_t *hs; size_t hs_cap;          /* [nhunks*4] new start, new lines, old start, old lines */
	size_t *paths; size_t paths_cap;     /* offsets into names */
	int32_t *order; size_t order_cap;    /* kept file -> index in the change */
	char **path_ptr; size_t path_ptr_cap;    /* file paths (pointers into names), kept file order */
	int32_t *hunk_new_start; size_t hunk_new_start_cap;
	int32_t *hunk_new_lines; size_t hunk_new_lines_cap;
	int32_t *hunk_old_start; size_t hunk_old_start_cap;
	int32_t *hunk_old_lines; size_t hunk_old_lines_cap;
	omen_buf names;
	int32_t nfiles, nhunks, ntok, nmsg;
};

uint32_t omen_token_id(const char *tok, size_t len, int deleted);
uint32_t omen_msg_token_id(const char *tok, size_t len);

#endif
