/* Unit tests of src/nn. Every backward kernel is checked against central
 * finite differences (L(x+h) - L(x-h)) / 2h of a double-precision reference
 * forward written here from the kernel's formula, with L = sum(out * R) for
 * random R (the standard gradient check, common practice; see also
 * torch.autograd.gradcheck). Both the AVX2 and the portable dense paths are
 * checked. The comparison with PyTorch itself is tests/ref/nn_torch.py. */
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <stdint.h>
#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>
#include "omen/nn.h"

#define FD_H 1e-5
/* float32 analytic gradient vs double FD: float rounding dominates */
#define FD_TOL 2e-3
#define FWD_TOL 1e-5
#define ACC0 0.25f /* gradients start here: backward must accumulate */

/* ---- small helpers ---------------------------------------------------------- */
static omen_rng trng;

static double urand(double lo, double hi) { return lo + (hi - lo) * omen_rng_uniform(&trng); }

static void fill(double *x, size_t n, double lo, double hi)
{
	size_t i;
	for (i = 0; i < n; i++)
		x[i] = urand(lo, hi);
}

static float *tof(const double *x, size_t n)
{
	float *f = malloc(sizeof(float) * (n ? n : 1));
	size_t i;
	for (i = 0; i < n; i++)
		f[i] = (float)x[i];
	return f;
}

/* Doubles of the float values, so reference and kernel see the same inputs. */
static void round_to_float(double *x, size_t n)
{
	size_t i;
	for (i = 0; i < n; i++)
		x[i] = (double)(float)x[i];
}

static float *fconst(size_t n, float v)
{
	float *f = malloc(sizeof(float) * (n ? n : 1));
	size_t i;
	for (i = 0; i < n; i++)
		f[i] = v;
	return f;
}

/* Reference problem: tensors x[0..nt), a loss over them. */
typedef struct prob prob;
struct prob {
	double *x[4];
	size_t n[4];
	double (*loss)(const prob *p);
	const double *R;
	int N, C, Ci, Co, K, S, T, D, V, Ca, Cb;
	const int32_t *off;
	const uint32_t *ids;
	const uint8_t *mask;
	double pdrop, pw;
	const double *y, *w;
};

static double max_rel_err(const char *kernel, const char *tensor, prob *p, int ti,
	const float *grad_acc)
{
	double worst = 0.0;
	size_t i;
	for (i = 0; i < p->n[ti]; i++) {
		double save = p->x[ti][i], lp, lm, fd, an, den, e;
		p->x[ti][i] = save + FD_H;
		lp = p->loss(p);
		p->x[ti][i] = save - FD_H;
		lm = p->loss(p);
		p->x[ti][i] = save;
		fd = (lp - lm) / (2 * FD_H);
		an = (double)grad_acc[i] - ACC0;
		den = fmax(fmax(fabs(fd), fabs(an)), 1e-2);
		e = fabs(an - fd) / den;
		if (e > worst)
			worst = e;
	}
	printf("FD %-10s d%-4s max rel err %.2e (%s)\n", kernel, tensor, worst,
		omen_nn_simd(-1) ? "avx2" : "portable");
	return worst;
}

static double max_fwd_err(const float *got, const double *want, size_t n)
{
	double worst = 0.0;
	size_t i;
	for (i = 0; i < n; i++) {
		double e = fabs((double)got[i] - want[i]) / fmax(1.0, fabs(want[i]));
		if (e > worst)
			worst = e;
	}
	return worst;
}

static double dot(const double *a, const double *b, size_t n)
{
	double s = 0;
	size_t i;
	for (i = 0; i < n; i++)
		s += a[i] * b[i];
	return s;
}

/* ---- embedding --------------------------------------------------------------- */
static void ref_embed(double *out, const prob *p)
{
	int t, j;
	for (t = 0; t < p->T; t++)
		for (j = 0; j < p->D; j++)
			out[t * p->D + j] = p->x[0][p->ids[t] * p->D + j];
}

static double loss_embed(const prob *p)
{
	double out[64 * 8];
	ref_embed(out, p);
	return dot(out, p->R, (size_t)p->T * p->D);
}

static void test_embed(void **state)
{
	enum { V = 11, D = 7, T = 9 };
	uint32_t ids[T] = {3, 0, 10, 3, 5, 3, 7, 1, 10};
	double W[V * D], R[T * D], want[T * D];
	prob p = {0};
	float *fW, *fR, *out, *dW;
	(void)state;
	fill(W, V * D, -1, 1);
	fill(R, T * D, -1, 1);
	round_to_float(W, V * D);
	p.x[0] = W; p.n[0] = V * D; p.loss = loss_embed; p.R = R;
	p.T = T; p.D = D; p.V = V; p.ids = ids;
	fW = tof(W, V * D); fR = tof(R, T * D);
	out = fconst(T * D, 0); dW = fconst(V * D, ACC0);
	omen_embed_forward(out, fW, ids, T, D);
	ref_embed(want, &p);
	assert_true(max_fwd_err(out, want, T * D) == 0.0);
	omen_embed_backward(dW, fR, ids, T, D);
	assert_true(max_rel_err("embed", "W", &p, 0, dW) < FD_TOL);
	free(fW); free(fR); free(out); free(dW);
}

static void ref_embag(double *out, const prob *p)
{
	int s, r, j;
	for (s = 0; s < p->S; s++)
		for (j = 0; j < p->D; j++) {
			double acc = 0;
			int n = p->off[s + 1] - p->off[s];
			for (r = p->off[s]; r < p->off[s + 1]; r++)
				acc += p->x[0][p->ids[r] * p->D + j];
			out[s * p->D + j] = n ? acc / n : 0.0;
		}
}

