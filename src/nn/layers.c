/* Element-wise, normalisation, pooling, loss and plumbing kernels. Each
 * *_forward sits directly above its *_backward; backward kernels accumulate
 * (+=). Shape letters as in include/omen/nn.h (R rows of a ragged set, S
 * sets, C channels, D embedding width, T tokens, N rows). */
#include <math.h>
#include <string.h>
#include "omen/nn.h"
#ifdef __SSE2__
#include <emmintrin.h>
#endif

/* A 256-bit clone of the hottest loops beside the baseline one, picked at
 * load time. Same operations lane for lane and no FMA contraction (ISO C
 * mode), so both clones give the same bits. Not with clang 14, which cannot
 * link clones across files. */
#if defined(__x86_64__) && defined(__GNUC__) && !defined(__clang__) && defined(__has_attribute)
#if __has_attribute(target_clones)
#define NN_CLONES __attribute__((target_clones("avx2", "default")))
#endif
#endif
#ifndef NN_CLONES
#define NN_CLONES
#endif

/* Prefetches every 64-byte line of a row of D floats (a table row of 256
 * bytes spans four lines; prefetching only the first leaves three misses). */
static inline void prefetch_row(const float *p, int D, int write)
{
	int j;
	for (j = 0; j < D; j += 16) {
		if (write)
			__builtin_prefetch(p + j, 1);
		else
			__builtin_prefetch(p + j, 0);
	}
}

/* a.b over n with 8 running partial sums (lane j takes c = j mod 8), summed
 * in a fixed tree at the end: the compiler can keep the lanes in vector
 * registers without reassociating anything, so every build gives the same
 * bits. */
static inline __attribute__((always_inline)) float dot8(const float *a, const float *b, int n)
{
	float acc[8] = {0, 0, 0, 0, 0, 0, 0, 0};
	int c = 0, j;
	for (; c + 8 <= n; c += 8)
		for (j = 0; j < 8; j++)
			acc[j] += a[c + j] * b[c + j];
	for (; c < n; c++)
		acc[c & 7] += a[c] * b[c];
	return ((acc[0] + acc[4]) + (acc[1] + acc[5])) + ((acc[2] + acc[6]) + (acc[3] + acc[7]));
}

/* ---- embedding sequence: out[T,D] = W[ids[t],:], W [V,D] ---------------- */
void omen_embed_forward(float *out, const float *W, const uint32_t *ids, int T, int D)
{
	int t;
	for (t = 0; t < T; t++) {
		if (t + 8 < T)
			prefetch_row(W + (size_t)ids[t + 8] * D, D, 0);
		memcpy(out + (size_t)t * D, W + (size_t)ids[t] * D, sizeof(float) * (size_t)D);
	}
}

/* dW[ids[t],:] += dout[t,:]; dout [T,D]. */
void omen_embed_backward(float *dW, const float *dout, const uint32_t *ids, int T, int D)
{
	int t, j;
	for (t = 0; t < T; t++) {
		float *w = dW + (size_t)ids[t] * D;
		const float *d = dout + (size_t)t * D;
		if (t + 8 < T)
			prefetch_row(dW + (size_t)ids[t + 8] * D, D, 1);
		for (j = 0; j < D; j++)
			w[j] += d[j];
	}
}

/* ---- embedding bag (mean): out[S,D], ids [R], off [S+1] ------------------- */
NN_CLONES void omen_embag_forward(float *out, const float *W, const uint32_t *ids,
	const int32_t *off, int S, int D)
{
	int s, r, j;
	for (s = 0; s < S; s++) {
		float *o = out + (size_t)s * D;
		int n = off[s + 1] - off[s];
		memset(o, 0, sizeof(float) * (size_t)D);
		for (r = off[s]; r < off[s + 1]; r++) {
			const float *w = W + (size_t)ids[r] * D;
			if (r + 16 < off[S])
				prefetch_row(W + (size_t)ids[r + 16] * D, D, 0);
			for (j = 0; j < D; j++)
				o[j] += w[j];
		}
		if (n > 0) {
			float inv = 1.0f / (float)n;
			for (j = 0; j < D; j++)
				o[j] *= inv;
		}
	}
}

