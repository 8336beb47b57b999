/* Benchmark of src/nn: figures only, never asserts a time.
 *
 * 1. Peak single-precision FMA rate: independent FMA chains held in
 *    registers (AVX2 when the CPU has it), one and two threads.
 * 2. memcpy bandwidth, counted as bytes read + bytes written, on a block
 *    larger than the last-level cache and on one that fits in it.
 * 3. Dense kernels (conv1d, linear) forward + backward at the model's sizes:
 *    achieved GFLOP/s and the share of the measured peak (one-thread kernels
 *    against the one-core peak, _mt kernels against the two-core peak).
 * 4. Memory-bound kernels (embedding, embedding bag, attention and max
 *    pooling): bytes moved per second as a share of memcpy bandwidth.
 * FLOPs are counted as 2 per multiply-add over the taps that really exist
 * (segment borders excluded). */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include "omen/nn.h"

#if defined(__x86_64__) && defined(__GNUC__)
#include <immintrin.h>
#define HAVE_X86 1
#endif

static volatile float sink;

/* ---- timing: best of reps, each rep repeats fn until >= min_s -------------
 * Two clocks: wall time, and the CPU time the process really ran (all its
 * threads). On a shared machine the second is the steadier one: time spent
 * waiting for a core is not in it (nor is a thread idling at a join). */
typedef void (*bench_fn)(void *ctx);

