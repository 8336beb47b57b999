/* Ranking and calibration metrics, walk-forward evaluation, HTML/SVG report. */
#ifndef OMEN_EVAL_H
#define OMEN_EVAL_H

#include <stddef.h>
#include <stdint.h>
#include "omen/util.h"
#include "omen/features.h"
#include "omen/model.h"

/* ---- metrics on (score, label[, effort]) arrays ------------------------- */
/* ROC AUC with ties counted as 1/2 (Mann-Whitney). NaN when a class is empty. */
double omen_auc(const double *score, const int *y, size_t n);
/* Average precision as sklearn's average_precision_score (step-wise, ties
 * grouped). NaN without positives. */
double omen_average_precision(const double *score, const int *y, size_t n);
double omen_brier(const double *prob, const int *y, size_t n);
/* Expected calibration error with nbins equal-width bins on [0,1]. The bin
 * counts, mean prediction and positive rate go to the optional arrays. */
double omen_ece(const double *prob, const int *y, size_t n, int nbins,
	size_t *bin_n, double *bin_pred, double *bin_true);
/* Confusion-matrix scores at a threshold (prob >= t is positive). */
typedef struct {
	double precision, recall, f1, mcc;
	size_t tp, fp, tn, fn;
} omen_cls_scores;
omen_cls_scores omen_classify_at(const double *prob, const int *y, size_t n, double t);
/* The same scores from confusion counts (to pool folds). */
omen_cls_scores omen_cls_from_counts(size_t tp, size_t fp, size_t tn, size_t fn);

/* Effort-aware metrics (Kamei et al., TSE 2013; Popt after Mende & Koschke,
 * PROMISE 2010), effort = lines added + deleted. Commits are inspected in
 * descending score order (ties: smaller effort first). */
typedef struct {
	double recall_at_20;      /* share of positives found within 20% of total effort */
	double effort_at_20;      /* share of effort spent to find 20% of positives */
	double popt;              /* 1 - (area(opt) - area(model)) / (area(opt) - area(worst)) */
	double commits_at_20;     /* share of commits inspected within 20% of effort */
	size_t false_alarms_first;/* negatives inspected before the first positive */
} omen_effort_scores;
omen_effort_scores omen_effort(const double *score, const int *y, const double *effort, size_t n);

/* ---- additions for walk-forward evaluation and the report ----------------
 * (owned by src/eval/; the functions above are the original contract) */

/* Bin edges as scikit-learn's calibration_curve(strategy="uniform"):
 * edges j * (1.0 / nbins); a value on an inner edge goes to the lower bin
 * (numpy searchsorted, side left), 0 to the first, 1 to the last. */
int omen_calib_bin(double p, int nbins);

/* AUC with case weights (bootstrap multiplicities); order is score
 * ascending (omen_sort_scores). NaN when a weighted class is empty. */
double omen_auc_weighted(const double *score, const int *y, const double *w,
	const size_t *order, size_t n);
/* Indices 0..n-1 sorted by score ascending (ties by index). */
int omen_sort_scores(size_t **out, const double *score, size_t n);
/* Percentile bootstrap 95% interval of the AUC: resamples of the n cases
 * drawn with omen_rng seeded by seed; resamples with an empty class are
 * skipped. lo/hi NaN when the AUC is undefined. */
int omen_auc_bootstrap(double *out_lo, double *out_hi, const double *score,
	const int *y, size_t n, int resamples, uint64_t seed);
/* Threshold maximising F1 over the distinct scores (ties: the higher
 * threshold). 0.5 when there is no positive. */
double omen_best_f1_threshold(const double *score, const int *y, size_t n);

/* ROC points (false-positive rate, true-positive rate), one per distinct
 * score from the top, starting at (0,0): at most n+1 points to out_fpr and
 * out_tpr (caller allocates n+1 each). Returns the number of points, 0
 * when a class is empty. */
