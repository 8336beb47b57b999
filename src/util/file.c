/* Atomic writes (temporary file beside the target, fsync, rename), whole-file
 * reads, mkdir -p, advisory locks, and the bounded cursor. */
#include <errno.h>
#include <fcntl.h>
#include <stdlib.h>
#include <string.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>
#include "omen/error.h"
#include "omen/util.h"

int omen_atomic_open(omen_atomic_file *f, const char *path)
{
	omen_buf tmp = OMEN_BUF_INIT;
	int fd;
	memset(f, 0, sizeof(*f));
	if (omen_buf_printf(&tmp, "%s.tmp.%ld", path, (long)getpid()))
		return OMEN_ENOMEM;
	fd = open(tmp.ptr, O_WRONLY | O_CREAT | O_TRUNC, 0644);
	if (fd < 0 || !(f->fp = fdopen(fd, "wb"))) {
		int e = errno;
		if (fd >= 0) close(fd);
		omen_buf_free(&tmp);
		return omen_error_set(OMEN_EIO, "cannot write '%s': %s", path, strerror(e));
	}
	f->tmp = omen_buf_detach(&tmp);
	f->path = strdup(path);
	if (!f->path) {
		omen_atomic_abort(f);
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	}
	return 0;
}

int omen_atomic_commit(omen_atomic_file *f)
{
	int bad = 0, e = 0;
	if (!f->fp)
		return omen_error_set(OMEN_EIO, "cannot write: file not open");
	if (fflush(f->fp) || ferror(f->fp) || fsync(fileno(f->fp)))
		bad = 1, e = errno;
	if (fclose(f->fp) && !bad)
		bad = 1, e = errno;
	f->fp = NULL;
	if (!bad && rename(f->tmp, f->path))
		bad = 1, e = errno;
	if (bad) {
		int rc = omen_error_set(OMEN_EIO, "cannot write '%s': %s", f->path, strerror(e ? e : EIO));
		unlink(f->tmp);
		free(f->tmp); free(f->path);
		f->tmp = f->path = NULL;
		return rc;
	}
	free(f->tmp); free(f->path);
	f->tmp = f->path = NULL;
	return 0;
}

void omen_atomic_abort(omen_atomic_file *f)
{
	if (f->fp)
		fclose(f->fp);
	if (f->tmp)
		unlink(f->tmp);
	free(f->tmp);
	free(f->path);
	memset(f, 0, sizeof(*f));
}

int omen_file_write_atomic(const char *path, const void *data, size_t n)
{
	omen_atomic_file f;
	int e = omen_atomic_open(&f, path);
	if (e)
		return e;
	if (n && fwrite(data, 1, n, f.fp) != n) {
		e = omen_error_set(OMEN_EIO, "cannot write '%s': %s", path, strerror(errno));
		omen_atomic_abort(&f);
		return e;
	}
	return omen_atomic_commit(&f);
}

int omen_file_read(omen_buf *out, const char *path, size_t max)
{
	FILE *fp = fopen(path, "rb");
	char chunk[65536];
	size_t k;
	int e = 0;
	if (!fp)
		return omen_error_set(errno == ENOENT ? OMEN_ENOTFOUND : OMEN_EIO,
			"cannot read '%s': %s", path, strerror(errno));
	while ((k = fread(chunk, 1, sizeof(chunk), fp)) > 0) {
		if (max && out->len + k > max) {
			e = omen_error_set(OMEN_ELIMIT, "cannot read '%s': larger than %zu bytes", path, max);
			break;
		}
		if ((e = omen_buf_put(out, chunk, k)))
			break;
	}
	if (!e && ferror(fp))
		e = omen_error_set(OMEN_EIO, "cannot read '%s': %s", path, strerror(errno));
	fclose(fp);
	if (!e && !out->ptr)
		e = omen_buf_grow(out, 0);
	return e;
}

int omen_mkdirs(const char *path, int is_dir)
{
	char *p = strdup(path), *s;
	int e = 0;
	if (!p)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	if (!is_dir && (s = strrchr(p, '/')))
		*s = '\0';
	else if (!is_dir) {
		free(p);
		return 0;
	}
	for (s = p + 1; ; s++) {
		if (*s == '/' || *s == '\0') {
			char c = *s;
			*s = '\0';
			if (p[0] && mkdir(p, 0777) && errno != EEXIST) {
				e = omen_error_set(OMEN_EIO, "cannot create directory '%s': %s", p, strerror(errno));
				break;
			}
			*s = c;
			if (!c)
				break;
		}
	}
	free(p);
	return e;
}