static double cpu_now(void)
{
	struct timespec ts;
	clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
	return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static double last_cpu; /* best CPU seconds per call of the last time_best */

static double time_best(bench_fn fn, void *ctx, double min_s, int reps)
{
	double best = 1e30, bcpu = 1e30;
	int r;
	fn(ctx); /* warm caches and pages */
	for (r = 0; r < reps; r++) {
		double t0 = omen_now(), c0 = cpu_now(), t;
		long n = 0;
		do {
			fn(ctx);
			n++;
			t = omen_now() - t0;
		} while (t < min_s);
		if (t / n < best)
			best = t / n;
		if ((cpu_now() - c0) / n < bcpu)
			bcpu = (cpu_now() - c0) / n;
	}
	last_cpu = bcpu;
	return best;
}

/* The machine may be shared, so a kernel and its yardstick (peak FMA or
 * memcpy) are timed in alternation, rep by rep, and each keeps its best:
 * both then see the same quiet moments. ca_cpu/cb_cpu get the CPU times. */
static void time_pair(double *ta, bench_fn fa, void *ca, double *tb, bench_fn fb, void *cb,
	double min_s, int reps, double *ta_cpu, double *tb_cpu)
{
	int r;
	*ta = *tb = *ta_cpu = *tb_cpu = 1e30;
	fa(ca);
	fb(cb);
	for (r = 0; r < reps; r++) {
		double t = time_best(fa, ca, min_s, 1);
		if (t < *ta)
			*ta = t;
		if (last_cpu < *ta_cpu)
			*ta_cpu = last_cpu;
		t = time_best(fb, cb, min_s, 1);
		if (t < *tb)
			*tb = t;
		if (last_cpu < *tb_cpu)
			*tb_cpu = last_cpu;
	}
}

/* ---- 1. peak FMA ------------------------------------------------------------- */
#define FMA_ITERS 1000000L
#ifdef HAVE_X86
__attribute__((target("avx2,fma"))) static void fma_chains_avx2(int tid, void *p)
{
	__m256 a0 = _mm256_set1_ps(1.0f + tid), a1 = a0, a2 = a0, a3 = a0, a4 = a0, a5 = a0;
	__m256 a6 = a0, a7 = a0, a8 = a0, a9 = a0, a10 = a0, a11 = a0;
	__m256 m = _mm256_set1_ps(0.999999f), c = _mm256_set1_ps(1e-7f);
	long i, n = *(long *)p;
	for (i = 0; i < n; i++) {
		a0 = _mm256_fmadd_ps(a0, m, c); a1 = _mm256_fmadd_ps(a1, m, c);
		a2 = _mm256_fmadd_ps(a2, m, c); a3 = _mm256_fmadd_ps(a3, m, c);
		a4 = _mm256_fmadd_ps(a4, m, c); a5 = _mm256_fmadd_ps(a5, m, c);
		a6 = _mm256_fmadd_ps(a6, m, c); a7 = _mm256_fmadd_ps(a7, m, c);
		a8 = _mm256_fmadd_ps(a8, m, c); a9 = _mm256_fmadd_ps(a9, m, c);
		a10 = _mm256_fmadd_ps(a10, m, c); a11 = _mm256_fmadd_ps(a11, m, c);
	}
	a0 = _mm256_add_ps(_mm256_add_ps(_mm256_add_ps(a0, a1), _mm256_add_ps(a2, a3)),
		_mm256_add_ps(_mm256_add_ps(a4, a5), _mm256_add_ps(a6, a7)));
	a0 = _mm256_add_ps(a0, _mm256_add_ps(_mm256_add_ps(a8, a9), _mm256_add_ps(a10, a11)));
	sink = _mm256_cvtss_f32(a0);
}
#endif

/* portable: 8 chains of 4 floats, whatever the compiler makes of them */
static void fma_chains_portable(int tid, void *p)
{
	float a[8][4], m = 0.999999f, c = 1e-7f, s = 0;
	long i, n = *(long *)p;
	int j, k;
	for (j = 0; j < 8; j++)
		for (k = 0; k < 4; k++)
			a[j][k] = 1.0f + (float)tid;
	for (i = 0; i < n; i++)
		for (j = 0; j < 8; j++)
			for (k = 0; k < 4; k++)
				a[j][k] = a[j][k] * m + c;
	for (j = 0; j < 8; j++)
		for (k = 0; k < 4; k++)
			s += a[j][k];
	sink = s;
}

typedef struct {
	int nthreads;
	long iters;
	int avx2;
} peak_ctx;

static void peak_run(void *p)
{
	peak_ctx *c = p;
#ifdef HAVE_X86
	if (c->avx2) {
		omen_parallel_run(c->nthreads, fma_chains_avx2, &c->iters);
		return;
	}
#endif
	omen_parallel_run(c->nthreads, fma_chains_portable, &c->iters);
}

static double peak_gflops(int nthreads, int avx2)
{
	peak_ctx c = {nthreads, FMA_ITERS / 4, avx2};
	double t = time_best(peak_run, &c, 0.004, 40);
	double flops_per_iter = avx2 ? 12.0 * 8 * 2 : 8.0 * 4 * 2;
	return flops_per_iter * (double)c.iters * nthreads / t / 1e9;
}

/* ---- 2. memcpy --------------------------------------------------------------- */
typedef struct {
	char *a, *b;
	size_t n;
} copy_ctx;

static void copy_run(void *p)
{
	copy_ctx *c = p;
	memcpy(c->b, c->a, c->n);
	sink = (float)c->b[c->n / 2];
}

static double memcpy_gbs(size_t n)
{
	copy_ctx c;
	double t;
	c.n = n;
	c.a = malloc(n);
	c.b = malloc(n);
	memset(c.a, 1, n);
	memset(c.b, 2, n);
	t = time_best(copy_run, &c, 0.004, 40);
	free(c.a);
	free(c.b);
	return 2.0 * (double)n / t / 1e9;
}

/* ---- 3. dense kernels ---------------------------------------------------------- */
typedef struct {
	int T, S, Ci, Co, K, nth;
	int part; /* 0 fwd+bwd, 1 forward only, 2 input gradient only, 3 weight gradient only */
	int32_t *off;
	float *in, *W, *b, *out, *dout, *din, *dW, *db;
} dense_ctx;

static float *frand(size_t n, omen_rng *r)
{
	float *x = malloc(sizeof(float) * (n ? n : 1));
	size_t i;
	for (i = 0; i < n; i++)
		x[i] = (float)(omen_rng_uniform(r) * 2 - 1);
	return x;
}

static void conv_fb(void *p)
{
	dense_ctx *c = p;
	if (c->part <= 1)
		omen_conv1d_forward_mt(c->out, c->in, c->W, c->b, c->off, c->S, c->Ci, c->Co, c->K,
			c->nth);
	if (c->part != 1)
		omen_conv1d_backward_mt(c->part == 3 ? NULL : c->din,
			c->part == 2 ? NULL : c->dW, c->part == 2 ? NULL : c->db, c->dout, c->in, c->W,
			c->off, c->S, c->Ci, c->Co, c->K, c->nth);
}

static void conv_f(void *p)
{
	dense_ctx *c = p;
	omen_conv1d_forward_mt(c->out, c->in, c->W, c->b, c->off, c->S, c->Ci, c->Co, c->K, c->nth);
}

static void linear_fb(void *p)
{
	dense_ctx *c = p;
	if (c->part <= 1)
		omen_linear_forward_mt(c->out, c->in, c->W, c->b, c->T, c->Ci, c->Co, c->nth);
	if (c->part != 1)
		omen_linear_backward_mt(c->part == 3 ? NULL : c->din,
			c->part == 2 ? NULL : c->dW, c->part == 2 ? NULL : c->db, c->dout, c->in, c->W,
			c->T, c->Ci, c->Co, c->nth);
}

static void linear_f(void *p)
{
	dense_ctx *c = p;
	omen_linear_forward_mt(c->out, c->in, c->W, c->b, c->T, c->Ci, c->Co, c->nth);
}

static void dense_alloc(dense_ctx *c, omen_rng *r)
{
	c->in = frand((size_t)c->T * c->Ci, r);
	c->W = frand((size_t)c->K * c->Ci * c->Co, r);
	c->b = frand((size_t)c->Co, r);
	c->out = frand((size_t)c->T * c->Co, r);
	c->dout = frand((size_t)c->T * c->Co, r);
	c->din = frand((size_t)c->T * c->Ci, r);
	c->dW = frand((size_t)c->K * c->Ci * c->Co, r);
	c->db = frand((size_t)c->Co, r);
}

static void dense_free(dense_ctx *c)
{
	free(c->in); free(c->W); free(c->b); free(c->out); free(c->dout); free(c->din);
	free(c->dW); free(c->db);
}

/* Multiply-adds of one conv forward over the taps inside the segments. */
static double conv_macs(const dense_ctx *c)
{
	double taps = 0;
	int s, t, p = c->K / 2;
	for (s = 0; s < c->S; s++)
		for (t = c->off[s]; t < c->off[s + 1]; t++) {
			int lo = t - p < c->off[s] ? c->off[s] : t - p;
			int hi = t + p >= c->off[s + 1] ? c->off[s + 1] - 1 : t + p;
			taps += hi - lo + 1;
		}
	return taps * c->Ci * c->Co;
}

static double peak_flops_per_run(const peak_ctx *c)
{
	return (c->avx2 ? 12.0 * 8 * 2 : 8.0 * 4 * 2) * (double)c->iters * c->nthreads;
}

static void report_dense(const char *what, bench_fn fwd, bench_fn fb, dense_ctx *c,
	double macs, int avx2)
{
	int nth;
	for (nth = 1; nth <= 2; nth++) {
		peak_ctx pk = {nth, 200000, avx2};
		double tf, tfb, tp, cf, cfb, cp, gf, gfb, peak, core_peak_cpu;
		c->nth = nth;
		time_pair(&tf, fwd, c, &tp, peak_run, &pk, 0.002, 30, &cf, &cp);
		time_pair(&tfb, fb, c, &tp, peak_run, &pk, 0.002, 30, &cfb, &cp);
		peak = peak_flops_per_run(&pk) / tp / 1e9;
		core_peak_cpu = peak_flops_per_run(&pk) / cp / 1e9; /* per CPU-second */
		gf = 2 * macs / tf / 1e9;
		gfb = 3 * 2 * macs / tfb / 1e9;
		printf("%-40s %d thr: fwd %5.1f GFLOP/s (%4.1f%%), fwd+bwd %5.1f GFLOP/s = "
			"%4.1f%% of %d-core peak %5.1f (wall), %4.1f%% (cpu time), %.2f ms\n", what, nth,
			gf, 100 * gf / peak, gfb, 100 * gfb / peak, nth, peak,
			100 * (3 * 2 * macs / cfb / 1e9) / core_peak_cpu, tfb * 1e3);
	}
	/* each pass alone, one thread, best CPU time of many back-to-back runs:
	 * what a core does when it is not shared */
	{
		peak_ctx pk = {1, 200000, avx2};
		double t, tp, cpart[4], cp, core;
		int part;
		c->nth = 1;
		for (part = 1; part <= 3; part++) {
			c->part = part;
			time_pair(&t, fb, c, &tp, peak_run, &pk, 0.0, 60, &cpart[part], &cp);
		}
		c->part = 0;
		core = peak_flops_per_run(&pk) / cp / 1e9;
		printf("%-40s 1 thr, per pass (cpu time): fwd %4.1f%%, din %4.1f%%, dW %4.1f%% "
			"of 1-core peak %5.1f; sum %4.1f%%\n", "", 100 * 2 * macs / cpart[1] / 1e9 / core,
			100 * 2 * macs / cpart[2] / 1e9 / core, 100 * 2 * macs / cpart[3] / 1e9 / core, core,
			100 * 6 * macs / (cpart[1] + cpart[2] + cpart[3]) / 1e9 / core);
	}
}

static void bench_conv(int Ci, int Co, int K, int ragged, int avx2, omen_rng *r)
{
	dense_ctx c = {0};
	char what[96];
	int S, T = 0, s;
	int32_t *off = malloc(sizeof(int32_t) * 1025);
	off[0] = 0;
	/* 4096 token rows: 16 hunks of 256 tokens, or ragged hunks of 4..64 */
	for (s = 0; T < 4096; s++) {
		int len = ragged ? 4 + (int)(omen_rng_next(r) % 61) : 256;
		if (T + len > 4096)
			len = 4096 - T;
		T += len;
		off[s + 1] = T;
	}
	S = s;
	c.T = T; c.S = S; c.Ci = Ci; c.Co = Co; c.K = K; c.off = off;
	dense_alloc(&c, r);
	snprintf(what, sizeof(what), "conv1d T=%d %s Ci=%d Co=%d K=%d", T,
		ragged ? "hunks 4..64" : "hunks of 256", Ci, Co, K);
	report_dense(what, conv_f, conv_fb, &c, conv_macs(&c), avx2);
	dense_free(&c);
	free(off);
}

static void bench_linear(int N, int Ci, int Co, int avx2, omen_rng *r)
{
	dense_ctx c = {0};
	char what[96];
	c.T = N; c.Ci = Ci; c.Co = Co; c.K = 1;
	dense_alloc(&c, r);
	snprintf(what, sizeof(what), "linear N=%d Ci=%d Co=%d", N, Ci, Co);
	report_dense(what, linear_f, linear_fb, &c, (double)N * Ci * Co, avx2);
	dense_free(&c);
}

/* ---- 4. memory-bound kernels ---------------------------------------------------- */
typedef struct {
	int T, D, V, S;
	uint32_t *ids;
	int32_t *off, *arg;
	float *W, *out, *dW, *dout, *attn, *q, *din;
} mem_ctx;

static void embed_f(void *p)
{
	mem_ctx *c = p;
	omen_embed_forward(c->out, c->W, c->ids, c->T, c->D);
}

static void embed_b(void *p)
{
	mem_ctx *c = p;
	omen_embed_backward(c->dW, c->dout, c->ids, c->T, c->D);
}

static void embag_f(void *p)
{
	mem_ctx *c = p;
	omen_embag_forward(c->out, c->W, c->ids, c->off, c->S, c->D);
}

static void attn_f(void *p)
{
	mem_ctx *c = p;
	omen_attnpool_forward(c->out, c->attn, c->din, c->q, c->off, c->S, c->D);
}

static void attn_b(void *p)
{
	mem_ctx *c = p;
	omen_attnpool_backward(c->dW, c->out, c->dout, c->din, c->q, c->attn, c->off, c->S, c->D);
}

static void maxp_f(void *p)
{
	mem_ctx *c = p;
	omen_maxpool_forward(c->out, c->arg, c->din, c->off, c->S, c->D);
}

/* The yardstick copies bytes/2 (so it too moves `bytes`, read + written). */
typedef struct {
	float *w, *g, *m, *v;
	uint8_t *decay;
	size_t n;
	int t;
} adam_ctx;

static void adam_run(void *p)
{
	adam_ctx *a = p;
	omen_adamw o = OMEN_ADAMW_DEFAULT;
	omen_adamw_step(a->w, a->g, a->m, a->v, a->n, &o, ++a->t, a->decay);
}

static void report_mem(const char *what, bench_fn fn, void *c, double bytes)
{
	copy_ctx cp;
	double t, tc, ct, cc, gbs, bw;
	cp.n = (size_t)(bytes / 2);
	cp.a = malloc(cp.n);
	cp.b = malloc(cp.n);
	memset(cp.a, 1, cp.n);
	memset(cp.b, 2, cp.n);
	time_pair(&t, fn, c, &tc, copy_run, &cp, 0.002, 30, &ct, &cc);
	gbs = bytes / t / 1e9;
	bw = bytes / tc / 1e9;
	printf("%-50s %6.2f GB/s = %5.1f%% of memcpy %5.2f GB/s (%.0f MiB) wall, %5.1f%% cpu time\n",
		what, gbs, 100 * gbs / bw, bw, (double)cp.n / (1 << 20), 100 * cc / ct);
	free(cp.a);
	free(cp.b);
}

int main(void)
{
	omen_rng r;
	int avx2 = omen_nn_simd(-1);
	double peak1, peak2, bw_big, bw_small, bw_mid;
	mem_ctx m = {0};
	int i;
	size_t rows;

	omen_rng_seed(&r, 7);
	printf("dense path: %s\n", avx2 ? "AVX2+FMA" : "portable C");
	peak1 = peak_gflops(1, avx2);
	peak2 = peak_gflops(2, avx2);
	printf("peak FMA (%s, 12 independent chains): 1 thread %.1f GFLOP/s, 2 threads %.1f GFLOP/s\n",
		avx2 ? "AVX2 256-bit" : "portable", peak1, peak2);
	if (peak2 < 1.5 * peak1)
		printf("note: two threads reached only %.2fx one thread: the machine's second core is "
			"busy with other work, so read the cpu-time shares for two threads\n",
			peak2 / peak1);
	bw_big = memcpy_gbs((size_t)256 << 20);
	bw_mid = memcpy_gbs((size_t)16 << 20);
	bw_small = memcpy_gbs((size_t)1 << 20);
	printf("memcpy (read+write bytes), 1 thread: 256 MiB %.1f GB/s, 16 MiB %.1f GB/s, "
		"1 MiB %.1f GB/s\n", bw_big, bw_mid, bw_small);

	printf("\n-- dense kernels (target: fwd+bwd >= 35%% of the 2-core peak with 2 threads; peak re-timed in alternation)\n");
	bench_conv(32, 64, 3, 0, avx2, &r);
	bench_conv(64, 64, 3, 0, avx2, &r);
	bench_conv(64, 64, 3, 1, avx2, &r);
	bench_conv(32, 64, 3, 1, avx2, &r);
	bench_linear(4096, 64, 64, avx2, &r);
	bench_linear(4096, 32, 64, avx2, &r);
	bench_linear(4096, 128, 64, avx2, &r);
	bench_linear(256, 64, 64, avx2, &r);

	/* embedding: V=65536 rows of D=64 (16 MiB table, in the last-level
	 * cache like memcpy of 16 MiB), T=65536 tokens, random ids */
	m.D = 64; m.V = 65536; m.T = 65536;
	m.ids = malloc(sizeof(uint32_t) * m.T);
	for (i = 0; i < m.T; i++)
		m.ids[i] = (uint32_t)(omen_rng_next(&r) % (uint64_t)m.V);
	m.W = frand((size_t)m.V * m.D, &r);
	m.dW = frand((size_t)m.V * m.D, &r);
	m.out = frand((size_t)m.T * m.D, &r);
	m.dout = frand((size_t)m.T * m.D, &r);
	m.din = frand((size_t)m.T * m.D, &r);
	m.attn = frand((size_t)m.T, &r);
	m.q = frand((size_t)m.D, &r);
	m.arg = malloc(sizeof(int32_t) * (size_t)m.T * m.D);
	m.off = malloc(sizeof(int32_t) * (size_t)(m.T + 1));
	m.off[0] = 0;
	for (m.S = 0; m.off[m.S] < m.T; m.S++) {
		int len = 4 + (int)(omen_rng_next(&r) % 61);
		m.off[m.S + 1] = m.off[m.S] + len > m.T ? m.T : m.off[m.S] + len;
	}
	rows = (size_t)m.T;
	printf("\n-- memory-bound kernels (target >= 50%% of memcpy moving the same bytes, "
		"timed in alternation)\n");
	report_mem("embed fwd T=65536 D=64 V=65536 (rows read+written)", embed_f, &m,
		2.0 * rows * m.D * 4 + rows * 4);
	report_mem("embed bwd (dout read, dW rows read+written)", embed_b, &m,
		3.0 * rows * m.D * 4 + rows * 4);
	report_mem("embag fwd sets of 4..64 (rows read, sets written)", embag_f, &m,
		1.0 * rows * m.D * 4 + rows * 4 + (double)m.S * m.D * 4);
	report_mem("attnpool fwd R=65536 C=64 sets of 4..64", attn_f, &m,
		1.0 * rows * m.D * 4 + (double)m.S * m.D * 4 + rows * 4);
	report_mem("attnpool bwd (in read, din read+written)", attn_b, &m,
		3.0 * rows * m.D * 4 + (double)m.S * m.D * 4 + rows * 4);
	report_mem("maxpool fwd R=65536 C=64 sets of 4..64", maxp_f, &m,
		1.0 * rows * m.D * 4 + 2.0 * m.S * m.D * 4);
	{
		adam_ctx a;
		size_t k;
		a.n = (size_t)1 << 21; /* 2M parameters: an embedding table and the rest */
		a.w = frand(a.n, &r); a.g = frand(a.n, &r); a.m = frand(a.n, &r); a.v = frand(a.n, &r);
		a.decay = malloc(a.n);
		for (k = 0; k < a.n; k++) {
			a.v[k] = a.v[k] * a.v[k];
			a.decay[k] = (uint8_t)(k % 7 != 0);
		}
		a.t = 0;
		report_mem("adamw step n=2M (w,m,v read+written; g, mask read)", adam_run, &a,
			(double)a.n * (6 * 4 + 4 + 1));
		free(a.w); free(a.g); free(a.m); free(a.v); free(a.decay);
	}
	free(m.ids); free(m.W); free(m.dW); free(m.out); free(m.dout); free(m.din);
	free(m.attn); free(m.q); free(m.arg); free(m.off);
	return 0;
}
