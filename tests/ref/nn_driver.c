/* Driver for tests/ref/nn_torch.py: reads the inputs the script wrote
 * (raw little-endian float32 / int32 files in DIR, sizes in DIR/shapes.txt),
 * runs every src/nn kernel forward and backward, five AdamW steps and the
 * gradient clip, and writes the results back into DIR for the script to
 * compare with PyTorch. Usage: nn_driver DIR */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "omen/nn.h"

static const char *dir;
static char keys[64][32];
static long vals[64];
static int nkeys;

static long shape(const char *k)
{
	int i;
	for (i = 0; i < nkeys; i++)
		if (!strcmp(keys[i], k))
			return vals[i];
	fprintf(stderr, "nn_driver: no shape '%s'\n", k);
	exit(2);
}

static void *rd(const char *name, size_t elem, size_t n)
{
	char path[512];
	FILE *f;
	void *p = calloc(n ? n : 1, elem);
	snprintf(path, sizeof(path), "%s/%s.bin", dir, name);
	f = fopen(path, "rb");
	if (!f || !p || fread(p, elem, n, f) != n) {
		fprintf(stderr, "nn_driver: cannot read '%s'\n", path);
		exit(2);
	}
	fclose(f);
	return p;
}

static float *rdf(const char *name, size_t n) { return rd(name, sizeof(float), n); }
static int32_t *rdi(const char *name, size_t n) { return rd(name, sizeof(int32_t), n); }

static void wr(const char *name, const void *x, size_t elem, size_t n)
{
	char path[512];
	FILE *f;
	snprintf(path, sizeof(path), "%s/%s.out.bin", dir, name);
	f = fopen(path, "wb");
	if (!f || fwrite(x, elem, n, f) != n || fclose(f) != 0) {
		fprintf(stderr, "nn_driver: cannot write '%s'\n", path);
		exit(2);
	}
}

static void wrf(const char *name, const float *x, size_t n) { wr(name, x, sizeof(float), n); }

static float *zeros(size_t n) { return calloc(n ? n : 1, sizeof(float)); }

static void run_embed(void)
{
	long V = shape("emb_V"), D = shape("emb_D"), T = shape("emb_T"), S = shape("emb_S");
	float *W = rdf("emb_W", V * D), *dout = rdf("emb_dout", T * D);
	float *bdout = rdf("bag_dout", S * D);
	uint32_t *ids = (uint32_t *)rdi("emb_ids", T);
	int32_t *off = rdi("bag_off", S + 1);
	float *out = zeros(T * D), *dW = zeros(V * D), *bout = zeros(S * D), *bdW = zeros(V * D);
	omen_embed_forward(out, W, ids, (int)T, (int)D);
	omen_embed_backward(dW, dout, ids, (int)T, (int)D);
	omen_embag_forward(bout, W, ids, off, (int)S, (int)D);
	omen_embag_backward(bdW, bdout, ids, off, (int)S, (int)D);
	wrf("emb_out", out, T * D); wrf("emb_dW", dW, V * D);
	wrf("bag_out", bout, S * D); wrf("bag_dW", bdW, V * D);
	free(W); free(dout); free(bdout); free(ids); free(off); free(out); free(dW); free(bout);
	free(bdW);
}

static void run_conv(const char *pre)
{
	char k[64];
	long T, S, Ci, Co, K;
	float *x, *W, *b, *dout, *out, *dx, *dW, *db;
	int32_t *off;
#define SH(s) (snprintf(k, sizeof(k), "%s_%s", pre, s), shape(k))
#define NM(s) (snprintf(k, sizeof(k), "%s_%s", pre, s), k)
	T = SH("T"); S = SH("S"); Ci = SH("Ci"); Co = SH("Co"); K = SH("K");
	x = rdf(NM("x"), T * Ci); W = rdf(NM("W"), K * Ci * Co); b = rdf(NM("b"), Co);
	dout = rdf(NM("dout"), T * Co); off = rdi(NM("off"), S + 1);
	out = zeros(T * Co); dx = zeros(T * Ci); dW = zeros(K * Ci * Co); db = zeros(Co);
	omen_conv1d_forward(out, x, W, b, off, (int)S, (int)Ci, (int)Co, (int)K);
	omen_conv1d_backward(dx, dW, db, dout, x, W, off, (int)S, (int)Ci, (int)Co, (int)K);
	wrf(NM("out"), out, T * Co); wrf(NM("dx"), dx, T * Ci); wrf(NM("dW"), dW, K * Ci * Co);
	wrf(NM("db"), db, Co);
#undef SH
#undef NM
	free(x); free(W); free(b); free(dout); free(off); free(out); free(dx); free(dW); free(db);
}