/* dW[ids[r],:] += dout[s,:] / |set s|. */
void omen_embag_backward(float *dW, const float *dout, const uint32_t *ids,
	const int32_t *off, int S, int D)
{
	int s, r, j;
	for (s = 0; s < S; s++) {
		const float *d = dout + (size_t)s * D;
		int n = off[s + 1] - off[s];
		float inv = n > 0 ? 1.0f / (float)n : 0.0f;
		for (r = off[s]; r < off[s + 1]; r++) {
			float *w = dW + (size_t)ids[r] * D;
			if (r + 8 < off[S])
				prefetch_row(dW + (size_t)ids[r + 8] * D, D, 1);
			for (j = 0; j < D; j++)
				w[j] += d[j] * inv;
		}
	}
}

/* ---- ReLU [N] --------------------------------------------------------------- */
void omen_relu_forward(float *out, const float *in, int N)
{
	int i;
	for (i = 0; i < N; i++)
		out[i] = in[i] > 0.0f ? in[i] : 0.0f;
}

void omen_relu_backward(float *din, const float *dout, const float *in, int N)
{
	int i;
	for (i = 0; i < N; i++)
		din[i] += in[i] > 0.0f ? dout[i] : 0.0f;
}

/* ---- GELU, exact: y = x Phi(x) = x/2 (1 + erf(x/sqrt 2)) [N] ------------- */
void omen_gelu_forward(float *out, const float *in, int N)
{
	int i;
	for (i = 0; i < N; i++)
		out[i] = 0.5f * in[i] * (1.0f + erff(in[i] * (float)M_SQRT1_2));
}

/* dy/dx = Phi(x) + x phi(x), phi(x) = exp(-x^2/2) / sqrt(2 pi). */
void omen_gelu_backward(float *din, const float *dout, const float *in, int N)
{
	const float inv_sqrt_2pi = 0.3989422804014327f;
	int i;
	for (i = 0; i < N; i++) {
		float x = in[i];
		float cdf = 0.5f * (1.0f + erff(x * (float)M_SQRT1_2));
		float pdf = inv_sqrt_2pi * expf(-0.5f * x * x);
		din[i] += dout[i] * (cdf + x * pdf);
	}
}

/* ---- layer normalisation over C: in/out [N,C], g,b [C], mean,rstd [N] ---- */
void omen_layernorm_forward(float *out, float *mean, float *rstd, const float *in,
	const float *g, const float *b, int N, int C)
{
	int n, c;
	for (n = 0; n < N; n++) {
		const float *x = in + (size_t)n * C;
		float *y = out + (size_t)n * C;
		float mu = 0.0f, var = 0.0f, rs;
		for (c = 0; c < C; c++)
			mu += x[c];
		mu /= (float)C;
		for (c = 0; c < C; c++)
			var += (x[c] - mu) * (x[c] - mu);
		var /= (float)C; /* biased, as torch.nn.LayerNorm */
		rs = 1.0f / sqrtf(var + 1e-5f);
		for (c = 0; c < C; c++)
			y[c] = (x[c] - mu) * rs * g[c] + b[c];
		mean[n] = mu;
		rstd[n] = rs;
	}
}

/* xh = (x-mu) rstd, dxh = dy g:
 * dx = rstd (dxh - mean_c(dxh) - xh mean_c(dxh xh)); dg += dy xh; db += dy. */
void omen_layernorm_backward(float *din, float *dg, float *db, const float *dout,
	const float *in, const float *mean, const float *rstd, const float *g, int N, int C)
{
	int n, c;
	for (n = 0; n < N; n++) {
		const float *x = in + (size_t)n * C, *dy = dout + (size_t)n * C;
		float mu = mean[n], rs = rstd[n], s1 = 0.0f, s2 = 0.0f;
		for (c = 0; c < C; c++) {
			float xh = (x[c] - mu) * rs, dxh = dy[c] * g[c];
			s1 += dxh;
			s2 += dxh * xh;
			if (dg)
				dg[c] += dy[c] * xh;
			if (db)
				db[c] += dy[c];
		}
		s1 /= (float)C;
		s2 /= (float)C;
		if (din) {
			float *dx = din + (size_t)n * C;
			for (c = 0; c < C; c++) {
				float xh = (x[c] - mu) * rs;
				dx[c] += rs * (dy[c] * g[c] - s1 - xh * s2);
			}
		}
	}
}

