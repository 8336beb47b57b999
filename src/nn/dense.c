/* Dense kernels: linear layer and 1-D convolution over ragged token
 * sequences, forward above backward, each with a two-thread variant (_mt)
 * that splits rows (forward, input gradient) and weight rows (weight
 * gradient) so its results are bit-identical to the one-thread kernel.
 * All the arithmetic goes through nn_tile (gemm.c). No allocation: the
 * transposed weight panel for input gradients lives on the stack. */
#include <string.h>
#include "nn/internal.h"
#include "omen/nn.h"

#define MIN(a, b) ((a) < (b) ? (a) : (b))
#define MAX(a, b) ((a) > (b) ? (a) : (b))
/* Rows of the reduction per block when accumulating a weight gradient,
 * so the activations of one block stay in the first-level caches. */
#define NN_NB 64
/* Below this many multiply-adds a second thread costs more to start than it
 * saves; the _mt kernels then run on the calling thread (same results). */
#define NN_MT_MIN_MACS (1 << 21)

/* db[c0..c1) += sum_n dout[n, c] with n ascending. dout [N,Co]. */
static void bias_grad(float *db, const float *dout, int N, int Co, int c0, int c1)
{
	float acc[64];
	int n, j, cb;

	for (cb = c0; cb < c1; cb += 64) {
		int w = MIN(64, c1 - cb);
		memset(acc, 0, sizeof(acc));
		for (n = 0; n < N; n++) {
			const float *d = dout + (size_t)n * Co + cb;
			for (j = 0; j < w; j++)
				acc[j] += d[j];
		}
		for (j = 0; j < w; j++)
			db[cb + j] += acc[j];
	}
}

/* Splits [0, n) into parts of the part-th of nparts, aligned to align. */
static void split_range(int *lo, int *hi, int n, int part, int nparts, int align)
{
	int blocks = (n + align - 1) / align;
	int b0 = (int)((long long)blocks * part / nparts);
	int b1 = (int)((long long)blocks * (part + 1) / nparts);
	*lo = MIN(n, b0 * align);
	*hi = MIN(n, b1 * align);
}

/* ======================================================================== */
/* Linear: out[N,Co] = in[N,Ci] W[Ci,Co] + b[Co].                            */

/* Rows [n0, n1) of the forward pass. */
static void linear_fwd_rows(float *out, const float *in, const float *W, const float *b,
	int n0, int n1, int Ci, int Co)
{
	const float *a[NN_MR];
	float *c[NN_MR];
	int n, i;

	if (!b)
		memset(out + (size_t)n0 * Co, 0, sizeof(float) * (size_t)(n1 - n0) * Co);
	for (n = n0; n < n1; n += NN_MR) {
		int mr = MIN(NN_MR, n1 - n);
		for (i = 0; i < mr; i++) {
			a[i] = in + (size_t)(n + i) * Ci;
			c[i] = out + (size_t)(n + i) * Co;
		}
		nn_tile(mr, Ci, a, 1, W, Co, Co, c, b);
	}
}

static void conv_din_segs(float *din, const float *dout, const float *W, const int32_t *off,
	int s0, int s1, int Ci, int Co, int K);

/* din rows [n0, n1) when Co is too wide for one stack panel: W^T packed
 * 16 columns of Ci by NN_PANEL/16 rows of Co at a time, partial sums
 * added to din chunk by chunk. */
static void linear_din_wide(float *din, const float *dout, const float *W, int n0, int n1,
	int Ci, int Co)
{
	float P[NN_PANEL];
	const float *a[NN_MR];
	float *c[NN_MR];
	int ci0, cc0, n, i, j, co;
	int kc = NN_PANEL / 16; /* rows of Co per panel */

	for (ci0 = 0; ci0 < Ci; ci0 += 16) {
		int nc = MIN(16, Ci - ci0);
		for (cc0 = 0; cc0 < Co; cc0 += kc) {
			int kl = MIN(kc, Co - cc0);
			for (co = 0; co < kl; co++)
				for (j = 0; j < nc; j++)
					P[co * 16 + j] = W[(size_t)(ci0 + j) * Co + cc0 + co];
			for (n = n0; n < n1; n += NN_MR) {
				int mr = MIN(NN_MR, n1 - n);
				for (i = 0; i < mr; i++) {
					a[i] = dout + (size_t)(n + i) * Co + cc0;
					c[i] = din + (size_t)(n + i) * Ci + ci0;
				}
				nn_tile(mr, kl, a, 1, P, 16, nc, c, NULL);
			}
		}
	}
}

