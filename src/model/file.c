/* Model file format (DEVELOPERS.md "Model file (file.c)"), little-endian:
 *
 *   0   8  magic "OMENMODL"
 *   8   4  u32 format version (OMEN_MODEL_VERSION)
 *   12  4  u32 reserved (0)
 *   16  8  u64 total file length
 *   24  8  u64 metadata length L
 *   32  L  metadata, JSON (cJSON): arch, dims, tensors, standardization,
 *          calibration, threshold, baseline, training range, test metrics
 *   ..     zero padding to a multiple of 64
 *   P      float32 parameter block (each tensor at a 64-byte aligned offset
 *          P + 4 * table offset; the table is in the metadata)
 *   ..  8  u64 metrics-state length S, then S bytes (omen_metrics_save)
 *   ..  4  u32 CRC-32 (omen_crc32) of every byte before it
 *
 * The loader trusts no length: every read goes through an omen_cursor and
 * the tensor table is recomputed from the dimensions and compared. */
#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "model/internal.h"

#define OMEN_MODEL_MAGIC "OMENMODL"
#define OMEN_MODEL_VERSION 1u
#define HDR 32

static cJSON *float_array(const float *v, int n)
{
	cJSON *a = cJSON_CreateArray();
	int i;
	for (i = 0; a && i < n; i++)
		cJSON_AddItemToArray(a, cJSON_CreateNumber(v[i]));
	return a;
}

static cJSON *double_array(const double *v, int n)
{
	cJSON *a = cJSON_CreateArray();
	int i;
	for (i = 0; a && i < n; i++)
		cJSON_AddItemToArray(a, cJSON_CreateNumber(v[i]));
	return a;
}

static void set_item(cJSON *o, const char *k, cJSON *v)
{
	if (cJSON_GetObjectItemCaseSensitive(o, k))
		cJSON_ReplaceItemInObjectCaseSensitive(o, k, v);
	else
		cJSON_AddItemToObject(o, k, v);
}

/* The metadata as written: descriptive fields of m->meta plus the fields
 * the loader needs, refreshed from the struct. */
static cJSON *meta_for_write(const omen_model *m, size_t param_off)
{
	cJSON *j = m->meta ? cJSON_Duplicate(m->meta, 1) : cJSON_CreateObject();
	cJSON *dims, *tens, *st, *cal, *caps, *lr;
	int i;
	if (!j)
		return NULL;
	set_item(j, "format", cJSON_CreateString("omen model"));
	set_item(j, "version", cJSON_CreateNumber(OMEN_MODEL_VERSION));
	set_item(j, "arch", cJSON_CreateString(OMEN_MODEL_ARCH));
	dims = cJSON_CreateObject();
	cJSON_AddNumberToObject(dims, "D", m->D);
	cJSON_AddNumberToObject(dims, "C", m->C);
	cJSON_AddNumberToObject(dims, "V", m->V);
	cJSON_AddNumberToObject(dims, "VM", m->VM);
	cJSON_AddNumberToObject(dims, "NE", m->NE);
	cJSON_AddNumberToObject(dims, "NM", m->NM);
	cJSON_AddNumberToObject(dims, "NFN", m->NFN);
	cJSON_AddNumberToObject(dims, "K", m->K);
	cJSON_AddNumberToObject(dims, "nparams", (double)m->nparams);
	set_item(j, "dims", dims);
	tens = cJSON_CreateArray();
	for (i = 0; i < P_COUNT; i++) {
		cJSON *t = cJSON_CreateObject();
		cJSON *sh = cJSON_CreateArray();
		int k;
		cJSON_AddStringToObject(t, "name", m->t[i].name);
		for (k = 0; k < 3; k++)
			cJSON_AddItemToArray(sh, cJSON_CreateNumber(m->t[i].shape[k]));
		cJSON_AddItemToObject(t, "shape", sh);
		cJSON_AddNumberToObject(t, "offset", (double)(param_off + m->t[i].off * sizeof(float)));
		cJSON_AddItemToArray(tens, t);
	}
	set_item(j, "tensors", tens);
	st = cJSON_CreateObject();
	cJSON_AddItemToObject(st, "metric_mean", float_array(m->metric_mean, OMEN_NMETRICS));
	cJSON_AddItemToObject(st, "metric_scale", float_array(m->metric_scale, OMEN_NMETRICS));
	cJSON_AddItemToObject(st, "fact_mean", float_array(m->fact_mean, OMEN_MODEL_NFN));
	cJSON_AddItemToObject(st, "fact_scale", float_array(m->fact_scale, OMEN_MODEL_NFN));
	set_item(j, "standardize", st);
	cal = cJSON_CreateObject();
	cJSON_AddStringToObject(cal, "method", "platt");
	cJSON_AddNumberToObject(cal, "a", m->platt_a);
	cJSON_AddNumberToObject(cal, "b", m->platt_b);
	set_item(j, "calibration", cal);
	set_item(j, "threshold", cJSON_CreateNumber(m->threshold));
	if (m->warn.npoints) {
		set_item(j, "warn_curve", omen_warn_curve_json(&m->warn));
		set_item(j, "threshold_max_f1", cJSON_CreateNumber(m->threshold_f1));
	}
	caps = cJSON_CreateObject();
	cJSON_AddNumberToObject(caps, "max_files", m->caps.max_files);
	cJSON_AddNumberToObject(caps, "max_hunks_per_file", m->caps.max_hunks_per_file);
	cJSON_AddNumberToObject(caps, "max_tokens_per_hunk", m->caps.max_tokens_per_hunk);
	cJSON_AddNumberToObject(caps, "max_msg_tokens", m->caps.max_msg_tokens);
	set_item(j, "caps", caps);
	set_item(j, "head", cJSON_CreateString(m->head));
	if (m->lr.p) {
		lr = cJSON_CreateObject();
		cJSON_AddItemToObject(lr, "w", double_array(m->lr.w, m->lr.p));
		cJSON_AddNumberToObject(lr, "b", m->lr.b);
		cJSON_AddItemToObject(lr, "mean", double_array(m->lr.mean, m->lr.p));
		cJSON_AddItemToObject(lr, "scale", double_array(m->lr.scale, m->lr.p));
		set_item(j, "lr_baseline", lr);
	}
	return j;
}

