/* Register-blocked tile routine: up to 6 rows by 16 columns of accumulators
 * held in registers while the inner loop runs over the reduction index
 * (the usual GEMM micro-kernel shape, common practice in BLAS-like code).
 * Two paths: AVX2+FMA chosen at run time with __builtin_cpu_supports, and a
 * portable C path that any x86-64 (or other) compiler vectorises as it can.
 * Both compute every output as one ascending chain over k, so a row's value
 * never depends on how rows are grouped into tiles or threads. */
#include <stdlib.h>
#include <string.h>
#include "nn/internal.h"
#include "omen/nn.h"

#if defined(__x86_64__) && defined(__GNUC__)
#define NN_HAVE_AVX2 1
#include <immintrin.h>
#endif

/* ---- portable path -------------------------------------------------------- */

static void tile_portable(int mr, int K, const float *const *a, ptrdiff_t sak,
	const float *B, ptrdiff_t ldb, int n, float *const *c, const float *init)
{
	int i, j, j0, k;

	for (j0 = 0; j0 < n; j0 += 16) {
		int w = n - j0 < 16 ? n - j0 : 16;
		float acc[NN_MR][16];
		memset(acc, 0, sizeof(acc));
		if (w == 16) {
			for (k = 0; k < K; k++) {
				const float *b = B + (ptrdiff_t)k * ldb + j0;
				for (i = 0; i < mr; i++) {
					float av = a[i][(ptrdiff_t)k * sak];
					for (j = 0; j < 16; j++)
						acc[i][j] += av * b[j];
				}
			}
		} else {
			for (k = 0; k < K; k++) {
				const float *b = B + (ptrdiff_t)k * ldb + j0;
				for (i = 0; i < mr; i++) {
					float av = a[i][(ptrdiff_t)k * sak];
					for (j = 0; j < w; j++)
						acc[i][j] += av * b[j];
				}
			}
		}
		for (i = 0; i < mr; i++) {
			float *cr = c[i] + j0;
			if (init)
				for (j = 0; j < w; j++)
					cr[j] = init[j0 + j] + acc[i][j];
			else
				for (j = 0; j < w; j++)
					cr[j] += acc[i][j];
		}
	}
}

/* ---- AVX2 + FMA path -------------------------------------------------------- */
#ifdef NN_HAVE_AVX2
#define AVX2_FN __attribute__((target("avx2,fma")))
#define AVX2_INLINE static inline __attribute__((always_inline, target("avx2,fma")))