/* ---- inverted dropout [N]: keep with probability 1-p, scale 1/(1-p) ----- */
void omen_dropout_forward(float *out, uint8_t *mask, const float *in, float p,
	omen_rng *rng, int N)
{
	float scale = p < 1.0f ? 1.0f / (1.0f - p) : 0.0f;
	int i;
	for (i = 0; i < N; i++) {
		int keep = p <= 0.0f ? 1 : (p >= 1.0f ? 0 : omen_rng_uniform(rng) >= (double)p);
		mask[i] = (uint8_t)keep;
		out[i] = keep ? in[i] * scale : 0.0f;
	}
}

void omen_dropout_backward(float *din, const float *dout, const uint8_t *mask, float p, int N)
{
	float scale = p < 1.0f ? 1.0f / (1.0f - p) : 0.0f;
	int i;
	for (i = 0; i < N; i++)
		din[i] += mask[i] ? dout[i] * scale : 0.0f;
}

/* ---- attention pooling: in [R,C], q [C], out [S,C], attn [R] ------------- *
 * e_r = in[r].q / sqrt(C); a = softmax(e) inside each set (max subtracted);
 * out[s] = sum_r a_r in[r]. */
NN_CLONES void omen_attnpool_forward(float *out, float *attn, const float *in, const float *q,
	const int32_t *off, int S, int C)
{
	float scale = 1.0f / sqrtf((float)C);
	int s, r, c;
	for (s = 0; s < S; s++) {
		float *o = out + (size_t)s * C;
		float mx = -INFINITY, sum = 0.0f, inv;
		memset(o, 0, sizeof(float) * (size_t)C);
		if (off[s + 1] <= off[s])
			continue;
		for (r = off[s]; r < off[s + 1]; r++) {
			float e;
			if (r + 6 < off[S])
				prefetch_row(in + (size_t)(r + 6) * C, C, 0);
			e = dot8(in + (size_t)r * C, q, C) * scale;
			attn[r] = e;
			if (e > mx)
				mx = e;
		}
		for (r = off[s]; r < off[s + 1]; r++) {
			attn[r] = expf(attn[r] - mx);
			sum += attn[r];
		}
		inv = 1.0f / sum;
		for (r = off[s]; r < off[s + 1]; r++) {
			const float *x = in + (size_t)r * C;
			float a = attn[r] *= inv;
			for (c = 0; c < C; c++)
				o[c] += a * x[c];
		}
	}
}

/* g = dout[s]; dL/da_r = g.x_r; dL/de_r = a_r (g.x_r - g.out_s);
 * din[r] += a_r g + dL/de_r q / sqrt(C); dq += sum_r dL/de_r x_r / sqrt(C).
 * out_s is recomputed as sum_r a_r x_r (g.out_s = sum_r a_r g.x_r). */
NN_CLONES void omen_attnpool_backward(float *din, float *dq, const float *dout, const float *in,
	const float *q, const float *attn, const int32_t *off, int S, int C)
{
	float scale = 1.0f / sqrtf((float)C);
	int s, r, c;
	for (s = 0; s < S; s++) {
		const float *g = dout + (size_t)s * C;
		float gout = 0.0f;
		for (r = off[s]; r < off[s + 1]; r++)
			gout += attn[r] * dot8(g, in + (size_t)r * C, C);
		for (r = off[s]; r < off[s + 1]; r++) {
			const float *x = in + (size_t)r * C;
			float gx = dot8(g, x, C), a = attn[r], de;
			de = a * (gx - gout) * scale;
			if (din) {
				float *dx = din + (size_t)r * C;
				for (c = 0; c < C; c++)
					dx[c] += a * g[c] + de * q[c];
			}
			if (dq)
				for (c = 0; c < C; c++)
					dq[c] += de * x[c];
		}
	}
}

