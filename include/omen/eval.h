/* Ranking and calibration metrics, walk-forward evaluation, HTML/SVG report. */
#ifndef OMEN_EVAL_H
#define OMEN_EVAL_H

#include <stddef.h>
#include <stdint.h>

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

#endif
