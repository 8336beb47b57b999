/* git omen eval: walk-forward evaluation of the model against its baselines
 * and honest references, as text, JSON and a self-contained HTML report. */
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include "cli/cli.h"

static const char usage_text[] =
	"usage: git omen eval [<rev>] [<options>]\n"
	"\n"
	"  --folds <n>            number of test windows (5)\n"
	"  --fold-days <d>        width of a test window in days (auto: half the labelled\n"
	"                         history shared among the folds)\n"
	"  --gap-days <d>         days left out between training and test (the labels' window,\n"
	"                         omen.window when they were made, 90)\n"
	"  --format <fmt>         text (default) or json\n"
	"  --html <file>          also write a self-contained HTML report with plots\n"
	"  --seed <n>             seed of the training runs and of the bootstrap (1)\n"
	"  --seeds <n>            run the folds over n seeds (seed, seed+1, ...) and report the\n"
	"                         mean and spread of the pooled figures (1)\n"
	"  --bootstrap <n>        resamples for the AUC intervals (1000)\n"
	"  --epochs <n>           most training epochs per fold (the trainer's default)\n"
	"  --threads <n>          training threads (omen.threads, else online cores, max 2)\n"
	"  --labels <file>        label file (omen.labels, else $GIT_DIR/omen/labels.jsonl)\n"
	"  --no-cache             rebuild the dataset instead of reading its cache\n"
	"  -h, --help             show this help\n"
	"\n"
	"Scores are advisory: the evaluation shows how far to trust them on this history.\n";

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