static double loss_embag(const prob *p)
{
	double out[64 * 8];
	ref_embag(out, p);
	return dot(out, p->R, (size_t)p->S * p->D);
}

static void test_embag(void **state)
{
	enum { V = 11, D = 6, S = 4 };
	uint32_t ids[] = {3, 0, 10, 3, 5, 3, 7, 1, 10};
	int32_t off[S + 1] = {0, 4, 4, 5, 9}; /* set 1 empty */
	double W[V * D], R[S * D], want[S * D];
	prob p = {0};
	float *fW, *fR, *out, *dW;
	(void)state;
	fill(W, V * D, -1, 1);
	fill(R, S * D, -1, 1);
	round_to_float(W, V * D);
	p.x[0] = W; p.n[0] = V * D; p.loss = loss_embag; p.R = R;
	p.S = S; p.D = D; p.ids = ids; p.off = off;
	fW = tof(W, V * D); fR = tof(R, S * D);
	out = fconst(S * D, 9); dW = fconst(V * D, ACC0);
	omen_embag_forward(out, fW, ids, off, S, D);
	ref_embag(want, &p);
	assert_true(max_fwd_err(out, want, S * D) < FWD_TOL);
	assert_true(out[1 * D] == 0.0f && out[1 * D + D - 1] == 0.0f);
	omen_embag_backward(dW, fR, ids, off, S, D);
	assert_true(max_rel_err("embag", "W", &p, 0, dW) < FD_TOL);
	free(fW); free(fR); free(out); free(dW);
}

/* ---- linear ------------------------------------------------------------------ */
static void ref_linear(double *out, const prob *p)
{
	int n, i, o;
	for (n = 0; n < p->N; n++)
		for (o = 0; o < p->Co; o++) {
			double acc = p->x[2][o];
			for (i = 0; i < p->Ci; i++)
				acc += p->x[0][n * p->Ci + i] * p->x[1][i * p->Co + o];
			out[n * p->Co + o] = acc;
		}
}

static double loss_linear(const prob *p)
{
	double out[32 * 40];
	ref_linear(out, p);
	return dot(out, p->R, (size_t)p->N * p->Co);
}

static void check_linear(int N, int Ci, int Co)
{
	double *x = malloc(sizeof(double) * N * Ci), *W = malloc(sizeof(double) * Ci * Co);
	double *b = malloc(sizeof(double) * Co), *R = malloc(sizeof(double) * N * Co);
	double *want = malloc(sizeof(double) * N * Co);
	prob p = {0};
	float *fx, *fW, *fb, *fR, *out, *dx, *dW, *db;
	fill(x, N * Ci, -1, 1); fill(W, Ci * Co, -1, 1); fill(b, Co, -1, 1);
	fill(R, N * Co, -1, 1);
	round_to_float(x, N * Ci); round_to_float(W, Ci * Co); round_to_float(b, Co);
	p.x[0] = x; p.n[0] = N * Ci; p.x[1] = W; p.n[1] = Ci * Co; p.x[2] = b; p.n[2] = Co;
	p.loss = loss_linear; p.R = R; p.N = N; p.Ci = Ci; p.Co = Co;
	fx = tof(x, N * Ci); fW = tof(W, Ci * Co); fb = tof(b, Co); fR = tof(R, N * Co);
	out = fconst(N * Co, 7); dx = fconst(N * Ci, ACC0); dW = fconst(Ci * Co, ACC0);
	db = fconst(Co, ACC0);
	omen_linear_forward(out, fx, fW, fb, N, Ci, Co);
	ref_linear(want, &p);
	assert_true(max_fwd_err(out, want, N * Co) < FWD_TOL);
	omen_linear_backward(dx, dW, db, fR, fx, fW, N, Ci, Co);
	assert_true(max_rel_err("linear", "in", &p, 0, dx) < FD_TOL);
	assert_true(max_rel_err("linear", "W", &p, 1, dW) < FD_TOL);
	assert_true(max_rel_err("linear", "b", &p, 2, db) < FD_TOL);
	/* din == NULL is allowed and leaves the others unchanged */
	{
		float *dW2 = fconst(Ci * Co, ACC0);
		omen_linear_backward(NULL, dW2, NULL, fR, fx, fW, N, Ci, Co);
		assert_memory_equal(dW, dW2, sizeof(float) * Ci * Co);
		free(dW2);
	}
	free(x); free(W); free(b); free(R); free(want);
	free(fx); free(fW); free(fb); free(fR); free(out); free(dx); free(dW); free(db);
}

static void test_linear(void **state)
{
	int pass;
	(void)state;
	for (pass = 0; pass < 2; pass++) {
		omen_nn_simd(pass == 0);
		check_linear(13, 9, 21); /* row tail 1, column tail 5 */
		check_linear(6, 16, 32);
		check_linear(1, 3, 2);
	}
	omen_nn_simd(1);
}

/* ---- conv1d ------------------------------------------------------------------ */
static void ref_conv(double *out, const prob *p)
{
	int s, t, k, i, o, pad = p->K / 2;
	for (s = 0; s < p->S; s++)
		for (t = p->off[s]; t < p->off[s + 1]; t++)
			for (o = 0; o < p->Co; o++) {
				double acc = p->x[2][o];
				for (k = 0; k < p->K; k++) {
					int r = t + k - pad;
					if (r < p->off[s] || r >= p->off[s + 1])
						continue;
					for (i = 0; i < p->Ci; i++)
						acc += p->x[0][r * p->Ci + i] *
							p->x[1][(k * p->Ci + i) * p->Co + o];
				}
				out[t * p->Co + o] = acc;
			}
}

static double loss_conv(const prob *p)
{
	double out[40 * 40];
	ref_conv(out, p);
	return dot(out, p->R, (size_t)p->T * p->Co);
}

