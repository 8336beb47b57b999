/* Small shared helpers: growable buffers, arenas, hashing, a seeded RNG,
 * atomic file writes, bounded cursors, progress through a callback. No git, no models. */
#ifndef OMEN_UTIL_H
#define OMEN_UTIL_H

#include <stddef.h>
#include <stdint.h>
#include <stdio.h>

/* ---- growable byte buffer ------------------------------------------------ */
/* A buffer remembers its first error: once an append fails, every later
 * append is a no-op that returns the same code, and omen_buf_error() gives
 * it. A writer of many pieces may then check once, at the end, and a
 * failure partway never reads as success. omen_buf_clear, _free and _detach
 * forget it. */
typedef struct {
	char *ptr;   /* always NUL-terminated when non-NULL */
	size_t len;
	size_t cap;
	int err;     /* first failed append's OMEN_E* code, 0 when none */
} omen_buf;

#define OMEN_BUF_INIT {NULL, 0, 0, 0}
/* 0, or the code of the buffer's first failed append. */
int omen_buf_error(const omen_buf *b);
int omen_buf_grow(omen_buf *b, size_t extra);
int omen_buf_put(omen_buf *b, const void *data, size_t n);
int omen_buf_puts(omen_buf *b, const char *s);
int omen_buf_printf(omen_buf *b, const char *fmt, ...)
#if defined(__GNUC__)
	__attribute__((format(printf, 2, 3)))
#endif
	;
/* Appends s as a JSON string literal (quotes included). Invalid UTF-8 bytes
 * become U+FFFD so the output is always valid JSON. */
int omen_buf_put_json_string(omen_buf *b, const char *s, size_t n);
/* omen_buf_put_json_string of a NUL-terminated string; NULL writes "". */
int omen_buf_put_json_cstr(omen_buf *b, const char *s);
/* Appends v as a JSON number with printf's "%.*g" at the given significant
 * digits (6: a figure to read, 9: round-trips a float), or null when v is
 * NaN or infinite (JSON has neither). */
int omen_buf_put_json_number(omen_buf *b, double v, int digits);
/* Append v as 4 or 8 little-endian bytes: the byte order of every binary file
 * omen writes, whatever the host's (read back with omen_cursor_u32le/u64le). */
int omen_buf_put_u32le(omen_buf *b, uint32_t v);
int omen_buf_put_u64le(omen_buf *b, uint64_t v);
/* Appends s[0..n) as text safe to show a person on a terminal (every path,
 * message, name and line from history goes through it; DEVELOPERS.md
 * "Hardening"). Escaped the way git quotes paths (core.quotePath): a
 * backslash as \\, BEL BS TAB LF VT FF CR as \a \b \t \n \v \f \r,
 * every other C0 byte and DEL as \ooo (three octal digits), and so each byte
 * of a C1 control (U+0080..U+009F), of U+2028/U+2029 and of a bidirectional
 * formatting character (UAX #9), and each byte that is not part of valid
 * UTF-8. Other text is copied. max > 0 caps the bytes appended: the text is
 * cut between characters (never inside one or inside an escape) and ends
 * in "..." (counted in max, when max >= 3). max = 0: no cap. s NULL: "". */
int omen_buf_put_shown(omen_buf *b, const char *s, size_t n, size_t max);
int omen_buf_puts_shown(omen_buf *b, const char *s, size_t max);  /* strlen(s) bytes */
/* The encoder under them: the low n bytes of v (n <= 8), least significant
 * first, to out. Writers that stream to a file use it directly. */
void omen_le_encode(unsigned char *out, uint64_t v, size_t n);
void omen_buf_clear(omen_buf *b);
void omen_buf_free(omen_buf *b);
/* Detaches the memory; caller frees. */
char *omen_buf_detach(omen_buf *b);

/* ---- index over a caller's items -------------------------------------------
 * Open addressing (linear probing, power-of-two capacity, at most half full)
 * from a key to the int32 index of the caller's item that holds it: the map
 * keeps only indices, the keys stay in the caller's array (the revision
 * walk's object ids: an id is not stored twice). ops->hash gives an item's
 * key hash (to rehash when growing), ops->is whether an item holds a key. */
typedef struct {
	int32_t *slots;   /* -1: empty */
	size_t cap, n;
} omen_index;
typedef struct {
	uint64_t (*hash)(int32_t item, const void *ctx);
	int (*is)(int32_t item, const void *key, const void *ctx);
} omen_index_ops;
/* The item holding key (h: its hash, as ops->hash gives), else -1. */
int32_t omen_index_find(const omen_index *x, const void *key, uint64_t h,
	const omen_index_ops *ops, const void *ctx);