static void run_linear(void)
{
	long N = shape("lin_N"), Ci = shape("lin_Ci"), Co = shape("lin_Co");
	float *x = rdf("lin_x", N * Ci), *W = rdf("lin_W", Ci * Co), *b = rdf("lin_b", Co);
	float *dout = rdf("lin_dout", N * Co);
	float *out = zeros(N * Co), *dx = zeros(N * Ci), *dW = zeros(Ci * Co), *db = zeros(Co);
	omen_linear_forward(out, x, W, b, (int)N, (int)Ci, (int)Co);
	omen_linear_backward(dx, dW, db, dout, x, W, (int)N, (int)Ci, (int)Co);
	wrf("lin_out", out, N * Co); wrf("lin_dx", dx, N * Ci); wrf("lin_dW", dW, Ci * Co);
	wrf("lin_db", db, Co);
	free(x); free(W); free(b); free(dout); free(out); free(dx); free(dW); free(db);
}

static void run_act(void)
{
	long N = shape("act_N");
	float *x = rdf("act_x", N), *dout = rdf("act_dout", N);
	float *o1 = zeros(N), *d1 = zeros(N), *o2 = zeros(N), *d2 = zeros(N);
	omen_relu_forward(o1, x, (int)N);
	omen_relu_backward(d1, dout, x, (int)N);
	omen_gelu_forward(o2, x, (int)N);
	omen_gelu_backward(d2, dout, x, (int)N);
	wrf("relu_out", o1, N); wrf("relu_dx", d1, N); wrf("gelu_out", o2, N); wrf("gelu_dx", d2, N);
	free(x); free(dout); free(o1); free(d1); free(o2); free(d2);
}

static void run_layernorm(void)
{
	long N = shape("ln_N"), C = shape("ln_C");
	float *x = rdf("ln_x", N * C), *g = rdf("ln_g", C), *b = rdf("ln_b", C);
	float *dout = rdf("ln_dout", N * C);
	float *out = zeros(N * C), *mean = zeros(N), *rstd = zeros(N), *dx = zeros(N * C);
	float *dg = zeros(C), *db = zeros(C);
	omen_layernorm_forward(out, mean, rstd, x, g, b, (int)N, (int)C);
	omen_layernorm_backward(dx, dg, db, dout, x, mean, rstd, g, (int)N, (int)C);
	wrf("ln_out", out, N * C); wrf("ln_mean", mean, N); wrf("ln_rstd", rstd, N);
	wrf("ln_dx", dx, N * C); wrf("ln_dg", dg, C); wrf("ln_db", db, C);
	free(x); free(g); free(b); free(dout); free(out); free(mean); free(rstd); free(dx);
	free(dg); free(db);
}

static void run_dropout(void)
{
	long N = shape("drop_N"), seed = shape("drop_seed");
	float p = (float)shape("drop_p_permille") / 1000.0f;
	float *x = rdf("drop_x", N), *dout = rdf("drop_dout", N), *out = zeros(N), *dx = zeros(N);
	float *maskf = zeros(N);
	uint8_t *mask = calloc((size_t)N, 1);
	omen_rng r;
	long i;
	omen_rng_seed(&r, (uint64_t)seed);
	omen_dropout_forward(out, mask, x, p, &r, (int)N);
	omen_dropout_backward(dx, dout, mask, p, (int)N);
	for (i = 0; i < N; i++)
		maskf[i] = mask[i];
	wrf("drop_out", out, N); wrf("drop_dx", dx, N); wrf("drop_mask", maskf, N);
	free(x); free(dout); free(out); free(dx); free(maskf); free(mask);
}

static void run_pool(void)
{
	long R = shape("pool_R"), S = shape("pool_S"), C = shape("pool_C");
	float *x = rdf("pool_x", R * C), *q = rdf("pool_q", C), *dout = rdf("pool_dout", S * C);
	int32_t *off = rdi("pool_off", S + 1), *arg = calloc((size_t)(S * C), sizeof(int32_t));
	float *out = zeros(S * C), *attn = zeros(R), *dx = zeros(R * C), *dq = zeros(C);
	float *mout = zeros(S * C), *mdx = zeros(R * C), *argf = zeros(S * C);
	long i;
	omen_attnpool_forward(out, attn, x, q, off, (int)S, (int)C);
	omen_attnpool_backward(dx, dq, dout, x, q, attn, off, (int)S, (int)C);
	omen_maxpool_forward(mout, arg, x, off, (int)S, (int)C);
	omen_maxpool_backward(mdx, dout, arg, (int)S, (int)C);
	for (i = 0; i < S * C; i++)
		argf[i] = (float)arg[i];
	wrf("attn_out", out, S * C); wrf("attn_a", attn, R); wrf("attn_dx", dx, R * C);
	wrf("attn_dq", dq, C);
	wrf("max_out", mout, S * C); wrf("max_arg", argf, S * C); wrf("max_dx", mdx, R * C);
	free(x); free(q); free(dout); free(off); free(arg); free(out); free(attn); free(dx);
	free(dq); free(mout); free(mdx); free(argf);
}

