/* Writers of a walk-forward result: JSON, text tables and one
 * self-contained HTML page with inline SVG plots (no scripts, no outside
 * resources). Undefined figures are JSON null and "n/a" in text. The many
 * appends do not check their results one by one: the buffer remembers its
 * first failed append (omen_buf_error), and each writer checks that once at
 * its end, so a failure anywhere fails the whole write. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include "omen/eval.h"
#include "omen/label.h"
#include "omen/error.h"
#include "eval/svg.h"

static const char *const method_titles[OMEN_EV_NMETHODS] = {
	"model (this repository, from scratch)", "logistic regression on metrics",
	"rank by lines added", "model per changed line", "smallest change first", "base rate",
	"base model alone", "fine-tuned from the base model"
};
static const char *const method_colors[OMEN_EV_NMETHODS] = {
	"#d62728", "#1f77b4", "#2ca02c", "#ff7f0e", "#9467bd", "#7f7f7f", "#8c564b", "#e377c2"
};
/* Tables list the five side by side first (issue 11), then the references. */
static const int method_order[OMEN_EV_NMETHODS] = {
	OMEN_EV_PRETRAINED, OMEN_EV_TUNED, OMEN_EV_MODEL, OMEN_EV_LR, OMEN_EV_LA,
	OMEN_EV_DENSITY, OMEN_EV_SMALL, OMEN_EV_BASE
};
static const char no_base[] = "no base model";

/* A method without figures in r: one that needs a base model, run without. */
static int absent(const omen_eval_result *r, int m)
{
	return omen_eval_needs_base(m) && !r->has_base;
}

static const char advisory[] = "scores are advisory: a probability learned from this "
	"repository's own fixes, not a verdict";

/* ---- JSON ---------------------------------------------------------------------- */
static void jnum(omen_buf *b, const char *key, double v, int comma)
{
	omen_buf_printf(b, "\"%s\":", key);
	omen_buf_put_json_number(b, v, 6);
	if (comma)
		omen_buf_puts(b, ",");
}

static void json_method(omen_buf *b, const omen_method_scores *m)
{
	int pos = m->positives > 0;
	omen_buf_puts(b, "{");
	omen_buf_printf(b, "\"n\":%zu,\"positives\":%zu,", m->n, m->positives);
	jnum(b, "auc", m->auc, 1);
	omen_buf_puts(b, "\"auc_ci95\":[");
	omen_buf_put_json_number(b, m->auc_lo, 6);
	omen_buf_puts(b, ",");
	omen_buf_put_json_number(b, m->auc_hi, 6);
	omen_buf_puts(b, "],");
	jnum(b, "ap", m->ap, 1);
	jnum(b, "brier", m->brier, 1);
	jnum(b, "brier_base_rate", m->brier_base, 1);
	jnum(b, "ece", m->ece, 1);
	if (m->has_cls) {
		jnum(b, "threshold", m->threshold, 1);
		jnum(b, "precision", m->cls.precision, 1);
		jnum(b, "recall", pos ? m->cls.recall : NAN, 1);
		jnum(b, "f1", m->cls.f1, 1);
		jnum(b, "mcc", m->cls.mcc, 1);
	} else {
		omen_buf_puts(b, "\"threshold\":null,\"precision\":null,\"recall\":null,"
			"\"f1\":null,\"mcc\":null,");
	}
	jnum(b, "recall_at_20_effort", m->eff.recall_at_20, 1);
	jnum(b, "effort_at_20_recall", m->eff.effort_at_20, 1);
	jnum(b, "popt", m->eff.popt, 1);
	jnum(b, "commits_at_20_effort", m->eff.commits_at_20, 1);
	if (pos)
		omen_buf_printf(b, "\"false_alarms_before_first_hit\":%zu", m->eff.false_alarms_first);
	else
		omen_buf_puts(b, "\"false_alarms_before_first_hit\":null");
	omen_buf_puts(b, "}");
}

/* Every method; null for one that needs the base model when there is none. */
static void json_methods(omen_buf *b, const omen_eval_result *r, const omen_method_scores *ms)
{
	int m;
	omen_buf_puts(b, "{");
	for (m = 0; m < OMEN_EV_NMETHODS; m++) {
		omen_buf_printf(b, "%s\"%s\":", m ? "," : "", omen_eval_method_names[m]);
		if (absent(r, m))
			omen_buf_puts(b, "null");
		else
			json_method(b, &ms[m]);
	}
	omen_buf_puts(b, "}");
}

