/* git omen refresh: relabel incrementally, then retrain (the dataset cache
 * is extended) only when enough new labelled commits exist since the model
 * was trained (issue 12). Meant for cron, a systemd timer or a git hook:
 * low priority, a time budget, quiet unless something changed, and the
 * same lock as 'git omen train' (a running train makes it skip, or wait
 * with --wait, and it says which). Label and train run as child processes
 * of this same binary, so their work and their files are exactly those of
 * the commands themselves; a child stopped at the time budget leaves the
 * old labels or model in place (both are written atomically). */
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <poll.h>
#include <signal.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>
#include <cjson/cJSON.h>
#include "cli/cli.h"
#include "cli/options.h"

static const char refresh_usage[] =
	"usage: git omen refresh [<options>]\n"
	"\n"
	"Relabels incrementally and retrains only when at least omen.refreshMinLabels\n"
	"(default 50) commits were newly labelled since the model was trained. Runs at\n"
	"low priority and prints nothing unless it retrained, skipped or failed, so it\n"
	"is safe from cron, a systemd timer or a git hook (the post-merge hook of\n"
	"'git omen hook install --refresh').\n";

static const cli_option opt_budget = {
	"--budget", CLI_INT, "<s>", 1, 7 * 86400, "a number of seconds from 1 to 604800",
	"stop after s seconds (default omen.refreshBudget, 3600)"};
static const cli_option opt_min_new = {
	"--min-new", CLI_INT, "<n>", 1, 100000000, "a count of at least 1",
	"new labelled commits needed to retrain (default omen.refreshMinLabels, 50)"};
static const cli_option opt_wait = {
	"--wait", CLI_FLAG, NULL, 0, 0, NULL, "wait for a running 'git omen train' instead of skipping"};
static const cli_option opt_verbose = {
	"--verbose", CLI_FLAG, NULL, 0, 0, NULL, "also say why nothing was done"};

#define REFRESH_NICE 10
#define REFRESH_OUTPUT_MAX (1u << 20)

/* Runs this binary with args, output captured, stopped (SIGTERM, then
 * SIGKILL) at the deadline. Returns the exit status, 124 on time out, -1
 * when it could not start. */
static int run_self(omen_buf *out, const char *const *args, double deadline)
{
	char self[4096];
	const char *argv[8];
	int fd[2], status = 0, i, timed_out = 0;
	ssize_t n;
	pid_t pid;
	double killed_at = 0;
	n = readlink("/proc/self/exe", self, sizeof(self) - 1);
	if (n <= 0)
		snprintf(self, sizeof(self), "git-omen");
	else
		self[n] = 0;
	argv[0] = "git-omen";
	for (i = 0; args[i] && i < 6; i++)
		argv[i + 1] = args[i];
	argv[i + 1] = NULL;
	if (pipe(fd))
		return -1;
	fflush(stdout);
	fflush(stderr);
	pid = fork();
	if (pid < 0) {
		close(fd[0]);
		close(fd[1]);
		return -1;
	}
	if (pid == 0) {
		int dn = open("/dev/null", O_RDONLY);
		if (dn >= 0) {
			dup2(dn, 0);
			close(dn);
		}
		dup2(fd[1], 1);
		dup2(fd[1], 2);
		close(fd[0]);
		close(fd[1]);
		if (strchr(self, '/'))
			execv(self, (char *const *)argv);
		else
			execvp(self, (char *const *)argv);
		_exit(127);
	}
	close(fd[1]);
	for (;;) {
		struct pollfd p;
		char buf[4096];
		double left = deadline - omen_now();
		int ms = left <= 0 ? 0 : left > 1000 ? 1000 : (int)(left * 1000) + 1, r;
		if (left <= 0 && !killed_at) {
			kill(pid, SIGTERM);
			killed_at = omen_now();
			timed_out = 1;
		} else if (killed_at && omen_now() - killed_at > 5) {
			kill(pid, SIGKILL);
		}
		if (killed_at)
			ms = 200;
		p.fd = fd[0];
		p.events = POLLIN;
		r = poll(&p, 1, ms);
		if (r < 0 && errno != EINTR)
			break;
		if (r > 0) {
			n = read(fd[0], buf, sizeof(buf));
			if (n <= 0)
				break;   /* the child closed its output: it is ending */
			if (out->len < REFRESH_OUTPUT_MAX)
				omen_buf_put(out, buf, (size_t)n);
		}
	}
	close(fd[0]);
	while (waitpid(pid, &status, 0) < 0 && errno == EINTR)
		;
	if (timed_out)
		return 124;
	return WIFEXITED(status) ? WEXITSTATUS(status) : 128;
}

