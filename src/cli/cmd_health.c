/* git omen health: one screen on the labels, the model (and the base model
 * when one is configured), their ages and the commits since, the last
 * evaluation figures, the warning budget, and drift (issue 12). Reads only
 * what is saved under $GIT_DIR/omen and the commits after the model's head. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>
#include <cjson/cJSON.h>
#include "cli/cli.h"
#include "cli/options.h"

static const char health_usage[] =
	"usage: git omen health [--format <fmt>]\n"
	"\n"
	"Shows the labels, the model, their ages and the commits since each, the\n"
	"last evaluation, the warning budget, and drift: the base rate of recent\n"
	"labelled commits and the population stability index of each change metric\n"
	"between the training slice and the last omen.driftCommits commits (default\n"
	"300). Adds a notice when the model is stale (omen.staleDays, omen.staleCommits).\n";

#define DRIFT_MAX_REPLAY 5000

typedef struct {
	int have;
	char *path;
	double age_days;
	size_t commits, inducing, clean, unknown;
	char head[OMEN_OID_HEX + 1];
	int64_t since;          /* -1 unknown (head not here) */
	omen_labels_brief brief;
} labels_info;

typedef struct {
	int have;
	char *path;
	double age_days;
	cJSON *json;            /* the saved eval report */
} eval_info;

static double file_age_days(const char *path, time_t now)
{
	struct stat st;
	if (stat(path, &st) != 0)
		return NAN;
	return difftime(now, st.st_mtime) / 86400.0;
}

static double jget(const cJSON *o, const char *k)
{
	const cJSON *v = o ? cJSON_GetObjectItemCaseSensitive(o, k) : NULL;
	return cJSON_IsNumber(v) ? v->valuedouble : NAN;
}

static void read_labels(labels_info *li, omen_repo *repo, time_t now, size_t window)
{
	memset(li, 0, sizeof(*li));
	li->since = -1;
	if (omen_labels_path(&li->path, repo, NULL) || access(li->path, R_OK) != 0 ||
	    omen_labels_brief_read(&li->brief, li->path, window)) {
		omen_error_clear();
		return;
	}
	li->have = 1;
	li->age_days = file_age_days(li->path, now);
	li->commits = li->brief.commits;
	li->inducing = li->brief.inducing;
	li->clean = li->brief.clean;
	li->unknown = li->brief.unknown;
	if (li->brief.head[0]) {
		snprintf(li->head, sizeof(li->head), "%s", li->brief.head);
		if (omen_commits_since(&li->since, repo, li->head)) {
			omen_error_clear();
			li->since = -1;
		}
	}
}

static void read_eval(eval_info *ev, omen_repo *repo, time_t now)
{
	omen_buf data = OMEN_BUF_INIT;
	memset(ev, 0, sizeof(*ev));
	omen_buf pb = OMEN_BUF_INIT;
	/* built by hand: health only reads, it never makes $GIT_DIR/omen */
	if (omen_buf_printf(&pb, "%somen/eval.json", omen_repo_gitdir(repo)) == 0)
		ev->path = omen_buf_detach(&pb);
	omen_buf_free(&pb);
	if (!ev->path || access(ev->path, R_OK) != 0 ||
	    omen_file_read(&data, ev->path, 16u << 20)) {
		omen_error_clear();
		omen_buf_free(&data);
		return;
	}
	ev->json = cJSON_ParseWithLength(data.ptr ? data.ptr : "", data.len);
	omen_buf_free(&data);
	if (ev->json) {
		ev->have = 1;
		ev->age_days = file_age_days(ev->path, now);
	}
}

static const cJSON *eval_model(const eval_info *ev)
{
	const cJSON *p = ev->have ? cJSON_GetObjectItemCaseSensitive(ev->json, "pooled") : NULL;
	const cJSON *m = p ? cJSON_GetObjectItemCaseSensitive(p, "methods") : NULL;
	return m ? cJSON_GetObjectItemCaseSensitive(m, "model") : NULL;
}

/* precision and recall of the calibration slice at the threshold */
static void curve_at(double *prec, double *rec, const omen_model *m, double thr)
{
	omen_warn_curve c;
	int k;
	*prec = *rec = NAN;
	if (omen_model_warn_curve(&c, m)) {
		omen_error_clear();
		return;
	}
	for (k = 0; k < c.npoints; k++)
		if (c.thr[k] <= thr) {
			*prec = c.precision[k];
			*rec = c.recall[k];
			return;
		}
}