int omen_eval_write_json(omen_buf *out, const omen_eval_result *r)
{
	size_t k, i;
	char d1[16], d2[16], d3[16];
	const char *s, *e;
	omen_buf *b = out;
	omen_buf_puts(b, "{\"advisory\":");
	omen_buf_put_json_string(b, advisory, strlen(advisory));
	omen_buf_printf(b, ",\"commits\":%zu,\"labelled\":%zu,\"folds_requested\":%zu,"
		"\"gap_days\":%lld,\"fold_days\":%lld,\"bootstrap\":%d,\"seed\":%llu,",
		r->n_commits, r->n_labelled, r->nfolds, (long long)r->gap_days,
		(long long)r->fold_days, r->bootstrap, (unsigned long long)r->seed);
	jnum(b, "seconds", r->seconds, 1);
	omen_buf_puts(b, "\"base_model_file\":");
	if (r->has_base)
		omen_buf_put_json_string(b, r->base_path, strlen(r->base_path));
	else
		omen_buf_puts(b, "null");
	omen_buf_puts(b, ",\"folds\":[");
	for (k = 0; k < r->nfolds; k++) {
		const omen_fold_result *f = &r->folds[k];
		omen_format_date(d1, f->fold.train_end);
		omen_format_date(d2, f->fold.test_start);
		omen_format_date(d3, f->fold.test_end);
		omen_buf_printf(b, "%s{\"fold\":%zu,\"train_before\":\"%s\",\"test_from\":\"%s\","
			"\"test_until\":\"%s\",\"n_train\":%zu,\"pos_train\":%zu,\"n_valid\":%zu,"
			"\"pos_valid\":%zu,\"relabelled_clean_at_cut\":%zu,\"n_test\":%zu,\"pos_test\":%zu,"
			"\"no_positives\":%s,",
			k ? "," : "", k + 1, d1, d2, d3, f->fold.n_train, f->fold.pos_train,
			f->fold.n_valid, f->fold.pos_valid, f->fold.n_late, f->fold.n_test, f->fold.pos_test,
			f->m[OMEN_EV_MODEL].positives == 0 ? "true" : "false");
		jnum(b, "base_rate", f->base_rate, 1);
		jnum(b, "seconds", f->seconds, 1);
		jnum(b, "top_effort_share", f->top_effort_share, 1);
		omen_buf_printf(b, "\"top_effort_commit\":\"%s\",\"methods\":", f->top_effort_id);
		json_methods(b, r, f->m);
		omen_buf_puts(b, "}");
	}
	omen_buf_printf(b, "],\"pooled\":{\"n\":%zu,\"positives\":%zu,\"methods\":",
		r->pooled[0].n, r->pooled[0].positives);
	json_methods(b, r, r->pooled);
	if (r->seeds.n > 1) {
		int m, q;
		omen_buf_printf(b, "},\"seeds\":{\"n\":%d,\"first\":%llu,\"methods\":{", r->seeds.n,
			(unsigned long long)r->seeds.first);
		for (m = 0; m < OMEN_EV_NMETHODS; m++) {
			omen_buf_printf(b, "%s\"%s\":{", m ? "," : "", omen_eval_method_names[m]);
			for (q = 0; q < OMEN_SPREAD_N; q++) {
				const omen_spread *x = &r->seeds.m[m][q];
				omen_buf_printf(b, "%s\"%s\":{\"n\":%zu,", q ? "," : "", omen_spread_names[q],
					x->n);
				jnum(b, "mean", x->mean, 1);
				jnum(b, "sd", x->sd, 1);
				jnum(b, "min", x->min, 1);
				jnum(b, "max", x->max, 0);
				omen_buf_puts(b, "}");
			}
			omen_buf_puts(b, "}");
		}
		omen_buf_puts(b, "}");
	}
	omen_buf_puts(b, "},\"riskiest\":[");
	for (i = 0; i < r->nrisky; i++) {
		const omen_risky *x = &r->risky[i];
		omen_format_date(d1, x->time);
		omen_buf_printf(b, "%s{\"commit\":\"%s\",\"date\":\"%s\",", i ? "," : "", x->id, d1);
		jnum(b, "probability", x->prob, 1);
		omen_buf_printf(b, "\"label\":%d,", x->label);
		jnum(b, "effort", x->effort, 1);
		omen_buf_puts(b, "\"why\":");
		omen_buf_put_json_string(b, x->why, strlen(x->why));
		omen_buf_puts(b, "}");
	}
	omen_buf_puts(b, "],\"notes\":[");
	s = r->notes.ptr;
	i = 0;
	while (s && *s) {
		e = strchr(s, '\n');
		if (!e)
			e = s + strlen(s);
		omen_buf_printf(b, "%s", i++ ? "," : "");
		omen_buf_put_json_string(b, s, (size_t)(e - s));
		s = *e ? e + 1 : e;
	}
	omen_buf_puts(b, "]}\n");
	return omen_buf_error(b) ? omen_error_set(OMEN_ENOMEM, "cannot write the evaluation: out of memory") : 0;
}

/* ---- text ---------------------------------------------------------------------- */
static void tnum(omen_buf *b, double v, const char *fmt, int width)
{
	if (isnan(v) || isinf(v))
		omen_buf_printf(b, "%*s", width, "n/a");
	else
		omen_buf_printf(b, fmt, width, v);
}

