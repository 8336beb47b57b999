/* git omen train: build (or reuse) the dataset of the repository's labelled
 * history, train the hierarchical model with its two baselines on a
 * time-ordered split, print them side by side on the test slice and write
 * the model atomically. `--info` prints a model's metadata. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include "cli/cli.h"
#include "omen/mpi.h"
#include "cli/options.h"
#include "omen/base.h"
#include "omen/shard.h"

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
	{
		char d1[16];
		omen_format_date(d1, r->labels_known);
		printf("split (time-ordered): train %zu (%zu inducing), validation %zu (%zu), labels as "
			"known on %s; a %lld-day gap; test %zu (%zu), labels as known now\n",
			r->n_train, r->pos_train, r->n_valid, r->pos_valid, d1, (long long)r->gap_days,
			r->n_test, r->pos_test);
		if (r->n_relabelled)
			printf("labels as known on %s: %zu training commits inducing now were still clean "
				"then (fixed later) and are trained on as clean\n", d1, r->n_relabelled);
	}
	printf("epochs: %d run, best %d by validation AUC; %zu commits capped (largest files and "
		"hunks kept)\n", r->epochs_run, r->best_epoch, r->capped_commits);
	{
		char d1[16], d2[16];
		omen_format_date(d1, r->test_start);
		omen_format_date(d2, r->test_end);
		printf("test slice, %zu labelled commits from %s to %s (%zu newer inducing ones, inside "
			"the verification window, left out); model trained on labels as known on %s:\n",
			r->n_test, d1, d2, r->n_window_left_out, d1);
	}
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
	{
		const omen_ship_check *c = &r->check;
		char d1[16], p[16], q[16], b1[16], b2[16], e1[16];
		omen_format_date(d1, c->start);
		if (!c->n) {
			printf("shipped model (%s): %s; too few inducing or clean commits in the test "
				"slice's older half (%d of each needed) for a held-out check of its "
				"calibration\n", r->refit ? "refit on train+validation" : "the evaluation model",
				r->refit ? "calibrated on the whole test slice" : "calibrated on validation",
				5);
			goto done;
		}
		fmt_num(p, sizeof(p), c->precision);
		fmt_num(q, sizeof(q), c->recall);
		fmt_num(b1, sizeof(b1), c->brier);
		fmt_num(b2, sizeof(b2), c->brier_base);
		fmt_num(e1, sizeof(e1), c->ece);
		printf("shipped model (%s), calibrated on the test slice's older %zu commits, checked "
			"on its newest %zu (%zu inducing, from %s; never trained nor calibrated on):\n",
			r->refit ? "refit on train+validation" : "the evaluation model", c->n_calib, c->n,
			c->positives, d1);
		printf("  threshold %.3f: precision %s, recall %s; Brier %s (%s for the calibration "
			"part's base rate), ECE %s, mean probability %.3f\n", c->threshold, p, q, b1, b2, e1,
			c->mean_prob);
	}
done:
	printf("evaluation model threshold %.3f (fires on the riskiest %.0f%% of the validation "
		"slice; max F1 there %.3f); %.1f s\n", r->threshold, 100.0 * r->warn_share,
		r->threshold_f1, r->seconds);
	printf("wrote %s (scores are advisory)\n", path);
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
	omen_buf_puts(&b, "}");
	{
		char d1[16], d2[16];
		const omen_ship_check *c = &r->check;
		omen_format_date(d1, r->labels_known);
		omen_format_date(d2, c->start);
		omen_buf_printf(&b, ",\"labels_known\":\"%s\",\"gap_days\":%lld,"
			"\"relabelled_clean_at_cut\":%zu", d1, (long long)r->gap_days, r->n_relabelled);
		if (!c->n) {
			omen_buf_puts(&b, ",\"check\":null}\n");
			goto print;
		}
		omen_buf_printf(&b, ",\"check\":{\"start\":\"%s\",\"n\":%zu,"
			"\"positives\":%zu,\"n_calib\":%zu,\"threshold\":%.6f,\"mean_prob\":%.6f",
			d2, c->n, c->positives, c->n_calib, c->threshold, c->mean_prob);
		if (isfinite(c->precision)) omen_buf_printf(&b, ",\"precision\":%.6f", c->precision);
		if (isfinite(c->recall)) omen_buf_printf(&b, ",\"recall\":%.6f", c->recall);
		if (isfinite(c->brier)) omen_buf_printf(&b, ",\"brier\":%.6f", c->brier);
		if (isfinite(c->brier_base)) omen_buf_printf(&b, ",\"brier_base\":%.6f", c->brier_base);
		if (isfinite(c->ece)) omen_buf_printf(&b, ",\"ece\":%.6f", c->ece);
		omen_buf_puts(&b, "}}\n");
	}
print:
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
	/* a base model (issue 11), or a model fine-tuned from one */
	for (int k = 0; k < 2; k++) {
		const cJSON *b = cJSON_GetObjectItemCaseSensitive(j, k ? "from_base" : "base");
		const cJSON *dt = cJSON_GetObjectItemCaseSensitive(b, "date");
		if (!cJSON_IsObject(b))
			continue;
		printf("%s%.0f histories, %.0f training commits, built %s\n",
			k ? "from base   " : "base model  ",
			cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(b, "histories")),
			cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(b, "n_train")),
			cJSON_IsString(dt) ? dt->valuestring : "?");
	}
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
		omen_error_set(OMEN_ENOMEM, "out of memory");
		rc = cli_fatal(NULL);
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

