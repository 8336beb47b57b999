/* Neural kernels. Each *_forward sits directly above its *_backward in
 * src/nn/. Kernels never allocate; callers pass every buffer. Backward
 * kernels ACCUMULATE (+=) into parameter and input gradients, so callers
 * zero them first. Row-major everywhere. Shape letters: B batch, F files,
 * H hunks, T tokens, M message tokens, D embedding width, C channels,
 * R rows of a ragged set, S sets. Ragged sets are offset arrays off[S+1]
 * (rows off[s] .. off[s+1]-1 belong to set s). */
#ifndef OMEN_NN_H
#define OMEN_NN_H

#include <stddef.h>
#include <stdint.h>
#include "omen/util.h"

/* Embedding sequence: out[T,D] = W[ids[t],:]. W [V,D]. */
void omen_embed_forward(float *out, const float *W, const uint32_t *ids, int T, int D);
void omen_embed_backward(float *dW, const float *dout, const uint32_t *ids, int T, int D);

/* Embedding bag, mean over each set: out[S,D]; empty set -> zeros. */
void omen_embag_forward(float *out, const float *W, const uint32_t *ids,
	const int32_t *off, int S, int D);
void omen_embag_backward(float *dW, const float *dout, const uint32_t *ids,
	const int32_t *off, int S, int D);

/* 1-D convolution, width K (odd), zero "same" padding inside each segment
 * (no mixing across segments off[S+1] of the T rows).
 * in [T,Ci], W [K,Ci,Co], b [Co], out [T,Co]. */
void omen_conv1d_forward(float *out, const float *in, const float *W, const float *b,
	const int32_t *off, int S, int Ci, int Co, int K);
void omen_conv1d_backward(float *din, float *dW, float *db, const float *dout,
	const float *in, const float *W, const int32_t *off, int S, int Ci, int Co, int K);

/* Linear: out[N,Co] = in[N,Ci] W[Ci,Co] + b[Co]. din may be NULL. */
void omen_linear_forward(float *out, const float *in, const float *W, const float *b,
	int N, int Ci, int Co);
void omen_linear_backward(float *din, float *dW, float *db, const float *dout,
	const float *in, const float *W, int N, int Ci, int Co);
/* Same results, bit for bit, as the one-thread kernels above, computed on
 * nthreads threads (rows split for out/din, weight rows split for dW). */
void omen_linear_forward_mt(float *out, const float *in, const float *W, const float *b,
	int N, int Ci, int Co, int nthreads);
void omen_linear_backward_mt(float *din, float *dW, float *db, const float *dout,
	const float *in, const float *W, int N, int Ci, int Co, int nthreads);
void omen_conv1d_forward_mt(float *out, const float *in, const float *W, const float *b,
	const int32_t *off, int S, int Ci, int Co, int K, int nthreads);
void omen_conv1d_backward_mt(float *din, float *dW, float *db, const float *dout,
	const float *in, const float *W, const int32_t *off, int S, int Ci, int Co, int K,
	int nthreads);

void omen_relu_forward(float *out, const float *in, int N);
void omen_relu_backward(float *din, const float *dout, const float *in, int N);
/* GELU, exact erf form (PyTorch's default). */
void omen_gelu_forward(float *out, const float *in, int N);
void omen_gelu_backward(float *din, const float *dout, const float *in, int N);

/* Layer normalisation over the last dim C, eps 1e-5; saves mean, rstd [N]. */
void omen_layernorm_forward(float *out, float *mean, float *rstd, const float *in,
	const float *g, const float *b, int N, int C);
void omen_layernorm_backward(float *din, float *dg, float *db, const float *dout,
	const float *in, const float *mean, const float *rstd, const float *g, int N, int C);

/* Inverted dropout with probability p; mask [N] is written (1 keep, 0 drop). */
void omen_dropout_forward(float *out, uint8_t *mask, const float *in, float p,
	omen_rng *rng, int N);
void omen_dropout_backward(float *din, const float *dout, const uint8_t *mask, float p, int N);

/* Attention pooling over ragged sets with a learned query q [C]:
 * score_r = in[r]·q / sqrt(C), a = softmax of scores inside each set,
 * out[s] = sum_r a_r in[r]. in [R,C], out [S,C], attn [R] saved.
 * An empty set gives a zero vector. */
void omen_attnpool_forward(float *out, float *attn, const float *in, const float *q,
	const int32_t *off, int S, int C);