/* din rows [n0, n1): din[N,Ci] += dout[N,Co] W^T, computed as a width-1
 * convolution over one segment (W^T packed into stack panels). */
static void linear_din_rows(float *din, const float *dout, const float *W, int n0, int n1,
	int Ci, int Co)
{
	int32_t seg[2];
	if ((size_t)Co * 16 > NN_PANEL) {
		linear_din_wide(din, dout, W, n0, n1, Ci, Co);
		return;
	}
	seg[0] = n0;
	seg[1] = n1;
	conv_din_segs(din, dout, W, seg, 0, 1, Ci, Co, 1);
}

/* dW rows [ci_a, ci_b): dW[Ci,Co] += in^T dout, reduction over N in blocks
 * of NN_NB rows (block order fixed, independent of the row split). */
static void linear_dw_rows(float *dW, const float *dout, const float *in, int N, int Ci,
	int Co, int ci_a, int ci_b)
{
	const float *a[NN_MR];
	float *c[NN_MR];
	int nb, ci, i;

	for (nb = 0; nb < N; nb += NN_NB) {
		int kl = MIN(NN_NB, N - nb);
		for (ci = ci_a; ci < ci_b; ci += NN_MR) {
			int mr = MIN(NN_MR, ci_b - ci);
			for (i = 0; i < mr; i++) {
				a[i] = in + (size_t)nb * Ci + ci + i;
				c[i] = dW + (size_t)(ci + i) * Co;
			}
			nn_tile(mr, kl, a, Ci, dout + (size_t)nb * Co, Co, Co, c, NULL);
		}
	}
}

/* ---- two-thread variants ---- */
typedef struct {
	float *out, *din, *dW, *db;
	const float *in, *W, *b, *dout;
	const int32_t *off;
	int N, S, Ci, Co, K, nth;
} dense_job;

static void linear_fwd_task(int tid, void *p)
{
	dense_job *j = p;
	int lo, hi;
	split_range(&lo, &hi, j->N, tid, j->nth, NN_MR);
	linear_fwd_rows(j->out, j->in, j->W, j->b, lo, hi, j->Ci, j->Co);
}

static void linear_bwd_task(int tid, void *p)
{
	dense_job *j = p;
	int lo, hi;
	if (j->din) {
		split_range(&lo, &hi, j->N, tid, j->nth, NN_MR);
		linear_din_rows(j->din, j->dout, j->W, lo, hi, j->Ci, j->Co);
	}
	if (j->dW) {
		split_range(&lo, &hi, j->Ci, tid, j->nth, NN_MR);
		linear_dw_rows(j->dW, j->dout, j->in, j->N, j->Ci, j->Co, lo, hi);
	}
	if (j->db) {
		split_range(&lo, &hi, j->Co, tid, j->nth, 8);
		bias_grad(j->db, j->dout, j->N, j->Co, lo, hi);
	}
}

/* ======================================================================== */
/* Conv1d: in [T,Ci], W [K,Ci,Co], b [Co], out [T,Co]; segments off[S+1].
 * Row t of segment [lo,hi) reads rows t-p .. t+p (p = K/2) that lie inside
 * the segment, taps kmin..kmax. Those rows are contiguous, so the window is
 * one run of (kmax-kmin+1)*Ci floats and W viewed as [K*Ci, Co] is the
 * matching run of weight rows: each output row is a short dot-product
 * chain with no im2col copy. Rows that share (kmin,kmax) are gathered into
 * tiles of up to NN_MR rows (interior rows all share kmin=0, kmax=K-1). */

#define CONV_MAXP 7 /* tiles per (kmin,kmax) class up to K = 15 */

typedef struct {
	const float *a[NN_MR];
	float *c[NN_MR];
	int n;
} row_tile;

typedef struct {
	const float *A;   /* source rows, lda floats each */
	int lda;
	const float *B;   /* weights for tap 0; tap k starts at B + k*btap */
	ptrdiff_t ldb, btap;
	float *C;         /* destination rows, ldc floats apart */
	int ldc, n;       /* n columns per panel (last panel: nlast) */
	const float *init;
	int K;
	int npan, nlast;  /* weight panels side by side, 16 columns apart in C */
	ptrdiff_t pan_stride;
} conv_pass;

