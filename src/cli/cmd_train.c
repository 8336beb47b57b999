/* git omen train: build (or reuse) the dataset of the repository's labelled
 * history, train the hierarchical model with its two baselines on a
 * time-ordered split, print them side by side on the test slice and write
 * the model atomically. `--info [FILE]` prints a model's metadata. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include "cli/cli.h"

static const char usage_text[] =
	"usage: git omen train [<rev>] [<options>]\n"
	"   or: git omen train --info [<file>] [--format <fmt>]\n"
	"\n"
	"  --labels <file>        label file (default omen.labels or $GIT_DIR/omen/labels.jsonl)\n"
	"  -o <file>              write the model here (default omen.model or $GIT_DIR/omen/model.omen)\n"
	"  --epochs <n>           most training epochs; early stopping may stop sooner (30)\n"
	"  --seed <n>             random seed (42)\n"
	"  --threads <n>          worker threads (default omen.threads, else online cores, max 2)\n"
	"  --no-cache             rebuild the dataset instead of reusing $GIT_DIR/omen/dataset.cache\n"
	"  --format <fmt>         summary as text (default) or json\n"
	"  --info                 print the metadata of a model file and exit\n"
	"  -h, --help             show this help\n";

typedef struct {
	int tty;
	double start;
} progress_state;

static void on_progress(void *payload, int epoch, int epochs, float loss, float valid_auc,
	double eta_s)
{
	progress_state *p = payload;
	if (!p->tty)
		return;
	if (isnan(valid_auc))   /* the refit on train+validation */
		fprintf(stderr, "\rtrain: refit epoch %d/%d  loss %.4f  about %.0f s left            ",
			epoch, epochs, loss, eta_s);
	else
		fprintf(stderr, "\rtrain: epoch %d/%d  loss %.4f  valid AUC %.3f  about %.0f s left   ",
			epoch, epochs, loss, valid_auc, eta_s);
	fflush(stderr);
}

static void fmt_num(char *buf, size_t n, double v)
{
	if (isfinite(v))
		snprintf(buf, n, "%.3f", v);
	else
		snprintf(buf, n, "-");
}

static void print_row(const char *name, const omen_slice_scores *s)
{
	char a[16], b[16], c[16], d[16];
	fmt_num(a, sizeof(a), s->auc);
	fmt_num(b, sizeof(b), s->ap);
	fmt_num(c, sizeof(c), s->brier);
	fmt_num(d, sizeof(d), s->recall20);
	printf("  %-16s %7s %7s %7s %10s\n", name, a, b, c, d);
}

static void print_text(const omen_train_report *r, const omen_dataset *ds, const char *path)
{
	size_t n = omen_dataset_size(ds), reused = omen_dataset_reused(ds);
	if (reused == n)
		printf("dataset: %zu commits, from the dataset cache\n", n);
	else if (reused)
		printf("dataset: %zu commits, %zu from the dataset cache and %zu read from history\n", n,
			reused, n - reused);
	else
		printf("dataset: %zu commits, read from history\n", n);
	printf("split (time-ordered): train %zu (%zu inducing), validation %zu (%zu), test %zu (%zu)\n",
		r->n_train, r->pos_train, r->n_valid, r->pos_valid, r->n_test, r->pos_test);
	printf("epochs: %d run, best %d by validation AUC; %zu commits capped (largest files and "
		"hunks kept)\n", r->epochs_run, r->best_epoch, r->capped_commits);
	printf("test slice, newest %zu labelled commits:\n", r->n_test);
	printf("  %-16s %7s %7s %7s %10s\n", "", "AUC", "AP", "Brier", "Recall@20%");
	print_row("model", &r->model);
	print_row("lr on metrics", &r->lr_metrics);
	print_row("lines added", &r->lines_added);
	{
		/* say it in words when a baseline ranks the test slice better */
		const omen_slice_scores *b = isnan(r->lines_added.auc) ||
			r->lr_metrics.auc >= r->lines_added.auc ? &r->lr_metrics : &r->lines_added;
		if (isfinite(r->model.auc) && isfinite(b->auc) && b->auc > r->model.auc)
			printf("note: %s ranks this test slice better than the model (AUC %.3f vs %.3f); "
				"on small histories the simple baselines are often as good\n",
				b == &r->lr_metrics ? "lr on metrics" : "lines added", b->auc, r->model.auc);
	}
	printf("threshold %.3f (max F1 on validation); %.1f s\n", r->threshold, r->seconds);
	printf("wrote %s (refit on train+validation; scores are advisory)\n", path);
}

