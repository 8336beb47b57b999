/* Unit tests of src/eval: metrics, effort-aware metrics, folds, results and
 * the report writers. References are named beside each check. */
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <stdint.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>
#include "omen/omen.h"

#define EPS 1e-12

/* ---- the hand-worked effort example -----------------------------------------
 * Five commits, effort = lines added + deleted (Kamei et al., IEEE TSE 39(6),
 * 2013: effort-aware evaluation inspects commits in ranking order and counts
 * churn as effort):
 *
 *   commit  score  inducing  effort
 *   A       0.9    no        10
 *   B       0.8    yes       20
 *   C       0.7    no        30
 *   D       0.6    yes       15
 *   E       0.5    no        25        total effort 100, 2 inducing
 *
 * Inspection order by score: A B C D E, cumulative effort 10 30 60 75 100.
 *
 * Recall@20%Effort (Kamei et al. 2013): the budget is 20 lines. A (10) fits,
 * B would bring the total to 30 > 20, so inspection stops after A (rule
 * stated in src/eval/effort.c, common practice: a commit counts only when it
 * fits whole in the budget). No inducing commit found: recall 0/2 = 0, and
 * 1 of 5 commits (0.2) was inspected.
 *
 * Effort@20%Recall: 20% of 2 inducing commits is 0.4, so the first inducing
 * commit suffices: B, reached at cumulative effort 30, i.e. 0.30.
 *
 * False alarms before the first hit: A, so 1.
 *
 * Popt (Mende & Koschke, CSMR 2010 / PROMISE 2009; Kamei et al. 2013, eq. in
 * section 5.1): Popt = 1 - (A(opt) - A(m)) / (A(opt) - A(worst)), areas under
 * the lift chart (x = effort share, y = recall) with points joined by
 * straight lines.
 *   model: (0,0) (.10,0) (.30,.5) (.60,.5) (.75,1) (1,1)
 *     area = 0 + .2*.25 + .3*.5 + .15*.75 + .25*1 = .05+.15+.1125+.25 = .5625
 *   optimal: inducing first, smallest first: D(15) B(20), then A E C
 *     (0,0) (.15,.5) (.35,1) ... (1,1)
 *     area = .15*.25 + .2*.75 + .65*1 = .0375+.15+.65 = .8375
 *   worst: clean first (C E A, 65 lines), then inducing largest first: B D
 *     (.65,0) (.85,.5) (1,1)
 *     area = .2*.25 + .15*.75 = .05+.1125 = .1625
 *   Popt = 1 - (.8375-.5625)/(.8375-.1625) = 1 - .275/.675 = 16/27.
 */
static const double ex_score[5] = {0.9, 0.8, 0.7, 0.6, 0.5};
static const int ex_y[5] = {0, 1, 0, 1, 0};
static const double ex_eff[5] = {10, 20, 30, 15, 25};

static void test_effort_hand_example(void **state)
{
	omen_effort_scores s = omen_effort(ex_score, ex_y, ex_eff, 5);
	(void)state;
	assert_true(fabs(s.recall_at_20 - 0.0) < EPS);
	assert_true(fabs(s.commits_at_20 - 0.2) < EPS);
	assert_true(fabs(s.effort_at_20 - 0.30) < EPS);
	assert_int_equal(s.false_alarms_first, 1);
	assert_true(fabs(s.popt - 16.0 / 27.0) < 1e-12);
}

/* Tie rule (stated in include/omen/eval.h, common practice): equal scores
 * are inspected smaller effort first. With every score equal (the base-rate
 * predictor) the order is A(10) D(15) B(20) E(25) C(30):
 *   Recall@20%Effort: A fits (10), D would make 25 > 20: stop; recall 0,
 *     commits inspected 1/5.
 *   Effort@20%Recall: D is the first inducing commit, at 25: 0.25.
 *   False alarms before the first hit: A, 1.
 *   Lift chart: (0,0) (.10,0) (.25,.5) (.45,1) (.70,1) (1,1)
 *     area = .15*.25 + .2*.75 + .55 = .0375+.15+.55 = .7375
 *   Popt = 1 - (.8375-.7375)/.675 = 1 - .1/.675 = 23/27. */
