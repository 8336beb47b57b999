/* Dataset shards (issue 11): one history's samples on disk, read back one
 * commit at a time. Little-endian throughout; the layout:
 *
 *   0    8  magic "OMENSHRD"
 *   8    4  u32 version (OMEN_SHARD_VERSION)     12  4  u32 reserved (0)
 *   16   8  u64 samples n                         24  8  u64 index offset X
 *   32  16  u32 caps: files, hunks a file, tokens a hunk, message tokens
 *   48  16  u32 metrics, file facts, vocabulary, message vocabulary
 *   64  40  the history's tip (hex; zeros when none)    104 24  zeros
 *   128  .  samples, each at an 8-byte aligned offset (layout at put_sample)
 *   X    .  index: n entries of IDX bytes (offset, length, CRC-32 of the
 *            sample, time, label, fix flag, capped flag, raw metrics)
 *   ..   4  u32 CRC-32 of the header and the index
 *
 * Every sample carries its own CRC-32, checked when it is read, so a reader
 * never needs the whole file in memory and never trusts a byte it did not
 * check. */
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>
#include "omen/error.h"
#include "omen/shard.h"
#include "omen/util.h"

#define SH_MAGIC "OMENSHRD"
#define SH_HDR 128
#define SH_IDX 88
#define SH_FIXED 35   /* words of a sample before its arrays */

struct omen_shard {
	int fd;
	char *path;
	size_t n;
	omen_shard_entry *e;
	uint64_t *off;
	uint32_t *len, *crc;
	omen_caps caps;
	char tip[OMEN_OID_HEX + 1];
};

static int host_is_le(void)
{
	const uint32_t one = 1;
	unsigned char b;
	memcpy(&b, &one, 1);
	return b == 1;
}

static uint32_t f2u(float f)
{
	uint32_t u;
	memcpy(&u, &f, 4);
	return u;
}

static float u2f(uint32_t u)
{
	float f;
	memcpy(&f, &u, 4);
	return f;
}

/* Words of a sample with these counts (counts are int32, so no overflow). */
static uint64_t sample_words(uint64_t nf, uint64_t nh, uint64_t nt, uint64_t nm)
{
	return SH_FIXED + (nf + 1) + (nh + 1) + 2 * nt + nm + nf * OMEN_NFACTS + 4 * nh;
}

static int put_arr(omen_buf *b, const void *p, size_t nwords)
{
	if (!nwords)
		return 0;
	if (p)
		return omen_buf_put(b, p, nwords * 4);
	if (omen_buf_grow(b, nwords * 4))
		return OMEN_ENOMEM;
	memset(b->ptr + b->len, 0, nwords * 4);
	b->len += nwords * 4;
	return 0;
}

/* A sample: id (40 bytes), u64 time, i32 la, ld, files, hunks, tokens,
 * message tokens, label, fix flag, capped flag, 14 f32 raw metrics; then
 * the arrays of omen_sample in this order: file_off, hunk_off, tok,
 * tok_line, msg, file_facts, hunk new start, new lines, old start, old
 * lines. */
static int put_sample(omen_buf *b, const omen_sample *s)
{
	int e = 0, j;
	int32_t w[9] = {s->la, s->ld, s->nfiles, s->nhunks, s->ntok, s->nmsg, s->label, s->is_fix,
		s->capped};
	e = omen_buf_put(b, s->id, OMEN_OID_HEX);
	if (!e) e = omen_buf_put_u64le(b, (uint64_t)s->time);
	for (j = 0; !e && j < 9; j++)
		e = omen_buf_put_u32le(b, (uint32_t)w[j]);
	for (j = 0; !e && j < OMEN_NMETRICS; j++)
		e = omen_buf_put_u32le(b, f2u(s->metrics[j]));
	if (!e) e = put_arr(b, s->file_off, (size_t)s->nfiles + 1);
	if (!e) e = put_arr(b, s->hunk_off, (size_t)s->nhunks + 1);
	if (!e) e = put_arr(b, s->tok, (size_t)s->ntok);
	if (!e) e = put_arr(b, s->tok_line, (size_t)s->ntok);
	if (!e) e = put_arr(b, s->msg, (size_t)s->nmsg);
	if (!e) e = put_arr(b, s->file_facts, (size_t)s->nfiles * OMEN_NFACTS);
	if (!e) e = put_arr(b, s->hunk_new_start, (size_t)s->nhunks);
	if (!e) e = put_arr(b, s->hunk_new_lines, (size_t)s->nhunks);
	if (!e) e = put_arr(b, s->hunk_old_start, (size_t)s->nhunks);
	if (!e) e = put_arr(b, s->hunk_old_lines, (size_t)s->nhunks);
	return e ? omen_error_set(OMEN_ENOMEM, "out of memory") : 0;
}