static void conv_flush(const conv_pass *cp, row_tile *tl, int kmin, int kmax)
{
	float *c2[NN_MR];
	int p, i;
	if (tl->n == 0)
		return;
	for (p = 0; p < cp->npan; p++) {
		for (i = 0; i < tl->n; i++)
			c2[i] = tl->c[i] + p * 16;
		nn_tile(tl->n, (kmax - kmin + 1) * cp->lda, tl->a, 1,
			cp->B + p * cp->pan_stride + kmin * cp->btap, cp->ldb,
			p == cp->npan - 1 ? cp->nlast : cp->n, c2, cp->init);
	}
	tl->n = 0;
}

/* Every row of segments [s0, s1). */
static void conv_rows(const conv_pass *cp, const int32_t *off, int s0, int s1)
{
	row_tile tiles[(CONV_MAXP + 1) * (CONV_MAXP + 1)];
	int p = cp->K / 2, s, t, kmin, kmax;
	int classes = p <= CONV_MAXP;

	if (classes)
		for (t = 0; t < (p + 1) * (p + 1); t++)
			tiles[t].n = 0;
	for (s = s0; s < s1; s++) {
		int lo = off[s], hi = off[s + 1];
		for (t = lo; t < hi; t++) {
			row_tile one, *tl;
			kmin = MAX(0, p - (t - lo));
			kmax = MIN(cp->K - 1, p + (hi - 1 - t));
			tl = classes ? &tiles[kmin * (p + 1) + (kmax - p)] : &one;
			if (!classes)
				one.n = 0;
			tl->a[tl->n] = cp->A + (ptrdiff_t)(t - p + kmin) * cp->lda;
			tl->c[tl->n] = cp->C + (ptrdiff_t)t * cp->ldc;
			if (++tl->n == NN_MR || !classes)
				conv_flush(cp, tl, kmin, kmax);
		}
	}
	if (classes)
		for (kmin = 0; kmin <= p; kmin++)
			for (kmax = p; kmax < cp->K; kmax++)
				conv_flush(cp, &tiles[kmin * (p + 1) + (kmax - p)], kmin, kmax);
}

static void conv_fwd_segs(float *out, const float *in, const float *W, const float *b,
	const int32_t *off, int s0, int s1, int Ci, int Co, int K)
{
	conv_pass cp;

	if (!b && off[s1] > off[s0])
		memset(out + (size_t)off[s0] * Co, 0, sizeof(float) * (size_t)(off[s1] - off[s0]) * Co);
	cp.A = in; cp.lda = Ci; cp.B = W; cp.ldb = Co; cp.btap = (ptrdiff_t)Ci * Co;
	cp.C = out; cp.ldc = Co; cp.n = Co; cp.init = b; cp.K = K;
	cp.npan = 1; cp.nlast = Co; cp.pan_stride = 0;
	conv_rows(&cp, off, s0, s1);
}

/* din for segments [s0, s1): din[t', ci] += sum over window rows r of the
 * segment, r = t'-p+k2, of dout[r, :] . W[K-1-k2, ci, :]. The reversed,
 * transposed weights are packed 16 input channels at a time:
 * P[k2*Co + co][j] = W[K-1-k2, ci0+j, co]. Falls back to direct loops when
 * K*Co*16 does not fit the stack panel. */
static void conv_din_segs(float *din, const float *dout, const float *W, const int32_t *off,
	int s0, int s1, int Ci, int Co, int K)
{
	float P[NN_PANEL];
	conv_pass cp;
	int ci0, k2, co, j, per, p = K / 2;

	if ((size_t)K * Co * 16 > NN_PANEL) {
		int s, t, k, ci;
		/* direct form: din[t] += sum_k dout[t-k+p] W[k]^T */
		for (s = s0; s < s1; s++)
			for (t = off[s]; t < off[s + 1]; t++)
				for (k = 0; k < K; k++) {
					int r = t - k + p;
					const float *d, *w;
					if (r < off[s] || r >= off[s + 1])
						continue;
					d = dout + (size_t)r * Co;
					for (ci = 0; ci < Ci; ci++) {
						float acc = 0;
						w = W + ((size_t)k * Ci + ci) * Co;
						for (co = 0; co < Co; co++)
							acc += d[co] * w[co];
						din[(size_t)t * Ci + ci] += acc;
					}
				}
		return;
	}
	/* as many 16-column panels as fit the stack buffer, packed once and
	 * used for every row (each panel is still its own nn_tile call, so the
	 * grouping does not change any value) */
	per = (int)(NN_PANEL / ((size_t)K * Co * 16));
	cp.A = dout; cp.lda = Co; cp.B = P; cp.ldb = 16; cp.btap = (ptrdiff_t)Co * 16;
	cp.ldc = Ci; cp.init = NULL; cp.K = K; cp.n = 16;
	cp.pan_stride = (ptrdiff_t)K * Co * 16;
	for (ci0 = 0; ci0 < Ci; ci0 += 16 * per) {
		int np = MIN(per, (Ci - ci0 + 15) / 16), pi;
		for (pi = 0; pi < np; pi++) {
			int c0 = ci0 + 16 * pi, nc = MIN(16, Ci - c0);
			for (k2 = 0; k2 < K; k2++)
				for (co = 0; co < Co; co++) {
					const float *w = W + ((size_t)(K - 1 - k2) * Ci + c0) * Co + co;
					float *pr = P + pi * cp.pan_stride + ((size_t)k2 * Co + co) * 16;
					for (j = 0; j < nc; j++)
						pr[j] = w[(size_t)j * Co];
				}
			cp.nlast = nc;
		}
		cp.C = din + ci0;
		cp.npan = np;
		conv_rows(&cp, off, s0, s1);
	}
}