void omen_attnpool_backward(float *din, float *dq, const float *dout, const float *in,
	const float *q, const float *attn, const int32_t *off, int S, int C);

/* Max pooling over ragged sets: out [S,C], arg [S,C] row index (-1 empty). */
void omen_maxpool_forward(float *out, int32_t *arg, const float *in,
	const int32_t *off, int S, int C);
void omen_maxpool_backward(float *din, const float *dout, const int32_t *arg, int S, int C);

/* Sigmoid binary cross-entropy on logits z [N] with targets y [N], optional
 * per-sample weights w (NULL = 1) and a positive-class weight pw:
 * l_n = -w_n [pw y_n log s(z_n) + (1-y_n) log(1-s(z_n))], returns
 * sum_n l_n / N (PyTorch BCEWithLogitsLoss(pos_weight=pw, reduction=mean)
 * when w is NULL). Backward writes dz += scale * dl/dz (scale is the upstream
 * gradient, normally 1). Numerically stable for large |z|. */
float omen_bce_forward(const float *z, const float *y, const float *w, float pw, int N);
void omen_bce_backward(float *dz, const float *z, const float *y, const float *w,
	float pw, int N, float scale);

/* Column concatenation: out[N, Ca+Cb] = [a | b]. */
void omen_concat_forward(float *out, const float *a, const float *b, int N, int Ca, int Cb);
void omen_concat_backward(float *da, float *db, const float *dout, int N, int Ca, int Cb);

/* ---- initialisation and optimiser --------------------------------------- */
/* Uniform(-bound, bound) with bound = gain * sqrt(6 / (fan_in + fan_out)). */
void omen_init_xavier(float *w, size_t n, int fan_in, int fan_out, float gain, omen_rng *r);
void omen_init_normal(float *w, size_t n, float std, omen_rng *r);

typedef struct {
	float lr, beta1, beta2, eps, weight_decay;
} omen_adamw;
#define OMEN_ADAMW_DEFAULT {1e-3f, 0.9f, 0.999f, 1e-8f, 1e-2f}
/* One AdamW step (Loshchilov & Hutter, ICLR 2019) on n parameters as in
 * torch.optim.AdamW: w -= lr*wd*w; m,v updated; bias-corrected; step t >= 1.
 * decay NULL = decay all; else decay[i] == 0 exempts parameter i. */
void omen_adamw_step(float *w, const float *g, float *m, float *v, size_t n,
	const omen_adamw *o, int t, const uint8_t *decay);
/* Global L2 norm of g; when max_norm > 0 and norm > max_norm, scales g by
 * max_norm / (norm + 1e-6) (torch.nn.utils.clip_grad_norm_, which scales
 * exactly when that factor is < 1, i.e. norm + 1e-6 > max_norm). Returns the
 * norm before clipping; NaN/Inf norm is returned unchanged (caller checks). */
float omen_clip_grad_norm(float *g, size_t n, float max_norm);
/* 1 when every value is finite. */
int omen_all_finite(const float *x, size_t n);

/* ---- threads --------------------------------------------------------------
 * Runs fn(tid, payload) for tid in [0, n) on n threads (n == 1: inline).
 * Per-thread gradient buffers are summed by omen_reduce_fixed in index
 * order, so results do not depend on scheduling. */
int omen_parallel_run(int n, void (*fn)(int tid, void *payload), void *payload);
/* Runs fn(task, payload) for every task in [0, ntasks) on nthreads threads
 * (thread i takes tasks i, i+nthreads, ...). Cut a batch into a fixed number
 * of tasks with one gradient buffer each, reduce them with
 * omen_reduce_fixed, and the sum is the same for any thread count. */
int omen_parallel_tasks(int ntasks, int nthreads, void (*fn)(int task, void *payload),
	void *payload);
/* dst[i] = src[0][i] + src[1][i] + ... (fixed order). dst may be src[0]. */
void omen_reduce_fixed(float *dst, float *const *src, int nsrc, size_t n);

/* Vector path of the dense kernels: AVX2+FMA when the CPU has it (checked at
 * run time; OMEN_NN_PORTABLE=1 in the environment forces the portable C
 * path). enable 0/1 switches it off/on (not thread-safe; tests and
 * benchmarks), -1 only asks. Returns 1 when the AVX2 path is in use. */
int omen_nn_simd(int enable);

#endif
