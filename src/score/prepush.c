/* git's pre-push protocol (githooks(5)): one line per ref to update,
 * "<local ref> SP <local id> SP <remote ref> SP <remote id> LF", read through
 * a bounded cursor. */
#include <string.h>
#include "omen/error.h"
#include "omen/score.h"

static int is_hex(const char *s, size_t n)
{
	size_t i;
	for (i = 0; i < n; i++) {
		char c = s[i];
		if (!((c >= '0' && c <= '9') || (c >= 'a' && c <= 'f') || (c >= 'A' && c <= 'F')))
			return 0;
	}
	return 1;
}

static int all_zero(const char *s, size_t n)
{
	size_t i;
	for (i = 0; i < n; i++)
		if (s[i] != '0')
			return 0;
	return 1;
}

/* Splits line into exactly 4 space-separated fields; returns the count found
 * (up to 5, meaning "too many"). */
static int split4(const char *line, size_t len, const char *f[4], size_t flen[4])
{
	size_t i = 0, start;
	int k = 0;
	while (i <= len) {
		start = i;
		while (i < len && line[i] != ' ')
			i++;
		if (k == 4)
			return 5;
		f[k] = line + start;
		flen[k] = i - start;
		k++;
		i++;  /* past the space (or the end) */
	}
	return k;
}

static int bad(size_t lineno, const char *why)
{
	return omen_error_set(OMEN_EINVAL, "bad pre-push input: line %zu: %s", lineno, why);
}

static int check_ref(size_t lineno, const char *s, size_t n, const char *which)
{
	size_t i;
	char why[64];
	if (n == 0 || n > OMEN_PREPUSH_MAX_REF) {
		snprintf(why, sizeof(why), "%s ref is %s", which, n ? "too long" : "empty");
		return bad(lineno, why);
	}
	for (i = 0; i < n; i++) {
		unsigned char c = (unsigned char)s[i];
		if (c < 0x20 || c == 0x7f) {
			snprintf(why, sizeof(why), "%s ref has a control character", which);
			return bad(lineno, why);
		}
	}
	return 0;
}

static int check_id(size_t lineno, const char *s, size_t n, const char *which)
{
	char why[80];
	if ((n != 40 && n != 64) || !is_hex(s, n)) {
		snprintf(why, sizeof(why), "%s id is not 40 or 64 hex digits", which);
		return bad(lineno, why);
	}
	return 0;
}

int omen_prepush_parse(omen_push_list *out, const void *data, size_t n)
{
	omen_cursor c;
	const char *line;
	size_t len, lineno = 0;
	int e = 0;

	memset(out, 0, sizeof(*out));
	omen_arena_init(&out->arena, 4096);
	omen_cursor_init(&c, data, n);
	if (data && memchr(data, '\0', n))
		return omen_error_set(OMEN_EINVAL, "bad pre-push input: it contains a NUL byte");
	while (omen_cursor_line(&c, &line, &len)) {
		const char *f[4];
		size_t fl[4];
		omen_push_update *u;
		int k;
		lineno++;
		if (lineno > OMEN_PREPUSH_MAX_LINES) {
			e = omen_error_set(OMEN_EINVAL, "bad pre-push input: more than %d lines",
				OMEN_PREPUSH_MAX_LINES);
			goto out;
		}
		if (len == 0)
			continue;  /* tolerate blank lines (a trailing CR LF, an editor) */
		k = split4(line, len, f, fl);
		if (k != 4) {
			char why[64];
			snprintf(why, sizeof(why), "expected 4 fields, got %s",
				k > 4 ? "more" : k == 3 ? "3" : k == 2 ? "2" : "1");
			e = bad(lineno, why);
			goto out;
		}
		if ((e = check_ref(lineno, f[0], fl[0], "local")) ||
		    (e = check_id(lineno, f[1], fl[1], "local")) ||
		    (e = check_ref(lineno, f[2], fl[2], "remote")) ||
		    (e = check_id(lineno, f[3], fl[3], "remote")))
			goto out;
		if (fl[1] != fl[3]) {
			e = bad(lineno, "local and remote ids differ in length");
			goto out;
		}
		if (OMEN_ARRAY_RESERVE(out->v, out->cap, out->n + 1)) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
		u = &out->v[out->n];
		memset(u, 0, sizeof(*u));
		u->local_ref = omen_arena_strndup(&out->arena, f[0], fl[0]);
		u->remote_ref = omen_arena_strndup(&out->arena, f[2], fl[2]);
		if (!u->local_ref || !u->remote_ref) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
		memcpy(u->local_id, f[1], fl[1]);
		memcpy(u->remote_id, f[3], fl[3]);
		u->id_len = (int)fl[1];
		for (k = 0; k < u->id_len; k++) {
			if (u->local_id[k] >= 'A' && u->local_id[k] <= 'F')
				u->local_id[k] = (char)(u->local_id[k] - 'A' + 'a');
			if (u->remote_id[k] >= 'A' && u->remote_id[k] <= 'F')
				u->remote_id[k] = (char)(u->remote_id[k] - 'A' + 'a');
		}
		u->is_delete = all_zero(u->local_id, fl[1]);
		u->is_new = all_zero(u->remote_id, fl[3]);
		out->n++;
	}
out:
	if (e) {
		omen_prepush_free(out);
		omen_arena_init(&out->arena, 4096);
	}
	return e;
}

void omen_prepush_free(omen_push_list *l)
{
	if (!l)
		return;
	free(l->v);
	omen_arena_free(&l->arena);
	l->v = NULL;
	l->n = l->cap = 0;
}