static void check_conv(const int32_t *off, int S, int Ci, int Co, int K)
{
	int T = off[S];
	double *x = malloc(sizeof(double) * T * Ci), *W = malloc(sizeof(double) * K * Ci * Co);
	double *b = malloc(sizeof(double) * Co), *R = malloc(sizeof(double) * T * Co);
	double *want = malloc(sizeof(double) * T * Co);
	prob p = {0};
	float *fx, *fW, *fb, *fR, *out, *dx, *dW, *db;
	char name[32];
	fill(x, T * Ci, -1, 1); fill(W, K * Ci * Co, -1, 1); fill(b, Co, -1, 1);
	fill(R, T * Co, -1, 1);
	round_to_float(x, T * Ci); round_to_float(W, K * Ci * Co); round_to_float(b, Co);
	p.x[0] = x; p.n[0] = T * Ci; p.x[1] = W; p.n[1] = K * Ci * Co; p.x[2] = b; p.n[2] = Co;
	p.loss = loss_conv; p.R = R; p.T = T; p.S = S; p.off = off; p.Ci = Ci; p.Co = Co;
	p.K = K;
	fx = tof(x, T * Ci); fW = tof(W, K * Ci * Co); fb = tof(b, Co); fR = tof(R, T * Co);
	out = fconst(T * Co, 7); dx = fconst(T * Ci, ACC0); dW = fconst(K * Ci * Co, ACC0);
	db = fconst(Co, ACC0);
	omen_conv1d_forward(out, fx, fW, fb, off, S, Ci, Co, K);
	ref_conv(want, &p);
	assert_true(max_fwd_err(out, want, T * Co) < FWD_TOL);
	omen_conv1d_backward(dx, dW, db, fR, fx, fW, off, S, Ci, Co, K);
	snprintf(name, sizeof(name), "conv1d/K%d", K);
	assert_true(max_rel_err(name, "in", &p, 0, dx) < FD_TOL);
	assert_true(max_rel_err(name, "W", &p, 1, dW) < FD_TOL);
	assert_true(max_rel_err(name, "b", &p, 2, db) < FD_TOL);
	free(x); free(W); free(b); free(R); free(want);
	free(fx); free(fW); free(fb); free(fR); free(out); free(dx); free(dW); free(db);
}

static void test_conv1d(void **state)
{
	/* segments of length 5, 1, 0, 2, 12, 3: border rows, a row with no
	 * neighbour, an empty segment, more interior rows than one tile */
	static const int32_t off[] = {0, 5, 6, 6, 8, 20, 23};
	int pass;
	(void)state;
	for (pass = 0; pass < 2; pass++) {
		omen_nn_simd(pass == 0);
		check_conv(off, 6, 7, 19, 3);
		check_conv(off, 6, 5, 16, 5);
		check_conv(off, 6, 3, 4, 1);
	}
	omen_nn_simd(1);
}

/* ---- activations ------------------------------------------------------------- */
static double loss_relu(const prob *p)
{
	double s = 0;
	int i;
	for (i = 0; i < p->N; i++)
		s += (p->x[0][i] > 0 ? p->x[0][i] : 0) * p->R[i];
	return s;
}

static double gelu_d(double x) { return 0.5 * x * (1 + erf(x / sqrt(2.0))); }

static double loss_gelu(const prob *p)
{
	double s = 0;
	int i;
	for (i = 0; i < p->N; i++)
		s += gelu_d(p->x[0][i]) * p->R[i];
	return s;
}

static void test_activations(void **state)
{
	enum { N = 40 };
	double x[N], R[N], want[N];
	prob p = {0};
	float *fx, *fR, *out, *dx;
	int i;
	(void)state;
	fill(x, N, -4, 4);
	for (i = 0; i < N; i++) /* keep away from the ReLU kink */
		if (fabs(x[i]) < 0.05)
			x[i] = 0.5;
	fill(R, N, -1, 1);
	round_to_float(x, N);
	p.x[0] = x; p.n[0] = N; p.R = R; p.N = N;
	fx = tof(x, N); fR = tof(R, N); out = fconst(N, 0);

	dx = fconst(N, ACC0);
	omen_relu_forward(out, fx, N);
	for (i = 0; i < N; i++)
		want[i] = x[i] > 0 ? x[i] : 0;
	assert_true(max_fwd_err(out, want, N) == 0.0);
	omen_relu_backward(dx, fR, fx, N);
	p.loss = loss_relu;
	assert_true(max_rel_err("relu", "in", &p, 0, dx) < FD_TOL);
	free(dx);

	dx = fconst(N, ACC0);
	omen_gelu_forward(out, fx, N);
	for (i = 0; i < N; i++)
		want[i] = gelu_d(x[i]);
	assert_true(max_fwd_err(out, want, N) < FWD_TOL);
	omen_gelu_backward(dx, fR, fx, N);
	p.loss = loss_gelu;
	assert_true(max_rel_err("gelu", "in", &p, 0, dx) < FD_TOL);
	free(dx);
	free(fx); free(fR); free(out);
}

/* ---- layer norm -------------------------------------------------------------- */
static void ref_layernorm(double *out, const prob *p)
{
	int n, c, C = p->C;
	for (n = 0; n < p->N; n++) {
		const double *x = p->x[0] + n * C;
		double mu = 0, var = 0, rs;
		for (c = 0; c < C; c++)
			mu += x[c];
		mu /= C;
		for (c = 0; c < C; c++)
			var += (x[c] - mu) * (x[c] - mu);
		var /= C;
		rs = 1 / sqrt(var + 1e-5);
		for (c = 0; c < C; c++)
			out[n * C + c] = (x[c] - mu) * rs * p->x[1][c] + p->x[2][c];
	}
}

