/* Driver for tests/ref/model_torch.py: one full forward and backward pass
 * of the whole model on a tiny hand-made batch. Writes to the directory in
 * argv[1]: params.bin and grad.bin (float32, the parameter block) and
 * batch.json (dimensions, tensor table, the batch, loss and logits). */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "omen/omen.h"

/* Three commits: (a) two files, the second with one one-token hunk; (b) a
 * file with no hunks (binary) and no message; (c) no files at all. */
static const int32_t a_file_off[] = {0, 2, 3}, a_hunk_off[] = {0, 5, 7, 8};
static const uint32_t a_tok[] = {11, 12, 13, 16395, 12, 5, 7, 30000};
static const uint32_t a_msg[] = {3, 9, 9, 4000};
static const float a_facts[2 * OMEN_NFACTS] = {1.5f, 0.2f, 0.1f, 2.0f, 0.7f, 0, 3.1f, 4,
	0.3f, 0, 0, 4.5f, 1.1f, 1, 0, 31};
static const int32_t b_file_off[] = {0, 0}, b_hunk_off[] = {0};
static const float b_facts[OMEN_NFACTS] = {0.4f, 0.4f, 1, 0.1f, 0.2f, 0, 5, 2};
static const int32_t c_file_off[] = {0}, c_hunk_off[] = {0};
static const uint32_t c_msg[] = {1, 2};

static void put_floats(const char *dir, const char *name, const float *v, size_t n)
{
	char path[4096];
	FILE *fp;
	snprintf(path, sizeof(path), "%s/%s", dir, name);
	fp = fopen(path, "wb");
	if (!fp || fwrite(v, sizeof(float), n, fp) != n)
		exit(2);
	fclose(fp);
}

static void json_ints(FILE *fp, const char *k, const void *v, int n, int is_unsigned)
{
	int i;
	fprintf(fp, "\"%s\":[", k);
	for (i = 0; i < n; i++)
		fprintf(fp, i ? ",%lld" : "%lld", is_unsigned ? (long long)((const uint32_t *)v)[i]
			: (long long)((const int32_t *)v)[i]);
	fprintf(fp, "]");
}

static void json_floats(FILE *fp, const char *k, const float *v, int n)
{
	int i;
	fprintf(fp, "\"%s\":[", k);
	for (i = 0; i < n; i++)
		fprintf(fp, i ? ",%.9g" : "%.9g", v[i]);
	fprintf(fp, "]");
}

int main(int argc, char **argv)
{
	omen_sample s[3];
	const omen_sample *sp[3] = {&s[0], &s[1], &s[2]};
	float y[3] = {1, 0, 1}, loss, logits[3], *g, *p;
	omen_model *m;
	omen_rng r;
	size_t i, n;
	int k, D = 4, C = 6;
	char path[4096];
	FILE *fp;
	if (argc != 2)
		return 2;
	memset(s, 0, sizeof(s));
	s[0].nfiles = 2; s[0].nhunks = 3; s[0].ntok = 8; s[0].nmsg = 4;
	s[0].file_off = a_file_off; s[0].hunk_off = a_hunk_off; s[0].tok = a_tok; s[0].msg = a_msg;
	s[0].file_facts = a_facts;
	s[1].nfiles = 1; s[1].file_off = b_file_off; s[1].hunk_off = b_hunk_off; s[1].file_facts = b_facts;
	s[2].file_off = c_file_off; s[2].hunk_off = c_hunk_off; s[2].nmsg = 2; s[2].msg = c_msg;
	for (k = 0; k < 3; k++) {
		int j;
		for (j = 0; j < OMEN_NMETRICS; j++)
			s[k].metrics[j] = (float)((k + 1) * (j + 2) % 7) + 0.25f * (float)j;
	}
	if (omen_model_new(&m, D, C, 17))
		return 1;
	/* every parameter random (biases and queries too), so all paths count */
	p = omen_model_params(m);
	n = omen_model_nparams(m);
	omen_rng_seed(&r, 23);
	for (i = 0; i < n; i++)
		p[i] = 0.5f * omen_rng_normal(&r);
	g = malloc(n * sizeof(float));
	if (!g || omen_model_loss_grad(&loss, g, logits, m, sp, y, 3, 2.5f)) {
		fprintf(stderr, "%s\n", omen_error_last());
		return 1;
	}
	put_floats(argv[1], "params.bin", p, n);
	put_floats(argv[1], "grad.bin", g, n);
	snprintf(path, sizeof(path), "%s/batch.json", argv[1]);
	if (!(fp = fopen(path, "w")))
		return 2;
	fprintf(fp, "{\"D\":%d,\"C\":%d,\"V\":%u,\"VM\":%u,\"NE\":%d,\"NM\":%d,\"NFACTS\":%d,"
		"\"EXT\":%d,\"pos_weight\":2.5,\"loss\":%.9g,", D, C, OMEN_VOCAB, OMEN_MSG_VOCAB,
		OMEN_EXT_BUCKETS, OMEN_NMETRICS, OMEN_NFACTS, OMEN_FF_EXT_HASH, loss);
	json_floats(fp, "logits", logits, 3);
	fprintf(fp, ",");
	json_floats(fp, "y", y, 3);
	fprintf(fp, ",\"tensors\":[");
	for (k = 0; ; k++) {
		size_t off, cnt;
		int sh[3];
		const char *nm = omen_model_tensor(m, k, &off, &cnt, sh);
		if (!nm)
			break;
		fprintf(fp, "%s{\"name\":\"%s\",\"off\":%zu,\"n\":%zu,\"shape\":[%d,%d,%d]}", k ? "," : "",
			nm, off, cnt, sh[0], sh[1], sh[2]);
	}
	fprintf(fp, "],\"samples\":[");
	for (k = 0; k < 3; k++) {
		fprintf(fp, "%s{", k ? "," : "");
		json_ints(fp, "file_off", s[k].file_off, s[k].nfiles + 1, 0);
		fprintf(fp, ",");
		json_ints(fp, "hunk_off", s[k].hunk_off, s[k].nhunks + 1, 0);
		fprintf(fp, ",");
		json_ints(fp, "tok", s[k].tok, s[k].ntok, 1);
		fprintf(fp, ",");
		json_ints(fp, "msg", s[k].msg, s[k].nmsg, 1);
		fprintf(fp, ",");
		json_floats(fp, "facts", s[k].file_facts, s[k].nfiles * OMEN_NFACTS);
		fprintf(fp, ",");
		json_floats(fp, "metrics", s[k].metrics, OMEN_NMETRICS);
		fprintf(fp, "}");
	}
	fprintf(fp, "]}\n");
	fclose(fp);
	free(g);
	omen_model_free(m);
	return 0;
}