size_t omen_roc_curve(double *out_fpr, double *out_tpr, const double *score,
	const int *y, size_t n);
/* Cumulative effort-recall curve (effort share, recall share) in the
 * inspection order of omen_effort, starting at (0,0): n+1 points (caller
 * allocates). order_kind: 0 by score, 1 optimal, 2 worst. Returns the
 * number of points, 0 without positives or effort. */
size_t omen_effort_curve(double *out_x, double *out_y, const double *score,
	const int *y, const double *effort, size_t n, int order_kind);

/* ---- effort: lines added + deleted outside vendored/generated paths ------ */
/* Default exclusion list, NULL-terminated. Pattern forms: "dir/" matches
 * a directory of that name at any depth; a pattern without '/' matches the
 * file's base name (fnmatch); any other pattern matches the whole path. */
extern const char *const omen_effort_exclude_default[];
int omen_path_excluded(const char *path, const char *const *patterns, size_t npat);

/* ---- walk-forward folds (pure function over times and labels) ------------ */
typedef struct {
	int folds;            /* test windows (default 5) */
	int64_t fold_days;    /* width of a test window (0 = auto: half of the
	                         labelled span shared among the folds, >= 7) */
	int64_t gap_days;     /* between training and test (default OMEN_WINDOW_DAYS:
	                         the verification window) */
	size_t min_train;     /* labelled training commits required (default 100) */
	double valid_frac;    /* newest share of the training commits used for
	                         validation and threshold choice (default 0.15) */
	const int64_t *label_known;  /* optional, per commit: when its label became
	                         known (an inducing commit: its first fix's time;
	                         else INT64_MIN). A training commit whose label
	                         was not yet known at the fold's test start is
	                         left out of that fold's training. */
} omen_fold_opts;
void omen_fold_opts_init(omen_fold_opts *o);

typedef struct {
	int64_t train_end;    /* training: labelled commits with time < train_end */
	int64_t test_start, test_end;   /* test: labelled, time in [start, end) */
	size_t *train_idx; size_t n_train;  /* oldest first, validation excluded */
	size_t *valid_idx; size_t n_valid;
	size_t *test_idx;  size_t n_test;
	size_t pos_train, pos_valid, pos_test;
	size_t n_late;        /* inducing commits left out: fixed only after test_start */
} omen_fold;

/* Builds the folds over n commits (time[i], label[i] in {-1,0,1}; index
 * order is the dataset's). Test windows tile the newest part of the
 * labelled history, oldest fold first, and end at the newest clean commit
 * (newer labelled commits are inducing ones inside the verification
 * window, where clean ones are still unknown: they are left out). Too short a history: OMEN_EINVAL
 * with the numbers. */
int omen_folds_build(omen_fold **out, size_t *out_n, const int64_t *time,
	const int8_t *label, size_t n, const omen_fold_opts *o);
void omen_folds_free(omen_fold *f, size_t n);

/* ---- results of a walk-forward evaluation -------------------------------- */
enum {
	OMEN_EV_MODEL,         /* the hierarchical model */
	OMEN_EV_LR,            /* baseline: logistic regression on metrics */
	OMEN_EV_LA,            /* baseline: rank by lines added */
	OMEN_EV_DENSITY,       /* the model's probability per changed line (effort-aware) */
	OMEN_EV_SMALL,         /* reference: smallest change first */
	OMEN_EV_BASE,          /* reference: base rate (training positive rate) */
	OMEN_EV_NMETHODS
};
extern const char *const omen_eval_method_names[OMEN_EV_NMETHODS];

typedef struct {
	size_t n, positives;
	double auc, auc_lo, auc_hi, ap;
	double brier, brier_base;     /* NaN for rankings that are not probabilities */
	double ece;
	double threshold;
	omen_cls_scores cls;
	int has_cls;                  /* 0: no threshold classification */
	omen_effort_scores eff;
} omen_method_scores;

