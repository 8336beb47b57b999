/* The hierarchical commit model (DEVELOPERS.md "Model"), its training loop,
 * Platt calibration, the two baselines and the model file format. Never
 * prints: progress goes through a callback. */
#ifndef OMEN_MODEL_H
#define OMEN_MODEL_H

#include <stddef.h>
#include <stdint.h>
#include <cjson/cJSON.h>
#include "omen/features.h"
#include "omen/label.h"

typedef struct omen_model omen_model;

/* Defaults stated once (plain integers: the help text is made from them). */
#define OMEN_SEED_DEFAULT 42     /* training, and eval's bootstrap */
#define OMEN_EPOCHS_DEFAULT 30
/* OMEN_THREADS_MAX (--threads and omen.threads): include/omen/history.h,
 * beside the other bounds of the settings table */

/* A range [off, off + n) of the parameter block. */
typedef struct { size_t off, n; } omen_span;

/* Data-parallel training (issue 13, src/util/mpi.c): fills in the chunk
 * gradients grad[c] (over spans) and losses loss[c] that other processes
 * computed, before the fixed-order sum of the chunks. */
typedef int (*omen_grad_exchange)(void *ctx, float *const *grad, float *loss, int nchunks,
	const omen_span *spans, size_t nspans);

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
	/* omen_model_train_subset: per dataset commit, the labels to train,
	 * validate and calibrate on (e.g. as known at a fold's cut); NULL = the
	 * samples' own labels */
	const int8_t *labels;
	/* omen_model_train: fix times of the dataset's commits, so that the
	 * training and validation slices are labelled as known at the test
	 * start (omen_label_at); NULL = every label counts as known at every
	 * time (no fix times: in-memory datasets) */
	const omen_label_clock *clock;
	int64_t test_start;      /* omen_model_train: pinned test start (0 = auto) */
	double warn_share;       /* the model's threshold fires on this share of the
	                          * calibration slice (default OMEN_WARN_SHARE_DEFAULT) */
	/* fine-tuning (issue 11): start from this model's weights (a base model
	 * of the same dims) instead of fresh ones and the warm start; the
	 * standardization is fitted on the training split as from scratch */
	const omen_model *init;
	/* per epoch; valid_auc is NaN during the refit on train+validation */
	void (*progress)(void *payload, int epoch, int epochs, float loss, float valid_auc, double eta_s);
	void *payload;
	/* data-parallel part (issue 13): with parts > 1 this process computes
	 * the chunks c of every batch with c % parts == part, and exchange
	 * brings the others' in; parts <= 1: one process (the default) */
	int part, parts;
	omen_grad_exchange exchange;
	void *exchange_ctx;
} omen_train_opts;
void omen_train_opts_init(omen_train_opts *o);

/* Scores of one model on the test slice (also used for baselines). */
typedef struct {
	size_t n, positives;
	double auc, ap, brier, recall20;
} omen_slice_scores;

/* The shipped model's own check: refit on train+validation, calibrated and
 * thresholded on the older part of the test slice, checked on its newest
 * part (the tail), which it was never trained nor calibrated on. */
typedef struct {
	size_t n_calib, pos_calib;   /* calibration part: older half of the test slice */
	size_t n, positives;         /* the tail */
	int64_t start;               /* time of the tail's oldest commit */
	double brier, brier_base;    /* brier_base: the calibration part's positive rate */
	double ece;                  /* 10 equal-width bins */
	double mean_prob;            /* mean calibrated probability on the tail */
	float threshold;             /* the shipped threshold (max F1 on the calibration part) */
	double precision, recall, f1;   /* at that threshold on the tail (NaN: undefined) */
	size_t tp, fp, fn;
} omen_ship_check;

