/* Label file: JSON Lines. Line 1 is the header object (format version, the
 * history it covers, options, summary); every further line is one commit,
 * oldest first:
 *   {"omen_labels":1,"head":"<id>","commits":N,...,"summary":{...}}
 *   {"id":"<id>","time":T,"label":"inducing","lines":3,"fixes":["<id>"],
 *    "fix":false,"fix_by":[],"merge":false,"boundary":false,"named":0}
 * A fix record adds "fix_scope": "code" (traced), or why it was not traced:
 * "cosmetic", "non-code" (only non-code paths), "large" (issue 10).
 * The reader needs id, time and label; other keys are optional and unknown
 * keys are ignored, so the format can grow. Reading goes through the bounded
 * cursor one line at a time; cJSON parses each line with its length. */
#include <ctype.h>
#include <stdlib.h>
#include <string.h>
#include <cJSON.h>
#include "omen/error.h"
#include "omen/label.h"
#include "label/internal.h"

struct omen_labels {
	omen_label_rec *recs;
	size_t n, cap;
	omen_strmap index;   /* id -> index + 1 */
	omen_arena arena;
	char head[OMEN_OID_HEX + 1];
	char *header_json;   /* the header line as read */
	int64_t window_days, horizon_days;   /* the header's "options" (90 and 0 when absent) */
};

const char *omen_label_name(int label)
{
	return label == OMEN_LABEL_INDUCING ? "inducing" : label == OMEN_LABEL_CLEAN ? "clean" : "unknown";
}

static const char *const fixby_names[] = {"pattern", "list", "issue", "named"};
/* fix_scope of a fix record (issue 10): traced, or why it was not */
static const char *const scope_names[] = {"code", "cosmetic", "non-code", "large"};

int lbl_write_record(omen_buf *b, const omen_label_rec *r)
{
	uint32_t i;
	int first = 1, k;
	omen_buf_printf(b, "{\"id\":\"%s\",\"time\":%lld,\"label\":\"%s\",\"lines\":%u,\"fixes\":[",
		r->id, (long long)r->time, omen_label_name(r->label), (unsigned)r->traced_lines);
	for (i = 0; i < r->nfixes; i++)
		omen_buf_printf(b, "%s\"%s\"", i ? "," : "", r->fixes[i]);
	omen_buf_printf(b, "],\"fix\":%s,\"fix_by\":[", r->is_fix ? "true" : "false");
	for (k = 0; k < 4; k++) {
		if (r->fix_by & (1u << k)) {
			omen_buf_printf(b, "%s\"%s\"", first ? "" : ",", fixby_names[k]);
			first = 0;
		}
	}
	omen_buf_printf(b, "],\"merge\":%s,\"boundary\":%s,\"named\":%u",
		r->merge ? "true" : "false", r->boundary ? "true" : "false", (unsigned)r->named);
	if (r->is_fix && r->fix_scope >= 0 && r->fix_scope < 4)
		omen_buf_printf(b, ",\"fix_scope\":\"%s\"", scope_names[r->fix_scope]);
	return omen_buf_puts(b, "}\n");
}

static int is_hex40(const char *s)
{
	size_t i;
	for (i = 0; i < OMEN_OID_HEX; i++)
		if (!isxdigit((unsigned char)s[i]) || isupper((unsigned char)s[i]))
			return 0;
	return s[OMEN_OID_HEX] == '\0';
}

#define BAD(...) do { e = omen_error_set(OMEN_ECORRUPT, "bad label file '%s': line %zu: " \
	"%s", name, lineno, (snprintf(why, sizeof(why), __VA_ARGS__), why)); goto out; } while (0)