/* Serialises m into out (a malloc'd image of the whole file). */
static int model_image(omen_buf *out, const omen_model *m)
{
	cJSON *j = NULL;
	char *js = NULL;
	size_t jl, param_off, total, i;
	uint64_t ml = m->mstate_blob.len;
	int e = 0;
	/* the metadata names the parameter offset, which depends on its own
	 * length: iterate until the padded length is stable */
	param_off = 64;
	for (i = 0; i < 4; i++) {
		cJSON_Delete(j);
		free(js);
		j = meta_for_write(m, param_off);
		js = j ? cJSON_PrintUnformatted(j) : NULL;
		if (!js) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
		jl = strlen(js);
		if ((HDR + jl + 63) / 64 * 64 == param_off)
			break;
		param_off = (HDR + jl + 63) / 64 * 64;
	}
	total = param_off + m->nparams * sizeof(float) + 8 + ml + 4;
	if ((e = omen_buf_grow(out, total)) || (e = omen_buf_put(out, OMEN_MODEL_MAGIC, 8)) ||
		(e = omen_buf_put_u32le(out, OMEN_MODEL_VERSION)) || (e = omen_buf_put_u32le(out, 0)) ||
		(e = omen_buf_put_u64le(out, total)) || (e = omen_buf_put_u64le(out, jl)) ||
		(e = omen_buf_put(out, js, jl)))
		goto out;
	while (out->len < param_off)
		if ((e = omen_buf_put(out, "", 1)))
			goto out;
	if ((e = omen_buf_put(out, m->params, m->nparams * sizeof(float))))
		goto out;
	if ((e = omen_buf_put_u64le(out, ml)) ||
		(ml && (e = omen_buf_put(out, m->mstate_blob.ptr, ml))))
		goto out;
	e = omen_buf_put_u32le(out, omen_crc32(0, out->ptr, out->len));
out:
	cJSON_Delete(j);
	free(js);
	return e;
}

