/* Dataset shards (issue 11): the samples of one history, written from the
 * dataset that src/features/dataset.c builds for it, so that training over
 * many histories can read them from disk one commit at a time and never
 * holds a whole copy of the corpus. The format is in DEVELOPERS.md ("Base
 * model (in progress)"). */
#ifndef OMEN_SHARD_H
#define OMEN_SHARD_H

#include <stddef.h>
#include <stdint.h>
#include "omen/features.h"

#define OMEN_SHARD_VERSION 1u

/* What a shard keeps of every sample in its index (read at open, so a
 * sampler can pick commits by label and time without reading them). */
typedef struct {
	int64_t time;
	int8_t label, is_fix;
	uint8_t capped;
	float metrics[OMEN_NMETRICS];   /* raw, as in omen_sample */
} omen_shard_entry;

typedef struct omen_shard omen_shard;

/* Writes the samples of d (built with caps), oldest first, atomically to
 * path. File paths are not written (training needs none). */
int omen_shard_write(const omen_dataset *d, const omen_caps *caps, const char *path);

/* Opens a shard: reads and checks its header and index (CRC-32, every
 * offset and length against the file's size); samples stay on disk. */
int omen_shard_open(omen_shard **out, const char *path);
void omen_shard_close(omen_shard *s);
size_t omen_shard_size(const omen_shard *s);
const omen_shard_entry *omen_shard_entry_at(const omen_shard *s, size_t i);
/* The commit the history was read from ("" when the dataset had none). */
const char *omen_shard_tip(const omen_shard *s);
const omen_caps *omen_shard_caps(const omen_shard *s);
const char *omen_shard_path(const omen_shard *s);

/* Memory for one sample read from a shard; reused by the next read. */
typedef struct {
	uint32_t *p;
	size_t cap;   /* in words */
} omen_shard_buf;
#define OMEN_SHARD_BUF_INIT {NULL, 0}
void omen_shard_buf_free(omen_shard_buf *b);

/* Reads sample i into b (one pread, so threads may read one shard at once
 * into their own buffers) and checks it: its CRC-32, then every count and
 * offset against its length, through a bounded cursor. out's arrays point
 * into b; file_path is NULL. */
int omen_shard_read(omen_sample *out, const omen_shard *s, size_t i, omen_shard_buf *b);

#endif