/* Adds item, whose key (hash h) the index does not hold yet. */
int omen_index_add(omen_index *x, int32_t item, uint64_t h, const omen_index_ops *ops,
	const void *ctx);
void omen_index_free(omen_index *x);

/* ---- binary heap of int32 items ------------------------------------------
 * The caller owns the array and its count; before(a, b, ctx) is a strict
 * order saying whether a leaves the heap before b (break ties in it, e.g. by
 * index, so that the order is total and the pops are deterministic). */
typedef int (*omen_heap_before_fn)(int32_t a, int32_t b, const void *ctx);
/* h[0..n-1] is a heap: puts v at h[n] and sifts it up (n + 1 items then;
 * the caller makes room). */
void omen_heap_push(int32_t *h, size_t n, int32_t v, omen_heap_before_fn before, const void *ctx);
/* Takes h[0] off a heap of n >= 1 items (n - 1 left) and returns it. */
int32_t omen_heap_pop(int32_t *h, size_t n, omen_heap_before_fn before, const void *ctx);

/* ---- growable typed arrays ---------------------------------------------- */
/* Grows *ptr (elements of size elem) so that at least need elements fit. */
int omen_array_reserve(void **ptr, size_t *cap, size_t need, size_t elem);
#define OMEN_ARRAY_RESERVE(p, cap, need) \
	omen_array_reserve((void **)&(p), &(cap), (need), sizeof(*(p)))

/* ---- arena: bump allocator, freed at once ------------------------------- */
typedef struct omen_arena_block omen_arena_block;
typedef struct {
	omen_arena_block *head;
	size_t block_size;
	size_t total; /* bytes handed out */
} omen_arena;
void omen_arena_init(omen_arena *a, size_t block_size);
void *omen_arena_alloc(omen_arena *a, size_t n);  /* 16-byte aligned, NULL on OOM */
char *omen_arena_strndup(omen_arena *a, const char *s, size_t n);
void omen_arena_reset(omen_arena *a);  /* keeps the first block */
void omen_arena_free(omen_arena *a);

/* ---- hashing ------------------------------------------------------------- */
/* 64-bit FNV-1a then a murmur finaliser: stable across platforms and runs,
 * used for token hashing (model inputs depend on it: never change it). */
uint64_t omen_hash64(const void *data, size_t n, uint64_t seed);
uint32_t omen_crc32(uint32_t crc, const void *data, size_t n);

/* ---- string -> pointer hash map (open addressing) ----------------------- */
typedef struct {
	char **keys;
	void **vals;
	size_t cap, len;
} omen_strmap;
int omen_strmap_put(omen_strmap *m, const char *key, void *val); /* copies key */
void *omen_strmap_get(const omen_strmap *m, const char *key);
void **omen_strmap_slot(omen_strmap *m, const char *key, int *created); /* NULL on OOM */
void omen_strmap_free(omen_strmap *m, void (*free_val)(void *));

/* ---- RNG: xoshiro256** (Blackman & Vigna 2018), explicit state ---------- */
typedef struct {
	uint64_t s[4];
} omen_rng;
void omen_rng_seed(omen_rng *r, uint64_t seed);  /* splitmix64 expansion */
uint64_t omen_rng_next(omen_rng *r);
double omen_rng_uniform(omen_rng *r);            /* [0,1) with 53 bits */
float omen_rng_normal(omen_rng *r);              /* Box-Muller, N(0,1) */

/* ---- files (DEVELOPERS.md "Hardening": file rules) ----------------------- */
/* Writes data to path atomically: <path>.tmp.<12 random hex digits> created
 * exclusively (O_EXCL | O_NOFOLLOW) in the same directory, fsync, rename. On
 * failure the old file is untouched. What is at path decides: absent or a
 * regular file: by rename; a character device or a FIFO (or a symbolic
 * link to one, like /dev/stdout): written in place, never replaced; any
 * other symbolic link, a directory, a block device or a socket: refused
 * (OMEN_EUSAGE, "cannot write 'x': it is a directory"). */
int omen_file_write_atomic(const char *path, const void *data, size_t n);
/* Streaming form of the same. commit: fflush, fsync, close, rename (in
 * place: fflush and close, where a full device reports ENOSPC). */