static double loss_layernorm(const prob *p)
{
	double out[16 * 16];
	ref_layernorm(out, p);
	return dot(out, p->R, (size_t)p->N * p->C);
}

static void test_layernorm(void **state)
{
	enum { N = 5, C = 11 };
	double x[N * C], g[C], b[C], R[N * C], want[N * C];
	prob p = {0};
	float *fx, *fg, *fb, *fR, *out, *dx, *dg, *db, mean[N], rstd[N];
	(void)state;
	fill(x, N * C, -2, 3); fill(g, C, 0.5, 1.5); fill(b, C, -1, 1); fill(R, N * C, -1, 1);
	round_to_float(x, N * C); round_to_float(g, C); round_to_float(b, C);
	p.x[0] = x; p.n[0] = N * C; p.x[1] = g; p.n[1] = C; p.x[2] = b; p.n[2] = C;
	p.loss = loss_layernorm; p.R = R; p.N = N; p.C = C;
	fx = tof(x, N * C); fg = tof(g, C); fb = tof(b, C); fR = tof(R, N * C);
	out = fconst(N * C, 0); dx = fconst(N * C, ACC0); dg = fconst(C, ACC0);
	db = fconst(C, ACC0);
	omen_layernorm_forward(out, mean, rstd, fx, fg, fb, N, C);
	ref_layernorm(want, &p);
	assert_true(max_fwd_err(out, want, N * C) < FWD_TOL);
	omen_layernorm_backward(dx, dg, db, fR, fx, mean, rstd, fg, N, C);
	assert_true(max_rel_err("layernorm", "in", &p, 0, dx) < FD_TOL);
	assert_true(max_rel_err("layernorm", "g", &p, 1, dg) < FD_TOL);
	assert_true(max_rel_err("layernorm", "b", &p, 2, db) < FD_TOL);
	free(fx); free(fg); free(fb); free(fR); free(out); free(dx); free(dg); free(db);
}

/* ---- dropout ----------------------------------------------------------------- */
static double loss_dropout(const prob *p)
{
	double s = 0;
	int i;
	for (i = 0; i < p->N; i++)
		s += (p->mask[i] ? p->x[0][i] / (1 - p->pdrop) : 0) * p->R[i];
	return s;
}

static void test_dropout(void **state)
{
	enum { N = 4000 };
	static double x[N], R[N];
	static uint8_t mask[N];
	prob p = {0};
	float *fx, *fR, *out, *dx;
	omen_rng r1, r2;
	int i, kept = 0;
	(void)state;
	fill(x, N, -1, 1); fill(R, N, -1, 1);
	round_to_float(x, N);
	fx = tof(x, N); fR = tof(R, N); out = fconst(N, 0); dx = fconst(N, ACC0);
	omen_rng_seed(&r1, 5);
	omen_dropout_forward(out, mask, fx, 0.25f, &r1, N);
	for (i = 0; i < N; i++) {
		kept += mask[i];
		assert_true(out[i] == (mask[i] ? fx[i] / 0.75f : 0.0f) ||
			fabsf(out[i] - fx[i] / 0.75f) < 1e-6f);
	}
	/* keep rate 0.75 within 4 standard deviations of a binomial */
	assert_true(fabs(kept / (double)N - 0.75) < 4 * sqrt(0.75 * 0.25 / N));
	p.x[0] = x; p.n[0] = 200; p.R = R; p.N = 200; p.mask = mask; p.pdrop = 0.25;
	p.loss = loss_dropout;
	omen_dropout_backward(dx, fR, mask, 0.25f, N);
	assert_true(max_rel_err("dropout", "in", &p, 0, dx) < FD_TOL);
	/* p = 0 is the identity and draws nothing */
	omen_rng_seed(&r1, 5);
	r2 = r1;
	omen_dropout_forward(out, mask, fx, 0.0f, &r1, N);
	assert_memory_equal(out, fx, sizeof(float) * N);
	assert_memory_equal(&r1, &r2, sizeof(r1));
	free(fx); free(fR); free(out); free(dx);
}

/* ---- attention pooling ------------------------------------------------------- */
static void ref_attnpool(double *out, const prob *p)
{
	int s, r, c, C = p->C;
	for (s = 0; s < p->S; s++) {
		double e[64], mx = -1e300, sum = 0;
		int lo = p->off[s], hi = p->off[s + 1];
		for (c = 0; c < C; c++)
			out[s * C + c] = 0;
		for (r = lo; r < hi; r++) {
			e[r - lo] = dot(p->x[0] + r * C, p->x[1], C) / sqrt((double)C);
			mx = fmax(mx, e[r - lo]);
		}
		for (r = lo; r < hi; r++)
			sum += exp(e[r - lo] - mx);
		for (r = lo; r < hi; r++)
			for (c = 0; c < C; c++)
				out[s * C + c] += exp(e[r - lo] - mx) / sum * p->x[0][r * C + c];
	}
}

static double loss_attnpool(const prob *p)
{
	double out[8 * 16];
	ref_attnpool(out, p);
	return dot(out, p->R, (size_t)p->S * p->C);
}

