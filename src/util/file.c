/* Atomic writes (a temporary file created exclusively beside the target,
 * fsync, rename; devices and FIFOs written in place), bounded reads of
 * regular files, mkdir -p, advisory locks, and the bounded cursor. */
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

/* ---- writes (DEVELOPERS.md "Hardening", file rules) --------------------- */
/* 12 hex digits from the kernel's random source (getentropy), else from the
 * seeded generator mixed with the time, pid and a counter: the name only
 * has to be hard to guess, O_EXCL makes it safe. */
static void random_suffix(char out[13])
{
	static const char hex[] = "0123456789abcdef";
	static unsigned long counter;
	unsigned char r[6];
	int i;
	if (getentropy(r, sizeof(r))) {
		omen_rng g;
		struct timespec ts;
		uint64_t v;
		clock_gettime(CLOCK_REALTIME, &ts);
		omen_rng_seed(&g, (uint64_t)ts.tv_nsec ^ (uint64_t)ts.tv_sec << 20 ^
			(uint64_t)getpid() << 40 ^ ++counter);
		v = omen_rng_next(&g);
		for (i = 0; i < 6; i++)
			r[i] = (unsigned char)(v >> (8 * i));
	}
	for (i = 0; i < 6; i++) {
		out[2 * i] = hex[r[i] >> 4];
		out[2 * i + 1] = hex[r[i] & 15];
	}
	out[12] = '\0';
}

/* Creates <path>.tmp.<12 random hex digits> exclusively (O_EXCL: never an
 * existing file, O_NOFOLLOW: never through a planted symlink), in the
 * target's own directory so that rename() stays atomic. */
static int tmp_create(int *out_fd, char **out_name, const char *path)
{
	omen_buf tmp = OMEN_BUF_INIT;
	char sfx[13];
	int tries, fd = -1, e = 0;
	for (tries = 0; tries < 100; tries++) {
		random_suffix(sfx);
		omen_buf_clear(&tmp);
		if (omen_buf_printf(&tmp, "%s.tmp.%s", path, sfx))
			return OMEN_ENOMEM;
		fd = open(tmp.ptr, O_WRONLY | O_CREAT | O_EXCL | O_NOFOLLOW | O_CLOEXEC | O_NOCTTY, 0644);
		if (fd >= 0 || errno != EEXIST)
			break;
	}
	if (fd < 0) {
		e = errno;
		omen_buf_free(&tmp);
		return omen_error_set(OMEN_EIO, "cannot write '%s': %s", path, strerror(e));
	}
	*out_fd = fd;
	*out_name = omen_buf_detach(&tmp);
	return 0;
}

static const char *kind_of(mode_t m)
{
	return S_ISDIR(m) ? "a directory" : S_ISBLK(m) ? "a block device" : S_ISSOCK(m) ? "a socket"
		: S_ISLNK(m) ? "a symbolic link" : "not a regular file";
}

int omen_atomic_open(omen_atomic_file *f, const char *path)
{
	struct stat st, tst;
	int fd = -1, e, link = 0;
	memset(f, 0, sizeof(*f));
	if (!path || !*path)
		return omen_error_set(OMEN_EUSAGE, "cannot write '': empty file name");
	if (lstat(path, &st)) {
		if (errno != ENOENT)
			return omen_error_set(OMEN_EIO, "cannot write '%s': %s", path, strerror(errno));
		st.st_mode = S_IFREG;   /* absent: created by rename */
	} else if (S_ISLNK(st.st_mode)) {
		/* a link is written through only to a device or a FIFO (/dev/stdout
		 * on a terminal or a pipe); renaming over it would replace the link,
		 * writing to its file would write elsewhere than named */
		if (stat(path, &tst) || !(S_ISCHR(tst.st_mode) || S_ISFIFO(tst.st_mode)))
			return omen_error_set(OMEN_EUSAGE, "cannot write '%s': it is a symbolic link "
				"(give the file it points to)", path);
		st = tst;
		link = 1;
	}
	if (S_ISCHR(st.st_mode) || S_ISFIFO(st.st_mode)) {
		/* written in place, as a shell's '>' would; never replaced */
		fd = open(path, O_WRONLY | O_NOCTTY | O_CLOEXEC | (link ? 0 : O_NOFOLLOW));
		if (fd < 0)
			return omen_error_set(OMEN_EIO, "cannot write '%s': %s", path, strerror(errno));
		if (fstat(fd, &tst) || !(S_ISCHR(tst.st_mode) || S_ISFIFO(tst.st_mode))) {
			close(fd);
			return omen_error_set(OMEN_EIO, "cannot write '%s': it changed while being opened", path);
		}
		f->direct = 1;
	} else if (!S_ISREG(st.st_mode)) {
		return omen_error_set(OMEN_EUSAGE, "cannot write '%s': it is %s", path, kind_of(st.st_mode));
	} else if ((e = tmp_create(&fd, &f->tmp, path))) {
		return e;
	}
	if (!(f->fp = fdopen(fd, "wb"))) {
		e = errno;
		close(fd);
		omen_atomic_abort(f);
		return omen_error_set(OMEN_EIO, "cannot write '%s': %s", path, strerror(e));
	}
	if (!(f->path = strdup(path))) {
		omen_atomic_abort(f);
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	}
	return 0;
}