typedef struct {
	FILE *fp;
	char *path;
	char *tmp;    /* NULL when written in place */
	int direct;   /* 0 by rename, 1 in place (device, FIFO), 2 standard output */
} omen_atomic_file;
int omen_atomic_open(omen_atomic_file *f, const char *path);
int omen_atomic_commit(omen_atomic_file *f);
void omen_atomic_abort(omen_atomic_file *f);  /* close and unlink temp */
/* What an `-o <file>` option opens: "-" is standard output (flushed, never
 * closed), anything else as omen_atomic_open. */
int omen_output_open(omen_atomic_file *f, const char *path);
int omen_output_write(const char *path, const void *data, size_t n);
/* The read ceiling when a caller gives none (4 GiB); omen.memoryLimit,
 * where set, is the ceiling of the reads it covers. */
#define OMEN_READ_MAX ((size_t)4 << 30)
/* Opens a regular file for reading: anything else (a FIFO, a device, a
 * directory) is refused without waiting or reading (OMEN_EINVAL), and so is
 * a file over max bytes (OMEN_ELIMIT; max 0 = OMEN_READ_MAX). *size gets its
 * size (may be NULL). */
int omen_file_open_read(FILE **out, uint64_t *size, const char *path, size_t max);
/* Reads a whole regular file through omen_file_open_read (max as there). */
int omen_file_read(omen_buf *out, const char *path, size_t max);
/* mkdir -p for the directory part of path (or path itself when is_dir). */
int omen_mkdirs(const char *path, int is_dir);

/* Advisory exclusive lock on path (created if missing) with flock().
 * wait_ms < 0 waits forever, 0 fails at once with OMEN_ELOCKED. */
int omen_lock_acquire(int *out_fd, const char *path, int wait_ms);
void omen_lock_release(int fd);

/* ---- bounded cursor for parsers of outside bytes ------------------------ */
typedef struct {
	const unsigned char *p;
	size_t n;   /* bytes left */
	int err;    /* set once a read ran past the end */
} omen_cursor;
void omen_cursor_init(omen_cursor *c, const void *data, size_t n);
int omen_cursor_u8(omen_cursor *c, uint8_t *out);
int omen_cursor_u32le(omen_cursor *c, uint32_t *out);
int omen_cursor_u64le(omen_cursor *c, uint64_t *out);
int omen_cursor_bytes(omen_cursor *c, const void **out, size_t n);
/* Takes the last 4 bytes of what is left as a u32le (the CRC-32 trailer of
 * omen's binary files) and leaves c holding only the bytes before them. */
int omen_cursor_tail_u32le(omen_cursor *c, uint32_t *out);
/* Next line without its '\n' (and '\r' before it); 0 at end of input. */
int omen_cursor_line(omen_cursor *c, const char **out, size_t *len);

/* ---- time and progress --------------------------------------------------- */
double omen_now(void);  /* monotonic seconds */
/* UTC date of t (seconds since the epoch) as YYYY-MM-DD, "?" if out of range. */
void omen_format_date(char out[16], int64_t t);
/* Progress of long work ("label: 1234/5678"). The library never prints it:
 * it calls the sink the program installed (the command line installs one
 * that writes to a terminal's stderr), at most every 0.2 s and at the end
 * of the total. No sink, no progress. done/total: total 0 when unknown;
 * extra may be NULL; finished: 1 once, when the work ends (clear the line). */
typedef void (*omen_progress_fn)(const char *what, uint64_t done, uint64_t total,
	const char *extra, int finished, void *payload);
void omen_progress_set_sink(omen_progress_fn fn, void *payload);
typedef struct {
	const char *what;
	uint64_t total;
	double last;
	int enabled;
} omen_progress;
void omen_progress_start(omen_progress *p, const char *what, uint64_t total);
void omen_progress_update(omen_progress *p, uint64_t done, const char *extra);
void omen_progress_end(omen_progress *p);

/* UTF-8 validity of n bytes. */
int omen_utf8_valid(const char *s, size_t n);
/* The longest prefix of s[0..n), at most max bytes, that does not end
 * inside a valid UTF-8 sequence: where to cut text kept in a fixed size. */
size_t omen_utf8_prefix(const char *s, size_t n, size_t max);
/* n less a last character that the end cuts short (a lead byte followed by
 * fewer continuation bytes than it announces): for text snprintf cut. */
size_t omen_utf8_trim(const char *s, size_t n);

#endif