static void test_attnpool(void **state)
{
	enum { S = 5, C = 9 };
	int32_t off[S + 1] = {0, 4, 5, 5, 9, 16};
	int R_ = 16;
	double x[16 * C], q[C], R[S * C], want[S * C];
	prob p = {0};
	float *fx, *fq, *fR, *out, *dx, *dq, attn[16];
	(void)state;
	fill(x, R_ * C, -2, 2); fill(q, C, -2, 2); fill(R, S * C, -1, 1);
	round_to_float(x, R_ * C); round_to_float(q, C);
	p.x[0] = x; p.n[0] = R_ * C; p.x[1] = q; p.n[1] = C;
	p.loss = loss_attnpool; p.R = R; p.S = S; p.C = C; p.off = off;
	fx = tof(x, R_ * C); fq = tof(q, C); fR = tof(R, S * C);
	out = fconst(S * C, 3); dx = fconst(R_ * C, ACC0); dq = fconst(C, ACC0);
	omen_attnpool_forward(out, attn, fx, fq, off, S, C);
	ref_attnpool(want, &p);
	assert_true(max_fwd_err(out, want, S * C) < FWD_TOL);
	assert_true(out[2 * C] == 0.0f); /* empty set */
	assert_true(fabsf(attn[0] + attn[1] + attn[2] + attn[3] - 1.0f) < 1e-6f);
	assert_true(attn[4] == 1.0f);
	omen_attnpool_backward(dx, dq, fR, fx, fq, attn, off, S, C);
	assert_true(max_rel_err("attnpool", "in", &p, 0, dx) < FD_TOL);
	assert_true(max_rel_err("attnpool", "q", &p, 1, dq) < FD_TOL);
	free(fx); free(fq); free(fR); free(out); free(dx); free(dq);
}

/* ---- max pooling -------------------------------------------------------------- */
static void ref_maxpool(double *out, const prob *p)
{
	int s, r, c, C = p->C;
	for (s = 0; s < p->S; s++)
		for (c = 0; c < C; c++) {
			double m = p->off[s + 1] > p->off[s] ? -1e300 : 0;
			for (r = p->off[s]; r < p->off[s + 1]; r++)
				m = fmax(m, p->x[0][r * C + c]);
			out[s * C + c] = m;
		}
}

static double loss_maxpool(const prob *p)
{
	double out[8 * 16];
	ref_maxpool(out, p);
	return dot(out, p->R, (size_t)p->S * p->C);
}

static void test_maxpool(void **state)
{
	enum { S = 4, C = 6, RR = 10 };
	int32_t off[S + 1] = {0, 3, 3, 4, 10}, arg[S * C];
	double x[RR * C], R[S * C], want[S * C];
	prob p = {0};
	float *fx, *fR, *out, *dx;
	(void)state;
	fill(x, RR * C, -2, 2); fill(R, S * C, -1, 1);
	round_to_float(x, RR * C);
	p.x[0] = x; p.n[0] = RR * C; p.loss = loss_maxpool; p.R = R; p.S = S; p.C = C;
	p.off = off;
	fx = tof(x, RR * C); fR = tof(R, S * C); out = fconst(S * C, 3); dx = fconst(RR * C, ACC0);
	omen_maxpool_forward(out, arg, fx, off, S, C);
	ref_maxpool(want, &p);
	assert_true(max_fwd_err(out, want, S * C) == 0.0);
	assert_int_equal(arg[1 * C], -1);
	assert_int_equal(arg[2 * C], 3);
	omen_maxpool_backward(dx, fR, arg, S, C);
	assert_true(max_rel_err("maxpool", "in", &p, 0, dx) < FD_TOL);
	free(fx); free(fR); free(out); free(dx);
}

/* ---- BCE with logits ----------------------------------------------------------- */
static double softplus_d(double u) { return fmax(u, 0) + log1p(exp(-fabs(u))); }

static double loss_bce(const prob *p)
{
	double s = 0;
	int n;
	for (n = 0; n < p->N; n++) {
		double l = p->pw * p->y[n] * softplus_d(-p->x[0][n]) +
			(1 - p->y[n]) * softplus_d(p->x[0][n]);
		s += (p->w ? p->w[n] : 1) * l;
	}
	return s / p->N * p->R[0];
}

static void test_bce(void **state)
{
	enum { N = 12 };
	double z[N], y[N], w[N], R[1] = {0.7};
	prob p = {0};
	float *fz, *fy, *fw, *dz, got;
	int n, pass;
	(void)state;
	fill(z, N, -6, 6); fill(w, N, 0.2, 2);
	for (n = 0; n < N; n++)
		y[n] = n % 3 == 0;
	round_to_float(z, N); round_to_float(w, N);
	fz = tof(z, N); fy = tof(y, N); fw = tof(w, N);
	p.x[0] = z; p.n[0] = N; p.y = y; p.R = R; p.N = N; p.pw = 2.5; p.loss = loss_bce;
	for (pass = 0; pass < 2; pass++) {
		p.w = pass ? w : NULL;
		got = omen_bce_forward(fz, fy, pass ? fw : NULL, 2.5f, N);
		assert_true(fabs(got * 0.7 - loss_bce(&p)) < 1e-5 * fabs(loss_bce(&p)) + 1e-7);
		dz = fconst(N, ACC0);
		omen_bce_backward(dz, fz, fy, pass ? fw : NULL, 2.5f, N, 0.7f);
		assert_true(max_rel_err(pass ? "bce/w" : "bce", "z", &p, 0, dz) < FD_TOL);
		free(dz);
	}
	/* large |z|: loss = |z| exactly-ish, finite gradient (stability) */
	{
		float zz[2] = {100.0f, -100.0f}, yy[2] = {0.0f, 1.0f}, d[2] = {0, 0};
		float l = omen_bce_forward(zz, yy, NULL, 3.0f, 2);
		assert_true(fabsf(l - (100.0f + 300.0f) / 2) < 1e-3f);
		omen_bce_backward(d, zz, yy, NULL, 3.0f, 2, 1.0f);
		assert_true(fabsf(d[0] - 0.5f) < 1e-6f && fabsf(d[1] + 1.5f) < 1e-6f);
	}
	free(fz); free(fy); free(fw);
}