static const cli_option opt_info = {
	"--info", CLI_FLAG, NULL, 0, 0, NULL,
	"print the metadata of the model file (--model, else the default) and exit"};

/* the base model (issue 11) */
static const cli_option opt_from = {
	"--from", CLI_STRING, "<file>", 0, 0, NULL,
	"fine-tune from this base model (default omen.baseModel, if set)"};
static const cli_option opt_scratch = {
	"--scratch", CLI_FLAG, NULL, 0, 0, NULL,
	"train from fresh weights even when a base model is set"};
static const cli_option opt_shard = {
	"--shard", CLI_STRING, "<file>", 0, 0, NULL,
	"write the dataset as a shard of the base model's corpus instead of training"};
static const cli_option opt_base = {
	"--base", CLI_STRING, "<dir>", 0, 0, NULL,
	"train the base model from every *.shard in <dir> (needs --model)"};

typedef struct {
	const char *model, *labels, *format, *rev;
	const char *revs[2];   /* {rev, NULL} for the dataset */
	const char *from, *shard, *base_dir;
	long long epochs, seed, threads;
	int epochs_set, seed_set, threads_set, info, no_cache, scratch;
} train_args;

/* Parses argv into o and a; -1 to go on, else the exit code. */
static int parse_args(omen_train_opts *o, train_args *a, int argc, char **argv)
{
	const cli_use uses[] = {
		{&cli_opt_labels, &a->labels, NULL, NULL, NULL},
		{&cli_opt_model, &a->model, NULL,
			"write the model here (default omen.model, else $GIT_DIR/omen/model.omen)", NULL},
		{&cli_opt_epochs, &a->epochs, NULL, NULL, &a->epochs_set},
		{&cli_opt_seed, &a->seed, NULL, NULL, &a->seed_set},
		{&cli_opt_threads, &a->threads, NULL, NULL, &a->threads_set},
		{&cli_opt_no_cache, &a->no_cache, NULL, NULL, NULL},
		{&cli_opt_format, &a->format, cli_formats_text_json, NULL, NULL},
		{&opt_info, &a->info, NULL, NULL, NULL},
		{&opt_from, &a->from, NULL, NULL, NULL},
		{&opt_scratch, &a->scratch, NULL, NULL, NULL},
		{&opt_shard, &a->shard, NULL, NULL, NULL},
		{&opt_base, &a->base_dir, NULL, NULL, NULL},
	};
	const cli_command cmd = {"train",
		"usage: git omen train [<rev>] [<options>]\n"
		"   or: git omen train --info [--model <file>] [--format <fmt>]\n"
		"   or: git omen train [<rev>] --shard <file>\n"
		"   or: git omen train --base <dir> --model <file> [<options>]\n", NULL,
		uses, sizeof(uses) / sizeof(uses[0])};
	const char **pos = NULL;
	size_t n;
	int rc;
	memset(a, 0, sizeof(*a));
	a->format = "text";
	if ((rc = cli_parse(&cmd, argc, argv, &pos, &n)) >= 0)
		return rc;
	rc = -1;
	if (n > 1)
		rc = cli_usage("train", "more than one revision ('%s', '%s')", pos[0], pos[1]);
	else if (n && a->info && a->model)
		rc = cli_usage("train", "--info reads the --model file; got '%s' too", pos[0]);
	else if (n && a->info) {
		/* the old spelling `train --info <file>` */
		cli_notice("'--info <file>' is now '--info --model <file>'; the old form goes in a "
			"later release");
		a->model = pos[0];
	} else if (n)
		a->rev = pos[0];
	free(pos);
	if (a->epochs_set)
		o->epochs = (int)a->epochs;
	if (a->seed_set)
		o->seed = (uint64_t)a->seed;
	if (a->threads_set)
		o->threads = (int)a->threads;
	return rc;
}

