/* Hashing (FNV-1a 64 with a murmur3 finaliser), CRC-32 (IEEE 802.3,
 * reflected 0xEDB88320, as zlib's crc32) and a string-keyed hash map. */
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/util.h"

uint64_t omen_hash64(const void *data, size_t n, uint64_t seed)
{
	const unsigned char *p = data;
	uint64_t h = 0xcbf29ce484222325ull ^ (seed * 0x9e3779b97f4a7c15ull);
	size_t i;
	for (i = 0; i < n; i++) {
		h ^= p[i];
		h *= 0x100000001b3ull;
	}
	h ^= h >> 33;
	h *= 0xff51afd7ed558ccdull;
	h ^= h >> 33;
	h *= 0xc4ceb9fe1a85ec53ull;
	h ^= h >> 33;
	return h;
}

/* Slicing-by-8 (Kounavis & Berry, Intel 2005): eight tables, eight bytes a
 * step; the model loader checksums every byte of the file on each hook run. */
static uint32_t crc_table[8][256];
static int crc_ready;

static void crc_init(void)
{
	uint32_t i, k, c;
	for (i = 0; i < 256; i++) {
		c = i;
		for (k = 0; k < 8; k++)
			c = c & 1 ? 0xedb88320u ^ (c >> 1) : c >> 1;
		crc_table[0][i] = c;
	}
	for (i = 0; i < 256; i++)
		for (k = 1; k < 8; k++)
			crc_table[k][i] = (crc_table[k - 1][i] >> 8) ^ crc_table[0][crc_table[k - 1][i] & 0xff];
	crc_ready = 1;
}

uint32_t omen_crc32(uint32_t crc, const void *data, size_t n)
{
	const unsigned char *p = data;
	if (!crc_ready)
		crc_init();  /* idempotent: a race writes identical values */
	crc = ~crc;
	while (n >= 8) {
		uint32_t lo = crc ^ ((uint32_t)p[0] | (uint32_t)p[1] << 8 | (uint32_t)p[2] << 16 |
			(uint32_t)p[3] << 24);
		crc = crc_table[7][lo & 0xff] ^ crc_table[6][(lo >> 8) & 0xff] ^
			crc_table[5][(lo >> 16) & 0xff] ^ crc_table[4][lo >> 24] ^
			crc_table[3][p[4]] ^ crc_table[2][p[5]] ^ crc_table[1][p[6]] ^ crc_table[0][p[7]];
		p += 8;
		n -= 8;
	}
	while (n--)
		crc = crc_table[0][(crc ^ *p++) & 0xff] ^ (crc >> 8);
	return ~crc;
}

/* ---- string map ---------------------------------------------------------- */
static size_t slot_of(const omen_strmap *m, const char *key)
{
	size_t mask = m->cap - 1;
	size_t i = (size_t)omen_hash64(key, strlen(key), 0) & mask;
	while (m->keys[i] && strcmp(m->keys[i], key))
		i = (i + 1) & mask;
	return i;
}

static int strmap_rehash(omen_strmap *m, size_t cap)
{
	omen_strmap n = {calloc(cap, sizeof(char *)), calloc(cap, sizeof(void *)), cap, 0};
	size_t i;
	if (!n.keys || !n.vals) {
		free(n.keys);
		free(n.vals);
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	}
	for (i = 0; i < m->cap; i++) {
		if (m->keys[i]) {
			size_t j = slot_of(&n, m->keys[i]);
			n.keys[j] = m->keys[i];
			n.vals[j] = m->vals[i];
			n.len++;
		}
	}
	free(m->keys);
	free(m->vals);
	*m = n;
	return 0;
}

void **omen_strmap_slot(omen_strmap *m, const char *key, int *created)
{
	size_t i;
	if (created)
		*created = 0;
	if ((m->len + 1) * 4 >= m->cap * 3 && strmap_rehash(m, m->cap ? m->cap * 2 : 64))
		return NULL;
	i = slot_of(m, key);
	if (!m->keys[i]) {
		if (!(m->keys[i] = strdup(key))) {
			omen_error_set(OMEN_ENOMEM, "out of memory");
			return NULL;
		}
		m->vals[i] = NULL;
		m->len++;
		if (created)
			*created = 1;
	}
	return &m->vals[i];
}

int omen_strmap_put(omen_strmap *m, const char *key, void *val)
{
	void **s = omen_strmap_slot(m, key, NULL);
	if (!s)
		return OMEN_ENOMEM;
	*s = val;
	return 0;
}

void *omen_strmap_get(const omen_strmap *m, const char *key)
{
	size_t i;
	if (!m->cap)
		return NULL;
	i = slot_of(m, key);
	return m->keys[i] ? m->vals[i] : NULL;
}

void omen_strmap_free(omen_strmap *m, void (*free_val)(void *))
{
	size_t i;
	for (i = 0; i < m->cap; i++) {
		if (m->keys[i]) {
			free(m->keys[i]);
			if (free_val)
				free_val(m->vals[i]);
		}
	}
	free(m->keys);
	free(m->vals);
	m->keys = NULL;
	m->vals = NULL;
	m->cap = m->len = 0;
}