int cmd_eval(int argc, char **argv)
{
	omen_eval_opts o;
	omen_eval_result res;
	omen_dataset_opts dso;
	omen_caps caps = OMEN_CAPS_DEFAULT;
	omen_repo *repo = NULL;
	omen_dataset *ds = NULL;
	omen_buf b = OMEN_BUF_INIT;
	progress_state ps = {0, 0};
	const char *format = "text", *html = NULL, *labels = NULL, *rev = NULL, *val;
	const char *revs[2] = {NULL, NULL};
	char *default_labels = NULL, *excl_text = NULL;
	char **excl = NULL;
	size_t nexcl = 0;
	int i, r, rc = EXIT_OK, gap_set = 0, threads_set = 0, no_cache = 0;
	long long n;

	omen_eval_opts_init(&o);
	memset(&res, 0, sizeof(res));
	for (i = 1; i < argc; i++) {
		const char *a = argv[i];
		if (!strcmp(a, "-h") || !strcmp(a, "--help")) {
			fputs(usage_text, stdout);
			goto done;
		} else if ((r = cli_opt_value(argc, argv, &i, "--folds", &val))) {
			if (r < 0)
				goto missing;
			if (cli_parse_int(&n, val, 1, 1000)) {
				rc = cli_usage("eval", "--folds: '%s' is not a count from 1 to 1000", val);
				goto done;
			}
			o.folds.folds = (int)n;
		} else if ((r = cli_opt_value(argc, argv, &i, "--fold-days", &val))) {
			if (r < 0)
				goto missing;
			if (cli_parse_int(&n, val, 1, 100000)) {
				rc = cli_usage("eval", "--fold-days: '%s' is not a number of days", val);
				goto done;
			}
			o.folds.fold_days = n;
		} else if ((r = cli_opt_value(argc, argv, &i, "--gap-days", &val))) {
			if (r < 0)
				goto missing;
			if (cli_parse_int(&n, val, 0, 100000)) {
				rc = cli_usage("eval", "--gap-days: '%s' is not a number of days", val);
				goto done;
			}
			o.folds.gap_days = n;
			gap_set = 1;
		} else if ((r = cli_opt_value(argc, argv, &i, "--format", &val))) {
			if (r < 0)
				goto missing;
			if (strcmp(val, "text") && strcmp(val, "json")) {
				rc = cli_usage("eval", "--format: '%s' is not text or json", val);
				goto done;
			}
			format = val;
		} else if ((r = cli_opt_value(argc, argv, &i, "--html", &val))) {
			if (r < 0)
				goto missing;
			html = val;
		} else if ((r = cli_opt_value(argc, argv, &i, "--seed", &val))) {
			if (r < 0)
				goto missing;
			if (cli_parse_int(&n, val, 0, INT64_MAX)) {
				rc = cli_usage("eval", "--seed: '%s' is not a number", val);
				goto done;
			}
			o.seed = (uint64_t)n;
			o.train.seed = (uint64_t)n;
		} else if ((r = cli_opt_value(argc, argv, &i, "--seeds", &val))) {
			if (r < 0)
				goto missing;
			if (cli_parse_int(&n, val, 1, 100)) {
				rc = cli_usage("eval", "--seeds: '%s' is not a count from 1 to 100", val);
				goto done;
			}
			o.seeds = (int)n;
		} else if ((r = cli_opt_value(argc, argv, &i, "--bootstrap", &val))) {
			if (r < 0)
				goto missing;
			if (cli_parse_int(&n, val, 0, 1000000)) {
				rc = cli_usage("eval", "--bootstrap: '%s' is not a count", val);
				goto done;
			}
			o.bootstrap = (int)n;
		} else if ((r = cli_opt_value(argc, argv, &i, "--epochs", &val))) {
			if (r < 0)
				goto missing;
			if (cli_parse_int(&n, val, 1, 100000)) {
				rc = cli_usage("eval", "--epochs: '%s' is not a count", val);
				goto done;
			}
			o.train.epochs = (int)n;
		} else if ((r = cli_opt_value(argc, argv, &i, "--threads", &val))) {
			if (r < 0)
				goto missing;
			if (cli_parse_int(&n, val, 0, 1024)) {
				rc = cli_usage("eval", "--threads: '%s' is not a count", val);
				goto done;
			}
			o.train.threads = (int)n;
			threads_set = 1;
		} else if ((r = cli_opt_value(argc, argv, &i, "--labels", &val))) {
			if (r < 0)
				goto missing;
			labels = val;
		} else if (!strcmp(a, "--no-cache")) {
			no_cache = 1;
		} else if (a[0] == '-' && a[1]) {
			rc = cli_usage("eval", "unknown option '%s'; see 'git omen eval --help'", a);
			goto done;
		} else if (rev) {
			rc = cli_usage("eval", "one revision at most; got '%s' and '%s'", rev, a);
			goto done;
		} else {
			rev = a;
		}
	}

	if (omen_repo_open(&repo, NULL) < 0) {
		rc = cli_fatal(NULL);
		goto done;
	}
	/* without --gap-days the gap is the window the labels were made with
	 * (their header), which is the rule behind "labels as known at the cut" */
	(void)gap_set;
	if (!threads_set) {
		int64_t t = o.train.threads;
		if (omen_config_int(&t, repo, "omen.threads") < 0) {
			rc = cli_fatal(NULL);
			goto done;
		}
		o.train.threads = (int)t;
	}
	if (omen_config_string(&excl_text, repo, "omen.effortExclude") < 0) {
		rc = cli_fatal(NULL);
		goto done;
	}
	if (excl_text) {
		if (split_globs(&excl, &nexcl, excl_text) < 0) {
			rc = cli_fatal("out of memory");
			goto done;
		}
		o.effort_exclude = (const char *const *)excl;
		o.n_effort_exclude = nexcl;
		if (!nexcl)   /* an empty list turns exclusion off */
			o.effort_exclude = (const char *const *)&excl_text;
	}
	if (!labels) {
		if (omen_labels_path(&default_labels, repo, NULL) < 0) {
			rc = cli_fatal(NULL);
			goto done;
		}
		labels = default_labels;
	}
	if (access(labels, R_OK) != 0) {
		fprintf(stderr, "git omen: cannot read labels '%s': run 'git omen label' first\n", labels);
		rc = EXIT_FATAL;
		goto done;
	}
	o.labels_path = labels;
	memset(&dso, 0, sizeof(dso));
	revs[0] = rev;
	dso.revs = rev ? revs : NULL;
	dso.labels_path = labels;
	dso.caps = caps;
	dso.use_cache = !no_cache;
	{
		int64_t lim = 0;
		if (omen_config_int(&lim, repo, "omen.memoryLimit") < 0) {
			rc = cli_fatal(NULL);
			goto done;
		}
		dso.max_bytes = lim;
	}
	if (omen_dataset_build(&ds, repo, &dso) < 0) {
		rc = cli_fatal(NULL);
		goto done;
	}
	ps.tty = isatty(2);
	o.progress = on_progress;
	o.payload = &ps;
	if (omen_eval_run(&res, ds, &o) < 0) {
		if (ps.tty)
			fputc('\n', stderr);
		rc = cli_fatal(NULL);
		goto done;
	}
	if (!strcmp(format, "json"))
		r = omen_eval_write_json(&b, &res);
	else
		r = omen_eval_write_text(&b, &res);
	if (r < 0) {
		rc = cli_fatal(NULL);
		goto done;
	}
	fwrite(b.ptr, 1, b.len, stdout);
	if (html) {
		omen_buf_clear(&b);
		if (omen_eval_write_html(&b, &res, "omen walk-forward evaluation") < 0 ||
		    omen_file_write_atomic(html, b.ptr, b.len) < 0) {
			rc = cli_fatal(NULL);
			goto done;
		}
		if (!strcmp(format, "text"))
			printf("wrote %s\n", html);
	}
	goto done;
missing:
	rc = cli_usage("eval", "option '%s' needs a value", argv[i]);
done:
	omen_buf_free(&b);
	omen_eval_result_free(&res);
	omen_dataset_free(ds);
	omen_repo_free(repo);
	free(default_labels);
	free(excl);
	free(excl_text);
	return rc;
}