/* The repository's train lock, held until omen_lock_release(*fd). */
static int take_lock(int *fd, char **lock_path, omen_repo *repo)
{
	int e;
	*fd = -1;
	if ((e = omen_repo_omen_path(lock_path, repo, "train.lock")))
		return e;
	if ((e = omen_lock_acquire(fd, *lock_path, 0))) {
		*fd = -1;
		if (e == OMEN_ELOCKED)
			return omen_error_set(e, "cannot train: another 'git omen train' is running on "
				"this repository (lock '%s')", *lock_path);
		return e;
	}
	return 0;
}

/* The dataset of the labelled history up to rev (NULL: HEAD). */
static int build_dataset(omen_dataset **ds, omen_dataset_opts *dopt, omen_repo *repo,
	train_args *a)
{
	omen_caps caps = OMEN_CAPS_DEFAULT;
	int64_t v64 = 0;
	memset(dopt, 0, sizeof(*dopt));
	dopt->caps = caps;
	if (a->rev) {
		a->revs[0] = a->rev;
		dopt->revs = a->revs;
	}
	dopt->labels_path = a->labels;   /* NULL: omen.labels, else the default file */
	dopt->use_cache = !a->no_cache;
	if (omen_config_int(&v64, repo, "omen.memoryLimit"))
		return -1;
	dopt->max_bytes = v64;
	return omen_dataset_build(ds, repo, dopt);
}