static void json_scores(omen_buf *b, const char *name, const omen_slice_scores *s)
{
	omen_buf_printf(b, "\"%s\":{\"n\":%zu,\"positives\":%zu", name, s->n, s->positives);
	if (isfinite(s->auc)) omen_buf_printf(b, ",\"auc\":%.6f", s->auc);
	if (isfinite(s->ap)) omen_buf_printf(b, ",\"ap\":%.6f", s->ap);
	if (isfinite(s->brier)) omen_buf_printf(b, ",\"brier\":%.6f", s->brier);
	if (isfinite(s->recall20)) omen_buf_printf(b, ",\"recall_at_20_effort\":%.6f", s->recall20);
	omen_buf_puts(b, "}");
}

static void print_json(const omen_train_report *r, const omen_dataset *ds, const char *path)
{
	omen_buf b = OMEN_BUF_INIT;
	omen_buf_printf(&b, "{\"model\":");
	omen_buf_put_json_string(&b, path, strlen(path));
	omen_buf_printf(&b, ",\"dataset\":{\"commits\":%zu,\"from_cache\":%zu}",
		omen_dataset_size(ds), omen_dataset_reused(ds));
	omen_buf_printf(&b, ",\"n_train\":%zu,\"n_valid\":%zu,\"n_test\":%zu,\"pos_train\":%zu,"
		"\"pos_valid\":%zu,\"pos_test\":%zu,\"capped_commits\":%zu,\"epochs_run\":%d,"
		"\"best_epoch\":%d,\"threshold\":%.6f,\"seconds\":%.3f,\"test\":{",
		r->n_train, r->n_valid, r->n_test, r->pos_train, r->pos_valid, r->pos_test,
		r->capped_commits, r->epochs_run, r->best_epoch, r->threshold, r->seconds);
	json_scores(&b, "model", &r->model);
	omen_buf_puts(&b, ",");
	json_scores(&b, "lr_metrics", &r->lr_metrics);
	omen_buf_puts(&b, ",");
	json_scores(&b, "lines_added", &r->lines_added);
	omen_buf_puts(&b, "}}\n");
	if (b.ptr)
		fputs(b.ptr, stdout);
	omen_buf_free(&b);
}

/* A string of a model file (outside bytes) as shown text, in b. */
static const char *shown_str(omen_buf *b, const char *s)
{
	omen_buf_clear(b);
	return omen_buf_puts_shown(b, s, 0) || !b->ptr ? "" : b->ptr;
}

static void print_info_text(const cJSON *j, const char *path)
{
	omen_buf s1 = OMEN_BUF_INIT, s2 = OMEN_BUF_INIT;
	const cJSON *tr = cJSON_GetObjectItemCaseSensitive(j, "training");
	const cJSON *dims = cJSON_GetObjectItemCaseSensitive(j, "dims");
	const cJSON *te = cJSON_GetObjectItemCaseSensitive(j, "test");
	const cJSON *v;
	printf("model       %s\n", path);
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "arch")) && cJSON_IsString(v))
		printf("arch        %s, format version %d\n", shown_str(&s1, v->valuestring),
			cJSON_GetObjectItemCaseSensitive(j, "version")
			? cJSON_GetObjectItemCaseSensitive(j, "version")->valueint : 0);
	if (dims)
		printf("dims        D=%d C=%d vocabulary %d, message vocabulary %d, %d parameters\n",
			cJSON_GetObjectItemCaseSensitive(dims, "D")->valueint,
			cJSON_GetObjectItemCaseSensitive(dims, "C")->valueint,
			cJSON_GetObjectItemCaseSensitive(dims, "V")->valueint,
			cJSON_GetObjectItemCaseSensitive(dims, "VM")->valueint,
			(int)cJSON_GetObjectItemCaseSensitive(dims, "nparams")->valuedouble);
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "head")) && cJSON_IsString(v) && v->valuestring[0])
		printf("head        %s\n", shown_str(&s1, v->valuestring));
	if (tr) {
		const cJSON *a = cJSON_GetObjectItemCaseSensitive(tr, "date");
		const cJSON *f = cJSON_GetObjectItemCaseSensitive(tr, "first_time");
		const cJSON *l = cJSON_GetObjectItemCaseSensitive(tr, "last_labelled_time");
		if (cJSON_IsString(a))
			printf("trained     %s\n", shown_str(&s1, a->valuestring));
		if (cJSON_IsString(f) && cJSON_IsString(l))
			printf("range       %s .. %s (labelled)\n", shown_str(&s1, f->valuestring),
				shown_str(&s2, l->valuestring));
		printf("split       train %.0f, validation %.0f, test %.0f commits\n",
			cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(tr, "n_train")),
			cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(tr, "n_valid")),
			cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(tr, "n_test")));
		printf("epochs      %.0f (best of %.0f run)\n",
			cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(tr, "best_epoch")),
			cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(tr, "epochs_run")));
	}
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "threshold")))
		printf("threshold   %.3f\n", cJSON_GetNumberValue(v));
	if (te) {
		static const char *const names[3] = {"model", "lr_metrics", "lines_added"};
		int i;
		for (i = 0; i < 3; i++) {
			const cJSON *s = cJSON_GetObjectItemCaseSensitive(te, names[i]);
			if (!s)
				continue;
			printf("test %-11s AUC %.3f  AP %.3f\n", names[i],
				cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(s, "auc")),
				cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(s, "ap")));
		}
	}
	omen_buf_free(&s1);
	omen_buf_free(&s2);
}