static int put_zeros(omen_buf *b, size_t n)
{
	static const unsigned char z[64];
	return omen_buf_put(b, z, n);
}

static int fwrite_all(FILE *fp, const void *p, size_t n)
{
	return n && fwrite(p, 1, n, fp) != n ? -1 : 0;
}

int omen_shard_write(const omen_dataset *d, const omen_caps *caps, const char *path)
{
	omen_buf hdr = OMEN_BUF_INIT, idx = OMEN_BUF_INIT, smp = OMEN_BUF_INIT;
	omen_atomic_file f;
	size_t n = omen_dataset_size(d), i;
	uint64_t off = SH_HDR;
	uint32_t crc;
	unsigned char tail[4];
	const char *tip = omen_dataset_tip(d);
	int e = 0, opened = 0, j;

	if (!host_is_le())
		return omen_error_set(OMEN_EINVAL, "cannot write shard '%s': not a little-endian host",
			path);
	if ((e = omen_atomic_open(&f, path)))
		goto out;
	opened = 1;
	/* the header is written last into a buffer but goes first in the file:
	 * leave room for it */
	if (fwrite_all(f.fp, (const unsigned char[SH_HDR]){0}, SH_HDR))
		goto io;
	for (i = 0; i < n; i++) {
		const omen_sample *s = omen_dataset_get(d, i);
		uint32_t c;
		size_t len;
		omen_buf_clear(&smp);
		if ((e = put_sample(&smp, s)))
			goto out;
		len = smp.len;
		c = omen_crc32(0, smp.ptr, len);
		if (len % 8 && (e = put_zeros(&smp, 8 - len % 8)))
			goto out;
		if (fwrite_all(f.fp, smp.ptr, smp.len))
			goto io;
		e = omen_buf_put_u64le(&idx, off);
		if (!e) e = omen_buf_put_u32le(&idx, (uint32_t)len);
		if (!e) e = omen_buf_put_u32le(&idx, c);
		if (!e) e = omen_buf_put_u64le(&idx, (uint64_t)s->time);
		if (!e) e = omen_buf_put_u32le(&idx, (uint32_t)(uint8_t)s->label |
			(uint32_t)(uint8_t)s->is_fix << 8 | (uint32_t)s->capped << 16);
		if (!e) e = omen_buf_put_u32le(&idx, 0);
		for (j = 0; !e && j < OMEN_NMETRICS; j++)
			e = omen_buf_put_u32le(&idx, f2u(s->metrics[j]));
		if (e) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
		off += smp.len;
	}
	e = omen_buf_put(&hdr, SH_MAGIC, 8);
	if (!e) e = omen_buf_put_u32le(&hdr, OMEN_SHARD_VERSION);
	if (!e) e = omen_buf_put_u32le(&hdr, 0);
	if (!e) e = omen_buf_put_u64le(&hdr, n);
	if (!e) e = omen_buf_put_u64le(&hdr, off);
	if (!e) e = omen_buf_put_u32le(&hdr, (uint32_t)caps->max_files);
	if (!e) e = omen_buf_put_u32le(&hdr, (uint32_t)caps->max_hunks_per_file);
	if (!e) e = omen_buf_put_u32le(&hdr, (uint32_t)caps->max_tokens_per_hunk);
	if (!e) e = omen_buf_put_u32le(&hdr, (uint32_t)caps->max_msg_tokens);
	if (!e) e = omen_buf_put_u32le(&hdr, OMEN_NMETRICS);
	if (!e) e = omen_buf_put_u32le(&hdr, OMEN_NFACTS);
	if (!e) e = omen_buf_put_u32le(&hdr, OMEN_VOCAB);
	if (!e) e = omen_buf_put_u32le(&hdr, OMEN_MSG_VOCAB);
	if (!e) e = tip ? omen_buf_put(&hdr, tip, OMEN_OID_HEX) : put_zeros(&hdr, OMEN_OID_HEX);
	if (!e) e = put_zeros(&hdr, SH_HDR - hdr.len);
	if (e) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	crc = omen_crc32(omen_crc32(0, hdr.ptr, hdr.len), idx.ptr, idx.len);
	for (j = 0; j < 4; j++)
		tail[j] = (unsigned char)(crc >> (8 * j));
	if (fwrite_all(f.fp, idx.ptr, idx.len) || fwrite_all(f.fp, tail, 4) ||
		fseek(f.fp, 0, SEEK_SET) || fwrite_all(f.fp, hdr.ptr, hdr.len))
		goto io;
	opened = 0;
	e = omen_atomic_commit(&f);
	goto out;
io:
	e = omen_error_set(OMEN_EIO, "cannot write shard '%s': %s", path,
		strerror(errno ? errno : EIO));
out:
	if (opened)
		omen_atomic_abort(&f);
	omen_buf_free(&hdr);
	omen_buf_free(&idx);
	omen_buf_free(&smp);
	return e;
}

