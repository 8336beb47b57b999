/* Ranking and calibration metrics on (score, label[, effort]) arrays:
 * src/util/rank.c (AUC, AP, Brier, ECE, classification scores, ROC) and
 * src/util/lift.c (effort-aware scores and curves). They sit in util/, below
 * model/, so that training (model/) and evaluation (eval/) use one copy of
 * each definition without model/ including eval/'s header (DEVELOPERS.md
 * "Module map", layer order). Pure functions over arrays: no commits, no git. */
#ifndef OMEN_RANK_H
#define OMEN_RANK_H

#include <stddef.h>
#include <stdint.h>

/* ---- metrics on (score, label[, effort]) arrays ------------------------- */
/* ROC AUC with ties counted as 1/2 (Mann-Whitney). NaN when a class is empty. */
double omen_auc(const double *score, const int *y, size_t n);
/* Population stability index of k bins, sum (a - e) ln(a / e) over the
 * shares expected (e) and actual (a), each share floored at 1e-4 so an
 * empty bin stays finite. Common credit-scoring practice, with its usual
 * reading: under 0.1 stable, 0.1 to 0.25 a moderate shift, over 0.25 a
 * large one (no single published source). */
double omen_psi(const double *expected, const double *actual, int k);
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

/* ---- curves, bins, weighted and bootstrap AUC --------------------------- */

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

/* ---- order statistics ---------------------------------------------------- */
/* qsort comparator of doubles, ascending. */
int omen_cmp_double(const void *a, const void *b);
/* The q-quantile (0 <= q <= 1) of n ascending values, linear between order
 * statistics (numpy.percentile's default, "linear"); 0 when n is 0. */
double omen_quantile_sorted(const double *v, size_t n, double q);

#endif