static void test_effort_ties_smaller_first(void **state)
{
	double flat[5] = {0.3, 0.3, 0.3, 0.3, 0.3};
	omen_effort_scores s = omen_effort(flat, ex_y, ex_eff, 5);
	(void)state;
	assert_true(fabs(s.recall_at_20) < EPS);
	assert_true(fabs(s.commits_at_20 - 0.2) < EPS);
	assert_true(fabs(s.effort_at_20 - 0.25) < EPS);
	assert_int_equal(s.false_alarms_first, 1);
	assert_true(fabs(s.popt - 23.0 / 27.0) < 1e-12);
}

/* A perfect ranking of the optimal order has Popt 1, the worst order 0
 * (by the definition above). Recall@20%Effort here: D (15) fits, B would
 * make 35: 1 of 2 inducing found = 0.5. */
static void test_effort_extremes(void **state)
{
	/* optimal order D B A E C as scores */
	double opt[5] = {0.3, 0.4, 0.1, 0.5, 0.2};
	/* worst order C E A B D */
	double worst[5] = {0.3, 0.2, 0.5, 0.1, 0.4};
	omen_effort_scores s = omen_effort(opt, ex_y, ex_eff, 5);
	(void)state;
	assert_true(fabs(s.popt - 1.0) < 1e-12);
	assert_true(fabs(s.recall_at_20 - 0.5) < EPS);
	assert_int_equal(s.false_alarms_first, 0);
	s = omen_effort(worst, ex_y, ex_eff, 5);
	assert_true(fabs(s.popt - 0.0) < 1e-12);
	assert_int_equal(s.false_alarms_first, 3);
	/* no inducing commit: recall and Popt undefined */
	{
		int none[5] = {0};
		double zero[5] = {0};
		s = omen_effort(ex_score, none, ex_eff, 5);
		assert_true(isnan(s.recall_at_20));
		assert_true(isnan(s.effort_at_20));
		assert_true(isnan(s.popt));
		/* every path excluded: no effort, no effort-aware figure */
		s = omen_effort(ex_score, ex_y, zero, 5);
		assert_true(isnan(s.recall_at_20) && isnan(s.commits_at_20));
		assert_true(isnan(s.effort_at_20) && isnan(s.popt));
		assert_int_equal(s.false_alarms_first, 1);
	}
}

static void test_effort_curve(void **state)
{
	double x[6], y[6];
	size_t k = omen_effort_curve(x, y, ex_score, ex_y, ex_eff, 5, 0);
	(void)state;
	assert_int_equal(k, 6);
	assert_true(fabs(x[2] - 0.30) < EPS && fabs(y[2] - 0.5) < EPS);
	assert_true(fabs(x[5] - 1.0) < EPS && fabs(y[5] - 1.0) < EPS);
}

/* ---- AUC and AP by hand -----------------------------------------------------
 * Same five commits. AUC = share of (inducing, clean) pairs ranked right,
 * ties 1/2 (Mann-Whitney; Hanley & McNeil 1982): B beats C and E, loses to
 * A; D beats E, loses to A and C: 3 of 6 = 0.5.
 * AP (scikit-learn average_precision_score): precision at each recall step,
 * B: 1/2 at recall .5, D: 2/4 at recall 1: AP = .5*.5 + .5*.5 = 0.5. */
static void test_auc_ap_hand(void **state)
{
	(void)state;
	assert_true(fabs(omen_auc(ex_score, ex_y, 5) - 0.5) < EPS);
	assert_true(fabs(omen_average_precision(ex_score, ex_y, 5) - 0.5) < EPS);
	{
		/* ties: scores {1,1,0,0}, labels {1,0,1,0}: pairs (p1,n1) tie=.5,
		 * (p1,n2) win, (p2,n1) loss, (p2,n2) tie=.5 -> 2/4 = 0.5.
		 * AP: one step at 1 (tp 1, fp 1, recall .5, precision .5), one at 0
		 * (recall 1, precision .5): 0.5. */
		double s[4] = {1, 1, 0, 0};
		int y[4] = {1, 0, 1, 0};
		assert_true(fabs(omen_auc(s, y, 4) - 0.5) < EPS);
		assert_true(fabs(omen_average_precision(s, y, 4) - 0.5) < EPS);
	}
	{
		double s[4] = {0.9, 0.1, 0.8, 0.2};
		int y[4] = {1, 0, 1, 0};
		int none[4] = {0, 0, 0, 0};
		assert_true(fabs(omen_auc(s, y, 4) - 1.0) < EPS);
		assert_true(isnan(omen_auc(s, none, 4)));   /* undefined, not 0.5 */
		assert_true(isnan(omen_average_precision(s, none, 4)));
	}
}