static void text_method_row(omen_buf *b, const char *name, const omen_method_scores *m)
{
	int pos = m->positives > 0;
	omen_buf_printf(b, "%-16s", name);
	tnum(b, m->auc, "%*.3f", 6);
	if (isnan(m->auc_lo))
		omen_buf_printf(b, " %-13s", "");
	else
		omen_buf_printf(b, " [%.3f-%.3f]", m->auc_lo, m->auc_hi);
	tnum(b, m->ap, "%*.3f", 7);
	tnum(b, m->brier, "%*.4f", 8);
	tnum(b, m->ece, "%*.3f", 7);
	tnum(b, m->has_cls ? m->cls.precision : NAN, "%*.3f", 7);
	tnum(b, m->has_cls ? m->cls.recall : NAN, "%*.3f", 7);
	tnum(b, m->has_cls ? m->cls.f1 : NAN, "%*.3f", 7);
	tnum(b, m->has_cls ? m->cls.mcc : NAN, "%*.3f", 7);
	tnum(b, m->eff.recall_at_20, "%*.3f", 8);
	tnum(b, m->eff.effort_at_20, "%*.3f", 8);
	tnum(b, m->eff.popt, "%*.3f", 7);
	tnum(b, m->eff.commits_at_20, "%*.3f", 8);
	if (pos)
		omen_buf_printf(b, "%7zu\n", m->eff.false_alarms_first);
	else
		omen_buf_printf(b, "%7s\n", "n/a");
}

static void text_method_table(omen_buf *b, const omen_eval_result *r, const omen_method_scores *ms)
{
	int i;
	omen_buf_printf(b, "%-16s%6s %-13s%7s%8s%7s%7s%7s%7s%7s%8s%8s%7s%8s%7s\n", "method", "auc",
		"[95% ci]", "ap", "brier", "ece", "prec", "rec", "f1", "mcc", "r@20%e", "e@20%r", "popt",
		"c@20%e", "fa1st");
	for (i = 0; i < OMEN_EV_NMETHODS; i++) {
		int m = method_order[i];
		if (absent(r, m))
			omen_buf_printf(b, "%-16s%6s\n", omen_eval_method_names[m], no_base);
		else
			text_method_row(b, omen_eval_method_names[m], &ms[m]);
	}
	omen_buf_printf(b, "(brier of the base rate on these commits: ");
	tnum(b, ms[OMEN_EV_BASE].brier_base, "%*.4f", 1);
	omen_buf_puts(b, ")\n");
}