/* Labelled commits in the label file (-1 when it cannot be read). */
static long labelled_count(omen_repo *repo)
{
	char *path = NULL;
	omen_labels *l = NULL;
	long n = -1;
	size_t i;
	if (omen_labels_path(&path, repo, NULL) == 0 && access(path, R_OK) == 0 &&
	    omen_labels_load(&l, path) == 0) {
		n = 0;
		for (i = 0; i < omen_labels_count(l); i++)
			n += omen_labels_at(l, i)->label >= 0;
	}
	omen_error_clear();
	omen_labels_free(l);
	free(path);
	return n;
}

/* Labelled commits the model was trained and tested on (-1 without a model). */
static long model_labelled(omen_repo *repo)
{
	char *path = NULL;
	omen_model *m = NULL;
	long n = -1;
	if (omen_score_model_path(&path, repo, NULL) == 0 && access(path, R_OK) == 0 &&
	    omen_model_load(&m, path) == 0) {
		const cJSON *tr = cJSON_GetObjectItemCaseSensitive(omen_model_meta(m), "training");
		double a = cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(tr, "n_train"));
		double b = cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(tr, "n_valid"));
		double c = cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(tr, "n_test"));
		n = isfinite(a + b + c) ? (long)(a + b + c) : 0;
	}
	omen_error_clear();
	omen_model_free(m);
	free(path);
	return n;
}

static void print_tail(const omen_buf *b)
{
	/* the child's last lines, each already "git omen: ..." */
	size_t start = b->len > 2000 ? b->len - 2000 : 0;
	if (b->len)
		fwrite(b->ptr + start, 1, b->len - start, stderr);
}

/* Over 120 lines: not split yet (issue 14, item 4, left for the next pass);
 *   the refresh command's driver: label, train, install, each step reported. */
