/* Initialisation from the explicit-state RNG, AdamW, gradient clipping and a
 * finiteness check. Everything here is element-wise over flat blocks, so the
 * model keeps parameters, gradients and moments contiguous. */
#include <math.h>
#include "omen/nn.h"

/* Glorot & Bengio (2010): U(-a, a), a = gain sqrt(6 / (fan_in + fan_out)). */
void omen_init_xavier(float *w, size_t n, int fan_in, int fan_out, float gain, omen_rng *r)
{
	double bound = gain * sqrt(6.0 / (double)(fan_in + fan_out));
	size_t i;
	for (i = 0; i < n; i++)
		w[i] = (float)((2.0 * omen_rng_uniform(r) - 1.0) * bound);
}

void omen_init_normal(float *w, size_t n, float std, omen_rng *r)
{
	size_t i;
	for (i = 0; i < n; i++)
		w[i] = std * omen_rng_normal(r);
}

/* Loshchilov & Hutter, "Decoupled weight decay regularization", ICLR 2019,
 * in the order torch.optim.AdamW (single-tensor path) applies it:
 *   w *= 1 - lr wd;  m = b1 m + (1-b1) g;  v = b2 v + (1-b2) g^2;
 *   w -= lr/(1-b1^t) * m / (sqrt(v)/sqrt(1-b2^t) + eps).
 * Scalars are formed in double, as Python does, then used in float. */
void omen_adamw_step(float *w, const float *g, float *m, float *v, size_t n,
	const omen_adamw *o, int t, const uint8_t *decay)
{
	double bc1 = 1.0 - pow((double)o->beta1, t), bc2 = 1.0 - pow((double)o->beta2, t);
	float step = (float)((double)o->lr / bc1);
	float bc2s = (float)sqrt(bc2);
	float keep = (float)(1.0 - (double)o->lr * (double)o->weight_decay);
	float b1 = o->beta1, b2 = o->beta2;
	float a1 = (float)(1.0 - (double)b1), a2 = (float)(1.0 - (double)b2);
	float eps = o->eps;
	size_t i;

	/* branch-free so the loop vectorises; a factor of exactly 1 leaves an
	 * exempt weight unchanged bit for bit */
	for (i = 0; i < n; i++) {
		float gi = g[i], kd = (!decay || decay[i]) ? keep : 1.0f, mi, vi;
		mi = m[i] * b1 + gi * a1;
		vi = v[i] * b2 + gi * gi * a2;
		m[i] = mi;
		v[i] = vi;
		w[i] = w[i] * kd + -step * (mi / (sqrtf(vi) / bc2s + eps));
	}
}

/* As torch.nn.utils.clip_grad_norm_ (norm_type 2): coef = max/(norm+1e-6),
 * applied when coef < 1. The norm is summed in double. */
float omen_clip_grad_norm(float *g, size_t n, float max_norm)
{
	double ss = 0.0;
	float norm, coef;
	size_t i;
	for (i = 0; i < n; i++)
		ss += (double)g[i] * g[i];
	norm = (float)sqrt(ss);
	if (!(max_norm > 0.0f) || !isfinite(norm))
		return norm;
	coef = max_norm / (norm + 1e-6f);
	if (coef < 1.0f)
		for (i = 0; i < n; i++)
			g[i] *= coef;
	return norm;
}

int omen_all_finite(const float *x, size_t n)
{
	size_t i;
	/* x*0 is NaN for NaN and +-Inf, 0 otherwise; eight lanes and no early
	 * exit inside a block, so the loop vectorises */
	for (i = 0; i < n; i += 1024) {
		size_t j, e = n - i < 1024 ? n : i + 1024;
		float acc[8] = {0, 0, 0, 0, 0, 0, 0, 0};
		int l;
		for (j = i; j + 8 <= e; j += 8)
			for (l = 0; l < 8; l++)
				acc[l] += x[j + l] * 0.0f;
		for (; j < e; j++)
			acc[0] += x[j] * 0.0f;
		for (l = 1; l < 8; l++)
			acc[0] += acc[l];
		if (acc[0] != acc[0])
			return 0;
	}
	return 1;
}
