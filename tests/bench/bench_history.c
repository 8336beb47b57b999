/* Benchmark: reading every non-merge commit's -U0 hunks and line texts
 * with omen_history_walk (1, 2 and the default number of diff threads) against
 * `git log -p -U0 --no-merges --no-renames >/dev/null` on the same
 * repository, in the same run, interleaved, best of 3. Figures only, no
 * assertion. Repository: $OMEN_BENCH_REPO (a git dir or work tree), else the
 * fixtures built by fixtures/build-fixtures.sh (small: the figures then only
 * show that the benchmark runs). Prints lines starting with "BENCH ". */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <unistd.h>
#include "omen/omen.h"

typedef struct {
	size_t commits, hunks, lines;
} counts;

static int on_change(const omen_change *c, void *payload)
{
	counts *k = payload;
	k->commits++;
	k->hunks += c->nhunks;
	k->lines += c->nlines;
	return 0;
}

static double cpu_of(int who)
{
	struct rusage ru;
	getrusage(who, &ru);
	return (double)ru.ru_utime.tv_sec + ru.ru_utime.tv_usec * 1e-6 +
		(double)ru.ru_stime.tv_sec + ru.ru_stime.tv_usec * 1e-6;
}

static double cpu_git, cpu_omen[3];

static double run_git(const char *repo)
{
	char cmd[2048];
	double t0 = omen_now(), c0 = cpu_of(RUSAGE_CHILDREN);
	snprintf(cmd, sizeof(cmd), "git -C '%s' -c core.quotepath=false log -p -U0 --no-merges "
		"--no-renames --no-ext-diff --no-textconv >/dev/null", repo);
	if (system(cmd) != 0)
		return -1;
	cpu_git += cpu_of(RUSAGE_CHILDREN) - c0;
	return omen_now() - t0;
}

static double run_omen(const char *repo, int threads, counts *k)
{
	omen_repo *r = NULL;
	omen_walk_opts o = OMEN_WALK_OPTS_INIT;
	double t0 = omen_now(), c0 = cpu_of(RUSAGE_SELF);
	o.detect_renames = -1;
	o.threads = threads;
	memset(k, 0, sizeof(*k));
	if (omen_repo_open(&r, repo) || omen_history_walk(r, &o, on_change, k)) {
		fprintf(stderr, "bench_history: %s\n", omen_error_last());
		omen_repo_free(r);
		return -1;
	}
	omen_repo_free(r);
	cpu_omen[threads] += cpu_of(RUSAGE_SELF) - c0;
	return omen_now() - t0;
}

static int cmp_d(const void *a, const void *b)
{
	double x = *(const double *)a, y = *(const double *)b;
	return (x > y) - (x < y);
}

int main(void)
{
	const char *repo = getenv("OMEN_BENCH_REPO");
	char tmp[] = "/tmp/omen-bench-history-XXXXXX", path[512];
	double tg[3], t0[3], t1[3], t2[3];
	counts k0, k1, k2;
	struct rusage ru;
	int made = 0;
	double load = 0;
	git_libgit2_init();
	if (getloadavg(&load, 1) != 1)
		load = -1;
	if (!repo || !*repo) {
		char cmd[1024];
		if (!mkdtemp(tmp))
			return 1;
		snprintf(cmd, sizeof(cmd), "sh fixtures/build-fixtures.sh '%s/fx' >/dev/null", tmp);
		if (system(cmd) != 0) {
			fprintf(stderr, "bench_history: cannot build fixtures (run from the source root)\n");
			return 1;
		}
		snprintf(path, sizeof(path), "%s/fx/history", tmp);
		repo = path;
		made = 1;
	}
	for (int i = 0; i < 3; i++) {
		tg[i] = run_git(repo);
		t1[i] = run_omen(repo, 1, &k1);
		t2[i] = run_omen(repo, 2, &k2);
		t0[i] = run_omen(repo, 0, &k0);
		if (tg[i] < 0 || t0[i] < 0 || t1[i] < 0 || t2[i] < 0)
			return 1;
	}
	qsort(tg, 3, sizeof(double), cmp_d);
	qsort(t1, 3, sizeof(double), cmp_d);
	qsort(t2, 3, sizeof(double), cmp_d);
	qsort(t0, 3, sizeof(double), cmp_d);
	getrusage(RUSAGE_SELF, &ru);
	printf("BENCH history: %s%zu commits, %zu hunks, %zu lines\n", made ? "fixture, " : "",
		k2.commits, k2.hunks, k2.lines);
	printf("BENCH history: git log -p -U0 %.3f s, omen 1 thread %.3f s, 2 threads %.3f s (best of 3)\n",
		tg[0], t1[0], t2[0]);
	printf("BENCH history: ratio omen/git %.2f (2 threads), %.2f (1 thread); %.0f commits/s\n",
		t2[0] / tg[0], t1[0] / tg[0], (double)k2.commits / t2[0]);
	printf("BENCH history: default threads (2, or 1 when the load average leaves no core idle) "
		"%.3f s, ratio %.2f\n", t0[0], t0[0] / tg[0]);
	printf("BENCH history: CPU seconds per run (user+sys): git %.3f, omen 1 thread %.3f, "
		"2 threads %.3f; load average at start %.2f\n", cpu_git / 3, cpu_omen[1] / 3,
		cpu_omen[2] / 3, load);
	printf("BENCH history: peak RSS of the omen walks %ld KiB\n", ru.ru_maxrss);
	if (k1.commits != k2.commits || k1.hunks != k2.hunks || k1.lines != k2.lines)
		printf("BENCH history: WARNING 1 and 2 threads read different counts\n");
	if (made) {
		char cmd[600];
		snprintf(cmd, sizeof(cmd), "rm -rf '%s'", tmp);
		if (system(cmd) != 0)
			return 1;
	}
	git_libgit2_shutdown();
	return 0;
}