/* ---- concat -------------------------------------------------------------------- */
static double loss_concat(const prob *p)
{
	double s = 0;
	int n, c, W = p->Ca + p->Cb;
	for (n = 0; n < p->N; n++) {
		for (c = 0; c < p->Ca; c++)
			s += p->x[0][n * p->Ca + c] * p->R[n * W + c];
		for (c = 0; c < p->Cb; c++)
			s += p->x[1][n * p->Cb + c] * p->R[n * W + p->Ca + c];
	}
	return s;
}

static void test_concat(void **state)
{
	enum { N = 3, Ca = 4, Cb = 5 };
	double a[N * Ca], b[N * Cb], R[N * (Ca + Cb)];
	prob p = {0};
	float *fa, *fb, *fR, *out, *da, *db;
	(void)state;
	fill(a, N * Ca, -1, 1); fill(b, N * Cb, -1, 1); fill(R, N * (Ca + Cb), -1, 1);
	round_to_float(a, N * Ca); round_to_float(b, N * Cb);
	p.x[0] = a; p.n[0] = N * Ca; p.x[1] = b; p.n[1] = N * Cb; p.R = R; p.N = N;
	p.Ca = Ca; p.Cb = Cb; p.loss = loss_concat;
	fa = tof(a, N * Ca); fb = tof(b, N * Cb); fR = tof(R, N * (Ca + Cb));
	out = fconst(N * (Ca + Cb), 0); da = fconst(N * Ca, ACC0); db = fconst(N * Cb, ACC0);
	omen_concat_forward(out, fa, fb, N, Ca, Cb);
	assert_true(out[1 * (Ca + Cb) + Ca] == fb[1 * Cb] && out[2 * (Ca + Cb) + 3] == fa[2 * Ca + 3]);
	omen_concat_backward(da, db, fR, N, Ca, Cb);
	assert_true(max_rel_err("concat", "a", &p, 0, da) < FD_TOL);
	assert_true(max_rel_err("concat", "b", &p, 1, db) < FD_TOL);
	free(fa); free(fb); free(fR); free(out); free(da); free(db);
}

/* ---- wide layers take the chunked / direct input-gradient paths ---------- */
static void test_wide_paths(void **state)
{
	/* linear with Co*16 above the stack panel, conv with K*Co*16 above it */
	enum { N = 9, Ci = 5, CoL = 1100, CoC = 400, K = 3 };
	static const int32_t off[] = {0, 4, 5, 9};
	float *x = malloc(sizeof(float) * N * Ci), *d = malloc(sizeof(float) * N * CoL);
	float *W = malloc(sizeof(float) * K * Ci * CoL), *dx = calloc(N * Ci, sizeof(float));
	double worst = 0;
	int n, i, o, k, s, pass;
	(void)state;
	for (i = 0; i < N * Ci; i++)
		x[i] = (float)urand(-1, 1);
	for (i = 0; i < N * CoL; i++)
		d[i] = (float)urand(-1, 1);
	for (i = 0; i < K * Ci * CoL; i++)
		W[i] = (float)urand(-1, 1);
	for (pass = 0; pass < 2; pass++) {
		omen_nn_simd(pass == 0);
		memset(dx, 0, sizeof(float) * N * Ci);
		omen_linear_backward(dx, NULL, NULL, d, x, W, N, Ci, CoL);
		for (n = 0; n < N; n++)
			for (i = 0; i < Ci; i++) {
				double want = 0;
				for (o = 0; o < CoL; o++)
					want += (double)d[n * CoL + o] * W[i * CoL + o];
				worst = fmax(worst, fabs(dx[n * Ci + i] - want) / fmax(1, fabs(want)));
			}
		memset(dx, 0, sizeof(float) * N * Ci);
		omen_conv1d_backward(dx, NULL, NULL, d, x, W, off, 3, Ci, CoC, K);
		for (s = 0; s < 3; s++)
			for (n = off[s]; n < off[s + 1]; n++)
				for (i = 0; i < Ci; i++) {
					double want = 0;
					for (k = 0; k < K; k++) {
						int t = n - k + K / 2; /* output row fed by row n with tap k */
						if (t < off[s] || t >= off[s + 1])
							continue;
						for (o = 0; o < CoC; o++)
							want += (double)d[t * CoC + o] * W[(k * Ci + i) * CoC + o];
					}
					worst = fmax(worst, fabs(dx[n * Ci + i] - want) / fmax(1, fabs(want)));
				}
	}
	omen_nn_simd(1);
	printf("wide input-gradient paths: max rel err %.2e vs double sums\n", worst);
	assert_true(worst < 1e-5);
	free(x); free(d); free(W); free(dx);
}

/* ---- AVX2 and portable paths agree -------------------------------------------- */
static void test_simd_vs_portable(void **state)
{
	static const int32_t off[] = {0, 17, 18, 40, 41, 77};
	enum { T = 77, Ci = 37, Co = 45, K = 3 };
	float *x = malloc(sizeof(float) * T * Ci), *W = malloc(sizeof(float) * K * Ci * Co);
	float *b = malloc(sizeof(float) * Co), *o1 = malloc(sizeof(float) * T * Co);
	float *o2 = malloc(sizeof(float) * T * Co);
	int i;
	(void)state;
	if (!omen_nn_simd(-1)) {
		printf("AVX2+FMA not available: portable path only\n");
		free(x); free(W); free(b); free(o1); free(o2);
		return;
	}
	for (i = 0; i < T * Ci; i++)
		x[i] = (float)urand(-1, 1);
	for (i = 0; i < K * Ci * Co; i++)
		W[i] = (float)urand(-1, 1);
	for (i = 0; i < Co; i++)
		b[i] = (float)urand(-1, 1);
	omen_conv1d_forward(o1, x, W, b, off, 5, Ci, Co, K);
	omen_nn_simd(0);
	omen_conv1d_forward(o2, x, W, b, off, 5, Ci, Co, K);
	omen_nn_simd(1);
	for (i = 0; i < T * Co; i++)
		assert_true(fabsf(o1[i] - o2[i]) <= 1e-5f * (1.0f + fabsf(o2[i])));
	free(x); free(W); free(b); free(o1); free(o2);
}