int omen_eval_write_text(omen_buf *out, const omen_eval_result *r)
{
	omen_buf *b = out;
	size_t k, i;
	char d1[16], d2[16];
	omen_buf_printf(b, "walk-forward evaluation: %zu folds, %lld-day test windows, %lld-day gap "
		"before each; %zu of %zu commits labelled; training labels as known when each test "
		"window opens\n", r->nfolds, (long long)r->fold_days, (long long)r->gap_days,
		r->n_labelled, r->n_commits);
	omen_buf_printf(b, "%s\n", advisory);
	if (r->has_base) {
		omen_buf_puts(b, "base model: ");
		omen_buf_puts_shown(b, r->base_path, 0);
		omen_buf_puts(b, " (base_model: alone, standardized on each fold's training split; "
			"fine_tuned: from it; model: from scratch)\n\n");
	} else {
		omen_buf_puts(b, "base model: none found (omen.baseModel, the installed one or --from "
			"<file>): the base_model and fine_tuned columns say \"no base model\"\n\n");
	}
	omen_buf_printf(b, "%-5s%-23s%7s%7s%6s%7s %-13s%8s%8s%8s%8s%8s\n", "fold", "test window",
		"train", "test", "pos", "auc", "[95% ci]", "auc-bm", "auc-ft", "auc-lr", "auc-la",
		"seconds");
	for (k = 0; k < r->nfolds; k++) {
		const omen_fold_result *f = &r->folds[k];
		const omen_method_scores *m = &f->m[OMEN_EV_MODEL];
		omen_format_date(d1, f->fold.test_start);
		omen_format_date(d2, f->fold.test_end - 1);
		omen_buf_printf(b, "%-5zu%s..%-11s%7zu%7zu%6zu", k + 1, d1, d2,
			f->fold.n_train + f->fold.n_valid, f->fold.n_test, f->fold.pos_test);
		tnum(b, m->auc, "%*.3f", 7);
		if (isnan(m->auc_lo))
			omen_buf_printf(b, " %-13s", "");
		else
			omen_buf_printf(b, " [%.3f-%.3f]", m->auc_lo, m->auc_hi);
		tnum(b, absent(r, OMEN_EV_PRETRAINED) ? NAN : f->m[OMEN_EV_PRETRAINED].auc, "%*.3f", 8);
		tnum(b, absent(r, OMEN_EV_TUNED) ? NAN : f->m[OMEN_EV_TUNED].auc, "%*.3f", 8);
		tnum(b, f->m[OMEN_EV_LR].auc, "%*.3f", 8);
		tnum(b, f->m[OMEN_EV_LA].auc, "%*.3f", 8);
		tnum(b, f->seconds, "%*.1f", 8);
		omen_buf_puts(b, f->m[OMEN_EV_MODEL].positives == 0 && f->fold.n_test ?
			"  no inducing commit\n" : "\n");
	}
	omen_buf_printf(b, "\npooled over the folds: %zu test commits, %zu inducing\n",
		r->pooled[0].n, r->pooled[0].positives);
	text_method_table(b, r, r->pooled);
	if (r->seeds.n > 1) {
		int m, q, mi;
		static const int cols[] = {OMEN_SPREAD_AUC, OMEN_SPREAD_AP, OMEN_SPREAD_BRIER,
			OMEN_SPREAD_POPT, OMEN_SPREAD_R20};
		static const char *const heads[] = {"auc", "ap", "brier", "popt", "r@20%e"};
		omen_buf_printf(b, "\npooled over %d seeds (training and bootstrap seeds %llu..%llu; "
			"the tables above are the first): mean, sd [min-max]\n", r->seeds.n,
			(unsigned long long)r->seeds.first,
			(unsigned long long)(r->seeds.first + (uint64_t)r->seeds.n - 1));
		omen_buf_printf(b, "%-16s", "method");
		for (q = 0; q < 5; q++)
			omen_buf_printf(b, "  %-27s", heads[q]);
		omen_buf_puts(b, "\n");
		for (mi = 0; mi < OMEN_EV_NMETHODS; mi++) {
			m = method_order[mi];
			omen_buf_printf(b, "%-16s", omen_eval_method_names[m]);
			if (absent(r, m)) {
				omen_buf_printf(b, "  %s\n", no_base);
				continue;
			}
			for (q = 0; q < 5; q++) {
				const omen_spread *x = &r->seeds.m[m][cols[q]];
				char cell[64];
				if (!x->n)
					snprintf(cell, sizeof(cell), "n/a");
				else if (isnan(x->sd) || x->max == x->min)
					snprintf(cell, sizeof(cell), "%.3f, 0 [%.3f-%.3f]", x->mean, x->min, x->max);
				else
					snprintf(cell, sizeof(cell), "%.3f, %.3f [%.3f-%.3f]", x->mean, x->sd,
						x->min, x->max);
				omen_buf_printf(b, "  %-27s", cell);
			}
			omen_buf_puts(b, "\n");
		}
	}
	omen_buf_puts(b, "prec, rec, f1, mcc at each method's threshold: the model's fires on the "
		"riskiest share (omen.warnShare, default 10%) of its fold's validation slice, the "
		"baselines' is their max F1 there\n");
	omen_buf_puts(b, "r@20%e recall at 20% effort, e@20%r effort at 20% recall, c@20%e share "
		"of commits inspected at 20% effort, fa1st false alarms before the first hit; "
		"effort = lines added + deleted\n");
	omen_buf_puts(b, "base_model scores as the base model comes (auc, ap, threshold at max F1 "
		"on the validation slice); its brier and ece after a Platt scaling fitted on each "
		"fold's validation slice; auc-bm, auc-ft per fold: base_model, fine_tuned\n");
	omen_buf_puts(b, "base_rate is one constant per fold (its training share of inducing "
		"commits): within a fold it ties every commit, so its AUC is 0.5 and its ranking, ties "
		"broken smaller change first, is that of smallest_first; pooled, it ranks the folds by "
		"their rates\n");
	if (r->nrisky) {
		omen_buf_puts(b, "\nriskiest test commits:\n");
		for (i = 0; i < r->nrisky; i++) {
			const omen_risky *x = &r->risky[i];
			omen_format_date(d1, x->time);
			omen_buf_printf(b, "  %.12s %s p=%.3f %-8s ", x->id, d1, x->prob,
				omen_label_name(x->label ? OMEN_LABEL_INDUCING : OMEN_LABEL_CLEAN));
			omen_buf_puts_shown(b, x->why, 0);   /* paths from history */
			omen_buf_puts(b, "\n");
		}
	}
	if (r->notes.len)
		omen_buf_printf(b, "\nnotes:\n%s", r->notes.ptr);
	return omen_buf_error(b) ? omen_error_set(OMEN_ENOMEM, "cannot write the evaluation: out of memory") : 0;
}

/* ---- HTML -------------------------------------------------------------------------- */
typedef struct {
	size_t n;
	int has_base;
	int *y;
	double *effort;
	double *score[OMEN_EV_NMETHODS];
} pooled_arrays;

static void pooled_free(pooled_arrays *p)
{
	int m;
	free(p->y);
	free(p->effort);
	for (m = 0; m < OMEN_EV_NMETHODS; m++)
		free(p->score[m]);
}

static int pooled_collect(pooled_arrays *p, const omen_eval_result *r)
{
	size_t k, n = 0, off = 0;
	int m;
	memset(p, 0, sizeof(*p));
	p->has_base = r->has_base;
	for (k = 0; k < r->nfolds; k++)
		n += r->folds[k].fold.n_test;
	p->n = n;
	p->y = malloc((n ? n : 1) * sizeof(int));
	p->effort = malloc((n ? n : 1) * sizeof(double));
	if (!p->y || !p->effort)
		return OMEN_ENOMEM;
	for (m = 0; m < OMEN_EV_NMETHODS; m++)
		if (!(p->score[m] = malloc((n ? n : 1) * sizeof(double))))
			return OMEN_ENOMEM;
	for (k = 0; k < r->nfolds; k++) {
		const omen_fold_result *f = &r->folds[k];
		size_t c = f->fold.n_test;
		memcpy(p->y + off, f->y, c * sizeof(int));
		memcpy(p->effort + off, f->effort, c * sizeof(double));
		for (m = 0; m < OMEN_EV_NMETHODS; m++)
			memcpy(p->score[m] + off, f->score[m], c * sizeof(double));
		off += c;
	}
	return 0;
}