static int parse_header(omen_labels *l, const char *name, const char *line, size_t len)
{
	cJSON *j = cJSON_ParseWithLength(line, len), *v;
	size_t lineno = 1;
	char why[160];
	int e = 0;
	if (!j || !cJSON_IsObject(j))
		BAD("not a JSON object (expected the header)");
	v = cJSON_GetObjectItemCaseSensitive(j, "omen_labels");
	if (!cJSON_IsNumber(v))
		BAD("missing header (\"omen_labels\" version)");
	if (v->valuedouble != 1)
		BAD("unsupported version %g", v->valuedouble);
	v = cJSON_GetObjectItemCaseSensitive(j, "head");
	if (cJSON_IsString(v) && v->valuestring && strlen(v->valuestring) <= OMEN_OID_HEX &&
	    (is_hex40(v->valuestring) || !*v->valuestring))
		strcpy(l->head, v->valuestring);
	else if (v && !cJSON_IsNull(v))
		BAD("bad \"head\"");
	/* the labelling rule the file was written with: verification window
	 * and horizon (issue 10; 0 or absent = no horizon) */
	l->window_days = OMEN_WINDOW_DAYS;
	l->horizon_days = 0;
	v = cJSON_GetObjectItemCaseSensitive(j, "options");
	if (cJSON_IsObject(v)) {
		cJSON *w = cJSON_GetObjectItemCaseSensitive(v, "window_days");
		cJSON *h = cJSON_GetObjectItemCaseSensitive(v, "horizon_days");
		if (w && (!cJSON_IsNumber(w) || !(w->valuedouble >= 0 && w->valuedouble <= 36500) ||
		    w->valuedouble != (double)(int64_t)w->valuedouble))
			BAD("bad \"window_days\" in \"options\"");
		if (h && !cJSON_IsNull(h) && (!cJSON_IsNumber(h) || !(h->valuedouble >= 0 &&
		    h->valuedouble <= 36500) || h->valuedouble != (double)(int64_t)h->valuedouble))
			BAD("bad \"horizon_days\" in \"options\"");
		if (w)
			l->window_days = (int64_t)w->valuedouble;
		if (cJSON_IsNumber(h))
			l->horizon_days = (int64_t)h->valuedouble;
	} else if (v && !cJSON_IsNull(v)) {
		BAD("bad \"options\" (not an object)");
	}
	if (!(l->header_json = malloc(len + 1))) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	memcpy(l->header_json, line, len);
	l->header_json[len] = '\0';
out:
	cJSON_Delete(j);
	return e;
}

