/* The hierarchical commit model (DESIGN.md "Model"), its training loop,
 * Platt calibration, the two baselines and the model file format. Never
 * prints: progress goes through a callback. */
#ifndef OMEN_MODEL_H
#define OMEN_MODEL_H

#include <stddef.h>
#include <stdint.h>
#include <cjson/cJSON.h>
#include "omen/features.h"

typedef struct omen_model omen_model;

/* Defaults stated once (plain integers: the help text is made from them). */
#define OMEN_SEED_DEFAULT 42     /* training, and eval's bootstrap */
#define OMEN_EPOCHS_DEFAULT 30
#define OMEN_THREADS_MAX 64      /* --threads and omen.threads bound */

typedef struct {
	int epochs;              /* maximum; early stopping may stop sooner (default OMEN_EPOCHS_DEFAULT) */
	int patience;            /* epochs without validation AUC gain (default 5) */
	int batch;               /* commits per step (default 32) */
	float lr, weight_decay, clip;
	float dropout;
	int threads;             /* 0 = online cores, max 2 */
	uint64_t seed;           /* default OMEN_SEED_DEFAULT */
	double valid_frac, test_frac;   /* time-ordered split shares (0.15, 0.15) */
	int refit;               /* refit on train+valid for the shipped model (default 1) */
	int dim;                 /* D token embedding width (default 32) */
	int channels;            /* C hidden width (default 32) */
	omen_caps caps;          /* the caps the dataset was built with (stored in the model) */
	int warm_start;          /* start from the metrics logistic regression (default 1) */
	/* fine-tuning (issue 11): start from this model's weights (a base model
	 * of the same dims) instead of fresh ones and the warm start; the
	 * standardization is fitted on the training split as from scratch */
	const omen_model *init;
	/* per epoch; valid_auc is NaN during the refit on train+validation */
	void (*progress)(void *payload, int epoch, int epochs, float loss, float valid_auc, double eta_s);
	void *payload;
} omen_train_opts;
void omen_train_opts_init(omen_train_opts *o);

/* Scores of one model on the test slice (also used for baselines). */
typedef struct {
	size_t n, positives;
	double auc, ap, brier, recall20;
} omen_slice_scores;

typedef struct {
	size_t n_train, n_valid, n_test, pos_train, pos_valid, pos_test;
	size_t capped_commits;
	int epochs_run, best_epoch;
	double seconds;
	omen_slice_scores model, lr_metrics, lines_added;
	float threshold;         /* chosen on validation (max F1) */
} omen_train_report;

/* Trains on the labelled samples of ds (label >= 0), time ordered.
 * Too few labelled commits or no positives: OMEN_EINVAL with a message that
 * says how many there are and how many are needed. */
int omen_model_train(omen_model **out, omen_train_report *rep, const omen_dataset *ds,
	const omen_train_opts *o);
/* Trains on an explicit subset (indices into ds, oldest first) with explicit
 * train/valid split: the building block of walk-forward evaluation. */
int omen_model_train_subset(omen_model **out, const omen_dataset *ds,
	const size_t *train_idx, size_t n_train, const size_t *valid_idx, size_t n_valid,
	const omen_train_opts *o);

/* Per-sample explanation filled by omen_model_predict when asked. */
typedef struct {
	int32_t nfiles, nhunks, ntok;
	float *file_attn;     /* [nfiles] attention over files */
	float *hunk_attn;     /* [nhunks] attention inside each file */
	float *hunk_contrib;  /* [nhunks] gradient x input of the hunk vector */
	float *tok_contrib;   /* [ntok] gradient x input of token embeddings */
	float metric_contrib[OMEN_NMETRICS];  /* gradient x standardized input */
	float message_contrib;
	int32_t cap;          /* allocated sizes */
} omen_explain;
void omen_explain_free(omen_explain *e);

/* Calibrated probability and raw logit of one sample; ex may be NULL. */
int omen_model_predict(float *out_prob, float *out_logit, const omen_model *m,
	const omen_sample *s, omen_explain *ex);