static void test_bootstrap(void **state)
{
	double s[200], lo, hi, lo2, hi2, auc;
	int y[200];
	omen_rng r;
	size_t i;
	(void)state;
	omen_rng_seed(&r, 7);
	for (i = 0; i < 200; i++) {
		y[i] = omen_rng_uniform(&r) < 0.3;
		s[i] = omen_rng_uniform(&r) + (y[i] ? 0.3 : 0.0);
	}
	auc = omen_auc(s, y, 200);
	assert_int_equal(omen_auc_bootstrap(&lo, &hi, s, y, 200, 500, 42), 0);
	assert_true(lo < auc && auc < hi);
	assert_true(hi - lo > 0.02 && hi - lo < 0.4);
	/* fixed seed: same interval */
	assert_int_equal(omen_auc_bootstrap(&lo2, &hi2, s, y, 200, 500, 42), 0);
	assert_true(lo == lo2 && hi == hi2);
	for (i = 0; i < 200; i++)
		y[i] = 0;
	assert_int_equal(omen_auc_bootstrap(&lo, &hi, s, y, 200, 100, 42), 0);
	assert_true(isnan(lo) && isnan(hi));
}

/* ---- calibration bins ---------------------------------------------------------
 * scikit-learn calibration_curve(strategy="uniform"): edges linspace(0,1,11),
 * bin = searchsorted(edges[1:-1], p) (side left): a value on an inner edge
 * goes to the lower bin. linspace's 4th edge is 0.30000000000000004, so 0.3
 * (below it) is in bin 2, as is the edge itself. */
static void test_calib_bins(void **state)
{
	(void)state;
	assert_int_equal(omen_calib_bin(0.0, 10), 0);
	assert_int_equal(omen_calib_bin(0.1, 10), 0);
	assert_int_equal(omen_calib_bin(0.1000001, 10), 1);
	assert_int_equal(omen_calib_bin(0.3, 10), 2);
	assert_int_equal(omen_calib_bin(0.30000000000000004, 10), 2);
	assert_int_equal(omen_calib_bin(0.31, 10), 3);
	assert_int_equal(omen_calib_bin(1.0, 10), 9);
	{
		/* ECE by hand: p {0.05,0.05,0.95,0.95}, y {0,1,1,1}:
		 * bin 0: mean .05, rate .5 -> |.45| * 2/4; bin 9: mean .95, rate 1
		 * -> .05 * 2/4. ECE = .225 + .025 = .25.  Brier = (.0025 + .9025 +
		 * .0025 + .0025) / 4 = .2275. */
		double p[4] = {0.05, 0.05, 0.95, 0.95};
		int y[4] = {0, 1, 1, 1};
		size_t bn[10];
		double bp[10], bt[10];
		assert_true(fabs(omen_ece(p, y, 4, 10, bn, bp, bt) - 0.25) < 1e-12);
		assert_int_equal(bn[0], 2);
		assert_int_equal(bn[9], 2);
		assert_int_equal(bn[5], 0);
		assert_true(isnan(bp[5]));
		assert_true(fabs(omen_brier(p, y, 4) - 0.2275) < 1e-12);
	}
}

/* F1 and MCC by hand (Matthews 1975): tp 2, fp 1, tn 3, fn 1:
 * precision 2/3, recall 2/3, F1 2/3, MCC (6-1)/sqrt(3*3*4*4) = 5/12. */
static void test_classify(void **state)
{
	double p[7] = {0.9, 0.8, 0.7, 0.2, 0.1, 0.3, 0.4};
	int y[7] = {1, 1, 0, 1, 0, 0, 0};
	omen_cls_scores c = omen_classify_at(p, y, 7, 0.5);
	(void)state;
	assert_int_equal(c.tp, 2);
	assert_int_equal(c.fp, 1);
	assert_int_equal(c.tn, 3);
	assert_int_equal(c.fn, 1);
	assert_true(fabs(c.f1 - 2.0 / 3.0) < EPS);
	assert_true(fabs(c.mcc - 5.0 / 12.0) < EPS);
	/* everything predicted clean: MCC 0 by scikit-learn's convention */
	c = omen_classify_at(p, y, 7, 0.95);
	assert_true(c.mcc == 0.0 && c.f1 == 0.0);
	/* best F1 threshold: at 0.8 F1 = 2*2/(2+0+3)=0.8 (tp 2 fp 0 fn 1) */
	assert_true(fabs(omen_best_f1_threshold(p, y, 7) - 0.8) < EPS);
}

