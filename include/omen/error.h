/* Error state: every library function returns 0 or a negative OMEN_E* code and
 * leaves a one-line message (lowercase, no trailing period, subject quoted,
 * what failed first) retrievable with omen_error_last(). Thread-local. */
#ifndef OMEN_ERROR_H
#define OMEN_ERROR_H

enum {
	OMEN_OK = 0,
	OMEN_ERROR = -1,    /* generic failure */
	OMEN_EINVAL = -2,   /* bad argument or bad input bytes */
	OMEN_ENOTFOUND = -3,
	OMEN_ENOMEM = -4,
	OMEN_EIO = -5,      /* read/write/rename failed */
	OMEN_ECORRUPT = -6, /* checksum, truncation, version mismatch */
	OMEN_EUSAGE = -7,   /* caller asked for something meaningless */
	OMEN_ELOCKED = -8,  /* another process holds the lock */
	OMEN_ELIMIT = -9,   /* a configured resource ceiling was reached */
	OMEN_EGIT = -10     /* libgit2 reported an error */
};

#if defined(__GNUC__)
#define OMEN_PRINTF(a, b) __attribute__((format(printf, a, b)))
#else
#define OMEN_PRINTF(a, b)
#endif

/* Sets the message and returns code, so `return omen_error_set(...)` works. */
int omen_error_set(int code, const char *fmt, ...) OMEN_PRINTF(2, 3);
/* Prefixes the current message: "ctx: old message". Returns code. */
int omen_error_wrap(int code, const char *fmt, ...) OMEN_PRINTF(2, 3);
/* Last message, "" when none. Never NULL. */
const char *omen_error_last(void);
int omen_error_code(void);
void omen_error_clear(void);

#endif