/* Baseline probability from the logistic regression on metrics. */
float omen_model_predict_lr(const omen_model *m, const omen_sample *s);
/* The metrics as the model and its baseline see them before z-scoring:
 * log1p of the counts, entropy and the fix flag as they are. */
void omen_metrics_transform(double out[OMEN_NMETRICS], const float raw[OMEN_NMETRICS]);

/* Model file: magic, version, length-prefixed JSON metadata, 64-byte
 * aligned float32 tensors, CRC32 over all of it; written atomically. */
int omen_model_save(const omen_model *m, const char *path);
int omen_model_load(omen_model **out, const char *path);
/* The same under a ceiling: max_bytes > 0 is omen.memoryLimit (named in the
 * error); the file is never read past 2 GiB. Not a regular file: refused. */
int omen_model_load_max(omen_model **out, const char *path, int64_t max_bytes);
/* Parses model bytes without trusting any length (fuzz target entry). */
int omen_model_parse(omen_model **out, const char *name, const void *data, size_t n);
void omen_model_free(omen_model *m);
/* Metadata (owned by the model): dims, training range and date,
 * calibration, threshold, test-slice metrics. */
const cJSON *omen_model_meta(const omen_model *m);
float omen_model_threshold(const omen_model *m);
/* Metrics state saved with the model (history up to the training head). */
const omen_metrics *omen_model_metrics_state(const omen_model *m);
const char *omen_model_head(const omen_model *m);   /* newest trained commit id */

/* Logistic regression (L2, Newton/IRLS) on standardized features: the
 * metrics baseline, exposed for tests and eval. X [N,P] row-major. */
typedef struct {
	int p;
	double *w;     /* [p] */
	double b;
	double *mean, *scale;   /* standardization */
} omen_logreg;
int omen_logreg_fit(omen_logreg *out, const double *X, const double *y, int n, int p,
	double l2);
double omen_logreg_predict(const omen_logreg *lr, const double *x);
void omen_logreg_free(omen_logreg *lr);

/* ---- calibration (src/model/calib.c) ------------------------------------ */
/* Platt scaling fit by Newton (Lin, Lin & Weng 2007): p = sigmoid(a f + b). */
int omen_platt_fit(double *out_a, double *out_b, const double *f, const int *y, size_t n);
double omen_platt_apply(double a, double b, double f);
/* Threshold of maximal F1 (prob >= t is positive); 0.5 without positives. */
double omen_threshold_max_f1(const double *prob, const int *y, size_t n);

/* Raw logits of the samples idx[0..n) of ds, batched over threads (0 = the
 * online cores, at most 2). */
int omen_model_logits(float *out, const omen_model *m, const omen_dataset *ds, const size_t *idx,
	size_t n, int threads);
/* The calibrated probability of a raw logit (the model's Platt scaling). */
float omen_model_calibrated(const omen_model *m, float logit);

/* ---- low-level access (tests, references, benchmarks) ------------------- */
/* A fresh model with seeded initial weights (no training, identity
 * standardization and calibration). */
int omen_model_new(omen_model **out, int dim, int channels, uint64_t seed);
size_t omen_model_nparams(const omen_model *m);
/* Copies src's weights into dst (fine-tuning from a base model, issue 11);
 * OMEN_EINVAL, saying which, when their dimensions differ. */
int omen_model_copy_weights(omen_model *dst, const omen_model *src);
float *omen_model_params(omen_model *m);
/* Tensor i of the parameter table: name, offset into the parameter block
 * and shape (up to 3 dims, unused = 1). Returns NULL past the end. */
const char *omen_model_tensor(const omen_model *m, int i, size_t *off, size_t *n, int shape[3]);
/* Mean weighted BCE (pos_weight pw) of n samples with labels y, its
 * gradient written to grad [nparams] (overwritten, may be NULL) and the raw
 * logits to logits [n] (may be NULL). No dropout. */
int omen_model_loss_grad(float *out_loss, float *grad, float *logits, const omen_model *m,
	const omen_sample *const *s, const float *y, int n, float pw);

#endif
