/* git omen hook: install, remove or report the pre-push hook, and run it
 * (what hooks/pre-push calls with git's pre-push lines on standard input).
 * The hook never stops a push unless the user asked for blocking. */
#include <ctype.h>
#include <signal.h>
#include <stdlib.h>
#include <string.h>
#include <sys/time.h>
#include <unistd.h>
#include "cli/cli.h"
#include "cli/options.h"

static const char hook_usage[] =
	"usage: git omen hook install [--refresh] | uninstall | status\n"
	"   or: git omen hook run [--] <remote-name> <remote-url>\n"
	"\n"
	"install     put the pre-push shim in the hooks directory (core.hooksPath honoured);\n"
	"            an existing pre-push hook is kept and runs after ours; with --refresh\n"
	"            also a post-merge shim that starts 'git omen refresh' in the background\n"
	"            after a merge or pull (an existing post-merge hook is kept the same way)\n"
	"uninstall   remove the shims and restore the kept hooks byte for byte\n"
	"status      say whether the hook is installed\n"
	"run         score the commits a push sends (git's pre-push lines on standard input)\n";
static const char hook_footer[] =
	"The hook warns about risky commits and lets the push through unless\n"
	"omen.onRisk=block. Scores are advisory; 'git push --no-verify' skips it.\n";
static int hook_refresh_flag;
static const cli_option opt_refresh = {
	"--refresh", CLI_FLAG, NULL, 0, 0, NULL,
	"with install: also the post-merge hook that runs git omen refresh"};
static const cli_use hook_uses[] = {
	{&opt_refresh, &hook_refresh_flag, NULL, NULL, NULL},
};
static const cli_command hook_cmd = {"hook", hook_usage, hook_footer, hook_uses,
	sizeof(hook_uses) / sizeof(hook_uses[0])};

#define HOOK_MAX_INPUT (8u << 20)
#define HOOK_MAX_COMMITS 200

/* ---- time limit: a hard stop that lets the push through ----------------- */
/* The "error:" line is made ahead and written with write(2): a signal
 * handler may not call stdio (so not cli_error). */
static char alarm_msg[256];
static size_t alarm_len;
static volatile int alarm_exit;

static void on_alarm(int sig)
{
	ssize_t w;
	(void)sig;
	w = write(2, alarm_msg, alarm_len);
	(void)w;
	_exit(alarm_exit);
}

static void arm_alarm(long ms, int block)
{
	struct itimerval it;
	struct sigaction sa;
	int n = snprintf(alarm_msg, sizeof(alarm_msg),
		block ? "git omen: error: scoring ran past omen.hookTimeout (%ld ms) and omen.onError=block: push stopped\n"
		      : "git omen: error: scoring ran past omen.hookTimeout (%ld ms); push not checked (scores are advisory)\n",
		ms);
	alarm_len = n > 0 && (size_t)n < sizeof(alarm_msg) ? (size_t)n : 0;
	alarm_exit = block ? 1 : 0;
	memset(&sa, 0, sizeof(sa));
	sa.sa_handler = on_alarm;
	sigemptyset(&sa.sa_mask);
	sigaction(SIGALRM, &sa, NULL);
	memset(&it, 0, sizeof(it));
	it.it_value.tv_sec = ms / 1000;
	it.it_value.tv_usec = (ms % 1000) * 1000;
	setitimer(ITIMER_REAL, &it, NULL);
}

static void disarm_alarm(void)
{
	struct itimerval it;
	memset(&it, 0, sizeof(it));
	setitimer(ITIMER_REAL, &it, NULL);
}

/* One "error:" line for anything that stops the check, saying what happens
 * to the push; exit status by omen.onError (allow: 0, block: 1). */
static int hook_error(int block, const char *what)
{
	const char *msg = what ? what : omen_error_last();   /* escaped by cli_error */
	cli_error("%s; %s", *msg ? msg : "unknown error",
		block ? "push stopped (omen.onError=block)" : "push not checked (scores are advisory)");
	return block ? EXIT_RISK : EXIT_OK;
}