int omen_model_save(const omen_model *m, const char *path)
{
	omen_buf img = OMEN_BUF_INIT;
	omen_atomic_file f;
	int e;
	if ((e = model_image(&img, m)))
		goto out;
	if ((e = omen_mkdirs(path, 0)))
		goto out;
	if ((e = omen_atomic_open(&f, path)))
		goto out;
	if (fwrite(img.ptr, 1, img.len, f.fp) != img.len || fflush(f.fp)) {
		int err = errno;
		omen_atomic_abort(&f);
		e = omen_error_set(OMEN_EIO, "cannot write model '%s': %s (the old model is kept)", path,
			strerror(err ? err : EIO));
		goto out;
	}
	if ((e = omen_atomic_commit(&f)))
		omen_error_wrap(e, "cannot write model '%s'", path);
out:
	omen_buf_free(&img);
	return e;
}

/* ---- loading ------------------------------------------------------------- */
static int num(double *out, const cJSON *o, const char *k)
{
	const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, k);
	if (!cJSON_IsNumber(v) || !isfinite(v->valuedouble))
		return -1;
	*out = v->valuedouble;
	return 0;
}

static int get_int(int *out, const cJSON *o, const char *k, int lo, int hi)
{
	double d;
	if (num(&d, o, k) || d < lo || d > hi || d != floor(d))
		return -1;
	*out = (int)d;
	return 0;
}

/* The n finite numbers of array k of o, to fout as floats or dout as
 * doubles (the other NULL). -1 when absent, of another length or not
 * finite numbers. */
static int num_array(float *fout, double *dout, const cJSON *o, const char *k, int n)
{
	const cJSON *a = cJSON_GetObjectItemCaseSensitive(o, k), *v;
	int i = 0;
	if (!cJSON_IsArray(a) || cJSON_GetArraySize(a) != n)
		return -1;
	cJSON_ArrayForEach(v, a) {
		if (!cJSON_IsNumber(v) || !isfinite(v->valuedouble))
			return -1;
		if (fout)
			fout[i++] = (float)v->valuedouble;
		else
			dout[i++] = v->valuedouble;
	}
	return 0;
}

static int farray(float *out, const cJSON *o, const char *k, int n)
{
	return num_array(out, NULL, o, k, n);
}

static int darray(double *out, const cJSON *o, const char *k, int n)
{
	return num_array(NULL, out, o, k, n);
}

#define BAD(...) do { e = omen_error_set(OMEN_ECORRUPT, __VA_ARGS__); goto out; } while (0)

/* The tensor table in the metadata names the tensors these dimensions give,
 * in order, at the offsets they give. */
static int check_tensors(const omen_model *m, const cJSON *j, size_t param_off, const char *name)
{
	const cJSON *tens, *t;
	double d;
	int e = 0, i;
	tens = cJSON_GetObjectItemCaseSensitive(j, "tensors");
	if (!cJSON_IsArray(tens) || cJSON_GetArraySize(tens) != P_COUNT)
		BAD("cannot read model '%s': other architecture (tensor table)", name);
	i = 0;
	cJSON_ArrayForEach(t, tens) {
		const cJSON *nm = cJSON_GetObjectItemCaseSensitive(t, "name");
		if (!cJSON_IsString(nm) || strcmp(nm->valuestring, m->t[i].name) || num(&d, t, "offset") ||
			d != (double)(param_off + m->t[i].off * sizeof(float)))
			BAD("cannot read model '%s': other architecture (tensor '%s')", name,
				cJSON_IsString(nm) ? nm->valuestring : "?");
		i++;
	}
out:
	return e;
}

/* The metadata fields beside the weights: standardization, calibration,
 * threshold, caps, head and the logistic-regression baseline. */