/* ---- max pooling: in [R,C], out [S,C], arg [S,C] (first max wins) ------- */
void omen_maxpool_forward(float *out, int32_t *arg, const float *in,
	const int32_t *off, int S, int C)
{
	int s, r, c;
	for (s = 0; s < S; s++) {
		float *o = out + (size_t)s * C;
		int32_t *a = arg + (size_t)s * C;
		if (off[s + 1] <= off[s]) {
			for (c = 0; c < C; c++) {
				o[c] = 0.0f;
				a[c] = -1;
			}
			continue;
		}
		memcpy(o, in + (size_t)off[s] * C, sizeof(float) * (size_t)C);
		for (c = 0; c < C; c++)
			a[c] = off[s];
		for (r = off[s] + 1; r < off[s + 1]; r++) {
			const float *x = in + (size_t)r * C;
			if (r + 6 < off[S])
				prefetch_row(in + (size_t)(r + 6) * C, C, 0);
			c = 0;
#ifdef __SSE2__
			/* strictly greater replaces: the first maximum wins */
			for (; c + 4 <= C; c += 4) {
				__m128 xv = _mm_loadu_ps(x + c), ov = _mm_loadu_ps(o + c);
				__m128i av = _mm_loadu_si128((const __m128i *)(a + c));
				__m128i gt = _mm_castps_si128(_mm_cmpgt_ps(xv, ov));
				__m128i rv = _mm_set1_epi32(r);
				_mm_storeu_ps(o + c, _mm_or_ps(_mm_and_ps(_mm_castsi128_ps(gt), xv),
					_mm_andnot_ps(_mm_castsi128_ps(gt), ov)));
				_mm_storeu_si128((__m128i *)(a + c),
					_mm_or_si128(_mm_and_si128(gt, rv), _mm_andnot_si128(gt, av)));
			}
#endif
			for (; c < C; c++)
				if (x[c] > o[c]) {
					o[c] = x[c];
					a[c] = r;
				}
		}
	}
}

void omen_maxpool_backward(float *din, const float *dout, const int32_t *arg, int S, int C)
{
	size_t i, n = (size_t)S * C;
	for (i = 0; i < n; i++)
		if (arg[i] >= 0)
			din[(size_t)arg[i] * C + i % (size_t)C] += dout[i];
}

/* ---- sigmoid binary cross-entropy, logits z [N] ------------------------ *
 * With sp(u) = log(1+e^u) = max(u,0) + log1p(e^-|u|):
 *   -log s(z) = sp(-z),  -log(1-s(z)) = sp(z),
 *   l_n = w_n [pw y_n sp(-z_n) + (1-y_n) sp(z_n)],
 *   dl_n/dz_n = w_n [(1-y_n) s(z_n) - pw y_n (1 - s(z_n))]. */
static float softplus(float u) { return fmaxf(u, 0.0f) + log1pf(expf(-fabsf(u))); }

static float sigmoid(float z)
{
	if (z >= 0.0f)
		return 1.0f / (1.0f + expf(-z));
	else {
		float e = expf(z);
		return e / (1.0f + e);
	}
}

float omen_bce_forward(const float *z, const float *y, const float *w, float pw, int N)
{
	double sum = 0.0;
	int n;
	if (N <= 0)
		return 0.0f;
	for (n = 0; n < N; n++) {
		float l = pw * y[n] * softplus(-z[n]) + (1.0f - y[n]) * softplus(z[n]);
		sum += (double)(w ? w[n] * l : l);
	}
	return (float)(sum / N);
}

void omen_bce_backward(float *dz, const float *z, const float *y, const float *w,
	float pw, int N, float scale)
{
	int n;
	float k = N > 0 ? scale / (float)N : 0.0f;
	for (n = 0; n < N; n++) {
		float s = sigmoid(z[n]);
		float d = (1.0f - y[n]) * s - pw * y[n] * (1.0f - s);
		dz[n] += k * (w ? w[n] * d : d);
	}
}

/* ---- column concatenation: out[N, Ca+Cb] = [a | b] --------------------- */
void omen_concat_forward(float *out, const float *a, const float *b, int N, int Ca, int Cb)
{
	int n;
	for (n = 0; n < N; n++) {
		float *o = out + (size_t)n * (Ca + Cb);
		memcpy(o, a + (size_t)n * Ca, sizeof(float) * (size_t)Ca);
		memcpy(o + Ca, b + (size_t)n * Cb, sizeof(float) * (size_t)Cb);
	}
}

void omen_concat_backward(float *da, float *db, const float *dout, int N, int Ca, int Cb)
{
	int n, c;
	for (n = 0; n < N; n++) {
		const float *d = dout + (size_t)n * (Ca + Cb);
		if (da)
			for (c = 0; c < Ca; c++)
				da[(size_t)n * Ca + c] += d[c];
		if (db)
			for (c = 0; c < Cb; c++)
				db[(size_t)n * Cb + c] += d[Ca + c];
	}
}
