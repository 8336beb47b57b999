/* Internal to src/nn/: the register-blocked tile routine every dense kernel
 * (linear, convolution) is built on. */
#ifndef OMEN_NN_INTERNAL_H
#define OMEN_NN_INTERNAL_H

#include <stddef.h>

/* Most rows one tile call handles. */
#define NN_MR 6
/* Floats in the on-stack panel that holds a transposed weight block. */
#define NN_PANEL 16384

/* For i < mr (1 <= mr <= NN_MR) and j < n:
 *   acc[i][j] = sum_{k<K} a[i][k*sak] * B[k*ldb + j]   (k ascending)
 *   init != NULL:  c[i][j] = init[j] + acc[i][j]
 *   init == NULL:  c[i][j] += acc[i][j]
 * Each row's value depends only on its own a[i] (never on mr or on which
 * other rows share the tile), so splitting rows across threads or tiles
 * gives bit-identical results. */
void nn_tile(int mr, int K, const float *const *a, ptrdiff_t sak, const float *B,
	ptrdiff_t ldb, int n, float *const *c, const float *init);

/* 1 when the AVX2+FMA path is in use. */
int nn_simd_active(void);

#endif
