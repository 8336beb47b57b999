/* Fuzz target: the model file loader (omen_model_parse). The first input
 * byte picks how the rest becomes a model file, so that the checksum does
 * not stop the fuzzer at the door:
 *   0  the bytes as they are (checksum and length as the input has them)
 *   1  the bytes with the header's length field and the trailing CRC-32
 *      fixed up, so every later check is reached
 *   2  a valid tiny model (D=1, C=1, built once) whose JSON metadata is
 *      replaced by the bytes (cut or padded with spaces to its length),
 *      length and CRC fixed up: this explores the metadata reader
 *   3  the tiny model with the bytes as its metrics-state section
 * Oracles: errors are OMEN_ECORRUPT (or ENOMEM/EINVAL) with a message
 * starting "cannot read model 'fuzz'"; a model that parses saves and loads
 * back with the same parameters, threshold and head; its warning curve, when
 * the metadata has one that reads, is ordered and usable.
 * Corpus: fixtures/corpora/model/. */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include "omen/error.h"
#include "omen/model.h"
#include "model/internal.h"

static omen_buf base;          /* the tiny model's file image */
static size_t base_ml;         /* its metadata length */
static char tmp_path[64];

static void put_u32(unsigned char *p, uint32_t v)
{
	p[0] = (unsigned char)v; p[1] = (unsigned char)(v >> 8);
	p[2] = (unsigned char)(v >> 16); p[3] = (unsigned char)(v >> 24);
}

static void fixup(unsigned char *img, size_t n)
{
	if (n < 32)
		return;
	put_u32(img + 16, (uint32_t)n);
	put_u32(img + 20, (uint32_t)((uint64_t)n >> 32));
	put_u32(img + n - 4, omen_crc32(0, img, n - 4));
}

static void init_base(void)
{
	omen_model *m = NULL;
	const unsigned char *p;
	if (base.len)
		return;
	/* tmpfs when there is one: the save fsyncs, which costs a disk flush */
	snprintf(tmp_path, sizeof(tmp_path), "%s/omen-fuzz-model.%ld",
		access("/dev/shm", W_OK) == 0 ? "/dev/shm" : "/tmp", (long)getpid());
	if (omen_model_alloc(&m, 1, 1))
		abort();
	omen_model_init_weights(m, 1);
	if (omen_model_save(m, tmp_path) || omen_file_read(&base, tmp_path, 0))
		abort();
	omen_model_free(m);
	unlink(tmp_path);
	p = (const unsigned char *)base.ptr + 24;
	base_ml = (size_t)p[0] | (size_t)p[1] << 8 | (size_t)p[2] << 16 | (size_t)p[3] << 24;
}

static void check_roundtrip(const omen_model *m)
{
	omen_model *m2 = NULL;
	if (omen_model_save(m, tmp_path))
		abort();
	if (omen_model_load(&m2, tmp_path))
		abort();
	unlink(tmp_path);
	if (m2->nparams != m->nparams || memcmp(m2->params, m->params, m->nparams * sizeof(float)) ||
	    omen_model_threshold(m2) != omen_model_threshold(m) ||
	    strcmp(omen_model_head(m2), omen_model_head(m)) || m2->platt_a != m->platt_a ||
	    m2->platt_b != m->platt_b)
		abort();
	omen_model_free(m2);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	omen_buf img = OMEN_BUF_INIT;
	omen_model *m = NULL;
	int mode, e;
	init_base();
	if (size < 1)
		return 0;
	mode = data[0] % 4;
	data++, size--;
	switch (mode) {
	case 0:
	case 1:
		omen_buf_put(&img, data, size);
		if (mode == 1)
			fixup((unsigned char *)img.ptr, img.len);
		break;
	case 2:
		omen_buf_put(&img, base.ptr, base.len);
		memset(img.ptr + 32, ' ', base_ml);
		memcpy(img.ptr + 32, data, size < base_ml ? size : base_ml);
		fixup((unsigned char *)img.ptr, img.len);
		break;
	case 3: {
		unsigned char len8[8];
		put_u32(len8, (uint32_t)size);
		put_u32(len8 + 4, 0);
		omen_buf_put(&img, base.ptr, base.len - 12);  /* drop "u64 0, CRC" */
		omen_buf_put(&img, len8, 8);
		omen_buf_put(&img, data, size);
		omen_buf_put(&img, "CRC!", 4);
		fixup((unsigned char *)img.ptr, img.len);
		break;
	}
	}
	omen_error_clear();
	e = omen_model_parse(&m, "fuzz", img.ptr ? img.ptr : "", img.len);
	if (e) {
		if (m)
			abort();
		if (e != OMEN_ECORRUPT && e != OMEN_ENOMEM && e != OMEN_EINVAL)
			abort();
		if (e == OMEN_ECORRUPT && strncmp(omen_error_last(), "cannot read model 'fuzz'", 24))
			abort();
	} else {
		if (!m || !omen_model_meta(m))
			abort();
		if (!(omen_model_threshold(m) >= 0 && omen_model_threshold(m) <= 1))
			abort();
		check_roundtrip(m);
		{
			/* the warning curve in the metadata (issue 12): absent, refused,
			 * or thresholds non-increasing in [0, 1] that a share can pick */
			omen_warn_curve c;
			omen_warn_choice ch;
			int k, we = omen_model_warn_curve(&c, m);
			if (we && we != OMEN_ENOTFOUND && we != OMEN_ECORRUPT)
				abort();
			if (!we) {
				for (k = 0; k < c.npoints; k++)
					if (!(c.thr[k] >= 0 && c.thr[k] <= 1) || (k && c.thr[k] > c.thr[k - 1]))
						abort();
				if (omen_warn_pick(&ch, &c, 0.1, 0) || !(ch.threshold >= 0 && ch.threshold <= 1))
					abort();
			}
			omen_error_clear();
		}
		omen_model_free(m);
	}
	omen_buf_free(&img);
	return 0;
}
