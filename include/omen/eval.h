/* Walk-forward evaluation, effort measure, results and the HTML/SVG report.
 * The ranking and calibration metrics it reports are in omen/rank.h. */
#ifndef OMEN_EVAL_H
#define OMEN_EVAL_H

#include <stddef.h>
#include <stdint.h>
#include "omen/util.h"
#include "omen/features.h"
#include "omen/model.h"
#include "omen/rank.h"

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
	int64_t gap_days;     /* between training and test (-1, the default: the
	                         window of the labels' rule, see clock; OMEN_WINDOW_DAYS
	                         without one) */
	size_t min_train;     /* labelled training commits required (default 100) */
	double valid_frac;    /* newest share of the training commits used for
	                         validation and threshold choice (default 0.15) */
	int64_t test_end;     /* end of the newest test window (0 = auto: just after
	                         the newest clean commit); pinned, the folds do not
	                         move when labels newer than a cut change */
	const omen_label_clock *clock;  /* optional, same commits and order: the
	                         training and validation rows of a fold are labelled
	                         as known at its test start (omen_label_at); without
	                         it every label counts as known at every time */
} omen_fold_opts;
void omen_fold_opts_init(omen_fold_opts *o);

typedef struct {
	int64_t train_end;    /* training: labelled commits with time < train_end */
	int64_t test_start, test_end;   /* test: labelled, time in [start, end) */
	size_t *train_idx; size_t n_train;  /* oldest first, validation excluded */
	size_t *valid_idx; size_t n_valid;
	size_t *test_idx;  size_t n_test;
	size_t pos_train, pos_valid, pos_test;   /* train, valid: as known at the cut */
	size_t n_late;        /* training or validation commits inducing now but
	                         clean at test_start (fixed only later): kept, as clean */
	int8_t *label_at_cut; /* [n] every commit's label as known at test_start;
	                         training and validation read their labels here */
	int64_t labels_known; /* that time (= test_start) */
} omen_fold;

/* Builds the folds over n commits (time[i], label[i] in {-1,0,1} as known
 * now; index order is the dataset's). Test windows tile the newest part of
 * the labelled history, oldest fold first, and end at the newest clean
 * commit (newer labelled commits are inducing ones inside the verification
 * window, where clean ones are still unknown: they are left out). Test
 * labels are label[]; training and validation take the commits older than
 * test_start - gap that are labelled as known at test_start (o->clock),
 * with those labels. Too short a history: OMEN_EINVAL with the numbers. */
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
	OMEN_EV_PRETRAINED,    /* the base model alone, never trained on the repository
	                          (issue 11); NaN columns without one */
	OMEN_EV_TUNED,         /* the model fine-tuned from the base model (issue 11) */
	OMEN_EV_NMETHODS
};
extern const char *const omen_eval_method_names[OMEN_EV_NMETHODS];
/* The methods that need a base model (OMEN_EV_PRETRAINED, OMEN_EV_TUNED). */
int omen_eval_needs_base(int method);

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
	/* per test commit, NULL or the probability that Brier and ECE read for
	 * a method whose score is a ranking of another calibration: the base
	 * model's logit through a Platt scaling fitted on the fold's own
	 * validation slice (score[OMEN_EV_PRETRAINED] keeps the base's own) */
	double *calib[OMEN_EV_NMETHODS];
	int64_t *time;
	char (*ids)[41];
	omen_method_scores m[OMEN_EV_NMETHODS];
} omen_fold_result;

/* Mean, sample standard deviation (n - 1) and range of one figure over
 * seeds; n counts the seeds where it was defined. */
typedef struct {
	double mean, sd, min, max;
	size_t n;
} omen_spread;

/* The pooled figures of every method over several seeds (eval --seeds). */
enum {
	OMEN_SPREAD_AUC, OMEN_SPREAD_AP, OMEN_SPREAD_BRIER, OMEN_SPREAD_ECE, OMEN_SPREAD_F1,
	OMEN_SPREAD_R20, OMEN_SPREAD_POPT, OMEN_SPREAD_N
};
extern const char *const omen_spread_names[OMEN_SPREAD_N];
typedef struct {
	int n;                        /* seeds run; <= 1: no summary */
	uint64_t first;               /* training seed of the first run (then +1, +2 ...) */
	omen_spread m[OMEN_EV_NMETHODS][OMEN_SPREAD_N];
} omen_seed_summary;
/* Folds the pooled figures of n results (one per seed) into out. */
void omen_seed_summarize(omen_seed_summary *out, const omen_method_scores (*pooled)[OMEN_EV_NMETHODS],
	int n);

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
	omen_seed_summary seeds;      /* eval --seeds N > 1: pooled figures over N seeds
	                                 (the rest of the result is the first seed's) */
	int has_base;                 /* 0: the base-model columns are "no base model" */
	char base_path[512];          /* the base model's file, as given (display only) */
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
	const char *labels_path;      /* for the label clock (NULL: every label counts as
	                                 known at every time) */
	int seeds;                    /* runs over seeds seed, seed+1, ... (default 1) */
	const char *const *effort_exclude;   /* NULL = omen_effort_exclude_default */
	size_t n_effort_exclude;
	int top_risky;                /* riskiest test commits kept (default 10) */
	/* the base model (issue 11), or NULL: then the columns base_model and
	 * fine_tuned say "no base model". Per fold, base_model is its weights
	 * and calibration with the standardization fitted on the fold's
	 * training split (the one rule, DEVELOPERS.md "Base model"), and
	 * fine_tuned is train.init = base on the fold's training split */
	const omen_model *base;
	const char *base_path;        /* shown beside the columns */
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

/* The label clock of ds (omen_label_at's inputs per dataset commit): its
 * time and label, and the author time of the earliest fix that traced to
 * it from the label file, with the file's window and horizon. labels_path
 * NULL: every label counts as known at every time (first_fix INT64_MIN for
 * inducing commits), window 90 days. */
int omen_label_clock_load(omen_label_clock *out, const omen_dataset *ds, const char *labels_path);

/* Builds the folds over ds, trains the model (and its baselines) per fold
 * with omen_model_train_subset, scores each test window and fills out (free
 * with omen_eval_result_free, also on error). With o->seeds N > 1 the whole
 * evaluation runs again with training and bootstrap seeds +1 .. +N-1; out
 * is the first run, with out->seeds summarising the N pooled results. */
int omen_eval_run(omen_eval_result *out, const omen_dataset *ds, const omen_eval_opts *o);

#endif