/* ---- reading -------------------------------------------------------------- */
void omen_shard_close(omen_shard *s)
{
	if (!s)
		return;
	if (s->fd >= 0)
		close(s->fd);
	free(s->path);
	free(s->e);
	free(s->off);
	free(s->len);
	free(s->crc);
	free(s);
}

size_t omen_shard_size(const omen_shard *s) { return s ? s->n : 0; }
const omen_shard_entry *omen_shard_entry_at(const omen_shard *s, size_t i)
{
	return s && i < s->n ? &s->e[i] : NULL;
}
const char *omen_shard_tip(const omen_shard *s) { return s->tip; }
const omen_caps *omen_shard_caps(const omen_shard *s) { return &s->caps; }
const char *omen_shard_path(const omen_shard *s) { return s->path; }

static int is_hex40(const unsigned char *p)
{
	for (int i = 0; i < OMEN_OID_HEX; i++)
		if (!((p[i] >= '0' && p[i] <= '9') || (p[i] >= 'a' && p[i] <= 'f')))
			return 0;
	return 1;
}

static int pread_all(int fd, void *p, size_t n, uint64_t off)
{
	unsigned char *q = p;
	while (n) {
		ssize_t r = pread(fd, q, n, (off_t)off);
		if (r < 0 && errno == EINTR)
			continue;
		if (r <= 0)
			return -1;
		q += r;
		n -= (size_t)r;
		off += (uint64_t)r;
	}
	return 0;
}

/* The shard's header, read from hi[SH_HDR]: the caps and the tip into s,
 * the sample count and the index offset out; NULL, or why it is unusable. */