static int default_model_path(char **out, omen_repo *repo)
{
	int e;
	*out = NULL;
	if ((e = omen_config_string(out, repo, "omen.model")))
		return e;
	if (*out)
		return 0;
	return omen_repo_omen_path(out, repo, "model.omen");
}

static int cmd_info(const char *file, const char *format)
{
	omen_repo *repo = NULL;
	omen_model *m = NULL;
	char *path = NULL;
	int rc = EXIT_OK;
	if (file) {
		path = strdup(file);
	} else {
		if (omen_repo_open(&repo, NULL) || default_model_path(&path, repo)) {
			rc = cli_fatal(NULL);
			goto out;
		}
	}
	if (!path) {
		rc = cli_fatal("out of memory");
		goto out;
	}
	if (omen_model_load(&m, path)) {
		rc = cli_fatal(NULL);
		goto out;
	}
	if (!strcmp(format, "json")) {
		cJSON *j = cJSON_Duplicate(omen_model_meta(m), 1);
		char *s;
		cJSON_DeleteItemFromObjectCaseSensitive(j, "tensors");
		s = cJSON_Print(j);
		if (s)
			printf("%s\n", s);
		free(s);
		cJSON_Delete(j);
	} else {
		print_info_text(omen_model_meta(m), path);
	}
out:
	omen_model_free(m);
	omen_repo_free(repo);
	free(path);
	return rc;
}

