/* Internals of src/model/: the model struct, its parameter table and the
 * per-chunk workspace of the forward/backward pass. */
#ifndef OMEN_MODEL_INTERNAL_H
#define OMEN_MODEL_INTERNAL_H

#include <math.h>
#include "omen/model.h"
#include "omen/nn.h"

/* 1 / (1 + exp(-z)) and log(1 + exp(z)) without overflow, shared by the
 * logistic regression and the Platt scaling. */
static inline double omen_sigmoid_d(double z)
{
	if (z >= 0) {
		double e = exp(-z);
		return 1.0 / (1.0 + e);
	} else {
		double e = exp(z);
		return e / (1.0 + e);
	}
}

static inline double omen_softplus_d(double z)
{
	return z > 0 ? z + log1p(exp(-z)) : log1p(exp(z));
}

#define OMEN_MODEL_ARCH "omen-hier-1"
#define OMEN_MODEL_KW 3                      /* conv width */
#define OMEN_MODEL_NFN (OMEN_NFACTS - 1)     /* numeric file facts (all but the extension) */

/* Parameter tensors, in block order. */
enum {
	P_TOK_EMB,   /* [V, D]     token embedding */
	P_CONV_W,    /* [K, D, C]  width-3 convolution over a hunk's tokens */
	P_CONV_B,    /* [C] */
	P_Q_TOK,     /* [C]        attention query: tokens -> hunk */
	P_Q_HUNK,    /* [C]        hunks -> file */
	P_FACT_W,    /* [NFN, C]   file facts projection */
	P_FACT_B,    /* [C] */
	P_EXT_EMB,   /* [NE, C]    extension bucket embedding */
	P_Q_FILE,    /* [C]        files -> commit */
	P_MSG_EMB,   /* [VM, D]    message embedding bag */
	P_H1_W,      /* [C+D+NM, C] head hidden layer */
	P_H1_B,      /* [C] */
	P_H2_W,      /* [C, 1]     head output */
	P_H2_B,      /* [1] */
	P_LIN_W,     /* [NM, 1]    linear skip from the metrics to the logit ("wide" part) */
	P_COUNT
};

typedef struct {
	const char *name;
	size_t off, n;
	int shape[3];
	int decay;   /* AdamW weight decay applies */
} omen_ptensor;

struct omen_model {
	int D, C, V, VM, NE, NM, NFN, HIN, HH, K;
	omen_ptensor t[P_COUNT];
	size_t nparams;
	float *params;   /* one 64-byte aligned block */
	/* standardization (train split): metrics after log1p of counts, facts */
	float metric_mean[OMEN_NMETRICS], metric_scale[OMEN_NMETRICS];
	float fact_mean[OMEN_MODEL_NFN], fact_scale[OMEN_MODEL_NFN];
	double platt_a, platt_b;
	float threshold;
	float threshold_f1;      /* max F1 on the calibration slice (reference) */
	omen_warn_curve warn;    /* npoints 0 after a load: it lives in meta */
	omen_caps caps;
	omen_logreg lr;          /* metrics baseline (p = 0 when absent) */
	cJSON *meta;
	omen_metrics *mstate;    /* NULL when trained without history */
	omen_buf mstate_blob;    /* its serialised bytes */
	char head[OMEN_OID_HEX + 1];
};

/* The threshold from the calibrated probabilities p of the calibration
 * slice (calib.c): the warning curve, the threshold firing on share of the
 * firing slice (fire, nfire: the newest commits of the history, whatever
 * their label; NULL = the calibration slice), precision and recall on the
 * calibration slice, and the max-F1 threshold for reference. */
int omen_calib_threshold(omen_model *m, const double *p, const int *y, size_t n,
	const double *fire, size_t nfire, double share);

/* Builds the parameter table for the dims already set in m and allocates
 * the (zeroed) block. */
int omen_model_layout(omen_model *m);
/* Allocates an empty model struct with dims D, C. */
int omen_model_alloc(omen_model **out, int D, int C);
void omen_model_init_weights(omen_model *m, uint64_t seed);
/* train.c's standardization of m on samples idx[0..n) of ds. */
void omen_model_fit_standardization(omen_model *m, const omen_dataset *ds, const size_t *idx,
	size_t n);

/* Workspace of one chunk: batch arrays and activations, one block each. */
typedef struct {
	int B, F, H, T, M;
	size_t cap;          /* bytes in blk */
	unsigned char *blk;
	/* batch inputs */
	int32_t *file_off, *hunk_off, *tok_off, *msg_off;
	uint32_t *tok, *msg, *ext;
	float *facts, *xm, *y;
	/* activations */
	float *emb, *conv, *act, *tattn, *hvec, *hattn, *fpool, *fvec, *fattn, *fproj;
	float *cvec, *mvec, *cm, *hin, *h1, *a1, *d1, *z, *zl;
	uint8_t *mask;
	/* activation gradients */
	float *g_emb, *g_conv, *g_act, *g_hvec, *g_fvec, *g_cvec, *g_mvec, *g_cm, *g_hin,
		*g_h1, *g_a1, *g_d1, *g_z, *g_xm, *g_tmp;
} omen_ws;

void omen_ws_free(omen_ws *w);
/* Loads samples s[0..n) into w (standardizing with m). */
int omen_ws_load(omen_ws *w, const omen_model *m, const omen_sample *const *s, const float *y,
	int n);
/* Forward pass; dropout p > 0 with rng in training. Logits in w->z. */
void omen_model_forward(const omen_model *m, omen_ws *w, float p, omen_rng *rng);
/* Backward from upstream logit gradients already in w->g_z; accumulates
 * parameter gradients into grad [nparams]. */
void omen_model_backward(const omen_model *m, omen_ws *w, float *grad, float p);

#endif