int cmd_refresh(int argc, char **argv)
{
	omen_repo *repo = NULL;
	omen_buf out = OMEN_BUF_INIT;
	char *lock_path = NULL;
	int r, rc = EXIT_OK, wait = 0, verbose = 0, lock_fd = -1, e, budget_set = 0, min_set = 0;
	int64_t budget = 3600, min_new = 50;
	long before, after, trained;
	double t0 = omen_now(), deadline, waited = 0;

	{
		long long bud = 0, mn = 0;
		const cli_use uses[] = {
			{&opt_budget, &bud, NULL, NULL, &budget_set},
			{&opt_min_new, &mn, NULL, NULL, &min_set},
			{&opt_wait, &wait, NULL, NULL, NULL},
			{&opt_verbose, &verbose, NULL, NULL, NULL},
		};
		const cli_command cmd = {"refresh", refresh_usage, NULL, uses, sizeof(uses) / sizeof(uses[0])};
		if ((rc = cli_parse_no_args(&cmd, argc, argv)) >= 0)
			return rc;
		rc = EXIT_OK;
		if (budget_set)
			budget = bud;
		if (min_set)
			min_new = mn;
	}
	/* low priority for us and the children (never raised back) */
	errno = 0;
	r = getpriority(PRIO_PROCESS, 0);
	if (!(r == -1 && errno) && r < REFRESH_NICE && setpriority(PRIO_PROCESS, 0, REFRESH_NICE))
		cli_notice("cannot lower the priority: %s", strerror(errno));
	if (omen_repo_open(&repo, NULL)) {
		rc = cli_fatal(NULL);
		goto done;
	}
	if ((!budget_set && omen_config_int(&budget, repo, "omen.refreshBudget")) ||
	    (!min_set && omen_config_int(&min_new, repo, "omen.refreshMinLabels"))) {
		rc = cli_fatal(NULL);
		goto done;
	}
	deadline = t0 + (double)budget;
	if (omen_repo_omen_path(&lock_path, repo, "train.lock")) {
		rc = cli_fatal(NULL);
		goto done;
	}
	/* the train lock, held while labelling; a running train: skip or wait */
	if ((e = omen_lock_acquire(&lock_fd, lock_path, 0)) == OMEN_ELOCKED) {
		omen_error_clear();
		if (!wait) {
			printf("git omen refresh: skipped: 'git omen train' is running on this repository "
				"(lock '%s'); --wait waits for it\n", lock_path);
			goto done;
		}
		printf("git omen refresh: waiting for a running 'git omen train' (lock '%s')\n", lock_path);
		fflush(stdout);
		{
			/* a negative wait would block without end (omen_lock_acquire):
			 * a budget already spent tries once */
			double left_ms = (deadline - omen_now()) * 1000;
			e = omen_lock_acquire(&lock_fd, lock_path, left_ms > 0 ? (int)left_ms : 0);
		}
		waited = omen_now() - t0;
		if (e == OMEN_ELOCKED) {
			omen_error_clear();
			printf("git omen refresh: skipped: 'git omen train' still ran after %.0f s (the "
				"time budget)\n", waited);
			lock_fd = -1;
			goto done;
		}
	}
	if (e) {
		lock_fd = -1;
		rc = cli_fatal(NULL);
		goto done;
	}
	before = labelled_count(repo);
	{
		static const char *const label_args[] = {"label", NULL};
		r = run_self(&out, label_args, deadline);
	}
	if (r == 124) {
		printf("git omen refresh: stopped labelling at the time budget (%lld s); the labels "
			"are as before\n", (long long)budget);
		goto done;
	}
	if (r != 0) {
		print_tail(&out);
		rc = cli_error("refresh: 'git omen label' failed (exit %d)", r);
		goto done;
	}
	after = labelled_count(repo);
	trained = model_labelled(repo);
	if (after < 0) {
		rc = cli_error("refresh: cannot read the labels after labelling");
		goto done;
	}
	if (trained >= 0 && after - trained < min_new) {
		if (verbose)
			printf("git omen refresh: up to date: %ld labelled commits, %ld more than the model "
				"saw; %lld needed to retrain (%+ld labelled by this run)\n", after,
				after - trained > 0 ? after - trained : 0, (long long)min_new,
				before >= 0 ? after - before : after);
		goto done;
	}
	/* retrain: the child takes the lock itself */
	omen_lock_release(lock_fd);
	lock_fd = -1;
	omen_buf_clear(&out);
	{
		static const char *const train_args[] = {"train", "--format", "json", NULL};
		double ts = omen_now();
		r = run_self(&out, train_args, deadline);
		if (r == 124) {
			printf("git omen refresh: stopped training at the time budget (%lld s); the model "
				"is as before\n", (long long)budget);
			goto done;
		}
		if (r != 0) {
			if (out.ptr && strstr(out.ptr, "another 'git omen train' is running")) {
				printf("git omen refresh: skipped: a 'git omen train' started meanwhile\n");
				goto done;
			}
			print_tail(&out);
			rc = cli_error("refresh: 'git omen train' failed (exit %d)", r);
			goto done;
		}
		{
			/* train's JSON summary, after any notices */
			const char *js = out.ptr ? strstr(out.ptr, "{\"model\":") : NULL;
			cJSON *j = js ? cJSON_Parse(js) : NULL, *te, *tm;
			te = j ? cJSON_GetObjectItemCaseSensitive(j, "test") : NULL;
			tm = te ? cJSON_GetObjectItemCaseSensitive(te, "model") : NULL;
			printf("git omen refresh: retrained on %ld labelled commits (%s%ld since the last "
				"model) in %.0f s", after, trained < 0 ? "no model before, " : "",
				trained < 0 ? after : after - trained, omen_now() - ts);
			if (tm && cJSON_IsNumber(cJSON_GetObjectItemCaseSensitive(tm, "auc")))
				printf("; test slice AUC %.3f",
					cJSON_GetObjectItemCaseSensitive(tm, "auc")->valuedouble);
			if (waited > 0)
				printf("; waited %.0f s for a running train first", waited);
			printf("; scores are advisory\n");
			cJSON_Delete(j);
		}
	}
done:
	if (lock_fd >= 0)
		omen_lock_release(lock_fd);
	omen_buf_free(&out);
	free(lock_path);
	omen_repo_free(repo);
	return rc;
}