static void test_roc_curve(void **state)
{
	double fpr[6], tpr[6];
	size_t k = omen_roc_curve(fpr, tpr, ex_score, ex_y, 5);
	(void)state;
	/* A: (1/3, 0), B: (1/3, .5), C: (2/3, .5), D: (2/3, 1), E: (1, 1) */
	assert_int_equal(k, 6);
	assert_true(fabs(fpr[1] - 1.0 / 3) < EPS && tpr[1] == 0);
	assert_true(fabs(tpr[2] - 0.5) < EPS);
	assert_true(fpr[5] == 1 && tpr[5] == 1);
}

static void test_path_excluded(void **state)
{
	const char *const *d = omen_effort_exclude_default;
	size_t n = 0;
	(void)state;
	while (d[n])
		n++;
	assert_true(omen_path_excluded("vendor/lib/a.c", d, n));
	assert_true(omen_path_excluded("web/node_modules/x/index.js", d, n));
	assert_true(omen_path_excluded("static/app.min.js", d, n));
	assert_true(omen_path_excluded("package-lock.json", d, n));
	assert_true(omen_path_excluded("ui/yarn.lock", d, n));
	assert_true(omen_path_excluded("api/v1/service.pb.go", d, n));
	assert_false(omen_path_excluded("src/vendors.c", d, n));
	assert_false(omen_path_excluded("src/main.c", d, n));
	assert_false(omen_path_excluded("myvendor/a.c", d, n));
	{
		const char *p[] = {"docs/*.md"};
		assert_true(omen_path_excluded("docs/a.md", p, 1));
		assert_false(omen_path_excluded("a.md", p, 1));
	}
}

/* Effort leaves out vendored and generated paths: lines of an excluded file
 * are counted from its -U0 hunks (old_lines deleted, new_lines added, as in
 * git's "@@ -a,b +c,d @@"). */
static void test_sample_effort(void **state)
{
	const char *paths[3] = {"src/a.c", "vendor/x.c", "web/b.min.js"};
	int32_t file_off[4] = {0, 1, 3, 4};
	int32_t old_l[4] = {2, 0, 10, 1}, new_l[4] = {3, 50, 0, 1};
	omen_sample s;
	const char *const *d = omen_effort_exclude_default;
	size_t n = 0;
	int partial, excl;
	(void)state;
	while (d[n])
		n++;
	memset(&s, 0, sizeof(s));
	s.la = 54;
	s.ld = 13;
	s.nfiles = 3;
	s.nhunks = 4;
	s.file_off = file_off;
	s.hunk_old_lines = old_l;
	s.hunk_new_lines = new_l;
	s.file_path = paths;
	/* 67 lines in all, 60 in vendor/, 2 in a minified file: 5 remain */
	assert_true(omen_sample_effort(&s, d, n, &partial, &excl) == 5.0);
	assert_int_equal(partial, 0);
	assert_int_equal(excl, 1);
	assert_true(omen_sample_effort(&s, d, 0, &partial, &excl) == 67.0);
	s.capped = 1;
	omen_sample_effort(&s, d, n, &partial, &excl);
	assert_int_equal(partial, 1);
}

/* ---- folds --------------------------------------------------------------------- */
#define DAY 86400
static void synth_history(int64_t *t, int8_t *y, size_t n, int64_t t0, int64_t step,
	size_t unknown_tail, unsigned seed)
{
	omen_rng r;
	size_t i;
	omen_rng_seed(&r, seed);
	for (i = 0; i < n; i++) {
		t[i] = t0 + (int64_t)i * step;
		y[i] = omen_rng_uniform(&r) < 0.2;
		if (i >= n - unknown_tail)
			y[i] = -1;
		else if (i == n - unknown_tail - 1)
			y[i] = 0;   /* the newest labelled commit is clean */
	}
}

