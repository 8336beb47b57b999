/* git omen eval: walk-forward evaluation of the model against its baselines
 * and honest references, as text, JSON and a self-contained HTML report. */
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include "cli/cli.h"
#include "cli/options.h"
#include "omen/base.h"

typedef struct {
	int tty;
	double total;
} progress_state;

static void on_progress(void *payload, size_t fold, size_t nfolds, int done, double seconds)
{
	progress_state *p = payload;
	if (!p->tty)
		return;
	if (!done)
		fprintf(stderr, "\reval: fold %zu/%zu training...", fold + 1, nfolds);
	else {
		p->total += seconds;
		fprintf(stderr, "\reval: fold %zu/%zu done in %.1f s          %s", fold + 1, nfolds,
			seconds, fold + 1 == nfolds ? "\n" : "");
	}
}

/* omen.effortExclude: globs separated by commas or spaces; "" = none. */
static int split_globs(char ***out, size_t *n, char *s)
{
	char **v = NULL, *tok, *save = NULL;
	size_t cap = 0;
	*n = 0;
	for (tok = strtok_r(s, ", \t", &save); tok; tok = strtok_r(NULL, ", \t", &save)) {
		if (OMEN_ARRAY_RESERVE(v, cap, *n + 1) < 0) {
			free(v);
			return -1;
		}
		v[(*n)++] = tok;
	}
	*out = v;
	return 0;
}

static const cli_option opt_folds = {
	"--folds", CLI_INT, "<n>", 1, 1000, "a count from 1 to 1000", "number of test windows (default 5)"};
static const cli_option opt_fold_days = {
	"--fold-days", CLI_INT, "<d>", 1, 100000, "a number of days from 1 to 100000",
	"width of a test window in days (default: half the labelled history shared among the folds)"};
static const cli_option opt_html = {
	"--html", CLI_STRING, "<file>", 0, 0, NULL, "also write a self-contained HTML report with plots"};
static const cli_option opt_seeds = {
	"--seeds", CLI_INT, "<n>", 1, 100, "a count from 1 to 100",
	"run the folds over n seeds (--seed, then one more each run) and report the mean and "
	"spread of the pooled figures (default 1)"};
static const cli_option opt_from = {
	"--from", CLI_STRING, "<file>", 0, 0, NULL,
	"the base model of the base_model and fine_tuned columns (default omen.baseModel, else "
	"the installed one)"};
static const cli_option opt_bootstrap = {
	"--bootstrap", CLI_INT, "<n>", 0, 1000000, "a count from 0 to 1000000",
	"resamples for the AUC intervals (default 1000)"};

typedef struct {
	const char *format, *html, *labels, *rev, *from;
	long long folds, fold_days, window, seed, seeds, bootstrap, epochs, threads;
	int folds_set, fold_days_set, window_set, seed_set, seeds_set, bootstrap_set, epochs_set;
	int threads_set;
	int no_cache;
} eval_args;