static int parse_record(omen_labels *l, const char *name, size_t lineno, const char *line, size_t len)
{
	cJSON *j = cJSON_ParseWithLength(line, len), *v, *it;
	omen_label_rec r;
	char why[160];
	int e = 0, created;
	void **slot;
	memset(&r, 0, sizeof(r));
	if (!j || !cJSON_IsObject(j))
		BAD("not a JSON object");
	v = cJSON_GetObjectItemCaseSensitive(j, "id");
	if (!cJSON_IsString(v) || !v->valuestring || !is_hex40(v->valuestring))
		BAD("\"id\" is not a 40-digit commit id");
	strcpy(r.id, v->valuestring);
	v = cJSON_GetObjectItemCaseSensitive(j, "time");
	if (!cJSON_IsNumber(v) || v->valuedouble < -1e15 || v->valuedouble > 1e15)
		BAD("\"time\" is not a number");
	r.time = (int64_t)v->valuedouble;
	v = cJSON_GetObjectItemCaseSensitive(j, "label");
	if (!cJSON_IsString(v) || !v->valuestring)
		BAD("missing \"label\"");
	if (!strcmp(v->valuestring, "inducing"))
		r.label = OMEN_LABEL_INDUCING;
	else if (!strcmp(v->valuestring, "clean"))
		r.label = OMEN_LABEL_CLEAN;
	else if (!strcmp(v->valuestring, "unknown"))
		r.label = OMEN_LABEL_UNKNOWN;
	else
		BAD("\"label\" is not inducing, clean or unknown");
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "lines"))) {
		if (!cJSON_IsNumber(v) || v->valuedouble < 0 || v->valuedouble > 4294967295.0)
			BAD("\"lines\" is not a count");
		r.traced_lines = (uint32_t)v->valuedouble;
	}
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "named"))) {
		if (!cJSON_IsNumber(v) || v->valuedouble < 0 || v->valuedouble > 4294967295.0)
			BAD("\"named\" is not a count");
		r.named = (uint32_t)v->valuedouble;
	}
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "fix")))
		r.is_fix = cJSON_IsTrue(v);
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "merge")))
		r.merge = cJSON_IsTrue(v);
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "boundary")))
		r.boundary = cJSON_IsTrue(v);
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "fix_scope"))) {
		int k;
		if (!cJSON_IsString(v) || !v->valuestring)
			BAD("\"fix_scope\" is not a string");
		for (k = 0; k < 4; k++)
			if (!strcmp(v->valuestring, scope_names[k]))
				r.fix_scope = k;
	}
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "fix_by"))) {
		if (!cJSON_IsArray(v))
			BAD("\"fix_by\" is not an array");
		cJSON_ArrayForEach(it, v) {
			int k;
			if (!cJSON_IsString(it))
				BAD("\"fix_by\" holds a non-string");
			for (k = 0; k < 4; k++)
				if (!strcmp(it->valuestring, fixby_names[k]))
					r.fix_by |= 1u << k;
		}
	}
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "fixes"))) {
		int n, i = 0;
		const char **ids;
		if (!cJSON_IsArray(v))
			BAD("\"fixes\" is not an array");
		n = cJSON_GetArraySize(v);
		if (n > 0) {
			if (!(ids = omen_arena_alloc(&l->arena, (size_t)n * sizeof(*ids)))) {
				e = omen_error_set(OMEN_ENOMEM, "out of memory");
				goto out;
			}
			cJSON_ArrayForEach(it, v) {
				if (!cJSON_IsString(it) || !it->valuestring || !is_hex40(it->valuestring))
					BAD("\"fixes\" holds something other than a commit id");
				if (!(ids[i++] = omen_arena_strndup(&l->arena, it->valuestring, OMEN_OID_HEX))) {
					e = omen_error_set(OMEN_ENOMEM, "out of memory");
					goto out;
				}
			}
			r.fixes = ids;
			r.nfixes = (uint32_t)n;
		}
	}
	if (!(slot = omen_strmap_slot(&l->index, r.id, &created))) {
		e = OMEN_ENOMEM;
		goto out;
	}
	if (!created)
		BAD("commit '%.12s' listed twice", r.id);
	if (OMEN_ARRAY_RESERVE(l->recs, l->cap, l->n + 1)) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	*slot = (void *)(uintptr_t)(l->n + 1);
	l->recs[l->n++] = r;
out:
	cJSON_Delete(j);
	return e;
}