AVX2_INLINE void tile_avx2_mr(const int mr, int K, const float *const *a, ptrdiff_t sak,
	const float *B, ptrdiff_t ldb, int n, float *const *c, const float *init)
{
	int i, j0, k;
	const float *ap[NN_MR];

	for (i = 0; i < mr; i++)
		ap[i] = a[i];
	for (j0 = 0; j0 + 16 <= n; j0 += 16) {
		__m256 acc0[NN_MR], acc1[NN_MR];
		const float *bp = B + j0;
		ptrdiff_t ko = 0; /* one running offset shared by all rows */
		for (i = 0; i < mr; i++) {
			acc0[i] = _mm256_setzero_ps();
			acc1[i] = _mm256_setzero_ps();
		}
		for (k = 0; k < K; k++) {
			__m256 b0 = _mm256_loadu_ps(bp), b1 = _mm256_loadu_ps(bp + 8);
			for (i = 0; i < mr; i++) {
				__m256 av = _mm256_broadcast_ss(ap[i] + ko);
				acc0[i] = _mm256_fmadd_ps(av, b0, acc0[i]);
				acc1[i] = _mm256_fmadd_ps(av, b1, acc1[i]);
			}
			ko += sak;
			bp += ldb;
		}
		for (i = 0; i < mr; i++) {
			float *cr = c[i] + j0;
			if (init) {
				_mm256_storeu_ps(cr, _mm256_add_ps(_mm256_loadu_ps(init + j0), acc0[i]));
				_mm256_storeu_ps(cr + 8, _mm256_add_ps(_mm256_loadu_ps(init + j0 + 8), acc1[i]));
			} else {
				_mm256_storeu_ps(cr, _mm256_add_ps(_mm256_loadu_ps(cr), acc0[i]));
				_mm256_storeu_ps(cr + 8, _mm256_add_ps(_mm256_loadu_ps(cr + 8), acc1[i]));
			}
		}
	}
	if (j0 < n) { /* 1..15 columns left: masked loads and stores */
		int w = n - j0;
		__m256 acc0[NN_MR], acc1[NN_MR];
		__m256i lane = _mm256_setr_epi32(0, 1, 2, 3, 4, 5, 6, 7);
		__m256i m0 = _mm256_cmpgt_epi32(_mm256_set1_epi32(w), lane);
		__m256i m1 = _mm256_cmpgt_epi32(_mm256_set1_epi32(w - 8), lane);
		const float *bp = B + j0;
		ptrdiff_t ko = 0;
		for (i = 0; i < mr; i++) {
			acc0[i] = _mm256_setzero_ps();
			acc1[i] = _mm256_setzero_ps();
		}
		for (k = 0; k < K; k++) {
			__m256 b0 = _mm256_maskload_ps(bp, m0), b1 = _mm256_maskload_ps(bp + 8, m1);
			for (i = 0; i < mr; i++) {
				__m256 av = _mm256_broadcast_ss(ap[i] + ko);
				acc0[i] = _mm256_fmadd_ps(av, b0, acc0[i]);
				acc1[i] = _mm256_fmadd_ps(av, b1, acc1[i]);
			}
			ko += sak;
			bp += ldb;
		}
		for (i = 0; i < mr; i++) {
			float *cr = c[i] + j0;
			const float *src0 = init ? init + j0 : cr;
			_mm256_maskstore_ps(cr, m0, _mm256_add_ps(_mm256_maskload_ps(src0, m0), acc0[i]));
			_mm256_maskstore_ps(cr + 8, m1,
				_mm256_add_ps(_mm256_maskload_ps(src0 + 8, m1), acc1[i]));
		}
	}
}

AVX2_FN static void tile_avx2(int mr, int K, const float *const *a, ptrdiff_t sak,
	const float *B, ptrdiff_t ldb, int n, float *const *c, const float *init)
{
	switch (mr) {
	case 6: tile_avx2_mr(6, K, a, sak, B, ldb, n, c, init); break;
	case 5: tile_avx2_mr(5, K, a, sak, B, ldb, n, c, init); break;
	case 4: tile_avx2_mr(4, K, a, sak, B, ldb, n, c, init); break;
	case 3: tile_avx2_mr(3, K, a, sak, B, ldb, n, c, init); break;
	case 2: tile_avx2_mr(2, K, a, sak, B, ldb, n, c, init); break;
	default: tile_avx2_mr(1, K, a, sak, B, ldb, n, c, init); break;
	}
}
#endif

/* ---- dispatch ------------------------------------------------------------- */

/* -1 unknown, 0 portable, 1 AVX2; detected on first use. Relaxed atomics:
 * two threads racing on the first call both store the same value. */
static int simd_state = -1;
static int simd_forced_off;

static int simd_detect(void)
{
#ifdef NN_HAVE_AVX2
	const char *e = getenv("OMEN_NN_PORTABLE");
	if (e && *e && *e != '0')
		return 0;
	__builtin_cpu_init();
	return __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma");
#else
	return 0;
#endif
}

int nn_simd_active(void)
{
	int st = __atomic_load_n(&simd_state, __ATOMIC_RELAXED);
	if (st < 0) {
		st = simd_detect();
		__atomic_store_n(&simd_state, st, __ATOMIC_RELAXED);
	}
	return st && !__atomic_load_n(&simd_forced_off, __ATOMIC_RELAXED);
}

int omen_nn_simd(int enable)
{
	if (enable >= 0)
		__atomic_store_n(&simd_forced_off, !enable, __ATOMIC_RELAXED);
	return nn_simd_active();
}

void nn_tile(int mr, int K, const float *const *a, ptrdiff_t sak, const float *B,
	ptrdiff_t ldb, int n, float *const *c, const float *init)
{
#ifdef NN_HAVE_AVX2
	if (nn_simd_active()) {
		tile_avx2(mr, K, a, sak, B, ldb, n, c, init);
		return;
	}
#endif
	tile_portable(mr, K, a, sak, B, ldb, n, c, init);
}