#define HBAD(why) return why
static const char *parse_header(omen_shard *s, uint64_t *n_out, uint64_t *xoff_out,
	const unsigned char *hi, uint64_t size)
{
	omen_cursor c;
	const void *p;
	uint64_t n, xoff;
	uint32_t v, want[8] = {0}, got[8];
	int j;

	omen_cursor_init(&c, hi, SH_HDR);
	if (omen_cursor_bytes(&c, &p, 8) || memcmp(p, SH_MAGIC, 8))
		HBAD("not a shard");
	if (omen_cursor_u32le(&c, &v) || v != OMEN_SHARD_VERSION)
		HBAD("unsupported version");
	omen_cursor_u32le(&c, &v);
	omen_cursor_u64le(&c, &n);
	omen_cursor_u64le(&c, &xoff);
	if (xoff < SH_HDR || xoff % 8 || xoff > size ||
		n > (size - xoff) / SH_IDX ||
		xoff + n * SH_IDX + 4 != size)
		HBAD("index out of bounds");
	for (j = 0; j < 8; j++)
		omen_cursor_u32le(&c, &got[j]);
	want[4] = OMEN_NMETRICS; want[5] = OMEN_NFACTS; want[6] = OMEN_VOCAB; want[7] = OMEN_MSG_VOCAB;
	for (j = 0; j < 4; j++)
		if (got[j] == 0 || got[j] > INT32_MAX)
			HBAD("bad caps");
	for (j = 4; j < 8; j++)
		if (got[j] != want[j])
			HBAD("written with other metrics, file facts or vocabularies");
	s->caps.max_files = (int32_t)got[0];
	s->caps.max_hunks_per_file = (int32_t)got[1];
	s->caps.max_tokens_per_hunk = (int32_t)got[2];
	s->caps.max_msg_tokens = (int32_t)got[3];
	if (omen_cursor_bytes(&c, &p, OMEN_OID_HEX))
		HBAD("too short");
	if (*(const unsigned char *)p) {
		if (!is_hex40(p))
			HBAD("bad tip");
		memcpy(s->tip, p, OMEN_OID_HEX);
	}
	*n_out = n;
	*xoff_out = xoff;
	return NULL;
}
#undef HBAD

/* The index of n samples (ix, n * SH_IDX bytes, checksum already checked)
 * into s; the samples end at xoff. 0, 1 with *reason set when an entry is
 * out of bounds, or OMEN_ENOMEM. */
#define IBAD(why) do { *reason = why; return 1; } while (0)
static int parse_index(omen_shard *s, const char **reason, const unsigned char *ix,
	uint64_t n, uint64_t xoff)
{
	omen_cursor c;
	uint64_t v64, prev_end = SH_HDR;
	uint32_t v;
	size_t i;
	int j;

	s->n = (size_t)n;
	s->e = calloc(s->n ? s->n : 1, sizeof(*s->e));
	s->off = calloc(s->n ? s->n : 1, sizeof(*s->off));
	s->len = calloc(s->n ? s->n : 1, sizeof(*s->len));
	s->crc = calloc(s->n ? s->n : 1, sizeof(*s->crc));
	if (!s->e || !s->off || !s->len || !s->crc)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	omen_cursor_init(&c, ix, (size_t)(n * SH_IDX));
	for (i = 0; i < s->n; i++) {
		omen_shard_entry *en = &s->e[i];
		uint32_t flags, pad;
		int8_t lab;
		omen_cursor_u64le(&c, &s->off[i]);
		omen_cursor_u32le(&c, &s->len[i]);
		omen_cursor_u32le(&c, &s->crc[i]);
		omen_cursor_u64le(&c, &v64);
		omen_cursor_u32le(&c, &flags);
		omen_cursor_u32le(&c, &pad);
		for (j = 0; j < OMEN_NMETRICS; j++) {
			omen_cursor_u32le(&c, &v);
			en->metrics[j] = u2f(v);
		}
		if (c.err)
			IBAD("index out of bounds");
		lab = (int8_t)(uint8_t)(flags & 0xff);
		if (s->off[i] != prev_end || s->len[i] % 4 || s->len[i] < SH_FIXED * 4 ||
			s->len[i] > xoff - s->off[i] || pad || (flags >> 24) ||
			lab < -1 || lab > 1 || ((flags >> 8) & 0xff) > 1 || ((flags >> 16) & 0xff) > 1)
			IBAD("bad index entry");
		prev_end = s->off[i] + (s->len[i] + 7u) / 8u * 8u;
		en->time = (int64_t)v64;
		en->label = lab;
		en->is_fix = (int8_t)((flags >> 8) & 0xff);
		en->capped = (uint8_t)((flags >> 16) & 0xff);
	}
	if (prev_end != xoff)
		IBAD("samples and index disagree");
	return 0;
}
#undef IBAD