/* dW rows ci in [ci_a, ci_b) of every tap: dW[k, ci, :] += sum_t
 * in[t+k-p, ci] dout[t, :] over the t of each segment whose tap k lies in
 * the segment; one reduction run per segment (per NN_NB-row block of a long
 * one), segments ascending. */
static void conv_dw_rows(float *dW, const float *dout, const float *in, const int32_t *off,
	int S, int Ci, int Co, int K, int ci_a, int ci_b)
{
	const float *a[NN_MR];
	float *c[NN_MR];
	int s, k, ci, i, p = K / 2;

	for (s = 0; s < S; s++) {
		int lo = off[s], hi = off[s + 1], tb;
		/* rows of a long segment in blocks of NN_NB, so the block's input
		 * and output-gradient rows stay cached across taps and tiles */
		for (tb = lo; tb < hi; tb += NN_NB) {
			int te = MIN(hi, tb + NN_NB);
			for (k = 0; k < K; k++) {
				int t0 = MAX(tb, lo + MAX(0, p - k)), t1 = MIN(te, hi - MAX(0, k - p));
				if (t1 <= t0)
					continue;
				for (ci = ci_a; ci < ci_b; ci += NN_MR) {
					int mr = MIN(NN_MR, ci_b - ci);
					for (i = 0; i < mr; i++) {
						a[i] = in + (size_t)(t0 + k - p) * Ci + ci + i;
						c[i] = dW + ((size_t)k * Ci + ci + i) * Co;
					}
					nn_tile(mr, t1 - t0, a, Ci, dout + (size_t)t0 * Co, Co, Co, c,
						NULL);
				}
			}
		}
	}
}

/* Segments [s0, s1) holding about the part-th share of the rows. */
static void split_segs(int *s0, int *s1, const int32_t *off, int S, int part, int nparts)
{
	long long total = off[S] - off[0];
	int s = 0, e;
	long long want0 = total * part / nparts, want1 = total * (part + 1) / nparts;
	while (s < S && off[s] - off[0] < want0)
		s++;
	e = s;
	while (e < S && off[e] - off[0] < want1)
		e++;
	if (part == nparts - 1)
		e = S;
	*s0 = s;
	*s1 = e;
}

static void conv_fwd_task(int tid, void *p)
{
	dense_job *j = p;
	int s0, s1;
	split_segs(&s0, &s1, j->off, j->S, tid, j->nth);
	conv_fwd_segs(j->out, j->in, j->W, j->b, j->off, s0, s1, j->Ci, j->Co, j->K);
}

static void conv_bwd_task(int tid, void *p)
{
	dense_job *j = p;
	int lo, hi;
	if (j->din) {
		split_segs(&lo, &hi, j->off, j->S, tid, j->nth);
		conv_din_segs(j->din, j->dout, j->W, j->off, lo, hi, j->Ci, j->Co, j->K);
	}
	if (j->dW) {
		split_range(&lo, &hi, j->Ci, tid, j->nth, NN_MR);
		conv_dw_rows(j->dW, j->dout, j->in, j->off, j->S, j->Ci, j->Co, j->K, lo, hi);
	}
	if (j->db) {
		int T = j->off[j->S] - j->off[0];
		split_range(&lo, &hi, j->Co, tid, j->nth, 8);
		bias_grad(j->db, j->dout + (size_t)j->off[0] * j->Co, T, j->Co, lo, hi);
	}
}