static void test_folds_basic(void **state)
{
	enum { N = 2000 };
	int64_t *t = malloc(N * sizeof(*t));
	int8_t *y = malloc(N);
	omen_fold_opts o;
	omen_fold *f;
	size_t nf, k, i;
	(void)state;
	/* a 2k-commit history, one commit every 8 hours, newest 270 unknown */
	synth_history(t, y, N, 1600000000, 8 * 3600, 270, 3);
	omen_fold_opts_init(&o);
	assert_int_equal(omen_folds_build(&f, &nf, t, y, N, &o), 0);
	assert_int_equal(nf, 5);
	for (k = 0; k < nf; k++) {
		/* windows tile the newest part, oldest fold first */
		if (k > 0)
			assert_true(f[k].test_start == f[k - 1].test_end);
		assert_true(f[k].train_end == f[k].test_start - 90 * DAY);
		assert_true(f[k].n_test > 0);
		for (i = 0; i < f[k].n_train; i++) {
			assert_true(t[f[k].train_idx[i]] < f[k].train_end);
			assert_true(y[f[k].train_idx[i]] >= 0);
		}
		for (i = 0; i < f[k].n_valid; i++) {
			assert_true(t[f[k].valid_idx[i]] < f[k].train_end);
			/* validation is the newest part of training */
			assert_true(f[k].n_train == 0 || t[f[k].valid_idx[i]] >= t[f[k].train_idx[f[k].n_train - 1]]);
		}
		for (i = 0; i < f[k].n_test; i++) {
			size_t j = f[k].test_idx[i];
			assert_true(t[j] >= f[k].test_start && t[j] < f[k].test_end);
			assert_true(y[j] >= 0);   /* unknown labels never tested */
		}
		/* expanding window */
		if (k > 0)
			assert_true(f[k].n_train + f[k].n_valid >= f[k - 1].n_train + f[k - 1].n_valid);
	}
	/* the last window ends after the newest labelled commit */
	assert_true(f[nf - 1].test_end > t[N - 271]);
	omen_folds_free(f, nf);

	/* inducing commits inside the verification window are labelled while
	 * clean ones there are unknown (DEVELOPERS.md "Labeller", Run): they must stay
	 * out of every test window, or the last window is nearly all positives */
	for (i = N - 270; i < N; i += 7)
		y[i] = 1;
	assert_int_equal(omen_folds_build(&f, &nf, t, y, N, &o), 0);
	for (k = 0; k < nf; k++)
		for (i = 0; i < f[k].n_test; i++)
			assert_true(f[k].test_idx[i] < N - 270);
	assert_true(f[nf - 1].test_end == t[N - 271] + 1);
	omen_folds_free(f, nf);
	for (i = N - 270; i < N; i++)
		y[i] = -1;

	/* explicit width */
	o.folds = 3;
	o.fold_days = 30;
	assert_int_equal(omen_folds_build(&f, &nf, t, y, N, &o), 0);
	assert_int_equal(nf, 3);
	assert_true(f[0].test_end - f[0].test_start == 30 * DAY);
	omen_folds_free(f, nf);
	free(t);
	free(y);
}

static void test_folds_too_short(void **state)
{
	enum { N = 300 };
	int64_t t[N];
	int8_t y[N];
	omen_fold_opts o;
	omen_fold *f;
	size_t nf;
	(void)state;
	/* 300 commits over 150 days: 5 folds of 60 days cannot leave 100 training commits */
	synth_history(t, y, N, 1600000000, 12 * 3600, 0, 5);
	omen_fold_opts_init(&o);
	o.fold_days = 60;
	assert_int_equal(omen_folds_build(&f, &nf, t, y, N, &o), OMEN_EINVAL);
	assert_non_null(strstr(omen_error_last(), "history too short for 5 folds of 60 days"));
	assert_non_null(strstr(omen_error_last(), "300 commits over 149 days"));
	assert_non_null(strstr(omen_error_last(), "100 are needed"));
	assert_null(f);
}