int omen_lock_acquire(int *out_fd, const char *path, int wait_ms)
{
	int fd = open(path, O_RDWR | O_CREAT, 0644);
	double until = omen_now() + wait_ms / 1000.0;
	if (fd < 0)
		return omen_error_set(OMEN_EIO, "cannot open lock '%s': %s", path, strerror(errno));
	for (;;) {
		if (!flock(fd, wait_ms < 0 ? LOCK_EX : LOCK_EX | LOCK_NB)) {
			*out_fd = fd;
			return 0;
		}
		if (errno != EWOULDBLOCK && errno != EINTR) {
			int e = errno;
			close(fd);
			return omen_error_set(OMEN_EIO, "cannot lock '%s': %s", path, strerror(e));
		}
		if (omen_now() >= until) {
			close(fd);
			return omen_error_set(OMEN_ELOCKED,
				"cannot lock '%s': another omen process is using it", path);
		}
		struct timespec ts = {0, 50 * 1000 * 1000};
		nanosleep(&ts, NULL);
	}
}

void omen_lock_release(int fd)
{
	if (fd >= 0) {
		flock(fd, LOCK_UN);
		close(fd);
	}
}

/* ---- bounded cursor ------------------------------------------------------ */
void omen_cursor_init(omen_cursor *c, const void *data, size_t n)
{
	c->p = data;
	c->n = data ? n : 0;
	c->err = 0;
}

int omen_cursor_bytes(omen_cursor *c, const void **out, size_t n)
{
	if (c->err || n > c->n) {
		c->err = 1;
		*out = NULL;
		return OMEN_ECORRUPT;
	}
	*out = c->p;
	c->p += n;
	c->n -= n;
	return 0;
}

int omen_cursor_u8(omen_cursor *c, uint8_t *out)
{
	const void *p;
	if (omen_cursor_bytes(c, &p, 1)) { *out = 0; return OMEN_ECORRUPT; }
	*out = *(const uint8_t *)p;
	return 0;
}

int omen_cursor_u32le(omen_cursor *c, uint32_t *out)
{
	const unsigned char *p;
	if (omen_cursor_bytes(c, (const void **)&p, 4)) { *out = 0; return OMEN_ECORRUPT; }
	*out = (uint32_t)p[0] | (uint32_t)p[1] << 8 | (uint32_t)p[2] << 16 | (uint32_t)p[3] << 24;
	return 0;
}

int omen_cursor_u64le(omen_cursor *c, uint64_t *out)
{
	uint32_t lo, hi;
	if (omen_cursor_u32le(c, &lo) || omen_cursor_u32le(c, &hi)) { *out = 0; return OMEN_ECORRUPT; }
	*out = (uint64_t)hi << 32 | lo;
	return 0;
}

int omen_cursor_tail_u32le(omen_cursor *c, uint32_t *out)
{
	omen_cursor t;
	if (c->err || c->n < 4) {
		c->err = 1;
		*out = 0;
		return OMEN_ECORRUPT;
	}
	c->n -= 4;
	omen_cursor_init(&t, c->p + c->n, 4);
	return omen_cursor_u32le(&t, out);
}

int omen_cursor_line(omen_cursor *c, const char **out, size_t *len)
{
	const unsigned char *nl;
	size_t k;
	if (c->err || c->n == 0)
		return 0;
	nl = memchr(c->p, '\n', c->n);
	k = nl ? (size_t)(nl - c->p) : c->n;
	*out = (const char *)c->p;
	*len = k;
	if (k && c->p[k - 1] == '\r')
		(*len)--;
	c->p += nl ? k + 1 : k;
	c->n -= nl ? k + 1 : k;
	return 1;
}

/* ---- time and progress --------------------------------------------------- */
double omen_now(void)
{
	struct timespec ts;
	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (double)ts.tv_sec + ts.tv_nsec * 1e-9;
}

void omen_format_date(char out[16], int64_t t)
{
	time_t tt = (time_t)t;
	struct tm tm;
	if (!gmtime_r(&tt, &tm) || !strftime(out, 16, "%Y-%m-%d", &tm))
		strcpy(out, "?");
}

static omen_progress_fn progress_fn;
static void *progress_payload;

void omen_progress_set_sink(omen_progress_fn fn, void *payload)
{
	progress_fn = fn;
	progress_payload = payload;
}

void omen_progress_start(omen_progress *p, const char *what, uint64_t total)
{
	p->what = what;
	p->total = total;
	p->last = 0;
	p->enabled = progress_fn != NULL;
}

void omen_progress_update(omen_progress *p, uint64_t done, const char *extra)
{
	double t;
	if (!p->enabled || !progress_fn)
		return;
	t = omen_now();
	if (t - p->last < 0.2 && done != p->total)
		return;
	p->last = t;
	progress_fn(p->what, done, p->total, extra, 0, progress_payload);
}

void omen_progress_end(omen_progress *p)
{
	if (p->enabled && progress_fn)
		progress_fn(p->what, 0, p->total, NULL, 1, progress_payload);
}