int omen_output_open(omen_atomic_file *f, const char *path)
{
	if (path && !strcmp(path, "-")) {
		memset(f, 0, sizeof(*f));
		if (!(f->path = strdup("standard output")))
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		f->fp = stdout;
		f->direct = 2;
		return 0;
	}
	return omen_atomic_open(f, path);
}

int omen_atomic_commit(omen_atomic_file *f)
{
	int bad = 0, e = 0, rc;
	if (!f->fp)
		return omen_error_set(OMEN_EIO, "cannot write: file not open");
	if (fflush(f->fp) || ferror(f->fp))
		bad = 1, e = errno;
	if (!bad && !f->direct && fsync(fileno(f->fp)))
		bad = 1, e = errno;
	if (f->direct != 2 && fclose(f->fp) && !bad)
		bad = 1, e = errno;
	f->fp = NULL;
	if (!bad && f->tmp && rename(f->tmp, f->path))
		bad = 1, e = errno;
	rc = bad ? omen_error_set(OMEN_EIO, "cannot write '%s': %s", f->path, strerror(e ? e : EIO)) : 0;
	if (bad && f->tmp)
		unlink(f->tmp);
	free(f->tmp);
	free(f->path);
	memset(f, 0, sizeof(*f));
	return rc;
}

void omen_atomic_abort(omen_atomic_file *f)
{
	if (f->fp && f->direct != 2)
		fclose(f->fp);
	else if (f->fp)
		fflush(f->fp);
	if (f->tmp)
		unlink(f->tmp);
	free(f->tmp);
	free(f->path);
	memset(f, 0, sizeof(*f));
}

static int write_all(const char *path, const void *data, size_t n, int output)
{
	omen_atomic_file f;
	int e = output ? omen_output_open(&f, path) : omen_atomic_open(&f, path);
	if (e)
		return e;
	if (n && fwrite(data, 1, n, f.fp) != n) {
		e = omen_error_set(OMEN_EIO, "cannot write '%s': %s", f.path, strerror(errno));
		omen_atomic_abort(&f);
		return e;
	}
	return omen_atomic_commit(&f);
}

int omen_file_write_atomic(const char *path, const void *data, size_t n)
{
	return write_all(path, data, n, 0);
}

int omen_output_write(const char *path, const void *data, size_t n)
{
	return write_all(path, data, n, 1);
}

/* ---- reads ---------------------------------------------------------------- */
int omen_file_open_read(FILE **out, uint64_t *size, const char *path, size_t max)
{
	struct stat st;
	int fd, fl;
	*out = NULL;
	if (size)
		*size = 0;
	if (!max)
		max = OMEN_READ_MAX;
	/* O_NONBLOCK: opening a FIFO must not wait for a writer; cleared below */
	fd = open(path, O_RDONLY | O_NOCTTY | O_CLOEXEC | O_NONBLOCK);
	if (fd < 0)
		return omen_error_set(errno == ENOENT ? OMEN_ENOTFOUND : OMEN_EIO,
			"cannot read '%s': %s", path, strerror(errno));
	if (fstat(fd, &st)) {
		int e = errno;
		close(fd);
		return omen_error_set(OMEN_EIO, "cannot read '%s': %s", path, strerror(e));
	}
	if (!S_ISREG(st.st_mode)) {
		close(fd);
		return omen_error_set(OMEN_EINVAL, "cannot read '%s': %s", path,
			S_ISDIR(st.st_mode) ? "it is a directory" : "not a regular file");
	}
	if ((uint64_t)st.st_size > (uint64_t)max) {
		close(fd);
		return omen_error_set(OMEN_ELIMIT, "cannot read '%s': %lld bytes, over the limit of %zu",
			path, (long long)st.st_size, max);
	}
	if ((fl = fcntl(fd, F_GETFL)) < 0 || fcntl(fd, F_SETFL, fl & ~O_NONBLOCK) < 0 ||
	    !(*out = fdopen(fd, "rb"))) {
		int e = errno;
		close(fd);
		return omen_error_set(OMEN_EIO, "cannot read '%s': %s", path, strerror(e));
	}
	if (size)
		*size = (uint64_t)st.st_size;
	return 0;
}

int omen_file_read(omen_buf *out, const char *path, size_t max)
{
	FILE *fp;
	char chunk[65536];
	size_t k;
	uint64_t size;
	int e;
	if (!max)
		max = OMEN_READ_MAX;
	if ((e = omen_file_open_read(&fp, &size, path, max)))
		return e;
	if (size && (e = omen_buf_grow(out, (size_t)size)))
		goto out;
	/* the size is checked again while reading: the file may grow */
	while ((k = fread(chunk, 1, sizeof(chunk), fp)) > 0) {
		if (out->len + k > max) {
			e = omen_error_set(OMEN_ELIMIT, "cannot read '%s': larger than %zu bytes", path, max);
			break;
		}
		if ((e = omen_buf_put(out, chunk, k)))
			break;
	}
	if (!e && ferror(fp))
		e = omen_error_set(OMEN_EIO, "cannot read '%s': %s", path, strerror(errno));
out:
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
	int fd = open(path, O_RDWR | O_CREAT | O_NOFOLLOW | O_CLOEXEC | O_NOCTTY, 0644);
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