static void html_num(omen_buf *b, double v, const char *fmt)
{
	if (isnan(v) || isinf(v))
		omen_buf_puts(b, "<td class=\"na\">n/a</td>");
	else {
		omen_buf_puts(b, "<td>");
		omen_buf_printf(b, fmt, v);
		omen_buf_puts(b, "</td>");
	}
}

static void html_method_table(omen_buf *b, const omen_eval_result *r, const omen_method_scores *ms)
{
	int m, i;
	omen_buf_puts(b, "<table><tr><th>method</th><th>AUC</th><th>95% CI</th><th>AP</th>"
		"<th>Brier</th><th>ECE</th><th>F1</th><th>MCC</th><th>Recall@20%Effort</th>"
		"<th>Effort@20%Recall</th><th>Popt</th><th>commits at 20% effort</th>"
		"<th>false alarms before first hit</th></tr>\n");
	for (i = 0; i < OMEN_EV_NMETHODS; i++) {
		const omen_method_scores *x = &ms[m = method_order[i]];
		omen_buf_printf(b, "<tr><td><span class=\"sw\" style=\"background:%s\"></span>%s</td>",
			method_colors[m], method_titles[m]);
		if (absent(r, m)) {
			omen_buf_printf(b, "<td class=\"na\" colspan=\"12\">%s</td></tr>\n", no_base);
			continue;
		}
		html_num(b, x->auc, "%.3f");
		if (isnan(x->auc_lo))
			omen_buf_puts(b, "<td class=\"na\">n/a</td>");
		else
			omen_buf_printf(b, "<td>%.3f&ndash;%.3f</td>", x->auc_lo, x->auc_hi);
		html_num(b, x->ap, "%.3f");
		html_num(b, x->brier, "%.4f");
		html_num(b, x->ece, "%.3f");
		html_num(b, x->has_cls ? x->cls.f1 : NAN, "%.3f");
		html_num(b, x->has_cls ? x->cls.mcc : NAN, "%.3f");
		html_num(b, x->eff.recall_at_20, "%.3f");
		html_num(b, x->eff.effort_at_20, "%.3f");
		html_num(b, x->eff.popt, "%.3f");
		html_num(b, x->eff.commits_at_20, "%.3f");
		html_num(b, x->positives ? (double)x->eff.false_alarms_first : NAN, "%.0f");
		omen_buf_puts(b, "</tr>\n");
	}
	omen_buf_puts(b, "</table>\n");
}

static int plot_roc(omen_buf *b, const pooled_arrays *p)
{
	svg_plot sp;
	double *x = malloc((p->n + 1) * sizeof(double)), *y = malloc((p->n + 1) * sizeof(double));
	int m;
	if (!x || !y) {
		free(x);
		free(y);
		return OMEN_ENOMEM;
	}
	svg_begin(&sp, b, "roc", "ROC curves (pooled test commits)", "false-positive rate",
		"true-positive rate", 520, 420, 0, 1, 0, 1);
	sp.legend_br = 1;
	svg_axes(&sp, 5, 5, 0);
	{
		double dx[2] = {0, 1}, dy[2] = {0, 1};
		svg_line(&sp, dx, dy, 2, "#bbb", "4 3", 1, "chance");
	}
	for (m = 0; m < OMEN_EV_NMETHODS; m++) {
		size_t k;
		if (m == OMEN_EV_BASE || m == OMEN_EV_DENSITY)
			continue;   /* a single point on the diagonal; an effort ordering, not a classifier */
		if (omen_eval_needs_base(m) && !p->has_base)
			continue;
		k = omen_roc_curve(x, y, p->score[m], p->y, p->n);
		svg_line(&sp, x, y, k, method_colors[m], NULL, m == OMEN_EV_MODEL ? 2.5 : 1.5,
			method_titles[m]);
	}
	svg_end(&sp);
	free(x);
	free(y);
	return 0;
}

static void plot_reliability(omen_buf *b, const pooled_arrays *p)
{
	svg_plot sp;
	int ms[4] = {OMEN_EV_MODEL, OMEN_EV_LR, OMEN_EV_BASE, OMEN_EV_TUNED}, i, j;
	svg_begin(&sp, b, "reliability", "Reliability diagram (10 bins)", "mean predicted probability",
		"observed share inducing", 520, 420, 0, 1, 0, 1);
	svg_axes(&sp, 5, 5, 0);
	{
		double dx[2] = {0, 1}, dy[2] = {0, 1};
		svg_line(&sp, dx, dy, 2, "#bbb", "4 3", 1, "perfect calibration");
	}
	for (i = 0; i < (p->has_base ? 4 : 3); i++) {
		size_t bn[10];
		double bp[10], bt[10], r[10];
		omen_ece(p->score[ms[i]], p->y, p->n, 10, bn, bp, bt);
		for (j = 0; j < 10; j++)
			r[j] = bn[j] ? 2.5 + 7.0 * sqrt((double)bn[j] / (double)(p->n ? p->n : 1)) : 0;
		/* skip empty bins without breaking the line */
		{
			double cx[10], cy[10], cr[10];
			size_t c = 0;
			for (j = 0; j < 10; j++)
				if (bn[j]) {
					cx[c] = bp[j];
					cy[c] = bt[j];
					cr[c++] = r[j];
				}
			svg_line(&sp, cx, cy, c, method_colors[ms[i]], NULL, ms[i] == OMEN_EV_MODEL ? 2.5 : 1.5,
				method_titles[ms[i]]);
			svg_markers(&sp, cx, cy, cr, c, method_colors[ms[i]]);
		}
	}
	svg_end(&sp);
}