static int parse_fields(omen_model *m, const cJSON *j, const char *name)
{
	const cJSON *st, *cal, *caps, *lr, *head;
	double d;
	int e = 0, i;
	st = cJSON_GetObjectItemCaseSensitive(j, "standardize");
	if (farray(m->metric_mean, st, "metric_mean", OMEN_NMETRICS) ||
		farray(m->metric_scale, st, "metric_scale", OMEN_NMETRICS) ||
		farray(m->fact_mean, st, "fact_mean", OMEN_MODEL_NFN) ||
		farray(m->fact_scale, st, "fact_scale", OMEN_MODEL_NFN))
		BAD("cannot read model '%s': bad standardization", name);
	for (i = 0; i < OMEN_NMETRICS; i++)
		if (!(m->metric_scale[i] > 0))
			BAD("cannot read model '%s': bad standardization", name);
	for (i = 0; i < OMEN_MODEL_NFN; i++)
		if (!(m->fact_scale[i] > 0))
			BAD("cannot read model '%s': bad standardization", name);
	cal = cJSON_GetObjectItemCaseSensitive(j, "calibration");
	if (num(&m->platt_a, cal, "a") || num(&m->platt_b, cal, "b"))
		BAD("cannot read model '%s': bad calibration", name);
	if (num(&d, j, "threshold") || d < 0 || d > 1)
		BAD("cannot read model '%s': bad threshold", name);
	m->threshold = (float)d;
	caps = cJSON_GetObjectItemCaseSensitive(j, "caps");
	if (get_int(&m->caps.max_files, caps, "max_files", 1, 1 << 20) ||
		get_int(&m->caps.max_hunks_per_file, caps, "max_hunks_per_file", 1, 1 << 20) ||
		get_int(&m->caps.max_tokens_per_hunk, caps, "max_tokens_per_hunk", 1, 1 << 24) ||
		get_int(&m->caps.max_msg_tokens, caps, "max_msg_tokens", 1, 1 << 24))
		BAD("cannot read model '%s': bad caps", name);
	head = cJSON_GetObjectItemCaseSensitive(j, "head");
	if (cJSON_IsString(head) && strlen(head->valuestring) <= OMEN_OID_HEX)
		strcpy(m->head, head->valuestring);
	lr = cJSON_GetObjectItemCaseSensitive(j, "lr_baseline");
	if (lr) {
		m->lr.p = OMEN_NMETRICS;
		m->lr.w = calloc(OMEN_NMETRICS, sizeof(double));
		m->lr.mean = calloc(OMEN_NMETRICS, sizeof(double));
		m->lr.scale = calloc(OMEN_NMETRICS, sizeof(double));
		if (!m->lr.w || !m->lr.mean || !m->lr.scale) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
		if (darray(m->lr.w, lr, "w", OMEN_NMETRICS) || num(&m->lr.b, lr, "b") ||
			darray(m->lr.mean, lr, "mean", OMEN_NMETRICS) ||
			darray(m->lr.scale, lr, "scale", OMEN_NMETRICS))
			BAD("cannot read model '%s': bad baseline", name);
		for (i = 0; i < OMEN_NMETRICS; i++)
			if (!(m->lr.scale[i] > 0))
				BAD("cannot read model '%s': bad baseline", name);
	}
out:
	return e;
}