/* Parses argv into o and a; -1 to go on, else the exit code. */
static int parse_args(omen_eval_opts *o, eval_args *a, int argc, char **argv)
{
	const cli_use uses[] = {
		{&opt_folds, &a->folds, NULL, NULL, &a->folds_set},
		{&opt_fold_days, &a->fold_days, NULL, NULL, &a->fold_days_set},
		{&cli_opt_window, &a->window, NULL,
			"days left out between training and test (default omen.window, else the "
			"window the labels were made with, " OMEN_STR(OMEN_WINDOW_DAYS) ")", &a->window_set},
		{&cli_opt_format, &a->format, cli_formats_text_json, NULL, NULL},
		{&opt_html, &a->html, NULL, NULL, NULL},
		{&cli_opt_seed, &a->seed, NULL,
			"random seed of the training runs and of the bootstrap (default "
			OMEN_STR(OMEN_SEED_DEFAULT) ")", &a->seed_set},
		{&opt_seeds, &a->seeds, NULL, NULL, &a->seeds_set},
		{&opt_bootstrap, &a->bootstrap, NULL, NULL, &a->bootstrap_set},
		{&cli_opt_epochs, &a->epochs, NULL, NULL, &a->epochs_set},
		{&cli_opt_threads, &a->threads, NULL, NULL, &a->threads_set},
		{&cli_opt_labels, &a->labels, NULL, NULL, NULL},
		{&cli_opt_no_cache, &a->no_cache, NULL, NULL, NULL},
		{&opt_from, &a->from, NULL, NULL, NULL},
	};
	const cli_command cmd = {"eval", "usage: git omen eval [<rev>] [<options>]\n",
		"Scores are advisory: the evaluation shows how far to trust them on this history.\n",
		uses, sizeof(uses) / sizeof(uses[0])};
	const char **pos = NULL;
	size_t n;
	int rc;
	memset(a, 0, sizeof(*a));
	a->format = "text";
	if ((rc = cli_parse(&cmd, argc, argv, &pos, &n)) >= 0)
		return rc;
	if (n > 1) {
		rc = cli_usage("eval", "one revision at most; got '%s' and '%s'", pos[0], pos[1]);
		free(pos);
		return rc;
	}
	a->rev = n ? pos[0] : NULL;
	free(pos);
	if (a->folds_set)
		o->folds.folds = (int)a->folds;
	if (a->fold_days_set)
		o->folds.fold_days = a->fold_days;
	if (a->window_set)
		o->folds.gap_days = a->window;
	if (a->seed_set) {
		o->seed = (uint64_t)a->seed;
		o->train.seed = (uint64_t)a->seed;
	}
	if (a->seeds_set)
		o->seeds = (int)a->seeds;
	if (a->bootstrap_set)
		o->bootstrap = (int)a->bootstrap;
	if (a->epochs_set)
		o->train.epochs = (int)a->epochs;
	if (a->threads_set)
		o->train.threads = (int)a->threads;
	return -1;
}

/* Settings from git config: omen.window, omen.threads, omen.effortExclude,
 * omen.memoryLimit; *excl and *excl_text are the caller's to free. */
static int read_config(omen_eval_opts *o, omen_dataset_opts *dso, char ***excl,
	char **excl_text, omen_repo *repo, const eval_args *a)
{
	size_t nexcl = 0;
	int64_t lim = 0;
	/* unset, the gap stays -1: the window the labels were made with (their
	 * header), the rule behind "labels as known at the cut" (issue 16) */
	if (!a->window_set && omen_config_int(&o->folds.gap_days, repo, "omen.window") < 0)
		return -1;
	if (!a->threads_set) {
		int64_t t = o->train.threads;
		if (omen_config_int(&t, repo, "omen.threads") < 0)
			return -1;
		o->train.threads = (int)t;
	}
	if (omen_config_string(excl_text, repo, "omen.effortExclude") < 0)
		return -1;
	if (*excl_text) {
		if (split_globs(excl, &nexcl, *excl_text) < 0)
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		o->effort_exclude = (const char *const *)*excl;
		o->n_effort_exclude = nexcl;
		if (!nexcl)   /* an empty list turns exclusion off */
			o->effort_exclude = (const char *const *)excl_text;
	}
	if (omen_config_int(&lim, repo, "omen.memoryLimit") < 0)
		return -1;
	dso->max_bytes = lim;
	{
		/* the model's threshold fires on omen.warnShare of each fold's validation slice */
		double prec;
		if (omen_warn_config(&o->train.warn_share, &prec, repo) < 0)
			return -1;
	}
	return 0;
}

/* The base model as `train` finds it (issue 11): --from, else omen.baseModel,
 * else the installed one. None: NULL, silently; one that cannot be used
 * (unreadable, damaged, other dimensions): a notice and NULL. *path is the
 * caller's to free. */
static omen_model *find_base(char **path, omen_repo *repo, const eval_args *a,
	const omen_eval_opts *o)
{
	omen_model *base = NULL, *probe = NULL;
	int configured;
	*path = NULL;
	if (a->from) {
		if (!(*path = strdup(a->from)))
			return NULL;
	} else if (omen_base_model_path(path, &configured, repo) < 0 || !*path || !**path) {
		omen_error_clear();
		return NULL;
	}
	if (omen_model_load(&base, *path) < 0 ||
	    omen_model_new(&probe, o->train.dim, o->train.channels, 0) < 0 ||
	    omen_model_copy_weights(probe, base) < 0) {
		cli_notice("cannot use base model '%s': %s; its columns say \"no base model\"", *path,
			omen_error_last());
		omen_error_clear();
		omen_model_free(base);
		base = NULL;
	}
	omen_model_free(probe);
	return base;
}