#define BAD(why) do { reason = why; goto bad; } while (0)

/* One bounded read of a shard, check after check, each with its message. */
int omen_shard_open(omen_shard **out, const char *path)
{
	omen_shard *s = calloc(1, sizeof(*s));
	unsigned char *hi = NULL;
	const char *reason = NULL;
	struct stat st;
	omen_cursor c;
	uint64_t n, xoff;
	uint32_t crc;
	size_t hilen;
	int e;

	*out = NULL;
	if (!s)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	s->fd = -1;
	if (!(s->path = strdup(path))) {
		omen_shard_close(s);
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	}
	if (!host_is_le()) {
		e = omen_error_set(OMEN_EINVAL, "cannot read shard '%s': not a little-endian host", path);
		goto fail;
	}
	/* O_NONBLOCK: a FIFO must not hang the open (issue 15, item 7); a regular
	 * file only, as for every other read (DEVELOPERS.md "Hardening") */
	if ((s->fd = open(path, O_RDONLY | O_CLOEXEC | O_NOCTTY | O_NONBLOCK)) < 0 || fstat(s->fd, &st)) {
		e = omen_error_set(errno == ENOENT ? OMEN_ENOTFOUND : OMEN_EIO,
			"cannot read shard '%s': %s", path, strerror(errno));
		goto fail;
	}
	if (!S_ISREG(st.st_mode)) {
		e = omen_error_set(OMEN_EINVAL, "cannot read shard '%s': not a regular file", path);
		goto fail;
	}
	if (st.st_size < SH_HDR + 4)
		BAD("too short");
	/* the header first: it says where the index is */
	if (!(hi = malloc(SH_HDR))) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto fail;
	}
	if (pread_all(s->fd, hi, SH_HDR, 0))
		BAD("cannot read the header");
	if ((reason = parse_header(s, &n, &xoff, hi, (uint64_t)st.st_size)))
		goto bad;
	/* then the index and the trailer, checked together with the header */
	hilen = (size_t)(n * SH_IDX + 4);
	{
		unsigned char *nb = realloc(hi, SH_HDR + hilen);
		if (!nb) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto fail;
		}
		hi = nb;
	}
	if (pread_all(s->fd, hi + SH_HDR, hilen, xoff))
		BAD("cannot read the index");
	omen_cursor_init(&c, hi, SH_HDR + hilen);
	if (omen_cursor_tail_u32le(&c, &crc) || crc != omen_crc32(0, hi, SH_HDR + hilen - 4))
		BAD("bad checksum");
	if ((e = parse_index(s, &reason, hi + SH_HDR, n, xoff)) < 0)
		goto fail;
	if (e)
		goto bad;
	free(hi);
	*out = s;
	return 0;
bad:
	e = omen_error_set(OMEN_ECORRUPT, "cannot read shard '%s': %s", path, reason);
fail:
	free(hi);
	omen_shard_close(s);
	return e;
}

void omen_shard_buf_free(omen_shard_buf *b)
{
	if (!b)
		return;
	free(b->p);
	b->p = NULL;
	b->cap = 0;
}