int cmd_train(int argc, char **argv)
{
	omen_train_opts o;
	omen_train_report rep;
	omen_label_clock clock;
	omen_dataset_opts dopt;
	omen_repo *repo = NULL;
	omen_dataset *ds = NULL;
	omen_model *m = NULL, *base = NULL;
	progress_state ps;
	train_args a;
	char *from_cfg = NULL;
	char *model_path = NULL, *lock_path = NULL;
	int rc, lock_fd = -1, e, rank = omen_mpi_rank();
	int64_t v64;

	omen_train_opts_init(&o);
	memset(&clock, 0, sizeof(clock));
	if ((rc = parse_args(&o, &a, argc, argv)) >= 0)
		return rc;
	if (a.info)
		return cmd_info(a.model, a.format);
	if (a.base_dir && (a.shard || a.rev || a.labels || a.no_cache || a.from || a.scratch))
		return cli_usage("train", "--base reads shards: no revision, --shard, --labels, "
			"--no-cache, --from or --scratch with it");
	if (a.base_dir)
		return cmd_train_base(a.base_dir, a.model, &o, a.format);
	rc = EXIT_OK;
	if (omen_repo_open(&repo, NULL))
		goto fatal;
	if (a.model) {
		if (!(model_path = strdup(a.model))) {
			omen_error_set(OMEN_ENOMEM, "out of memory");
			goto fatal;
		}
	} else if (default_model_path(&model_path, repo)) {
		goto fatal;
	}
	if (!o.threads) {
		v64 = 0;
		if (omen_config_int(&v64, repo, "omen.threads"))
			goto fatal;
		if (v64 > 0)
			o.threads = v64 > OMEN_THREADS_MAX ? OMEN_THREADS_MAX : (int)v64;
	}
	{
		double prec;
		if (omen_warn_config(&o.warn_share, &prec, repo))
			goto fatal;
	}
	/* one train per repository at a time: a second one refuses. Under
	 * mpirun (issue 13) rank 0 holds the lock and builds the dataset first
	 * (it writes the dataset cache); the other ranks then read it. */
	if (rank == 0 && (take_lock(&lock_fd, &lock_path, repo) || build_dataset(&ds, &dopt, repo, &a)))
		goto fatal;
	if (omen_mpi_barrier() || (rank != 0 && build_dataset(&ds, &dopt, repo, &a)))
		goto fatal;
	o.caps = dopt.caps;
	if (a.shard) {
		size_t k, nl = 0, np = 0;
		if (rank != 0)
			goto out;   /* rank 0 writes the shard */
		if (omen_shard_write(ds, &dopt.caps, a.shard))
			goto fatal;
		for (k = 0; k < omen_dataset_size(ds); k++) {
			nl += omen_dataset_get(ds, k)->label >= 0;
			np += omen_dataset_get(ds, k)->label > 0;
		}
		printf("wrote shard %s: %zu commits, %zu labelled (%zu inducing), %zu capped\n",
			a.shard, omen_dataset_size(ds), nl, np, omen_dataset_capped(ds));
		goto out;
	}
	/* the fix times behind "labels as known at the test start" (issue 16) */
	{
		char *lp = NULL;
		if (!a.labels && omen_labels_path(&lp, repo, NULL))
			goto fatal;
		e = omen_label_clock_load(&clock, ds, a.labels ? a.labels : lp);
		free(lp);
		if (e)
			goto fatal;
		o.clock = &clock;
	}
	/* fine-tuning: the base model named, else omen.baseModel, else the
	 * installed one (omen_base_model_path); one that cannot be used is a
	 * notice, and training starts from scratch */
	if (!a.scratch && !a.from) {
		int configured;
		if (omen_base_model_path(&from_cfg, &configured, repo))
			goto fatal;
		if (from_cfg && *from_cfg)
			a.from = from_cfg;
	}
	if (!a.scratch && a.from) {
		omen_model *probe = NULL;
		if (omen_model_load(&base, a.from) || omen_model_new(&probe, o.dim, o.channels, 0) ||
			omen_model_copy_weights(probe, base)) {
			cli_notice("cannot use base model '%s': %s; training from scratch", a.from,
				omen_error_last());
			omen_model_free(base);
			base = NULL;
		}
		omen_model_free(probe);
		o.init = base;
	}
	omen_mpi_train_setup(&o);
	ps.tty = rank == 0 && isatty(2);
	ps.start = omen_now();
	o.progress = on_progress;
	o.payload = &ps;
	e = omen_model_train(&m, &rep, ds, &o);
	if (ps.tty)
		fputs("\r\033[K", stderr);
	if (e == OMEN_EINVAL && base && !strncmp(omen_error_last(), "too few", 7)) {
		/* a young repository: the base model, standardized on its commits */
		char why[512];
		snprintf(why, sizeof(why), "%s", omen_error_last());
		if (rank != 0)
			goto out;   /* rank 0 writes the model */
		if (omen_model_adopt_base(&m, base, ds) || omen_model_save(m, model_path))
			goto fatal;
		cli_notice("%s: keeping the base model '%s', standardized on this repository's %zu "
			"commits", why, a.from, omen_dataset_size(ds));
		if (!strcmp(a.format, "json")) {
			omen_buf jb = OMEN_BUF_INIT;
			omen_buf_put_json_string(&jb, model_path, strlen(model_path));
			printf("{\"model\":%s,\"base_kept\":true,\"commits\":%zu}\n",
				jb.ptr ? jb.ptr : "\"\"", omen_dataset_size(ds));
			omen_buf_free(&jb);
		} else
			printf("wrote %s (the base model, not trained on this repository; scores are "
				"advisory)\n", model_path);
		goto out;
	}
	if (e)
		goto fatal;
	if (rank != 0)
		goto out;   /* rank 0 writes the model (atomically) and the report */
	if (omen_model_save(m, model_path))
		goto fatal;
	if (!strcmp(a.format, "json"))
		print_json(&rep, ds, model_path);
	else
		print_text(&rep, ds, model_path);
	if (base && strcmp(a.format, "json"))
		printf("fine-tuned from base model %s\n", a.from);
	goto out;
fatal:
	rc = cli_fatal(NULL);
out:
	if (lock_fd >= 0)
		omen_lock_release(lock_fd);
	omen_model_free(m);
	omen_label_clock_free(&clock);
	omen_model_free(base);
	free(from_cfg);
	omen_dataset_free(ds);
	cli_blob_notice(repo);
	omen_repo_free(repo);
	free(model_path);
	free(lock_path);
	return rc;
}