/* ---- threads: _mt kernels equal one-thread kernels bit for bit; fixed task
 * split reduced in fixed order gives identical sums on 1 and 2 threads ---- */
typedef struct {
	const float *x, *dout;
	float *dW[4];
	int rows, Ci, Co;
} chunk_job;

static void chunk_task(int task, void *p)
{
	chunk_job *j = p;
	size_t o = (size_t)task * j->rows;
	omen_linear_backward(NULL, j->dW[task], NULL, j->dout + o * j->Co, j->x + o * j->Ci,
		NULL, j->rows, j->Ci, j->Co);
}

static void test_threads(void **state)
{
	enum { N = 960, Ci = 40, Co = 64, K = 3, NT = 4 }; /* above NN_MT_MIN_MACS */
	static const int32_t off[] = {0, 300, 301, 600, 960};
	size_t nw = (size_t)Ci * Co;
	float *x = malloc(sizeof(float) * N * Ci), *d = malloc(sizeof(float) * N * Co);
	float *W = malloc(sizeof(float) * K * Ci * Co), *b = malloc(sizeof(float) * Co);
	float *a1 = calloc(N * Co, sizeof(float)), *a2 = calloc(N * Co, sizeof(float));
	float *g1 = calloc(K * nw + N * Ci + Co, sizeof(float));
	float *g2 = calloc(K * nw + N * Ci + Co, sizeof(float));
	float *sum1 = malloc(sizeof(float) * nw), *sum2 = malloc(sizeof(float) * nw);
	chunk_job j;
	int i, t;
	(void)state;
	for (i = 0; i < N * Ci; i++)
		x[i] = (float)urand(-1, 1);
	for (i = 0; i < N * Co; i++)
		d[i] = (float)urand(-1, 1);
	for (i = 0; i < K * (int)nw; i++)
		W[i] = (float)urand(-1, 1);
	for (i = 0; i < Co; i++)
		b[i] = (float)urand(-1, 1);

	omen_linear_forward(a1, x, W, b, N, Ci, Co);
	omen_linear_forward_mt(a2, x, W, b, N, Ci, Co, 2);
	assert_memory_equal(a1, a2, sizeof(float) * N * Co);
	omen_linear_backward(g1 + nw, g1, g1 + 2 * nw, d, x, W, N, Ci, Co);
	omen_linear_backward_mt(g2 + nw, g2, g2 + 2 * nw, d, x, W, N, Ci, Co, 2);
	assert_memory_equal(g1, g2, sizeof(float) * (2 * nw + Co));

	memset(g1, 0, sizeof(float) * (K * nw + N * Ci + Co));
	memset(g2, 0, sizeof(float) * (K * nw + N * Ci + Co));
	omen_conv1d_forward(a1, x, W, b, off, 4, Ci, Co, K);
	omen_conv1d_forward_mt(a2, x, W, b, off, 4, Ci, Co, K, 2);
	assert_memory_equal(a1, a2, sizeof(float) * N * Co);
	omen_conv1d_backward(g1 + K * nw, g1, g1 + K * nw + N * Ci, d, x, W, off, 4, Ci, Co, K);
	omen_conv1d_backward_mt(g2 + K * nw, g2, g2 + K * nw + N * Ci, d, x, W, off, 4, Ci, Co,
		K, 2);
	assert_memory_equal(g1, g2, sizeof(float) * (K * nw + N * Ci + Co));

	/* the model's pattern: NT fixed chunks, one buffer each, fixed reduce */
	j.x = x; j.dout = d; j.rows = N / NT; j.Ci = Ci; j.Co = Co;
	for (t = 0; t < NT; t++)
		j.dW[t] = calloc(nw, sizeof(float));
	assert_int_equal(omen_parallel_tasks(NT, 1, chunk_task, &j), 0);
	omen_reduce_fixed(sum1, j.dW, NT, nw);
	for (t = 0; t < NT; t++)
		memset(j.dW[t], 0, sizeof(float) * nw);
	assert_int_equal(omen_parallel_tasks(NT, 2, chunk_task, &j), 0);
	omen_reduce_fixed(sum2, j.dW, NT, nw);
	assert_memory_equal(sum1, sum2, sizeof(float) * nw);
	/* reduce order is index order: (s0 + s1) + s2 + s3, in place allowed */
	for (i = 0; i < 5; i++) {
		float e = ((j.dW[0][i] + j.dW[1][i]) + j.dW[2][i]) + j.dW[3][i];
		assert_true(sum2[i] == e);
	}
	omen_reduce_fixed(j.dW[0], j.dW, NT, nw);
	assert_memory_equal(j.dW[0], sum2, sizeof(float) * nw);
	for (t = 0; t < NT; t++)
		free(j.dW[t]);
	free(x); free(d); free(W); free(b); free(a1); free(a2); free(g1); free(g2);
	free(sum1); free(sum2);
}

static void count_task(int tid, void *p)
{
	int *hits = p;
	hits[tid] += tid + 1; /* each tid writes only its own slot */
}

static void test_parallel_run(void **state)
{
	int hits[3] = {0, 0, 0};
	(void)state;
	assert_int_equal(omen_parallel_run(3, count_task, hits), 0);
	assert_int_equal(hits[0], 1);
	assert_int_equal(hits[1], 2);
	assert_int_equal(hits[2], 3);
	assert_int_equal(omen_parallel_run(1, count_task, hits), 0);
	assert_int_equal(hits[0], 2);
	assert_int_equal(hits[1], 2);
}

