/* Fuzz target: the dataset shard reader (omen_shard_open, omen_shard_read).
 * The first input byte picks how the rest becomes a shard file, so that the
 * checksums do not stop the fuzzer at the door:
 *   0  the bytes as they are
 *   1  a valid tiny shard (two samples, built once) whose first sample after
 *      its commit id is overwritten by the bytes, that sample's CRC-32 in
 *      the index and the header-and-index CRC-32 fixed up: this explores
 *      the sample parser
 *   2  the tiny shard with the bytes over its index, the trailer fixed up:
 *      this explores the index checks
 * Oracles: errors are OMEN_ECORRUPT (or ENOMEM, EINVAL, EIO) with a message
 * starting "cannot read shard"; a sample that reads has offsets that agree
 * with its counts (its arrays are then read whole, under ASan in make asan).
 * Corpus: fixtures/corpora/shard/. */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include "omen/error.h"
#include "omen/shard.h"
#include "omen/util.h"

#define HDR 128
#define IDX 88

static omen_buf base;
static char tmp_path[64];

static void put_u32(unsigned char *p, uint32_t v)
{
	p[0] = (unsigned char)v; p[1] = (unsigned char)(v >> 8);
	p[2] = (unsigned char)(v >> 16); p[3] = (unsigned char)(v >> 24);
}

static uint64_t get_u64(const unsigned char *p)
{
	uint64_t v = 0;
	for (int i = 7; i >= 0; i--)
		v = v << 8 | p[i];
	return v;
}

static void init_base(void)
{
	static const int32_t file_off[2] = {0, 1}, hunk_off[2] = {0, 3}, tl[3] = {1, 2, -1};
	static const uint32_t tok[3] = {5, 70000, 9}, msg[2] = {1, 2};
	static const int32_t hs[1] = {1}, hl[1] = {2}, os[1] = {1}, ol[1] = {1};
	float facts[OMEN_NFACTS] = {1, 0, 0, 2, 1, 0, 3, 4};
	omen_sample s[2];
	omen_dataset *d = NULL;
	omen_caps caps = OMEN_CAPS_DEFAULT;
	int i;
	if (base.len)
		return;
	snprintf(tmp_path, sizeof(tmp_path), "%s/omen-fuzz-shard.%ld",
		access("/dev/shm", W_OK) == 0 ? "/dev/shm" : "/tmp", (long)getpid());
	memset(s, 0, sizeof(s));
	for (i = 0; i < 2; i++) {
		memset(s[i].id, 'a' + i, OMEN_OID_HEX);
		s[i].time = 1600000000 + i;
		s[i].label = (int8_t)i;
		s[i].la = 2; s[i].ld = 1;
		s[i].metrics[0] = 1; s[i].metrics[4] = 2;
		s[i].nfiles = 1; s[i].nhunks = 1; s[i].ntok = 3; s[i].nmsg = 2;
		s[i].file_off = file_off; s[i].hunk_off = hunk_off;
		s[i].tok = tok; s[i].tok_line = tl; s[i].msg = msg; s[i].file_facts = facts;
		s[i].hunk_new_start = hs; s[i].hunk_new_lines = hl;
		s[i].hunk_old_start = os; s[i].hunk_old_lines = ol;
	}
	if (omen_dataset_from_samples(&d, s, 2) || omen_shard_write(d, &caps, tmp_path) ||
		omen_file_read(&base, tmp_path, 0))
		abort();
	omen_dataset_free(d);
	unlink(tmp_path);
}

/* The index entry of sample 0 and the trailer, after the image changed. */
static void fix_crcs(unsigned char *img, size_t n, int sample0)
{
	uint64_t xoff = get_u64(img + 24);
	if (sample0) {
		uint64_t off = get_u64(img + xoff);
		uint32_t len = (uint32_t)img[xoff + 8] | (uint32_t)img[xoff + 9] << 8 |
			(uint32_t)img[xoff + 10] << 16 | (uint32_t)img[xoff + 11] << 24;
		put_u32(img + xoff + 12, omen_crc32(0, img + off, len));
	}
	put_u32(img + n - 4, omen_crc32(omen_crc32(0, img, HDR), img + xoff, n - 4 - xoff));
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	omen_buf img = OMEN_BUF_INIT;
	omen_shard *sh = NULL;
	omen_shard_buf b = OMEN_SHARD_BUF_INIT;
	int mode, e;
	size_t i;
	init_base();
	if (size < 1)
		return 0;
	mode = data[0] % 3;
	data++, size--;
	if (mode == 0) {
		omen_buf_put(&img, data, size);
	} else {
		unsigned char *p;
		uint64_t xoff, off, room;
		omen_buf_put(&img, base.ptr, base.len);
		p = (unsigned char *)img.ptr;
		xoff = get_u64(p + 24);
		if (mode == 1) {
			off = get_u64(p + xoff) + OMEN_OID_HEX;
			room = xoff - off;
		} else {
			off = xoff;
			room = img.len - 4 - xoff;
		}
		memcpy(p + off, data, size < room ? size : room);
		fix_crcs(p, img.len, mode == 1);
	}
	if (omen_file_write_atomic(tmp_path, img.ptr ? img.ptr : "", img.len))
		abort();
	omen_error_clear();
	e = omen_shard_open(&sh, tmp_path);
	if (e) {
		if (sh)
			abort();
		if (e != OMEN_ECORRUPT && e != OMEN_ENOMEM && e != OMEN_EINVAL && e != OMEN_EIO)
			abort();
		if (strncmp(omen_error_last(), "cannot read shard", 17))
			abort();
	} else {
		for (i = 0; i < omen_shard_size(sh); i++) {
			omen_sample s;
			int32_t k;
			uint64_t sum = 0;
			if (omen_shard_read(&s, sh, i, &b)) {
				if (strncmp(omen_error_last(), "cannot read shard", 17))
					abort();
				continue;
			}
			if (s.file_off[s.nfiles] != s.nhunks || s.hunk_off[s.nhunks] != s.ntok)
				abort();
			for (k = 0; k < s.ntok; k++)
				sum += s.tok[k] + (uint32_t)s.tok_line[k];
			for (k = 0; k < s.nmsg; k++)
				sum += s.msg[k];
			for (k = 0; k < s.nhunks; k++)
				sum += (uint32_t)(s.hunk_new_start[k] + s.hunk_old_lines[k]);
			if (sum == 0xffffffffffffffffull)   /* keeps the reads */
				abort();
		}
		omen_shard_close(sh);
	}
	unlink(tmp_path);
	omen_shard_buf_free(&b);
	omen_buf_free(&img);
	return 0;
}