/* The last figures, for 'git omen health' (issue 12): the JSON report as
 * $GIT_DIR/omen/eval.json, written atomically; a failure is a notice. */
static void save_summary(const omen_eval_result *res, omen_repo *repo)
{
	char *sum = NULL;
	omen_buf j = OMEN_BUF_INIT;
	if (omen_repo_omen_path(&sum, repo, "eval.json") < 0 || omen_eval_write_json(&j, res) < 0 ||
	    omen_file_write_atomic(sum, j.ptr, j.len) < 0) {
		cli_notice("could not save the evaluation summary: %s", omen_error_last());
		omen_error_clear();
	}
	omen_buf_free(&j);
	free(sum);
}

/* The report on standard output, and the HTML file when asked for. */
static int write_reports(const omen_eval_result *res, const eval_args *a)
{
	omen_buf b = OMEN_BUF_INIT;
	int r;
	if (!strcmp(a->format, "json"))
		r = omen_eval_write_json(&b, res);
	else
		r = omen_eval_write_text(&b, res);
	if (r < 0)
		goto out;
	if (b.len && fwrite(b.ptr, 1, b.len, stdout) != b.len) {
		r = omen_error_set(OMEN_EIO, "cannot write standard output");
		goto out;
	}
	if (a->html) {
		omen_buf_clear(&b);
		if ((r = omen_eval_write_html(&b, res, "omen walk-forward evaluation")) < 0 ||
		    (r = omen_file_write_atomic(a->html, b.ptr, b.len)) < 0)
			goto out;
		if (!strcmp(a->format, "text"))
			printf("wrote %s\n", a->html);
	}
out:
	omen_buf_free(&b);
	return r < 0 ? r : 0;
}

int cmd_eval(int argc, char **argv)
{
	omen_eval_opts o;
	omen_eval_result res;
	omen_dataset_opts dso;
	omen_caps caps = OMEN_CAPS_DEFAULT;
	omen_repo *repo = NULL;
	omen_dataset *ds = NULL;
	omen_model *base = NULL;
	progress_state ps = {0, 0};
	eval_args a;
	const char *revs[2] = {NULL, NULL};
	char *default_labels = NULL, *excl_text = NULL, *base_path = NULL;
	char **excl = NULL;
	int rc;

	omen_eval_opts_init(&o);
	memset(&res, 0, sizeof(res));
	memset(&dso, 0, sizeof(dso));
	if ((rc = parse_args(&o, &a, argc, argv)) >= 0)
		return rc;
	rc = EXIT_OK;
	if (omen_repo_open(&repo, NULL) < 0 || read_config(&o, &dso, &excl, &excl_text, repo, &a) < 0)
		goto fatal;
	if (!a.labels) {
		if (omen_labels_path(&default_labels, repo, NULL) < 0)
			goto fatal;
		a.labels = default_labels;
	}
	if (access(a.labels, R_OK) != 0) {
		omen_error_set(OMEN_ENOTFOUND, "cannot read labels '%s': run 'git omen label' first",
			a.labels);
		goto fatal;
	}
	o.labels_path = a.labels;
	revs[0] = a.rev;
	dso.revs = a.rev ? revs : NULL;
	dso.labels_path = a.labels;
	dso.caps = caps;
	dso.use_cache = !a.no_cache;
	if (omen_dataset_build(&ds, repo, &dso) < 0)
		goto fatal;
	base = find_base(&base_path, repo, &a, &o);
	o.base = base;
	o.base_path = base_path;
	ps.tty = isatty(2);
	o.progress = on_progress;
	o.payload = &ps;
	if (omen_eval_run(&res, ds, &o) < 0) {
		if (ps.tty)
			fputc('\n', stderr);
		goto fatal;
	}
	if (write_reports(&res, &a) < 0)
		goto fatal;
	save_summary(&res, repo);
	goto done;
fatal:
	rc = cli_fatal(NULL);
done:
	omen_eval_result_free(&res);
	omen_dataset_free(ds);
	omen_model_free(base);
	free(base_path);
	omen_repo_free(repo);
	free(default_labels);
	free(excl);
	free(excl_text);
	return rc;
}