static void test_folds_no_positive_fold(void **state)
{
	enum { N = 1000 };
	int64_t t[N];
	int8_t y[N];
	omen_fold_opts o;
	omen_fold *f;
	size_t nf, i;
	(void)state;
	synth_history(t, y, N, 1600000000, DAY, 0, 9);
	/* no inducing commit in the newest 100 days */
	for (i = 900; i < N; i++)
		y[i] = 0;
	omen_fold_opts_init(&o);
	o.folds = 4;
	o.fold_days = 50;
	assert_int_equal(omen_folds_build(&f, &nf, t, y, N, &o), 0);
	assert_int_equal(f[3].pos_test, 0);
	assert_true(f[3].n_test == 50);
	assert_true(f[0].pos_test > 0);
	omen_folds_free(f, nf);
}

/* A commit whose only fix came after the fold's test start looked clean to
 * anyone standing at that time: it stays in that fold's training, labelled
 * clean (and counted), so the training rows are those of the same folds
 * without fix times; a fix older than the test start keeps it inducing. */
static void test_folds_late_labels(void **state)
{
	enum { N = 1000 };
	int64_t t[N];
	int8_t y[N];
	omen_label_clock c;
	omen_fold_opts o;
	omen_fold *f, *g;
	size_t nf, ng, i, k, late = 0;
	(void)state;
	synth_history(t, y, N, 1600000000, DAY, 0, 4);
	assert_int_equal(omen_label_clock_alloc(&c, N), 0);
	for (i = 0; i < N; i++) {
		c.time[i] = t[i];
		c.label[i] = y[i];
		c.first_fix[i] = y[i] == 1 ? t[i] + 30 * DAY : INT64_MAX;
	}
	/* a few inducing commits fixed very late: at the newest commit */
	for (i = 100; i < 600; i += 50)
		if (y[i] == 1) {
			c.first_fix[i] = t[N - 1];
			late++;
		}
	omen_fold_opts_init(&o);
	o.folds = 3;
	o.fold_days = 60;
	assert_int_equal(omen_folds_build(&g, &ng, t, y, N, &o), 0);
	o.clock = &c;
	assert_int_equal(omen_folds_build(&f, &nf, t, y, N, &o), 0);
	assert_true(late > 0);
	for (k = 0; k < nf; k++) {
		/* nothing is dropped: the same rows, the late ones relabelled clean */
		assert_int_equal(f[k].n_late, late);
		assert_int_equal(f[k].n_train, g[k].n_train);
		assert_int_equal(f[k].n_valid, g[k].n_valid);
		assert_memory_equal(f[k].train_idx, g[k].train_idx, f[k].n_train * sizeof(size_t));
		assert_int_equal(f[k].pos_train + f[k].pos_valid + late, g[k].pos_train + g[k].pos_valid);
		for (i = 100; i < 600; i += 50)
			if (y[i] == 1)
				assert_int_equal(f[k].label_at_cut[i], 0);
		for (i = 0; i < f[k].n_train; i++) {
			size_t j = f[k].train_idx[i];
			int known = c.first_fix[j] < f[k].test_start;
			assert_int_equal(f[k].label_at_cut[j], y[j] == 1 && known);
		}
		assert_int_equal(f[k].n_test, g[k].n_test);
		assert_int_equal(f[k].labels_known, f[k].test_start);
	}
	omen_folds_free(f, nf);
	omen_folds_free(g, ng);
	omen_label_clock_free(&c);
}

/* The rule itself (issue 16): fixes before t, clean only when older than
 * the window at t, the horizon in place of the window when set. */