typedef struct {
	size_t n_train, n_valid, n_test, pos_train, pos_valid, pos_test;
	size_t capped_commits;
	int epochs_run, best_epoch;
	double seconds;
	omen_slice_scores model, lr_metrics, lines_added;
	float threshold;         /* fires on warn_share of the calibration slice */
	float threshold_f1;      /* max F1 on the same slice, for reference */
	double warn_share;       /* the share it was chosen for */
	/* the split (issue 16): training and validation are the commits older
	 * than test_start - gap_days, labelled as known on labels_known
	 * (= test_start); the test slice uses the labels known now */
	int64_t labels_known, test_start, test_end;
	int64_t gap_days;
	size_t n_gap;            /* labelled-now commits inside the gap, used nowhere */
	size_t n_relabelled;     /* inducing now, clean at the cut: trained on as clean */
	size_t n_window_left_out;/* labelled-now commits newer than the newest clean one
	                            (inducing ones inside the verification window) */
	int refit;               /* 1: check below is of the refit model */
	omen_ship_check check;
} omen_train_report;

/* Trains on the labelled samples of ds, time ordered (DEVELOPERS.md
 * "Training (train.c)"): the test slice is the newest test_frac of the
 * commits labelled now, up to the newest clean one; training and validation
 * are the commits older than its start less the labels' window, labelled
 * as known at its start (o->clock). Too few labelled commits or no
 * positives: OMEN_EINVAL with a message that says how many there are and
 * how many are needed. */
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

/* Warning budget (issue 12): per share of the calibration slice (1%, 2%,
 * ... 100%), the threshold that fires on it and the precision and recall
 * there. Saved in the model metadata as "warn_curve". */
#define OMEN_WARN_POINTS 100
#define OMEN_WARN_SHARE_DEFAULT 0.10
/* the shipped model's firing slice: the commits newer than its training,
 * at most this many of the newest */
#define OMEN_WARN_FIRE_MAX 1000
typedef struct {
	int npoints;            /* 0: none (a model from before issue 12) */
	size_t n_slice, positives;   /* calibration slice: precision and recall */
	size_t n_fire;               /* firing slice: thresholds and shares fired */
	double thr[OMEN_WARN_POINTS];        /* non-increasing */
	double fired[OMEN_WARN_POINTS];      /* share at or above thr (ties count) */
	double precision[OMEN_WARN_POINTS], recall[OMEN_WARN_POINTS];
} omen_warn_curve;
typedef struct {
	double threshold, share, precision, recall;
	int point;
	int unmet;              /* the precision target is out of reach: the most precise point */
} omen_warn_choice;
int omen_warn_curve_build(omen_warn_curve *out, const double *prob, const int *y, size_t n);
/* The same with thresholds and shares fired counted on other commits
 * (fire[nfire], any label) and precision and recall on prob, y. */
int omen_warn_curve_build_on(omen_warn_curve *out, const double *fire, size_t nfire,
	const double *prob, const int *y, size_t n);
/* By precision when precision_target > 0 (the largest share reaching it),
 * else by share in (0, 1). Out of range: OMEN_EINVAL naming the setting. */
int omen_warn_pick(omen_warn_choice *out, const omen_warn_curve *c, double share,
	double precision_target);
/* About how often a given threshold fires on the calibration slice. */
double omen_warn_share_at(const omen_warn_curve *c, double threshold);
cJSON *omen_warn_curve_json(const omen_warn_curve *c);
int omen_warn_curve_parse(omen_warn_curve *out, const cJSON *j);
/* The curve saved with m (OMEN_ENOTFOUND when it has none). */
int omen_model_warn_curve(omen_warn_curve *out, const omen_model *m);

/* Drift reference (issue 12, src/model/drift.c): per metric, up to
 * OMEN_DRIFT_BINS - 1 decile edges of the training slice (bin b holds
 * edges[b-1] < x <= edges[b]), its shares per bin, and the bin of each of
 * the newest `recent` samples, one digit each; saved as "drift" in the
 * model metadata. */
#define OMEN_DRIFT_BINS 10
#define OMEN_DRIFT_RECENT 500
int omen_drift_edges(double *edges, const float *v, size_t n);   /* count, or OMEN_ENOMEM */
int omen_drift_bin(const double *edges, int ne, double x);
cJSON *omen_drift_ref_json(const omen_dataset *ds, const size_t *train_idx, size_t n_train,
	size_t recent);

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