/* ======================================================================== */
/* Public kernels, each forward directly above its backward.                 */

void omen_linear_forward(float *out, const float *in, const float *W, const float *b,
	int N, int Ci, int Co)
{
	linear_fwd_rows(out, in, W, b, 0, N, Ci, Co);
}

void omen_linear_backward(float *din, float *dW, float *db, const float *dout,
	const float *in, const float *W, int N, int Ci, int Co)
{
	if (din)
		linear_din_rows(din, dout, W, 0, N, Ci, Co);
	if (dW)
		linear_dw_rows(dW, dout, in, N, Ci, Co, 0, Ci);
	if (db)
		bias_grad(db, dout, N, Co, 0, Co);
}

void omen_linear_forward_mt(float *out, const float *in, const float *W, const float *b,
	int N, int Ci, int Co, int nthreads)
{
	dense_job j = {0};
	if (nthreads <= 1 || N < 2 * NN_MR || (double)N * Ci * Co < NN_MT_MIN_MACS) {
		omen_linear_forward(out, in, W, b, N, Ci, Co);
		return;
	}
	j.out = out; j.in = in; j.W = W; j.b = b; j.N = N; j.Ci = Ci; j.Co = Co;
	j.nth = nthreads;
	omen_parallel_run(nthreads, linear_fwd_task, &j);
}

void omen_linear_backward_mt(float *din, float *dW, float *db, const float *dout,
	const float *in, const float *W, int N, int Ci, int Co, int nthreads)
{
	dense_job j = {0};
	if (nthreads <= 1 || (double)N * Ci * Co < NN_MT_MIN_MACS) {
		omen_linear_backward(din, dW, db, dout, in, W, N, Ci, Co);
		return;
	}
	j.din = din; j.dW = dW; j.db = db; j.dout = dout; j.in = in; j.W = W;
	j.N = N; j.Ci = Ci; j.Co = Co; j.nth = nthreads;
	omen_parallel_run(nthreads, linear_bwd_task, &j);
}

void omen_conv1d_forward(float *out, const float *in, const float *W, const float *b,
	const int32_t *off, int S, int Ci, int Co, int K)
{
	conv_fwd_segs(out, in, W, b, off, 0, S, Ci, Co, K);
}

void omen_conv1d_backward(float *din, float *dW, float *db, const float *dout,
	const float *in, const float *W, const int32_t *off, int S, int Ci, int Co, int K)
{
	if (din)
		conv_din_segs(din, dout, W, off, 0, S, Ci, Co, K);
	if (dW)
		conv_dw_rows(dW, dout, in, off, S, Ci, Co, K, 0, Ci);
	if (db)
		bias_grad(db, dout + (size_t)off[0] * Co, off[S] - off[0], Co, 0, Co);
}

void omen_conv1d_forward_mt(float *out, const float *in, const float *W, const float *b,
	const int32_t *off, int S, int Ci, int Co, int K, int nthreads)
{
	dense_job j = {0};
	if (nthreads <= 1 || S < 2 ||
		(double)(off[S] - off[0]) * K * Ci * Co < NN_MT_MIN_MACS) {
		omen_conv1d_forward(out, in, W, b, off, S, Ci, Co, K);
		return;
	}
	j.out = out; j.in = in; j.W = W; j.b = b; j.off = off; j.S = S;
	j.Ci = Ci; j.Co = Co; j.K = K; j.nth = nthreads;
	omen_parallel_run(nthreads, conv_fwd_task, &j);
}

void omen_conv1d_backward_mt(float *din, float *dW, float *db, const float *dout,
	const float *in, const float *W, const int32_t *off, int S, int Ci, int Co, int K,
	int nthreads)
{
	dense_job j = {0};
	if (nthreads <= 1 || (double)(off[S] - off[0]) * K * Ci * Co < NN_MT_MIN_MACS) {
		omen_conv1d_backward(din, dW, db, dout, in, W, off, S, Ci, Co, K);
		return;
	}
	j.din = din; j.dW = dW; j.db = db; j.dout = dout; j.in = in; j.W = W; j.off = off;
	j.S = S; j.Ci = Ci; j.Co = Co; j.K = K; j.nth = nthreads;
	omen_parallel_run(nthreads, conv_bwd_task, &j);
}