static int read_stdin(omen_buf *b)
{
	char tmp[65536];
	size_t n;
	while ((n = fread(tmp, 1, sizeof(tmp), stdin)) > 0) {
		if (b->len + n > HOOK_MAX_INPUT)
			return omen_error_set(OMEN_ELIMIT, "bad pre-push input: more than %u bytes", HOOK_MAX_INPUT);
		if (omen_buf_put(b, tmp, n))
			return omen_error_code();
	}
	if (ferror(stdin))
		return omen_error_set(OMEN_EIO, "cannot read the pre-push input");
	return 0;
}

/* An omen.* key that is no setting (omen.onRsik=block) would be ignored
 * without a word, and the push not blocked as its author meant: say so,
 * with the nearest setting's name (issue 15). */
static void warn_unknown_settings(omen_repo *repo)
{
	size_t pos = 0, n, i;
	const omen_setting *t = omen_settings_table(&n);
	const char *k;
	while ((k = omen_config_next_unknown(repo, &pos))) {
		char a[256], b[256];
		const char *best = NULL;
		size_t bd = (size_t)-1, j;
		for (j = 0; k[j] && j + 1 < sizeof(a); j++)
			a[j] = (char)tolower((unsigned char)k[j]);
		a[j] = '\0';
		for (i = 0; i < n; i++) {
			size_t d;
			for (j = 0; t[i].key[j] && j + 1 < sizeof(b); j++)
				b[j] = (char)tolower((unsigned char)t[i].key[j]);
			b[j] = '\0';
			d = cli_edit_distance(a, b);
			if (d < bd) {
				bd = d;
				best = t[i].key;
			}
		}
		if (best && bd <= 3)
			cli_warning("unknown setting '%s' is ignored; did you mean '%s'?", k, best);
		else
			cli_warning("unknown setting '%s' is ignored", k);
	}
}

/* Over 120 lines: not split yet (issue 14, item 4, left for the next pass);
 *   the pre-push hook's driver, from reading the pushed refs to the verdict. */
