/* git omen train --base <dir>: the base model (issue 11) from every
 * <owner>+<name>.shard in dir (written by `git omen train --shard`), in name
 * order; and `--shard <file>`, the dataset of this repository written as one
 * such shard. */
#include <dirent.h>
#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>
#include <sys/stat.h>
#include "cli/cli.h"
#include "omen/base.h"
#include "omen/mpi.h"

void cli_note_base_model(const omen_scorer *sc)
{
	size_t n = 0;
	const char *fb = omen_scorer_base_fallback(sc, &n);
	const cJSON *y;
	if (fb) {
		cli_notice("no model of this repository's own: scored with the base model '%s', "
			"standardized on this repository's %zu commits; scores are advisory", fb, n);
		return;
	}
	y = cJSON_GetObjectItemCaseSensitive(omen_model_meta(omen_scorer_model(sc)),
		"young");
	if (cJSON_IsObject(y))
		cli_notice("scored with a base model: this repository had %.0f labelled commits, too "
			"few to train its own model; scores are advisory",
			cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(y, "labelled")));
}

/* `git omen version`'s line on the installed base model (issue 11): its
 * path, corpus (histories and their commits), file size and build date;
 * one that does not load is said so, and version still succeeds. */
void cli_print_base_model(void)
{
	omen_model *m = NULL;
	char *path = NULL;
	const cJSON *b, *list, *dt, *one;
	struct stat st;
	double commits = 0;
	int configured;
	if (omen_base_model_path(&path, &configured, NULL) || !path) {
		omen_error_clear();
		printf("base model  none installed\n");
		free(path);
		return;
	}
	if (omen_model_load(&m, path)) {
		printf("base model  %s: cannot load: %s\n", path, omen_error_last());
		omen_error_clear();
		free(path);
		return;
	}
	b = cJSON_GetObjectItemCaseSensitive(omen_model_meta(m), "base");
	list = cJSON_GetObjectItemCaseSensitive(b, "corpus");
	dt = cJSON_GetObjectItemCaseSensitive(b, "date");
	cJSON_ArrayForEach(one, list)
		commits += cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(one, "commits"));
	if (!cJSON_IsObject(b))
		printf("base model  %s: not a base model (no corpus in its metadata)\n", path);
	else
		printf("base model  %s: %.0f histories, %.0f commits, %.1f MB, built %s\n", path,
			cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(b, "histories")), commits,
			stat(path, &st) == 0 ? (double)st.st_size / 1e6 : 0.0,
			cJSON_IsString(dt) ? dt->valuestring : "?");
	omen_model_free(m);
	free(path);
}

static int name_cmp(const void *a, const void *b)
{
	return strcmp(*(char *const *)a, *(char *const *)b);
}

/* The build date: SOURCE_DATE_EPOCH when set (reproducible-builds.org),
 * else now. */
static int build_time(int64_t *out)
{
	const char *v = getenv("SOURCE_DATE_EPOCH");
	char *end;
	long long n;
	if (!v || !*v) {
		*out = (int64_t)time(NULL);
		return 0;
	}
	errno = 0;
	n = strtoll(v, &end, 10);
	if (errno || *end || n < 0 || n > 253402300799LL || v[0] < '0' || v[0] > '9')
		return -1;
	*out = (int64_t)n;
	return 0;
}

static void on_base_progress(void *payload, int epoch, int epochs, float loss, float valid_auc,
	double eta_s)
{
	(void)eta_s;
	if (*(int *)payload)
		fprintf(stderr, "\rtrain --base: epoch %d/%d  loss %.4f  best mean valid AUC %.3f   ",
			epoch, epochs, loss, valid_auc);
}