static int plot_effort(omen_buf *b, const pooled_arrays *p)
{
	svg_plot sp;
	double *x = malloc((p->n + 1) * sizeof(double)), *y = malloc((p->n + 1) * sizeof(double));
	int m;
	size_t k;
	if (!x || !y) {
		free(x);
		free(y);
		return OMEN_ENOMEM;
	}
	svg_begin(&sp, b, "effort", "Cumulative effort and recall (pooled)",
		"share of effort (lines added + deleted)", "share of inducing commits found",
		520, 420, 0, 1, 0, 1);
	sp.legend_br = 1;
	svg_axes(&sp, 5, 5, 0);
	k = omen_effort_curve(x, y, p->score[0], p->y, p->effort, p->n, 1);
	svg_line(&sp, x, y, k, "#000", "2 2", 1.2, "optimal");
	for (m = 0; m < OMEN_EV_NMETHODS; m++) {
		if (m == OMEN_EV_BASE)
			continue;   /* all ties: the same order as smallest first */
		if (omen_eval_needs_base(m) && !p->has_base)
			continue;
		k = omen_effort_curve(x, y, p->score[m], p->y, p->effort, p->n, 0);
		svg_line(&sp, x, y, k, method_colors[m], NULL, m == OMEN_EV_MODEL ? 2.5 : 1.5,
			method_titles[m]);
	}
	{
		double vx[2] = {0.2, 0.2}, vy[2] = {0, 1};
		svg_line(&sp, vx, vy, 2, "#999", "1 3", 1, NULL);
	}
	svg_end(&sp);
	free(x);
	free(y);
	return 0;
}

static int plot_folds(omen_buf *b, const omen_eval_result *r)
{
	svg_plot sp;
	size_t k, n = r->nfolds;
	double *x = calloc(n ? n : 1, sizeof(double)), *y = calloc(n ? n : 1, sizeof(double));
	double *lo = calloc(n ? n : 1, sizeof(double)), *hi = calloc(n ? n : 1, sizeof(double));
	double xmin = 0, xmax = 1;
	int m, ms[5] = {OMEN_EV_MODEL, OMEN_EV_LR, OMEN_EV_LA, OMEN_EV_PRETRAINED, OMEN_EV_TUNED}, i;
	if (!x || !y || !lo || !hi) {
		free(x); free(y); free(lo); free(hi);
		return OMEN_ENOMEM;
	}
	if (n) {
		xmin = (double)r->folds[0].fold.test_start;
		xmax = (double)r->folds[n - 1].fold.test_end;
	}
	svg_begin(&sp, b, "folds", "AUC per fold over time (95% bootstrap interval)",
		"test window", "AUC", 520, 420, xmin, xmax, 0, 1);
	sp.legend_br = 1;
	svg_axes(&sp, n > 1 ? 4 : 1, 5, 1);
	{
		double dx[2] = {xmin, xmax}, dy[2] = {0.5, 0.5};
		svg_line(&sp, dx, dy, 2, "#bbb", "4 3", 1, "chance (0.5)");
	}
	for (i = 0; i < (r->has_base ? 5 : 3); i++) {
		m = ms[i];
		for (k = 0; k < n; k++) {
			const omen_fold_result *f = &r->folds[k];
			x[k] = 0.5 * ((double)f->fold.test_start + (double)f->fold.test_end);
			y[k] = f->m[m].auc;
			lo[k] = f->m[m].auc_lo;
			hi[k] = f->m[m].auc_hi;
		}
		svg_line(&sp, x, y, n, method_colors[m], NULL, m == OMEN_EV_MODEL ? 2.5 : 1.5,
			method_titles[m]);
		svg_markers(&sp, x, y, NULL, n, method_colors[m]);
		if (m == OMEN_EV_MODEL)
			svg_errbars(&sp, x, lo, hi, n, method_colors[m]);
	}
	svg_end(&sp);
	free(x); free(y); free(lo); free(hi);
	return 0;
}