static void test_label_at(void **state)
{
	const int64_t d = DAY, t0 = 1600000000;
	(void)state;
	/* inducing now, fixed at day 200: unknown, then clean, then inducing */
	assert_int_equal(omen_label_at(1, t0, t0 + 200 * d, t0 + 50 * d, 90, 0), -1);
	assert_int_equal(omen_label_at(1, t0, t0 + 200 * d, t0 + 91 * d, 90, 0), 0);
	assert_int_equal(omen_label_at(1, t0, t0 + 200 * d, t0 + 200 * d, 90, 0), 0);
	assert_int_equal(omen_label_at(1, t0, t0 + 200 * d, t0 + 200 * d + 1, 90, 0), 1);
	/* fixed early: inducing as soon as the fix is made, even inside the window */
	assert_int_equal(omen_label_at(1, t0, t0 + 5 * d, t0 + 6 * d, 90, 0), 1);
	/* clean now: unknown until the window has passed (strictly older) */
	assert_int_equal(omen_label_at(0, t0, INT64_MAX, t0 + 90 * d, 90, 0), -1);
	assert_int_equal(omen_label_at(0, t0, INT64_MAX, t0 + 90 * d + 1, 90, 0), 0);
	/* unknown now is unknown at every time */
	assert_int_equal(omen_label_at(-1, t0, t0 + 5 * d, t0 + 900 * d, 90, 0), -1);
	/* no fix times: known throughout */
	assert_int_equal(omen_label_at(1, t0, INT64_MIN, t0 + 1, 90, 0), 1);
	/* a horizon of 365 days: the window is the horizon; a fix after it
	 * does not make the commit inducing */
	assert_int_equal(omen_label_at(0, t0, INT64_MAX, t0 + 200 * d, 90, 365), -1);
	assert_int_equal(omen_label_at(0, t0, INT64_MAX, t0 + 366 * d, 90, 365), 0);
	assert_int_equal(omen_label_at(1, t0, t0 + 300 * d, t0 + 301 * d, 90, 365), 1);
	assert_int_equal(omen_label_at(0, t0, t0 + 400 * d, t0 + 500 * d, 90, 365), 0);
	assert_int_equal(omen_label_at(0, t0, t0 + 400 * d, t0 + 300 * d, 90, 365), -1);
}

/* ---- results and writers ------------------------------------------------------ */
static void synth_result(omen_eval_result *r, size_t nfolds, int last_no_pos)
{
	size_t k, i;
	omen_rng g;
	omen_rng_seed(&g, 11);
	assert_int_equal(omen_eval_result_init(r, nfolds), 0);
	r->bootstrap = 200;
	for (k = 0; k < nfolds; k++) {
		omen_fold_result *f = &r->folds[k];
		size_t n = 80;
		f->fold.n_test = n;
		f->fold.test_start = 1600000000 + (int64_t)k * 30 * DAY;
		f->fold.test_end = f->fold.test_start + 30 * DAY;
		f->fold.n_train = 500 + 100 * k;
		f->base_rate = 0.2;
		assert_int_equal(omen_eval_fold_alloc(f, n), 0);
		for (i = 0; i < n; i++) {
			int yy = omen_rng_uniform(&g) < 0.2;
			double la = 1 + floor(omen_rng_uniform(&g) * 200);
			if (last_no_pos && k == nfolds - 1)
				yy = 0;
			f->y[i] = yy;
			f->effort[i] = la * 1.5;
			f->time[i] = f->fold.test_start + (int64_t)i * 3600;
			snprintf(f->ids[i], sizeof(f->ids[i]), "%040zx", k * 1000 + i);
			f->score[OMEN_EV_MODEL][i] = 1 / (1 + exp(-(yy ? 1.0 : -1.0) - omen_rng_normal(&g)));
			f->score[OMEN_EV_LR][i] = 1 / (1 + exp(-(yy ? 0.5 : -0.5) - omen_rng_normal(&g)));
			f->score[OMEN_EV_LA][i] = la;
			f->score[OMEN_EV_DENSITY][i] = f->score[OMEN_EV_MODEL][i] / (f->effort[i] > 1 ? f->effort[i] : 1);
			f->score[OMEN_EV_SMALL][i] = -f->effort[i];
			f->score[OMEN_EV_BASE][i] = f->base_rate;
		}
		f->effort[0] = 5000;   /* one huge commit: a warning */
		f->m[OMEN_EV_MODEL].threshold = 0.5;
		f->m[OMEN_EV_MODEL].has_cls = 1;
		f->m[OMEN_EV_BASE].threshold = 0.5;
		f->m[OMEN_EV_BASE].has_cls = 1;
	}
}