int cmd_train(int argc, char **argv)
{
	omen_train_opts o;
	omen_train_report rep;
	omen_dataset_opts dopt;
	omen_repo *repo = NULL;
	omen_dataset *ds = NULL;
	omen_model *m = NULL;
	progress_state ps;
	const char *out_path = NULL, *labels = NULL, *format = "text", *rev = NULL, *val;
	const char *revs[2] = {NULL, NULL};
	char *model_path = NULL, *lock_path = NULL;
	int i, r, rc = EXIT_OK, info = 0, no_cache = 0, lock_fd = -1, e;
	long long n;
	int64_t v64;

	omen_train_opts_init(&o);
	for (i = 1; i < argc; i++) {
		const char *a = argv[i];
		if (!strcmp(a, "-h") || !strcmp(a, "--help")) {
			fputs(usage_text, stdout);
			return EXIT_OK;
		} else if (!strcmp(a, "--info")) {
			info = 1;
		} else if (!strcmp(a, "--no-cache")) {
			no_cache = 1;
		} else if ((r = cli_opt_value(argc, argv, &i, "-o", &val))) {
			if (r < 0) goto missing;
			out_path = val;
		} else if ((r = cli_opt_value(argc, argv, &i, "--labels", &val))) {
			if (r < 0) goto missing;
			labels = val;
		} else if ((r = cli_opt_value(argc, argv, &i, "--epochs", &val))) {
			if (r < 0) goto missing;
			if (cli_parse_int(&n, val, 1, 10000))
				return cli_usage("train", "--epochs: '%s' is not a count from 1 to 10000", val);
			o.epochs = (int)n;
		} else if ((r = cli_opt_value(argc, argv, &i, "--seed", &val))) {
			if (r < 0) goto missing;
			if (cli_parse_int(&n, val, 0, INT64_MAX))
				return cli_usage("train", "--seed: '%s' is not a non-negative integer", val);
			o.seed = (uint64_t)n;
		} else if ((r = cli_opt_value(argc, argv, &i, "--threads", &val))) {
			if (r < 0) goto missing;
			if (cli_parse_int(&n, val, 1, 64))
				return cli_usage("train", "--threads: '%s' is not a count from 1 to 64", val);
			o.threads = (int)n;
		} else if ((r = cli_opt_value(argc, argv, &i, "--format", &val))) {
			if (r < 0) goto missing;
			if (strcmp(val, "text") && strcmp(val, "json"))
				return cli_usage("train", "--format: '%s' is not text or json", val);
			format = val;
		} else if (a[0] == '-' && a[1]) {
			return cli_usage("train", "unknown option '%s'", a);
		} else if (!rev) {
			rev = a;
		} else {
			return cli_usage("train", "more than one revision ('%s', '%s')", rev, a);
		}
	}
	if (info)
		return cmd_info(rev, format);

	if (omen_repo_open(&repo, NULL)) {
		rc = cli_fatal(NULL);
		goto out;
	}
	if (out_path) {
		if (!(model_path = strdup(out_path))) {
			rc = cli_fatal("out of memory");
			goto out;
		}
	} else if (default_model_path(&model_path, repo)) {
		rc = cli_fatal(NULL);
		goto out;
	}
	if (!o.threads) {
		v64 = 0;
		if (omen_config_int(&v64, repo, "omen.threads")) {
			rc = cli_fatal(NULL);
			goto out;
		}
		if (v64 > 0)
			o.threads = v64 > 64 ? 64 : (int)v64;
	}
	/* one train per repository at a time: a second one refuses */
	if (omen_repo_omen_path(&lock_path, repo, "train.lock")) {
		rc = cli_fatal(NULL);
		goto out;
	}
	if ((e = omen_lock_acquire(&lock_fd, lock_path, 0))) {
		lock_fd = -1;
		if (e == OMEN_ELOCKED)
			fprintf(stderr, "git omen: cannot train: another 'git omen train' is running on this "
				"repository (lock '%s')\n", lock_path);
		else
			cli_fatal(NULL);
		rc = EXIT_FATAL;
		goto out;
	}
	memset(&dopt, 0, sizeof(dopt));
	{
		omen_caps caps = OMEN_CAPS_DEFAULT;
		dopt.caps = caps;
	}
	if (rev) {
		revs[0] = rev;
		dopt.revs = revs;
	}
	dopt.labels_path = labels;   /* NULL: omen.labels, else the default file */
	dopt.use_cache = !no_cache;
	v64 = 0;
	if (omen_config_int(&v64, repo, "omen.memoryLimit")) {
		rc = cli_fatal(NULL);
		goto out;
	}
	dopt.max_bytes = v64;
	if (omen_dataset_build(&ds, repo, &dopt)) {
		rc = cli_fatal(NULL);
		goto out;
	}
	o.caps = dopt.caps;
	ps.tty = isatty(2);
	ps.start = omen_now();
	o.progress = on_progress;
	o.payload = &ps;
	e = omen_model_train(&m, &rep, ds, &o);
	if (ps.tty)
		fputs("\r\033[K", stderr);
	if (e) {
		rc = cli_fatal(NULL);
		goto out;
	}
	if (omen_model_save(m, model_path)) {
		rc = cli_fatal(NULL);
		goto out;
	}
	if (!strcmp(format, "json"))
		print_json(&rep, ds, model_path);
	else
		print_text(&rep, ds, model_path);
out:
	if (lock_fd >= 0)
		omen_lock_release(lock_fd);
	omen_model_free(m);
	omen_dataset_free(ds);
	omen_repo_free(repo);
	free(model_path);
	free(lock_path);
	return rc;
missing:
	return cli_usage("train", "option '%s' needs a value", argv[i]);
}