/* The pooled figures over several seeds: mean, sd and range per method. */
static void html_seeds(omen_buf *b, const omen_eval_result *r)
{
	int m, q, mi;
	omen_buf_printf(b, "<h2>Pooled figures over %d seeds</h2>\n<p class=\"adv\">Training "
		"and bootstrap seeds %llu to %llu on the same folds; the tables and plots are the "
		"first seed's. Mean, sample standard deviation and range.</p>\n<table><tr>"
		"<th>method</th>", r->seeds.n, (unsigned long long)r->seeds.first,
		(unsigned long long)(r->seeds.first + (uint64_t)r->seeds.n - 1));
	for (q = 0; q < OMEN_SPREAD_N; q++)
		omen_buf_printf(b, "<th>%s</th>", omen_spread_names[q]);
	omen_buf_puts(b, "</tr>\n");
	for (mi = 0; mi < OMEN_EV_NMETHODS; mi++) {
		m = method_order[mi];
		omen_buf_printf(b, "<tr><td><span class=\"sw\" style=\"background:%s\"></span>%s"
			"</td>", method_colors[m], method_titles[m]);
		if (absent(r, m)) {
			omen_buf_printf(b, "<td class=\"na\" colspan=\"%d\">%s</td></tr>\n",
				OMEN_SPREAD_N, no_base);
			continue;
		}
		for (q = 0; q < OMEN_SPREAD_N; q++) {
			const omen_spread *x = &r->seeds.m[m][q];
			if (!x->n)
				omen_buf_puts(b, "<td class=\"na\">n/a</td>");
			else
				omen_buf_printf(b, "<td>%.3f &plusmn; %.3f<br><small>%.3f&ndash;%.3f"
					"</small></td>", x->mean, isnan(x->sd) ? 0.0 : x->sd, x->min, x->max);
		}
		omen_buf_puts(b, "</tr>\n");
	}
	omen_buf_puts(b, "</table>\n");
}

/* The run's notes and warnings, one list item per line of s. */
static void html_notes(omen_buf *b, const char *s)
{
	const char *e;
	omen_buf_puts(b, "<div class=\"note\"><b>Notes and warnings</b><ul>\n");
	while (*s) {
		char line[512];
		size_t len;
		e = strchr(s, '\n');
		if (!e)
			e = s + strlen(s);
		len = (size_t)(e - s) < sizeof(line) - 1 ? (size_t)(e - s) : sizeof(line) - 1;
		memcpy(line, s, len);
		line[len] = '\0';
		omen_buf_puts(b, "<li>");
		svg_text_esc(b, line);
		omen_buf_puts(b, "</li>\n");
		s = *e ? e + 1 : e;
	}
	omen_buf_puts(b, "</ul></div>\n");
}

/* The table of folds, one row each. */
static void html_folds(omen_buf *b, const omen_eval_result *r)
{
	char d1[16], d2[16];
	size_t k;
	omen_buf_puts(b, "<h2>Folds</h2>\n<table><tr><th>fold</th><th>trained before</th>"
		"<th>test window</th><th>train</th><th>test</th><th>inducing</th><th>AUC model</th>"
		"<th>95% CI</th><th>AUC base model alone</th><th>AUC fine-tuned</th>"
		"<th>AUC LR</th><th>AUC lines added</th><th>largest commit's effort"
		"</th><th>seconds</th></tr>\n");
	for (k = 0; k < r->nfolds; k++) {
		const omen_fold_result *f = &r->folds[k];
		const omen_method_scores *m = &f->m[OMEN_EV_MODEL];
		omen_format_date(d1, f->fold.train_end);
		omen_buf_printf(b, "<tr><td>%zu</td><td>%s</td>", k + 1, d1);
		omen_format_date(d1, f->fold.test_start);
		omen_format_date(d2, f->fold.test_end - 1);
		omen_buf_printf(b, "<td>%s &ndash; %s</td><td>%zu</td><td>%zu</td><td>%zu</td>", d1, d2,
			f->fold.n_train + f->fold.n_valid, f->fold.n_test, f->fold.pos_test);
		html_num(b, m->auc, "%.3f");
		if (isnan(m->auc_lo))
			omen_buf_puts(b, "<td class=\"na\">n/a</td>");
		else
			omen_buf_printf(b, "<td>%.3f&ndash;%.3f</td>", m->auc_lo, m->auc_hi);
		if (r->has_base) {
			html_num(b, f->m[OMEN_EV_PRETRAINED].auc, "%.3f");
			html_num(b, f->m[OMEN_EV_TUNED].auc, "%.3f");
		} else {
			omen_buf_printf(b, "<td class=\"na\">%s</td><td class=\"na\">%s</td>", no_base,
				no_base);
		}
		html_num(b, f->m[OMEN_EV_LR].auc, "%.3f");
		html_num(b, f->m[OMEN_EV_LA].auc, "%.3f");
		html_num(b, 100 * f->top_effort_share, "%.0f%%");
		html_num(b, f->seconds, "%.1f");
		omen_buf_puts(b, "</tr>\n");
	}
}