static const char *psi_word(double v)
{
	return !(v >= 0) ? "n/a" : v < 0.1 ? "stable" : v <= 0.25 ? "moderate" : "large";
}

static void age_text(omen_buf *b, double days)
{
	if (isnan(days))
		omen_buf_puts(b, "age unknown");
	else if (days < 1)
		omen_buf_printf(b, "%.0f hours old", floor(days * 24));
	else
		omen_buf_printf(b, "%.0f days old", floor(days));
}

static void json_num(omen_buf *b, const char *k, double v)
{
	if (isfinite(v))
		omen_buf_printf(b, "\"%s\":%.6g,", k, v);
	else
		omen_buf_printf(b, "\"%s\":null,", k);
}

/* Over 120 lines: not split yet (issue 14, item 4, left for the next pass);
 *   the health command's driver: options, then the report, text and JSON. */
int cmd_health(int argc, char **argv)
{
	const char *format = "text";
	omen_repo *repo = NULL;
	omen_scorer *sc = NULL;
	labels_info li;
	eval_info ev;
	omen_freshness fr;
	omen_drift dr;
	omen_buf out = OMEN_BUF_INIT, notice = OMEN_BUF_INIT;
	omen_score_opts so = OMEN_SCORE_OPTS_INIT;
	char *base_path = NULL, *model_path = NULL;
	int rc = EXIT_OK, json, have_model = 0, j;
	int64_t window = 300;
	time_t now = time(NULL);
	double prec = NAN, rec = NAN;

	memset(&li, 0, sizeof(li));
	memset(&ev, 0, sizeof(ev));
	memset(&fr, 0, sizeof(fr));
	memset(&dr, 0, sizeof(dr));
	{
		const cli_use uses[] = {
			{&cli_opt_format, &format, cli_formats_text_json, NULL, NULL},
		};
		const cli_command cmd = {"health", health_usage, NULL, uses, 1};
		if ((rc = cli_parse_no_args(&cmd, argc, argv)) >= 0)
			return rc;
		rc = EXIT_OK;
	}
	json = !strcmp(format, "json");
	if (omen_repo_open(&repo, NULL)) {
		rc = cli_fatal(NULL);
		goto done;
	}
	if (omen_config_int(&window, repo, "omen.driftCommits")) {
		rc = cli_fatal(NULL);
		goto done;
	}
	if (omen_config_string(&base_path, repo, "omen.baseModel")) {
		rc = cli_fatal(NULL);
		goto done;
	}
	read_labels(&li, repo, now, (size_t)window);
	read_eval(&ev, repo, now);
	if (omen_score_model_path(&model_path, repo, NULL)) {
		rc = cli_fatal(NULL);
		goto done;
	}
	if (access(model_path, R_OK) == 0) {
		if (omen_scorer_open(&sc, repo, &so)) {
			rc = cli_fatal(NULL);
			goto done;
		}
		have_model = 1;
		if (omen_freshness_check(&fr, sc, (int64_t)now) ||
		    omen_drift_measure(&dr, sc, li.have ? &li.brief : NULL, (size_t)window, DRIFT_MAX_REPLAY)) {
			rc = cli_fatal(NULL);
			goto done;
		}
		omen_freshness_text(&notice, &fr);
		curve_at(&prec, &rec, omen_scorer_model(sc), omen_scorer_threshold(sc));
		if (omen_scorer_notices(sc))
			omen_buf_puts(&notice, omen_scorer_notices(sc));
	}

	if (json) {
		omen_buf_puts(&out, "{\"labels\":");
		if (li.have) {
			omen_buf_puts(&out, "{\"path\":");
			omen_buf_put_json_string(&out, li.path, strlen(li.path));
			omen_buf_printf(&out, ",\"commits\":%zu,\"inducing\":%zu,\"clean\":%zu,\"unknown\":%zu,"
				"\"head\":\"%s\",", li.commits, li.inducing, li.clean, li.unknown, li.head);
			json_num(&out, "age_days", li.age_days);
			json_num(&out, "commits_since", li.since >= 0 ? (double)li.since : NAN);
			out.len--;
			omen_buf_puts(&out, "}");
		} else {
			omen_buf_puts(&out, "null");
		}
		omen_buf_puts(&out, ",\"model\":");
		if (have_model) {
			const omen_model *m = omen_scorer_model(sc);
			omen_buf_puts(&out, "{\"path\":");
			omen_buf_put_json_string(&out, model_path, strlen(model_path));
			omen_buf_printf(&out, ",\"head\":\"%s\",\"head_in_repository\":%s,\"base_model\":%s,",
				omen_model_head(m), fr.head_known ? "true" : "false", fr.is_base ? "true" : "false");
			json_num(&out, "age_days", fr.age_days);
			json_num(&out, "commits_since", fr.behind >= 0 ? (double)fr.behind : NAN);
			omen_buf_printf(&out, "\"stale\":%s,", fr.stale ? "true" : "false");
			json_num(&out, "threshold", omen_scorer_threshold(sc));
			json_num(&out, "fires", omen_scorer_fires(sc));
			json_num(&out, "precision", prec);
			json_num(&out, "recall", rec);
			{
				const cJSON *te = cJSON_GetObjectItemCaseSensitive(omen_model_meta(m), "test");
				const cJSON *tm = te ? cJSON_GetObjectItemCaseSensitive(te, "model") : NULL;
				json_num(&out, "test_auc", jget(tm, "auc"));
				json_num(&out, "test_ap", jget(tm, "ap"));
			}
			out.len--;
			omen_buf_puts(&out, "}");
		} else {
			omen_buf_puts(&out, "null");
		}
		omen_buf_puts(&out, ",\"base_model\":");
		if (base_path && *base_path) {
			omen_buf_puts(&out, "{\"path\":");
			omen_buf_put_json_string(&out, base_path, strlen(base_path));
			omen_buf_puts(&out, ",");
			json_num(&out, "age_days", file_age_days(base_path, now));
			out.len--;
			omen_buf_puts(&out, "}");
		} else {
			omen_buf_puts(&out, "null");
		}
		omen_buf_puts(&out, ",\"eval\":");
		if (ev.have) {
			const cJSON *em = eval_model(&ev);
			omen_buf_puts(&out, "{");
			json_num(&out, "age_days", ev.age_days);
			json_num(&out, "auc", jget(em, "auc"));
			json_num(&out, "ap", jget(em, "ap"));
			json_num(&out, "ece", jget(em, "ece"));
			json_num(&out, "precision", jget(em, "precision"));
			json_num(&out, "recall", jget(em, "recall"));
			json_num(&out, "popt", jget(em, "popt"));
			out.len--;
			omen_buf_puts(&out, "}");
		} else {
			omen_buf_puts(&out, "null");
		}
		omen_buf_puts(&out, ",\"drift\":");
		if (have_model) {
			omen_buf_printf(&out, "{\"window\":%zu,\"from_history\":%zu,\"replay_skipped\":%zu,"
				"\"training_commits\":%zu,", dr.window, dr.from_history, dr.replay_skipped, dr.n_train);
			json_num(&out, "base_rate_training", dr.base_train);
			json_num(&out, "base_rate_recent", dr.base_recent);
			omen_buf_printf(&out, "\"recent_labelled\":%zu,\"psi\":", dr.recent_labelled);
			if (dr.have && dr.window) {
				omen_buf_puts(&out, "{");
				for (j = 0; j < OMEN_NMETRICS; j++)
					json_num(&out, omen_metric_names[j], dr.psi[j]);
				out.len--;
				omen_buf_puts(&out, "}}");
			} else {
				omen_buf_puts(&out, "null}");
			}
		} else {
			omen_buf_puts(&out, "null");
		}
		omen_buf_puts(&out, ",\"notices\":[");
		{
			/* one string per notice line */
			const char *p = notice.ptr ? notice.ptr : "", *nl;
			int first = 1;
			while (*p && (nl = strchr(p, '\n'))) {
				omen_buf_puts(&out, first ? "" : ",");
				omen_buf_put_json_string(&out, p, (size_t)(nl - p));
				first = 0;
				p = nl + 1;
			}
		}
		omen_buf_puts(&out, "]}\n");
	} else {
		if (li.have) {
			omen_buf_printf(&out, "labels    %s: %zu commits (%zu inducing, %zu clean, %zu unknown); ",
				li.path, li.commits, li.inducing, li.clean, li.unknown);
			age_text(&out, li.age_days);
			if (li.since >= 0)
				omen_buf_printf(&out, ", %lld commits since\n", (long long)li.since);
			else
				omen_buf_puts(&out, ", its head is not in this history\n");
		} else {
			omen_buf_puts(&out, "labels    none: run 'git omen label'\n");
		}
		if (have_model) {
			const omen_model *m = omen_scorer_model(sc);
			const cJSON *te = cJSON_GetObjectItemCaseSensitive(omen_model_meta(m), "test");
			const cJSON *tm = te ? cJSON_GetObjectItemCaseSensitive(te, "model") : NULL;
			char rate[64];
			omen_buf_printf(&out, "model     %s: head %.10s, ", model_path, omen_model_head(m));
			age_text(&out, fr.age_days);
			if (fr.behind >= 0)
				omen_buf_printf(&out, ", %lld commits since\n", (long long)fr.behind);
			else
				omen_buf_printf(&out, ", %s\n", fr.is_base ? "the base model" :
					"its head is not in this history");
			omen_buf_printf(&out, "          test slice AUC %.3f, AP %.3f; threshold %.3f fires on %s "
				"(precision %.2f, recall %.2f on the calibration slice)\n",
				jget(tm, "auc"), jget(tm, "ap"), (double)omen_scorer_threshold(sc),
				omen_warn_rate_text(rate, sizeof(rate), omen_scorer_fires(sc)), prec, rec);
		} else {
			omen_buf_printf(&out, "model     none at %s: run 'git omen train'\n", model_path);
		}
		if (base_path && *base_path) {
			omen_buf_printf(&out, "base      %s: ", base_path);
			age_text(&out, file_age_days(base_path, now));
			omen_buf_puts(&out, "\n");
		} else {
			omen_buf_puts(&out, "base      none configured (omen.baseModel)\n");
		}
		if (ev.have) {
			const cJSON *em = eval_model(&ev);
			omen_buf_puts(&out, "eval      ");
			age_text(&out, ev.age_days);
			omen_buf_printf(&out, ": pooled AUC %.3f, AP %.3f, ECE %.3f, precision %.2f and recall "
				"%.2f at the threshold, Popt %.3f\n", jget(em, "auc"), jget(em, "ap"),
				jget(em, "ece"), jget(em, "precision"), jget(em, "recall"), jget(em, "popt"));
		} else {
			omen_buf_puts(&out, "eval      none saved: run 'git omen eval'\n");
		}
		if (have_model) {
			omen_buf_printf(&out, "drift     base rate: training %.3f, last %zu labelled %.3f\n",
				dr.base_train, dr.recent_labelled, dr.base_recent);
			if (dr.have && dr.window) {
				omen_buf_printf(&out, "          PSI, training slice deciles against the last %zu "
					"commits (%zu read after the model's head):\n         ", dr.window,
					dr.from_history);
				for (j = 0; j < OMEN_NMETRICS; j++)
					omen_buf_printf(&out, "%s %s %.3f%s", j % 5 ? "" : " ",
						omen_metric_names[j], dr.psi[j], j % 5 == 4 || j == OMEN_NMETRICS - 1 ?
						(j == OMEN_NMETRICS - 1 ? "\n" : "\n         ") : ",");
				{
					double worst = -1;
					int wj = 0;
					for (j = 0; j < OMEN_NMETRICS; j++)
						if (dr.psi[j] > worst) {
							worst = dr.psi[j];
							wj = j;
						}
					omen_buf_printf(&out, "          largest %s %.3f: %s (common practice: under "
						"0.1 stable, 0.1-0.25 moderate, over 0.25 large)\n",
						omen_metric_names[wj], worst, psi_word(worst));
				}
			} else if (dr.replay_skipped) {
				omen_buf_printf(&out, "          PSI not computed: %zu commits since the model's "
					"head (over %d); retrain first\n", dr.replay_skipped, DRIFT_MAX_REPLAY);
			} else {
				omen_buf_puts(&out, "          PSI not available: the model has no drift "
					"reference (trained before it was saved); retrain\n");
			}
		}
		omen_buf_puts(&out, "scores are advisory\n");
	}
	if (notice.len && !json)
		cli_notices(notice.ptr);
	if (out.len && fwrite(out.ptr, 1, out.len, stdout) != out.len)
		rc = cli_fatal("cannot write standard output");
done:
	omen_buf_free(&out);
	omen_buf_free(&notice);
	omen_scorer_free(sc);
	free(li.path);
	free(ev.path);
	cJSON_Delete(ev.json);
	free(base_path);
	free(model_path);
	omen_repo_free(repo);
	return rc;
}