static void run_bce(void)
{
	long N = shape("bce_N");
	float pw = (float)shape("bce_pw_permille") / 1000.0f;
	float *z = rdf("bce_z", N), *y = rdf("bce_y", N), *w = rdf("bce_w", N);
	float *dz = zeros(N), *dzw = zeros(N), loss[2];
	loss[0] = omen_bce_forward(z, y, NULL, pw, (int)N);
	loss[1] = omen_bce_forward(z, y, w, pw, (int)N);
	omen_bce_backward(dz, z, y, NULL, pw, (int)N, 1.0f);
	omen_bce_backward(dzw, z, y, w, pw, (int)N, 1.0f);
	wrf("bce_loss", loss, 2); wrf("bce_dz", dz, N); wrf("bce_dzw", dzw, N);
	free(z); free(y); free(w); free(dz); free(dzw);
}

static void run_concat(void)
{
	long N = shape("cat_N"), Ca = shape("cat_Ca"), Cb = shape("cat_Cb");
	float *a = rdf("cat_a", N * Ca), *b = rdf("cat_b", N * Cb);
	float *dout = rdf("cat_dout", N * (Ca + Cb));
	float *out = zeros(N * (Ca + Cb)), *da = zeros(N * Ca), *db = zeros(N * Cb);
	omen_concat_forward(out, a, b, (int)N, (int)Ca, (int)Cb);
	omen_concat_backward(da, db, dout, (int)N, (int)Ca, (int)Cb);
	wrf("cat_out", out, N * (Ca + Cb)); wrf("cat_da", da, N * Ca); wrf("cat_db", db, N * Cb);
	free(a); free(b); free(dout); free(out); free(da); free(db);
}

static void run_adamw(void)
{
	long n = shape("adam_n"), steps = shape("adam_steps"), t, i;
	float *w = rdf("adam_w", n), *g = rdf("adam_g", steps * n), *dec = rdf("adam_decay", n);
	float *hp = rdf("adam_hp", 5);
	float *m = zeros(n), *v = zeros(n);
	uint8_t *decay = malloc((size_t)n);
	omen_adamw o;
	o.lr = hp[0]; o.beta1 = hp[1]; o.beta2 = hp[2]; o.eps = hp[3]; o.weight_decay = hp[4];
	for (i = 0; i < n; i++)
		decay[i] = dec[i] != 0.0f;
	for (t = 1; t <= steps; t++)
		omen_adamw_step(w, g + (t - 1) * n, m, v, (size_t)n, &o, (int)t, decay);
	wrf("adam_w", w, n); wrf("adam_m", m, n); wrf("adam_v", v, n);
	free(w); free(g); free(dec); free(hp); free(m); free(v); free(decay);
}

static void run_clip(void)
{
	long n = shape("clip_n");
	float *g1 = rdf("clip_g", n), *g2 = rdf("clip_g", n), norms[2];
	float maxn = (float)shape("clip_max_permille") / 1000.0f;
	norms[0] = omen_clip_grad_norm(g1, (size_t)n, maxn);
	norms[1] = omen_clip_grad_norm(g2, (size_t)n, 1000.0f);
	wrf("clip_norms", norms, 2); wrf("clip_g1", g1, n); wrf("clip_g2", g2, n);
	free(g1); free(g2);
}

int main(int argc, char **argv)
{
	char path[512];
	FILE *f;
	if (argc != 2) {
		fprintf(stderr, "usage: nn_driver DIR\n");
		return 2;
	}
	dir = argv[1];
	snprintf(path, sizeof(path), "%s/shapes.txt", dir);
	f = fopen(path, "r");
	if (!f) {
		fprintf(stderr, "nn_driver: cannot read '%s'\n", path);
		return 2;
	}
	while (nkeys < 64 && fscanf(f, "%31s %ld", keys[nkeys], &vals[nkeys]) == 2)
		nkeys++;
	fclose(f);
	run_embed();
	run_conv("conv3");
	run_conv("conv5");
	run_linear();
	run_act();
	run_layernorm();
	run_dropout();
	run_pool();
	run_bce();
	run_concat();
	run_adamw();
	run_clip();
	printf("nn_driver: %s path\n", omen_nn_simd(-1) ? "avx2" : "portable");
	return 0;
}