static int hook_run(int argc, char **argv)
{
	omen_repo *repo = NULL;
	omen_scorer *sc = NULL;
	omen_score_opts so = OMEN_SCORE_OPTS_INIT;
	omen_score_set set;
	omen_push_list pl;
	omen_buf in = OMEN_BUF_INIT;
	git_oid *ids = NULL;
	size_t nids = 0, i, risky = 0, skip = 0;
	int on_risk = 0, on_error = 0;  /* indexes: warn|block, allow|block */
	int64_t timeout_ms = 3000;
	int block_risk = 0, block_error = 0, rc = EXIT_OK;
	/* argv: run <remote> <url> */
	const char *remote = argc > 1 ? argv[1] : "", *url = argc > 2 ? argv[2] : "";
	int how = OMEN_PUSH_BY_ID;
	double t0 = omen_now();

	omen_score_set_init(&set);
	memset(&pl, 0, sizeof(pl));
	if (omen_repo_open(&repo, NULL)) {
		rc = hook_error(0, NULL);
		goto done;
	}
	warn_unknown_settings(repo);
	/* the settings table holds the words and bounds (allow|block,
	 * warn|block, 1 ms to one hour); a bad onError lets the push through,
	 * as the shim does for anything but "block" */
	if (omen_config_choice(&on_error, repo, "omen.onError")) {
		rc = hook_error(0, NULL);
		goto done;
	}
	block_error = on_error == 1;
	if (omen_config_choice(&on_risk, repo, "omen.onRisk") ||
	    omen_config_int(&timeout_ms, repo, "omen.hookTimeout")) {
		rc = hook_error(block_error, NULL);
		goto done;
	}
	block_risk = on_risk == 1;
	arm_alarm((long)timeout_ms, block_error);
	so.deadline = t0 + (double)timeout_ms / 1000.0;
	so.lazy = 1;   /* attention only for the commits it reports */

	if (read_stdin(&in) || omen_prepush_parse(&pl, in.ptr, in.len)) {
		rc = hook_error(block_error, NULL);
		goto done;
	}
	if (pl.n == 0)
		goto done;
	if (omen_scorer_open(&sc, repo, &so)) {
		rc = hook_error(block_error, NULL);
		goto done;
	}
	cli_note_base_model(sc);
	{
		/* half of what is left of the budget to ask the remote what it has
		 * (a new branch, a push to a URL), the rest to score */
		double left = so.deadline - omen_now();
		int ls_ms = left > 0.002 ? (int)(left * 500) : 0;
		if (omen_push_select(&ids, &nids, &how, repo, remote, url, ls_ms, &pl)) {
			rc = hook_error(block_error, NULL);
			goto done;
		}
	}
	if (how == OMEN_PUSH_BY_ANY_TRACKING && nids)
		cli_notice("cannot list what '%s' has; leaving out commits any remote-tracking "
			"ref holds", remote);
	else if (how == OMEN_PUSH_BY_OTHER_REFS && nids)
		cli_notice("cannot tell what '%s' has; scoring only commits on no other ref", remote);
	if (nids == 0)
		goto done;
	if (nids > HOOK_MAX_COMMITS) {
		skip = nids - HOOK_MAX_COMMITS;
		cli_notice("scoring the newest %d of %zu new commits", HOOK_MAX_COMMITS, nids);
	}
	if (omen_scorer_commits(&set, sc, ids + skip, nids - skip)) {
		rc = hook_error(block_error, NULL);
		goto done;
	}
	/* the freshness check walks the commits since the model's head: still
	 * inside the time budget */
	if (omen_scorer_check_fresh(sc)) {
		rc = hook_error(block_error, NULL);
		goto done;
	}
	disarm_alarm();
	cli_notices(omen_scorer_notices(sc));
	for (i = 0; i < set.n; i++) {
		const omen_score_result *r = &set.v[i];
		if (r->prob < set.threshold)
			continue;
		risky++;
		{
			/* reasons (paths) and summary through the sanitiser; the summary
			 * cut at 60 bytes between characters (issue 15, items 1 and 8) */
			omen_buf w = OMEN_BUF_INIT;
			int j;
			omen_buf_printf(&w, "git omen: risky commit %.10s: %.2f (threshold %.2f)", r->id,
				(double)r->prob, (double)set.threshold);
			for (j = 0; j < r->nreasons && j < 2; j++) {
				omen_buf_puts(&w, j ? "; " : ": ");
				omen_buf_puts_shown(&w, r->reasons[j].text, 0);
			}
			omen_buf_puts(&w, " - ");
			omen_buf_puts_shown(&w, r->summary, 60);
			fprintf(stderr, "%s\n", w.ptr ? w.ptr : "git omen: risky commit");
			omen_buf_free(&w);
		}
	}
	if (risky && block_risk) {
		fprintf(stderr, "git omen: push blocked: %zu of %zu commits at or over %.2f (omen.onRisk=block); "
			"scores are advisory, 'git push --no-verify' skips this check\n",
			risky, set.n, (double)set.threshold);
		rc = EXIT_RISK;
	} else if (risky) {
		char rate[64];
		fprintf(stderr, "git omen: %zu of %zu commits look risky (the threshold %.2f fires on %s); "
			"scores are advisory, the push goes on\n", risky, set.n, (double)set.threshold,
			omen_warn_rate_text(rate, sizeof(rate), omen_scorer_fires(sc)));
	}
done:
	disarm_alarm();
	omen_score_set_free(&set);
	omen_prepush_free(&pl);
	omen_buf_free(&in);
	omen_scorer_free(sc);
	omen_repo_free(repo);
	free(ids);
	return rc;
}