int omen_labels_parse(omen_labels **out, const char *name, const char *data, size_t n)
{
	omen_labels *l;
	omen_cursor cur;
	const char *line;
	size_t len, lineno = 0;
	int e = 0;
	*out = NULL;
	if (!(l = calloc(1, sizeof(*l))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	omen_arena_init(&l->arena, 64 * 1024);
	omen_cursor_init(&cur, data, n);
	while (omen_cursor_line(&cur, &line, &len)) {
		lineno++;
		if (memchr(line, '\0', len)) {
			e = omen_error_set(OMEN_ECORRUPT, "bad label file '%s': line %zu: NUL byte", name, lineno);
			goto out;
		}
		if (lineno == 1) {
			if ((e = parse_header(l, name, line, len)))
				goto out;
			continue;
		}
		if (len == 0 && cur.n == 0)
			break;
		if ((e = parse_record(l, name, lineno, line, len)))
			goto out;
	}
	if (lineno == 0)
		e = omen_error_set(OMEN_ECORRUPT, "bad label file '%s': line 1: empty file", name);
out:
	if (e)
		omen_labels_free(l);
	else
		*out = l;
	return e;
}

int omen_labels_load(omen_labels **out, const char *path)
{
	return omen_labels_load_max(out, path, 0);
}

int omen_labels_load_max(omen_labels **out, const char *path, int64_t max_bytes)
{
	omen_buf b = OMEN_BUF_INIT;
	size_t max = max_bytes > 0 && (uint64_t)max_bytes < OMEN_READ_MAX ? (size_t)max_bytes : 0;
	int e;
	*out = NULL;
	if ((e = omen_file_read(&b, path, max))) {
		omen_buf_free(&b);
		if (e == OMEN_ELIMIT && max)
			return omen_error_set(e, "cannot read label file '%s': larger than the memory limit "
				"of %zu bytes (omen.memoryLimit)", path, max);
		return omen_error_wrap(e, "cannot read label file '%s'", path);
	}
	e = omen_labels_parse(out, path, b.ptr ? b.ptr : "", b.len);
	omen_buf_free(&b);
	return e;
}

void omen_labels_free(omen_labels *l)
{
	if (!l)
		return;
	free(l->recs);
	omen_strmap_free(&l->index, NULL);
	omen_arena_free(&l->arena);
	free(l->header_json);
	free(l);
}

const omen_label_rec *omen_labels_get(const omen_labels *l, const char *hex)
{
	uintptr_t i = (uintptr_t)omen_strmap_get(&l->index, hex);
	return i ? &l->recs[i - 1] : NULL;
}

size_t omen_labels_count(const omen_labels *l) { return l ? l->n : 0; }
const omen_label_rec *omen_labels_at(const omen_labels *l, size_t i) { return i < l->n ? &l->recs[i] : NULL; }
const char *omen_labels_head(const omen_labels *l) { return l->head; }
const char *lbl_labels_header(const omen_labels *l) { return l->header_json; }

void omen_labels_rule(const omen_labels *l, int64_t *out_window_days, int64_t *out_horizon_days)
{
	*out_window_days = l ? l->window_days : OMEN_WINDOW_DAYS;
	*out_horizon_days = l ? l->horizon_days : 0;
}

/* ---- brief read (issue 12): header counts and the newest records --------
 * For `git omen health`: the header's summary and the labels of the newest
 * `tail` labelled records, reading the header line and then ever larger
 * chunks from the end of the file instead of parsing every record. */
static size_t count_of(const cJSON *o, const char *k)
{
	const cJSON *v = o ? cJSON_GetObjectItemCaseSensitive(o, k) : NULL;
	/* 0 to 2^53 only: a conversion out of range is undefined (C11 6.3.1.4) */
	return cJSON_IsNumber(v) && v->valuedouble >= 0 && v->valuedouble <= 9007199254740992.0 ?
		(size_t)v->valuedouble : 0;
}

static int read_at(omen_buf *b, FILE *fp, long off, size_t n, const char *path)
{
	omen_buf_clear(b);
	if (omen_buf_grow(b, n + 1))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	if (fseek(fp, off, SEEK_SET) || fread(b->ptr, 1, n, fp) != n)
		return omen_error_set(OMEN_EIO, "cannot read label file '%s'", path);
	b->len = n;
	b->ptr[n] = '\0';
	return 0;
}

int omen_labels_brief_read(omen_labels_brief *out, const char *path, size_t tail)
{
	FILE *fp = NULL;
	omen_buf b = OMEN_BUF_INIT;
	omen_cursor cur;
	const char *line;
	size_t len, chunk = 256 * 1024, want;
	long size;
	cJSON *j = NULL;
	int e = 0;
	memset(out, 0, sizeof(*out));
	/* a regular file only (a FIFO would wait for a writer); the size is no
	 * limit here, only its first line and its end are read */
	if ((e = omen_file_open_read(&fp, NULL, path, SIZE_MAX)))
		return e;
	if (fseek(fp, 0, SEEK_END) || (size = ftell(fp)) < 0) {
		e = omen_error_set(OMEN_EIO, "cannot read label file '%s'", path);
		goto out;
	}
	/* the header: the first line */
	want = (size_t)size < (1u << 20) ? (size_t)size : (1u << 20);
	if ((e = read_at(&b, fp, 0, want, path)))
		goto out;
	omen_cursor_init(&cur, b.ptr, b.len);
	if (!omen_cursor_line(&cur, &line, &len) ||
	    !(j = cJSON_ParseWithLength(line, len)) ||
	    !cJSON_IsNumber(cJSON_GetObjectItemCaseSensitive(j, "omen_labels"))) {
		e = omen_error_set(OMEN_ECORRUPT, "bad label file '%s': line 1: not a label header", path);
		goto out;
	}
	{
		const cJSON *h = cJSON_GetObjectItemCaseSensitive(j, "head");
		const cJSON *s = cJSON_GetObjectItemCaseSensitive(j, "summary");
		if (cJSON_IsString(h) && is_hex40(h->valuestring))
			strcpy(out->head, h->valuestring);
		out->commits = count_of(s, "commits");
		out->inducing = count_of(s, "inducing");
		out->clean = count_of(s, "clean");
		out->unknown = count_of(s, "unknown");
	}
	cJSON_Delete(j);
	j = NULL;
	/* the newest records: chunks from the end until enough are labelled */
	for (;;) {
		long off = (size_t)size > chunk ? size - (long)chunk : 0;
		size_t got = 0, pos = 0, nlines = 0, k;
		const char **ls = NULL;
		size_t *ln = NULL, cap = 0;
		if ((e = read_at(&b, fp, off, (size_t)(size - off), path)))
			goto out;
		omen_cursor_init(&cur, b.ptr, b.len);
		if (off > 0)
			omen_cursor_line(&cur, &line, &len);   /* a partial line */
		while (omen_cursor_line(&cur, &line, &len)) {
			if (nlines == cap) {
				size_t nc = cap ? cap * 2 : 1024;
				const char **nls = realloc(ls, nc * sizeof(*ls));
				size_t *nln = nls ? realloc(ln, nc * sizeof(*ln)) : NULL;
				if (nls) ls = nls;
				if (!nls || !nln) {
					free(ls);
					free(nln ? nln : ln);
					e = omen_error_set(OMEN_ENOMEM, "out of memory");
					goto out;
				}
				ln = nln;
				cap = nc;
			}
			ls[nlines] = line;
			ln[nlines++] = len;
		}
		for (k = nlines; k-- > 0 && got < tail;) {
			cJSON *r, *v;
			if (off == 0 && k == 0)
				break;   /* the header */
			if (!ln[k])
				continue;
			r = cJSON_ParseWithLength(ls[k], ln[k]);
			v = r ? cJSON_GetObjectItemCaseSensitive(r, "label") : NULL;
			if (cJSON_IsString(v) && strcmp(v->valuestring, "unknown")) {
				got++;
				pos += !strcmp(v->valuestring, "inducing");
			}
			cJSON_Delete(r);
		}
		free(ls);
		free(ln);
		out->recent = got;
		out->recent_inducing = pos;
		if (got >= tail || off == 0)
			break;
		chunk *= 4;
	}
out:
	cJSON_Delete(j);
	omen_buf_free(&b);
	fclose(fp);
	return e;
}

int64_t omen_labels_file_horizon(const char *path)
{
	char buf[65536];
	size_t n;
	FILE *fp = NULL;
	cJSON *j, *v;
	int64_t h = 0;
	/* a regular file only, as omen_labels_brief_read */
	if (!path || omen_file_open_read(&fp, NULL, path, SIZE_MAX)) {
		omen_error_clear();
		return 0;
	}
	n = fread(buf, 1, sizeof(buf) - 1, fp);
	fclose(fp);
	buf[n] = '\0';
	buf[strcspn(buf, "\n")] = '\0';
	if ((j = cJSON_Parse(buf))) {
		v = cJSON_GetObjectItemCaseSensitive(cJSON_GetObjectItemCaseSensitive(j, "options"), "horizon_days");
		if (cJSON_IsNumber(v) && v->valuedouble > 0 && v->valuedouble < 1e7)
			h = (int64_t)v->valuedouble;
		cJSON_Delete(j);
	}
	return h;
}