int cmd_train_base(const char *dir, const char *out_path, omen_train_opts *o, const char *format)
{
	DIR *d = NULL;
	struct dirent *de;
	char **paths = NULL, **names = NULL;
	size_t n = 0, cap = 0, k;
	omen_corpus *c = NULL;
	omen_model *m = NULL;
	omen_base_report rep;
	int64_t when;
	int rc = EXIT_OK, tty = isatty(2), e;
	double t0 = omen_now();

	if (!out_path)
		return cli_usage("train", "--base needs --model <file> for the base model");
	if (build_time(&when))
		return cli_usage("train", "SOURCE_DATE_EPOCH: '%s' is not seconds since the epoch",
			getenv("SOURCE_DATE_EPOCH"));
	if (!(d = opendir(dir))) {
		return cli_error("cannot read shard directory '%s': %s", dir, strerror(errno));
	}
	while ((de = readdir(d))) {
		size_t len = strlen(de->d_name);
		if (len <= 6 || strcmp(de->d_name + len - 6, ".shard") || de->d_name[0] == '.')
			continue;
		if (OMEN_ARRAY_RESERVE(paths, cap, n + 1) ||
			!(paths[n] = malloc(strlen(dir) + len + 2))) {
			rc = cli_fatal("out of memory");
			goto out;
		}
		sprintf(paths[n], "%s/%s", dir, de->d_name);
		n++;
	}
	closedir(d);
	d = NULL;
	if (!n) {
		rc = cli_error("cannot train the base model: no '*.shard' file in '%s'", dir);
		goto out;
	}
	qsort(paths, n, sizeof(*paths), name_cmp);
	if (!(names = calloc(n, sizeof(*names)))) {
		rc = cli_fatal("out of memory");
		goto out;
	}
	for (k = 0; k < n; k++) {
		/* "owner+name.shard" names the history owner/name */
		const char *b = strrchr(paths[k], '/') + 1;
		char *p;
		if (!(names[k] = strndup(b, strlen(b) - 6))) {
			rc = cli_fatal("out of memory");
			goto out;
		}
		if ((p = strchr(names[k], '+')))
			*p = '/';
	}
	if (omen_corpus_open(&c, (const char *const *)paths, (const char *const *)names, n)) {
		rc = cli_fatal(NULL);
		goto out;
	}
	o->progress = on_base_progress;
	o->payload = &tty;
	/* under mpirun (issue 13): data-parallel, rank 0 writes and reports */
	omen_mpi_train_setup(o);
	if (omen_mpi_rank() != 0)
		tty = 0;
	e = omen_base_train(&m, &rep, c, o, when);
	if (tty)
		fputs("\r\033[K", stderr);
	if (!e && omen_mpi_rank() != 0)
		goto out;
	if (e || omen_model_save(m, out_path)) {
		rc = cli_fatal(NULL);
		goto out;
	}
	if (!strcmp(format, "json")) {
		omen_buf jb = OMEN_BUF_INIT;
		omen_buf_put_json_string(&jb, out_path, strlen(out_path));
		printf("{\"model\":%s,\"histories\":%zu,\"n_train\":%zu,\"pos_train\":%zu,"
			"\"n_valid\":%zu,\"pos_valid\":%zu,\"steps_per_epoch\":%zu,\"epochs_run\":%d,"
			"\"best_epoch\":%d", jb.ptr ? jb.ptr : "\"\"", rep.histories, rep.n_train, rep.pos_train, rep.n_valid,
			rep.pos_valid, rep.steps_per_epoch, rep.epochs_run, rep.best_epoch);
		if (isfinite(rep.valid_auc))
			printf(",\"valid_mean_auc\":%.6f", rep.valid_auc);
		printf(",\"seconds\":%.3f}\n", omen_now() - t0);
		omen_buf_free(&jb);
	} else {
		printf("corpus: %zu histories; train %zu commits (%zu inducing), validation %zu (%zu)\n",
			rep.histories, rep.n_train, rep.pos_train, rep.n_valid, rep.pos_valid);
		printf("epochs: %d run of %zu balanced steps, best %d; mean validation AUC over "
			"histories %.3f\n", rep.epochs_run, rep.steps_per_epoch, rep.best_epoch,
			rep.valid_auc);
		printf("wrote %s (%.1f s; scores are advisory)\n", out_path, omen_now() - t0);
	}
out:
	if (d)
		closedir(d);
	for (k = 0; k < n; k++) {
		free(paths[k]);
		if (names)
			free(names[k]);
	}
	free(paths);
	free(names);
	omen_model_free(m);
	omen_corpus_free(c);
	return rc;
}