int omen_shard_read(omen_sample *out, const omen_shard *s, size_t i, omen_shard_buf *b)
{
	const char *reason = NULL;
	const omen_shard_entry *en;
	const uint32_t *w;
	omen_cursor c;
	const void *p;
	uint32_t f[9], v;
	uint64_t t, words;
	size_t nw, k;
	int j;

	memset(out, 0, sizeof(*out));
	if (!s || i >= s->n)
		return omen_error_set(OMEN_EINVAL, "shard sample %zu out of range", i);
	en = &s->e[i];
	nw = s->len[i] / 4;
	if (nw > b->cap) {
		uint32_t *np = realloc(b->p, nw * 4);
		if (!np)
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		b->p = np;
		b->cap = nw;
	}
	if (pread_all(s->fd, b->p, s->len[i], s->off[i]))
		return omen_error_set(OMEN_EIO, "cannot read shard '%s': sample %zu: %s", s->path, i,
			errno ? strerror(errno) : "short read");
	if (omen_crc32(0, b->p, s->len[i]) != s->crc[i])
		BAD("bad checksum");
	omen_cursor_init(&c, b->p, s->len[i]);
	if (omen_cursor_bytes(&c, &p, OMEN_OID_HEX) || !is_hex40(p))
		BAD("bad commit id");
	memcpy(out->id, p, OMEN_OID_HEX);
	out->id[OMEN_OID_HEX] = '\0';
	omen_cursor_u64le(&c, &t);
	for (j = 0; j < 9; j++)
		omen_cursor_u32le(&c, &f[j]);
	for (j = 0; j < OMEN_NMETRICS; j++) {
		omen_cursor_u32le(&c, &v);
		out->metrics[j] = u2f(v);
	}
	if (c.err)
		BAD("too short");
	for (j = 2; j < 6; j++)
		if (f[j] > INT32_MAX)
			BAD("bad counts");
	out->time = (int64_t)t;
	out->la = (int32_t)f[0];
	out->ld = (int32_t)f[1];
	out->nfiles = (int32_t)f[2];
	out->nhunks = (int32_t)f[3];
	out->ntok = (int32_t)f[4];
	out->nmsg = (int32_t)f[5];
	out->label = (int8_t)(int32_t)f[6];
	out->is_fix = (int8_t)f[7];
	out->capped = (uint8_t)f[8];
	if ((int32_t)f[6] != en->label || f[7] != (uint32_t)en->is_fix ||
		f[8] != en->capped || out->time != en->time ||
		memcmp(out->metrics, en->metrics, sizeof(out->metrics)))
		BAD("sample and index disagree");
	words = sample_words((uint64_t)out->nfiles, (uint64_t)out->nhunks, (uint64_t)out->ntok,
		(uint64_t)out->nmsg);
	if (words != nw)
		BAD("counts and length disagree");
	/* the arrays are the rest, in place (4-byte aligned words) */
	w = b->p + SH_FIXED;
	out->file_off = (const int32_t *)w; w += out->nfiles + 1;
	out->hunk_off = (const int32_t *)w; w += out->nhunks + 1;
	out->tok = w; w += out->ntok;
	out->tok_line = (const int32_t *)w; w += out->ntok;
	out->msg = w; w += out->nmsg;
	out->file_facts = (const float *)w; w += (size_t)out->nfiles * OMEN_NFACTS;
	out->hunk_new_start = (const int32_t *)w; w += out->nhunks;
	out->hunk_new_lines = (const int32_t *)w; w += out->nhunks;
	out->hunk_old_start = (const int32_t *)w; w += out->nhunks;
	out->hunk_old_lines = (const int32_t *)w;
	if (out->file_off[0] != 0 || out->file_off[out->nfiles] != out->nhunks ||
		out->hunk_off[0] != 0 || out->hunk_off[out->nhunks] != out->ntok)
		BAD("bad offsets");
	for (k = 0; k < (size_t)out->nfiles; k++) {
		float ext = out->file_facts[k * OMEN_NFACTS + OMEN_FF_EXT_HASH];
		if (out->file_off[k + 1] < out->file_off[k] || !isfinite(ext) || ext < 0 ||
			ext >= OMEN_EXT_BUCKETS)
			BAD("bad file");
	}
	for (k = 0; k < (size_t)out->nhunks; k++)
		if (out->hunk_off[k + 1] < out->hunk_off[k])
			BAD("bad offsets");
	return 0;
bad:
	memset(out, 0, sizeof(*out));
	return omen_error_set(OMEN_ECORRUPT, "cannot read shard '%s': sample %zu: %s", s->path, i,
		reason);
}