/* ---- optimiser, clipping, init, finiteness -------------------------------------- */
static void test_adamw(void **state)
{
	/* First step of Adam moves each weight by lr * g/(|g| + eps') (Kingma &
	 * Ba 2015, sec. 2.1: m_hat = g, v_hat = g^2), after the decoupled decay
	 * w *= 1 - lr wd (Loshchilov & Hutter 2019). */
	float w[4] = {1.0f, -2.0f, 0.5f, 3.0f}, g[4] = {0.1f, -0.3f, 2.0f, 0.0f};
	float m[4] = {0}, v[4] = {0}, w0[4];
	uint8_t decay[4] = {1, 1, 0, 1};
	omen_adamw o = OMEN_ADAMW_DEFAULT;
	int i;
	(void)state;
	memcpy(w0, w, sizeof(w));
	omen_adamw_step(w, g, m, v, 4, &o, 1, decay);
	for (i = 0; i < 4; i++) {
		double dec = decay[i] ? w0[i] * (1 - 1e-3 * 1e-2) : w0[i];
		double upd = g[i] == 0 ? 0 : 1e-3 * g[i] / (fabs(g[i]) + 1e-8);
		assert_true(fabs(w[i] - (dec - upd)) < 1e-6);
	}
	assert_true(fabsf(m[1] - 0.1f * -0.3f) < 1e-7f);
	assert_true(fabsf(v[2] - 0.001f * 4.0f) < 1e-7f);
}

static void test_clip(void **state)
{
	float g[4] = {3.0f, 0.0f, -4.0f, 0.0f}, h[2] = {0.3f, 0.4f}, bad[2] = {1.0f, NAN};
	float n;
	(void)state;
	n = omen_clip_grad_norm(g, 4, 1.0f);
	assert_true(fabsf(n - 5.0f) < 1e-6f);
	assert_true(fabsf(g[0] - 3.0f / (5.0f + 1e-6f)) < 1e-7f); /* torch: max/(norm+1e-6) */
	n = omen_clip_grad_norm(h, 2, 1.0f);
	assert_true(fabsf(n - 0.5f) < 1e-7f && h[0] == 0.3f && h[1] == 0.4f);
	n = omen_clip_grad_norm(bad, 2, 1.0f);
	assert_true(isnan(n) && bad[0] == 1.0f);
}

static void test_init(void **state)
{
	enum { N = 20000 };
	static float a[N], b[N];
	omen_rng r1, r2;
	double bound = 1.5 * sqrt(6.0 / (30 + 70)), mean = 0, var = 0;
	int i;
	(void)state;
	omen_rng_seed(&r1, 42);
	omen_rng_seed(&r2, 42);
	omen_init_xavier(a, N, 30, 70, 1.5f, &r1);
	omen_init_xavier(b, N, 30, 70, 1.5f, &r2);
	assert_memory_equal(a, b, sizeof(a));
	for (i = 0; i < N; i++)
		assert_true(fabs(a[i]) <= bound);
	omen_init_normal(a, N, 0.02f, &r1);
	omen_init_normal(b, N, 0.02f, &r2);
	assert_memory_equal(a, b, sizeof(a));
	for (i = 0; i < N; i++)
		mean += a[i];
	mean /= N;
	for (i = 0; i < N; i++)
		var += (a[i] - mean) * (a[i] - mean);
	var /= N;
	assert_true(fabs(mean) < 4 * 0.02 / sqrt(N));
	assert_true(fabs(sqrt(var) - 0.02) < 0.02 * 0.03);
	omen_rng_seed(&r1, 43);
	omen_init_normal(b, N, 0.02f, &r1);
	assert_true(memcmp(a, b, sizeof(a)) != 0);
}

static void test_all_finite(void **state)
{
	enum { N = 3000 };
	static float x[N];
	size_t pos[4] = {0, 1023, 1024, N - 1};
	float bad[3];
	int i, k;
	(void)state;
	bad[0] = NAN; bad[1] = INFINITY; bad[2] = -INFINITY;
	for (i = 0; i < N; i++)
		x[i] = (float)urand(-1, 1);
	x[7] = FLT_MAX;
	x[8] = -FLT_MAX;
	x[9] = FLT_MIN / 4; /* subnormal */
	assert_int_equal(omen_all_finite(x, N), 1);
	assert_int_equal(omen_all_finite(x, 0), 1);
	for (k = 0; k < 3; k++)
		for (i = 0; i < 4; i++) {
			float save = x[pos[i]];
			x[pos[i]] = bad[k];
			assert_int_equal(omen_all_finite(x, N), 0);
			assert_int_equal(omen_all_finite(x, pos[i]), 1);
			x[pos[i]] = save;
		}
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_embed),
		cmocka_unit_test(test_embag),
		cmocka_unit_test(test_linear),
		cmocka_unit_test(test_conv1d),
		cmocka_unit_test(test_activations),
		cmocka_unit_test(test_layernorm),
		cmocka_unit_test(test_dropout),
		cmocka_unit_test(test_attnpool),
		cmocka_unit_test(test_maxpool),
		cmocka_unit_test(test_bce),
		cmocka_unit_test(test_concat),
		cmocka_unit_test(test_wide_paths),
		cmocka_unit_test(test_simd_vs_portable),
		cmocka_unit_test(test_threads),
		cmocka_unit_test(test_parallel_run),
		cmocka_unit_test(test_adamw),
		cmocka_unit_test(test_clip),
		cmocka_unit_test(test_init),
		cmocka_unit_test(test_all_finite),
	};
	omen_rng_seed(&trng, 20240601);
	return cmocka_run_group_tests(tests, NULL, NULL);
}