int omen_eval_write_html(omen_buf *out, const omen_eval_result *r, const char *title)
{
	omen_buf *b = out;
	pooled_arrays p;
	size_t i;
	char d1[16];
	int rc;
	if ((rc = pooled_collect(&p, r)) < 0) {
		pooled_free(&p);
		return omen_error_set(OMEN_ENOMEM, "cannot write the report: out of memory");
	}
	omen_buf_puts(b, "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n<title>");
	svg_text_esc(b, title ? title : "omen evaluation");
	omen_buf_puts(b, "</title>\n<style>\n"
		"body{font-family:sans-serif;margin:24px;color:#222;max-width:1120px}\n"
		"h1{font-size:22px}h2{font-size:17px;margin-top:28px}\n"
		"table{border-collapse:collapse;font-size:12px;margin:8px 0}\n"
		"td,th{border:1px solid #ccc;padding:3px 6px;text-align:right}td{white-space:nowrap}\n"
		"td.why{white-space:normal;text-align:left}\n"
		"td:first-child,th:first-child{text-align:left}\n"
		"td.na{color:#999}.sw{display:inline-block;width:10px;height:10px;margin-right:5px}\n"
		".grid{display:grid;grid-template-columns:540px 540px;gap:12px}\n"
		".note{background:#fff6e0;border-left:4px solid #e0a000;padding:6px 10px;font-size:13px}\n"
		".adv{color:#555;font-size:13px}code{font-size:12px}\n"
		"</style></head><body>\n<h1>");
	svg_text_esc(b, title ? title : "omen evaluation");
	omen_buf_puts(b, "</h1>\n<p class=\"adv\">");
	svg_text_esc(b, advisory);
	omen_buf_printf(b, ".</p>\n<p>Walk-forward evaluation over %zu folds: each fold trains on "
		"every labelled commit older than its test window minus a %lld-day gap, labelled as it "
		"was known when that window opened, then scores the %lld-day test window, labelled as "
		"known now. %zu of %zu commits are labelled. AUC intervals: %d bootstrap "
		"resamples, seed %llu. Effort = lines added + deleted outside vendored and generated "
		"paths.</p>\n", r->nfolds, (long long)r->gap_days, (long long)r->fold_days,
		r->n_labelled, r->n_commits, r->bootstrap, (unsigned long long)r->seed);
	omen_buf_puts(b, "<p>Base model: ");
	if (r->has_base) {
		svg_text_esc(b, r->base_path);
		omen_buf_puts(b, ". <i>Base model alone</i> is its weights and calibration as they come, "
			"standardized on each fold's training split, never trained on this repository "
			"(Brier and ECE after a Platt scaling on the fold's validation slice); "
			"<i>fine-tuned</i> starts from it on the fold's training split.</p>\n");
	} else {
		omen_buf_printf(b, "none found; its two columns say \"%s\".</p>\n", no_base);
	}
	omen_buf_printf(b, "<h2>Pooled test commits (%zu, %zu inducing)</h2>\n", p.n,
		r->pooled[0].positives);
	html_method_table(b, r, r->pooled);
	if (r->seeds.n > 1)
		html_seeds(b, r);
	omen_buf_puts(b, "<p class=\"adv\">Brier of the base rate on the same commits: ");
	if (isnan(r->pooled[OMEN_EV_BASE].brier_base))
		omen_buf_puts(b, "n/a");
	else
		omen_buf_printf(b, "%.4f", r->pooled[OMEN_EV_BASE].brier_base);
	omen_buf_puts(b, ". Rankings that are not probabilities have no Brier score or ECE. "
		"The base rate is one constant per fold (its training share of inducing commits): "
		"within a fold it ties every commit, so its AUC is 0.5 and its inspection order, ties "
		"broken smaller change first, is that of smallest change first; pooled over the folds "
		"it ranks the folds by their rates.</p>\n");
	if (r->notes.len)
		html_notes(b, r->notes.ptr);
	omen_buf_puts(b, "<h2>Plots</h2>\n<div class=\"grid\">\n");
	if ((rc = plot_roc(b, &p)) < 0)
		goto out;
	plot_reliability(b, &p);
	if ((rc = plot_effort(b, &p)) < 0)
		goto out;
	if ((rc = plot_folds(b, r)) < 0)
		goto out;
	omen_buf_puts(b, "</div>\n");
	html_folds(b, r);
	omen_buf_puts(b, "</table>\n<h2>Riskiest test commits</h2>\n");
	if (!r->nrisky) {
		omen_buf_puts(b, "<p class=\"adv\">none</p>\n");
	} else {
		omen_buf_puts(b, "<table><tr><th>commit</th><th>date</th><th>probability</th>"
			"<th>label</th><th>effort</th><th>what drove the score</th></tr>\n");
		for (i = 0; i < r->nrisky; i++) {
			const omen_risky *x = &r->risky[i];
			omen_format_date(d1, x->time);
			omen_buf_printf(b, "<tr><td><code>%.12s</code></td><td>%s</td><td>%.3f</td>"
				"<td>%s</td><td>%.0f</td><td class=\"why\">", x->id, d1, x->prob,
				omen_label_name(x->label ? OMEN_LABEL_INDUCING : OMEN_LABEL_CLEAN), x->effort);
			svg_text_esc(b, x->why);
			omen_buf_puts(b, "</td></tr>\n");
		}
		omen_buf_puts(b, "</table>\n");
	}
	omen_buf_puts(b, "</body></html>\n");
out:
	pooled_free(&p);
	if (rc < 0)
		return omen_error_set(OMEN_ENOMEM, "cannot write the report: out of memory");
	return omen_buf_error(b) ? omen_error_set(OMEN_ENOMEM, "cannot write the report: out of memory") : 0;
}