int omen_model_parse(omen_model **out, const char *name, const void *data, size_t n)
{
	omen_cursor c;
	omen_model *m = NULL;
	cJSON *j = NULL;
	const cJSON *dims, *t;
	const void *magic, *mj, *pb, *sb;
	uint32_t version, reserved, crc;
	uint64_t total, ml, sl;
	size_t param_off;
	int e = 0, D, C, V, VM, NE, NM, NFN, K;

	*out = NULL;
	omen_cursor_init(&c, data, n);
	if (omen_cursor_bytes(&c, &magic, 8) || memcmp(magic, OMEN_MODEL_MAGIC, 8))
		BAD("cannot read model '%s': not an omen model file", name);
	if (omen_cursor_u32le(&c, &version) || omen_cursor_u32le(&c, &reserved) ||
		omen_cursor_u64le(&c, &total) || omen_cursor_u64le(&c, &ml))
		BAD("cannot read model '%s': truncated header", name);
	if (version != OMEN_MODEL_VERSION)
		BAD("cannot read model '%s': format version %u, this build reads version %u", name,
			version, OMEN_MODEL_VERSION);
	if (total != n)
		BAD("cannot read model '%s': truncated or padded (%zu bytes, header says %llu)", name, n,
			(unsigned long long)total);
	/* the CRC trailer comes off the cursor here, so what is left ends at
	 * the metrics state */
	if (omen_cursor_tail_u32le(&c, &crc) || omen_crc32(0, data, n - 4) != crc)
		BAD("cannot read model '%s': bad checksum", name);
	if (ml > c.n || omen_cursor_bytes(&c, &mj, (size_t)ml))
		BAD("cannot read model '%s': metadata length out of bounds", name);
	j = cJSON_ParseWithLength(mj, (size_t)ml);
	if (!j || !cJSON_IsObject(j))
		BAD("cannot read model '%s': bad metadata json", name);
	t = cJSON_GetObjectItemCaseSensitive(j, "arch");
	if (!cJSON_IsString(t) || strcmp(t->valuestring, OMEN_MODEL_ARCH))
		BAD("cannot read model '%s': architecture '%s', this build runs '%s'", name,
			cJSON_IsString(t) ? t->valuestring : "?", OMEN_MODEL_ARCH);
	dims = cJSON_GetObjectItemCaseSensitive(j, "dims");
	if (get_int(&D, dims, "D", 1, 1024) || get_int(&C, dims, "C", 1, 1024) ||
		get_int(&V, dims, "V", 1, 1 << 30) || get_int(&VM, dims, "VM", 1, 1 << 30) ||
		get_int(&NE, dims, "NE", 1, 1 << 30) || get_int(&NM, dims, "NM", 1, 1000) ||
		get_int(&NFN, dims, "NFN", 1, 1000) || get_int(&K, dims, "K", 1, 99))
		BAD("cannot read model '%s': bad dimensions", name);
	if (V != (int)OMEN_VOCAB || VM != (int)OMEN_MSG_VOCAB || NE != OMEN_EXT_BUCKETS ||
		NM != OMEN_NMETRICS || NFN != OMEN_MODEL_NFN || K != OMEN_MODEL_KW)
		BAD("cannot read model '%s': other architecture (vocabulary %d/%d, metrics %d, facts %d, "
			"width %d)", name, V, VM, NM, NFN, K);
	if ((e = omen_model_alloc(&m, D, C)))
		goto out;
	/* tensor table must match the one these dimensions give */
	param_off = (HDR + (size_t)ml + 63) / 64 * 64;
	if ((e = check_tensors(m, j, param_off, name)))
		goto out;
	if (param_off - HDR - ml > c.n || omen_cursor_bytes(&c, &pb, param_off - HDR - (size_t)ml))
		BAD("cannot read model '%s': truncated", name);
	if (m->nparams > c.n / sizeof(float) ||
		omen_cursor_bytes(&c, &pb, m->nparams * sizeof(float)))
		BAD("cannot read model '%s': truncated parameters", name);
	memcpy(m->params, pb, m->nparams * sizeof(float));
	if (!omen_all_finite(m->params, m->nparams))
		BAD("cannot read model '%s': non-finite weights", name);
	if (omen_cursor_u64le(&c, &sl) || sl > c.n || omen_cursor_bytes(&c, &sb, (size_t)sl) ||
		c.n != 0)
		BAD("cannot read model '%s': bad metrics-state length", name);
	if ((e = parse_fields(m, j, name)))
		goto out;
	if (sl) {
		if ((e = omen_buf_put(&m->mstate_blob, sb, (size_t)sl)))
			goto out;
		if ((e = omen_metrics_load(&m->mstate, sb, (size_t)sl))) {
			omen_error_wrap(OMEN_ECORRUPT, "cannot read model '%s'", name);
			e = OMEN_ECORRUPT;
			goto out;
		}
	}
	m->meta = j;
	j = NULL;
	*out = m;
	m = NULL;
out:
	cJSON_Delete(j);
	omen_model_free(m);
	return e;
}

int omen_model_load(omen_model **out, const char *path)
{
	return omen_model_load_max(out, path, 0);
}

int omen_model_load_max(omen_model **out, const char *path, int64_t max_bytes)
{
	omen_buf b = OMEN_BUF_INIT;
	size_t max = (size_t)1 << 31;
	int e, by_limit = 0;
	*out = NULL;
	if (max_bytes > 0 && (uint64_t)max_bytes < max) {
		max = (size_t)max_bytes;
		by_limit = 1;
	}
	if ((e = omen_file_read(&b, path, max))) {
		omen_buf_free(&b);
		if (e == OMEN_ELIMIT && by_limit)
			return omen_error_set(e, "cannot read model '%s': larger than the memory limit "
				"of %zu bytes (omen.memoryLimit)", path, max);
		return e == OMEN_ENOTFOUND
			? omen_error_set(e, "cannot read model '%s': no such file (run 'git omen train')", path)
			: e;
	}
	e = omen_model_parse(out, path, b.ptr, b.len);
	omen_buf_free(&b);
	return e;
}