static void test_results_finish(void **state)
{
	omen_eval_result r;
	omen_buf b = OMEN_BUF_INIT;
	(void)state;
	synth_result(&r, 3, 1);
	assert_int_equal(omen_eval_finish(&r), 0);
	/* fold without positives: AUC undefined (NaN), not 0.5 */
	assert_true(isnan(r.folds[2].m[OMEN_EV_MODEL].auc));
	assert_true(!isnan(r.folds[0].m[OMEN_EV_MODEL].auc));
	assert_true(r.folds[0].m[OMEN_EV_MODEL].auc > 0.6);
	/* base rate: all ties, AUC exactly 0.5 (Mann-Whitney with ties) */
	assert_true(fabs(r.folds[0].m[OMEN_EV_BASE].auc - 0.5) < EPS);
	assert_true(isnan(r.folds[0].m[OMEN_EV_LA].brier));
	assert_int_equal(r.pooled[OMEN_EV_MODEL].n, 240);
	assert_true(r.pooled[OMEN_EV_MODEL].has_cls);
	assert_int_equal(r.pooled[OMEN_EV_MODEL].cls.tp + r.pooled[OMEN_EV_MODEL].cls.fp +
		r.pooled[OMEN_EV_MODEL].cls.tn + r.pooled[OMEN_EV_MODEL].cls.fn, 240);
	assert_true(r.folds[0].top_effort_share > 0.10);
	assert_non_null(strstr(r.notes.ptr, "fold 1: commit 000000000000 holds"));
	assert_non_null(strstr(r.notes.ptr, "fold 3: no inducing commit"));
	/* JSON: undefined figures are null */
	assert_int_equal(omen_eval_write_json(&b, &r), 0);
	assert_non_null(strstr(b.ptr, "\"auc\":null"));
	assert_null(strstr(b.ptr, "nan"));
	omen_buf_clear(&b);
	assert_int_equal(omen_eval_write_text(&b, &r), 0);
	assert_non_null(strstr(b.ptr, "n/a"));
	omen_buf_clear(&b);
	assert_int_equal(omen_eval_write_html(&b, &r, "demo"), 0);
	assert_non_null(strstr(b.ptr, "<svg"));
	assert_null(strstr(b.ptr, "<script"));
	omen_buf_free(&b);
	omen_eval_result_free(&r);
	omen_eval_result_free(NULL);
}

/* Issue 15, item 1: the riskiest list quotes paths from history; the text
 * report shows them through the sanitiser, the JSON keeps them raw
 * (escaped as JSON). */
static void test_riskiest_escaped(void **state)
{
	omen_eval_result r;
	omen_buf b = OMEN_BUF_INIT;
	omen_risky *saved, rk;
	size_t nsaved;
	(void)state;
	synth_result(&r, 3, 1);
	assert_int_equal(omen_eval_finish(&r), 0);
	memset(&rk, 0, sizeof(rk));
	memcpy(rk.id, "0123456789abcdef0123456789abcdef01234567", 41);
	rk.prob = 0.9;
	rk.label = 1;
	snprintf(rk.why, sizeof(rk.why), "files: src/a\033[31mX\033]0;T\007.c 100%%");
	saved = r.risky;
	nsaved = r.nrisky;
	r.risky = &rk;
	r.nrisky = 1;
	assert_int_equal(omen_eval_write_text(&b, &r), 0);
	assert_null(strchr(b.ptr, '\033'));
	assert_null(strchr(b.ptr, '\007'));
	assert_non_null(strstr(b.ptr, "files: src/a\\033[31mX\\033]0;T\\a.c 100%"));
	omen_buf_clear(&b);
	assert_int_equal(omen_eval_write_json(&b, &r), 0);
	assert_non_null(strstr(b.ptr, "src/a\\u001b[31mX\\u001b]0;T\\u0007.c"));
	r.risky = saved;
	r.nrisky = nsaved;
	omen_buf_free(&b);
	omen_eval_result_free(&r);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_effort_hand_example),
		cmocka_unit_test(test_riskiest_escaped),
		cmocka_unit_test(test_effort_ties_smaller_first),
		cmocka_unit_test(test_effort_extremes),
		cmocka_unit_test(test_effort_curve),
		cmocka_unit_test(test_auc_ap_hand),
		cmocka_unit_test(test_bootstrap),
		cmocka_unit_test(test_calib_bins),
		cmocka_unit_test(test_classify),
		cmocka_unit_test(test_roc_curve),
		cmocka_unit_test(test_path_excluded),
		cmocka_unit_test(test_sample_effort),
		cmocka_unit_test(test_folds_basic),
		cmocka_unit_test(test_folds_too_short),
		cmocka_unit_test(test_folds_no_positive_fold),
		cmocka_unit_test(test_folds_late_labels),
		cmocka_unit_test(test_label_at),
		cmocka_unit_test(test_results_finish),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