typedef struct {
	char id[41];
	int64_t time;
	double prob;
	int label;
	double effort;
	char why[256];   /* short explanation: top files, metrics */
} omen_risky;

typedef struct {
	omen_fold fold;               /* indices into the dataset */
	double seconds;               /* training + prediction */
	double base_rate;             /* training positive rate */
	double top_effort_share;      /* largest single-commit share of effort */
	char top_effort_id[41];
	size_t n_excluded_effort;     /* commits whose effort lost excluded paths */
	/* per test commit (n_test): labels, effort, one score per method */
	int *y;
	double *effort;
	double *score[OMEN_EV_NMETHODS];
	int64_t *time;
	char (*ids)[41];
	omen_method_scores m[OMEN_EV_NMETHODS];
} omen_fold_result;

typedef struct {
	omen_fold_result *folds;
	size_t nfolds;
	omen_method_scores pooled[OMEN_EV_NMETHODS];
	omen_risky *risky; size_t nrisky;
	double seconds;
	int bootstrap;                /* resamples */
	uint64_t seed;
	int64_t gap_days, fold_days;
	size_t n_commits, n_labelled;
	omen_buf notes;               /* warnings, one per line */
} omen_eval_result;

/* Allocates the per-commit arrays of fold k for n test commits. */
int omen_eval_result_init(omen_eval_result *r, size_t nfolds);
int omen_eval_fold_alloc(omen_fold_result *f, size_t n);
/* Computes every method's scores per fold and pooled (from the per-commit
 * arrays and the per-fold thresholds in m[].threshold, has_cls), and the
 * large-commit warnings. */
int omen_eval_finish(omen_eval_result *r);
void omen_eval_result_free(omen_eval_result *r);

/* Writes the result as JSON (one object) or as the text tables. */
int omen_eval_write_json(omen_buf *out, const omen_eval_result *r);
int omen_eval_write_text(omen_buf *out, const omen_eval_result *r);
/* One self-contained HTML page, inline SVG, no scripts. */
int omen_eval_write_html(omen_buf *out, const omen_eval_result *r, const char *title);

/* ---- walk-forward evaluation of the model (src/eval/walkforward.c) ------- */
typedef struct {
	omen_fold_opts folds;
	omen_train_opts train;        /* per-fold training settings */
	int bootstrap;                /* AUC resamples (default 1000) */
	uint64_t seed;                /* bootstrap seed (default OMEN_SEED_DEFAULT) */
	const char *labels_path;      /* for label_known (NULL: every label counts as known) */
	const char *const *effort_exclude;   /* NULL = omen_effort_exclude_default */
	size_t n_effort_exclude;
	int top_risky;                /* riskiest test commits kept (default 10) */
	/* called before (done 0) and after (done 1) each fold's training */
	void (*progress)(void *payload, size_t fold, size_t nfolds, int done, double seconds);
	void *payload;
} omen_eval_opts;
void omen_eval_opts_init(omen_eval_opts *o);

/* Effort of one sample: la + ld less the lines of files whose path is
 * excluded (counted from the sample's -U0 hunks). *out_partial is set when
 * an excluded file's hunks were capped, so the figure is an upper bound. */
double omen_sample_effort(const omen_sample *s, const char *const *patterns, size_t npat,
	int *out_partial, int *out_excluded);

/* Per dataset commit, when its label became known (see label_known):
 * the author time of the earliest fix that traced to it, from the label
 * file; INT64_MIN for clean or unknown commits. */
int omen_eval_label_times(int64_t **out, const omen_dataset *ds, const char *labels_path);

/* Builds the folds over ds, trains the model (and its baselines) per fold
 * with omen_model_train_subset, scores each test window and fills out (free
 * with omen_eval_result_free, also on error). */
int omen_eval_run(omen_eval_result *out, const omen_dataset *ds, const omen_eval_opts *o);

#endif