int cmd_hook(int argc, char **argv)
{
	omen_repo *repo = NULL;
	char *dir = NULL;
	const char **pos = NULL, *sub;
	size_t npos;
	int rc = EXIT_OK, st = 0, rst = 0;

	/* git passes a pre-push hook exactly two words, the remote's name and
	 * URL, and a name may look like an option ('-h', issue 15): "run" with
	 * two words is never a request for help, even from a shim installed
	 * before the shim passed '--' (which cli_parse takes as the end of
	 * options) */
	if (argc == 4 && !strcmp(argv[1], "run") && strcmp(argv[2], "--"))
		return hook_run(argc - 1, argv + 1);
	if ((rc = cli_parse(&hook_cmd, argc, argv, &pos, &npos)) >= 0)
		return rc;
	rc = EXIT_OK;
	sub = npos ? pos[0] : NULL;
	if (!sub) {
		free(pos);
		cli_print_help(&hook_cmd, stderr);
		return EXIT_USAGE;
	}
	if (!strcmp(sub, "run")) {
		rc = hook_run((int)npos, (char **)pos);
		free(pos);
		return rc;
	}
	free(pos);
	if (strcmp(sub, "install") && strcmp(sub, "uninstall") && strcmp(sub, "status"))
		return cli_usage("hook", "unknown subcommand '%s'; use install, uninstall, status or run", sub);
	if (npos > 1)
		return cli_usage("hook", "'%s' takes no arguments", sub);
	if (hook_refresh_flag && strcmp(sub, "install"))
		return cli_usage("hook", "--refresh goes with install");
	if (omen_repo_open(&repo, NULL) || omen_hook_dir(&dir, repo)) {
		rc = cli_fatal(NULL);
		goto done;
	}
	if (!strcmp(sub, "install")) {
		if (omen_hook_install(&st, dir)) {
			rc = cli_fatal(NULL);
			goto done;
		}
		printf("installed the pre-push hook in '%s'%s\n", dir,
			st == OMEN_HOOK_CHAINED ? "; the existing hook is kept and runs after it" : "");
		if (hook_refresh_flag) {
			if (omen_hook_install_as(&rst, dir, OMEN_HOOK_KIND_REFRESH)) {
				rc = cli_fatal(NULL);
				goto done;
			}
			printf("installed the post-merge hook in '%s': 'git omen refresh' runs in the "
				"background after a merge or pull%s\n", dir, rst == OMEN_HOOK_CHAINED ?
				"; the existing hook is kept and runs after it" : "");
		}
	} else if (!strcmp(sub, "uninstall")) {
		/* the post-merge shim goes too, when it is ours */
		if (omen_hook_status_as(&rst, dir, OMEN_HOOK_KIND_REFRESH)) {
			rc = cli_fatal(NULL);
			goto done;
		}
		if (rst == OMEN_HOOK_OURS || rst == OMEN_HOOK_CHAINED) {
			if (omen_hook_uninstall_as(&rst, dir, OMEN_HOOK_KIND_REFRESH)) {
				rc = cli_fatal(NULL);
				goto done;
			}
			printf("removed the post-merge hook from '%s'%s\n", dir,
				rst == OMEN_HOOK_FOREIGN ? "; the previous hook is back" : "");
		}
		if (omen_hook_status(&st, dir)) {
			rc = cli_fatal(NULL);
			goto done;
		}
		if (st == OMEN_HOOK_ABSENT) {
			printf("no pre-push hook in '%s'\n", dir);
		} else if (omen_hook_uninstall(&st, dir)) {
			rc = cli_fatal(NULL);
			goto done;
		} else {
			printf("removed the pre-push hook from '%s'%s\n", dir,
				st == OMEN_HOOK_FOREIGN ? "; the previous hook is back" : "");
		}
	} else {
		if (omen_hook_status(&st, dir)) {
			rc = cli_fatal(NULL);
			goto done;
		}
		printf("pre-push hook: %s (%s/pre-push)\n",
			st == OMEN_HOOK_ABSENT ? "not installed" :
			st == OMEN_HOOK_OURS ? "installed" :
			st == OMEN_HOOK_CHAINED ? "installed, the previous hook runs after it" :
			"not installed; another pre-push hook is there", dir);
		if (omen_hook_status_as(&rst, dir, OMEN_HOOK_KIND_REFRESH)) {
			rc = cli_fatal(NULL);
			goto done;
		}
		if (rst != OMEN_HOOK_ABSENT)
			printf("post-merge refresh hook: %s (%s/post-merge)\n",
				rst == OMEN_HOOK_OURS ? "installed" :
				rst == OMEN_HOOK_CHAINED ? "installed, the previous hook runs after it" :
				"not installed; another post-merge hook is there", dir);
	}
done:
	free(dir);
	omen_repo_free(repo);
	return rc;
}
