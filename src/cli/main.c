/* git-omen entry point: dispatches `git omen <command>`. */
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <git2.h>
#ifdef __GLIBC__
#include <malloc.h>
#endif
#include "cli/cli.h"
#include "cli/options.h"
#include "omen/mpi.h"

static const struct {
	const char *name;
	int (*fn)(int, char **);
	const char *summary;
} commands[] = {
	{"label", cmd_label, "find fix commits and label the commits that introduced the repaired lines"},
	{"train", cmd_train, "train the commit model on this repository's labelled history"},
	{"score", cmd_score, "score commits, a range, or staged changes (advisory)"},
	{"explain", cmd_explain, "show which files, hunks, lines and metrics drove a commit's score"},
	{"eval", cmd_eval, "walk-forward evaluation of the model against baselines"},
	{"features", cmd_features, "export per-commit change metrics as CSV or JSON Lines"},
	{"hook", cmd_hook, "install, remove or run the pre-push hook"},
	{"refresh", cmd_refresh, "relabel, and retrain when enough new labels exist (cron, timer, hook)"},
	{"health", cmd_health, "labels, model, their ages, last evaluation and drift on one screen"},
	{"version", cmd_version, "print the version"},
};

static void usage(FILE *fp)
{
	size_t i;
	fprintf(fp, "usage: git omen <command> [<options>]\n\n");
	for (i = 0; i < sizeof(commands) / sizeof(commands[0]); i++)
		fprintf(fp, "   %-9s %s\n", commands[i].name, commands[i].summary);
	fprintf(fp, "\nScores are advisory: a probability learned from this repository's own fixes.\n"
		"'git omen <command> --help' shows a command's options; 'man git-omen' the manual.\n");
}

/* Every error, warning and notice line goes through the sanitiser: the
 * messages quote paths, names and values that come from history or from
 * files (DEVELOPERS.md "Hardening"). Our own wording is plain ASCII and
 * shows unchanged. */
/* "git omen: <tag>: <text>"; under mpirun (issue 13) every line names the
 * rank that wrote it. */
static void emit_line(const char *tag, const char *text)
{
	if (omen_mpi_size() > 1)
		fprintf(stderr, "git omen: %s: rank %d of %d: %s\n", tag, omen_mpi_rank(), omen_mpi_size(), text);
	else
		fprintf(stderr, "git omen: %s: %s\n", tag, text);
}

static void tagged(const char *tag, const char *fmt, va_list ap)
{
	char stack[1024];
	omen_buf m = OMEN_BUF_INIT;
	va_list aq;
	int n;
	va_copy(aq, ap);
	n = vsnprintf(stack, sizeof(stack), fmt, aq);
	va_end(aq);
	if (n >= (int)sizeof(stack)) {
		char *big = malloc((size_t)n + 1);
		if (big && vsnprintf(big, (size_t)n + 1, fmt, ap) == n && !omen_buf_put_shown(&m, big, (size_t)n, 0))
			emit_line(tag, m.ptr);
		else
			fprintf(stderr, "git omen: %s: (message lost: out of memory)\n", tag);
		free(big);
	} else if (n >= 0 && !omen_buf_put_shown(&m, stack, (size_t)n, 0)) {
		emit_line(tag, m.ptr ? m.ptr : "");
	} else {
		emit_line(tag, n >= 0 ? stack : "(bad message)");
	}
	omen_buf_free(&m);
}

int cli_error(const char *fmt, ...)
{
	va_list ap;
	va_start(ap, fmt);
	tagged("error", fmt, ap);
	va_end(ap);
	return EXIT_FATAL;
}

int cli_fatal(const char *what)
{
	/* the message may quote history: cli_error shows it escaped */
	const char *msg = omen_error_last();
	if (what && *what)
		return cli_error("%s%s%s", what, *msg ? ": " : "", msg);
	return cli_error("%s", *msg ? msg : "unknown error");
}

int cli_usage(const char *cmd, const char *fmt, ...)
{
	va_list ap;
	fprintf(stderr, "git omen %s: ", cmd);
	va_start(ap, fmt);
	vfprintf(stderr, fmt, ap);
	va_end(ap);
	fprintf(stderr, "\n");
	return EXIT_USAGE;
}

void cli_warning(const char *fmt, ...)
{
	va_list ap;
	va_start(ap, fmt);
	tagged("warning", fmt, ap);
	va_end(ap);
}

void cli_notice(const char *fmt, ...)
{
	va_list ap;
	va_start(ap, fmt);
	tagged("notice", fmt, ap);
	va_end(ap);
}

void cli_notices(const char *lines)
{
	const char *nl;
	while (lines && *lines) {
		nl = strchr(lines, '\n');
		if (!nl) {
			cli_notice("%s", lines);
			break;
		}
		cli_notice("%.*s", (int)(nl - lines), lines);
		lines = nl + 1;
	}
}

int cli_use_color(FILE *fp)
{
	const char *nc = getenv("NO_COLOR");
	if (nc && *nc)
		return 0;
	return isatty(fileno(fp));
}

int cmd_version(int argc, char **argv)
{
	static const cli_command cmd = {"version", "usage: git omen version\n", NULL, NULL, 0};
	const char **pos = NULL;
	size_t npos;
	int maj, min, rev, rc;
	if ((rc = cli_parse(&cmd, argc, argv, &pos, &npos)) >= 0)
		return rc;
	free(pos);
	if (npos)
		return cli_usage("version", "'%s': version takes no arguments", argv[1]);
	git_libgit2_version(&maj, &min, &rev);
	printf("git-omen %s (libgit2 %d.%d.%d)\n", OMEN_VERSION, maj, min, rev);
	cli_print_base_model();
	return EXIT_OK;
}

/* glibc raises its mmap threshold to the size of every large block freed,
 * up to 32 MiB, so the big training and diff buffers freed and allocated
 * again end up in per-thread arenas that keep their pages. A fixed 1 MiB
 * threshold maps every large block and gives it back when freed: `git omen
 * train` on jq peaks at 91 MB instead of 223 MB, in the same time. */
static void malloc_setup(void)
{
#ifdef __GLIBC__
	mallopt(M_MMAP_THRESHOLD, 1 << 20);
#endif
}

/* The progress sink of the command line: one line on stderr, rewritten in
 * place, when stderr is a terminal and OMEN_NO_PROGRESS is not set. */
static void progress_line(const char *what, uint64_t done, uint64_t total, const char *extra,
	int finished, void *payload)
{
	(void)payload;
	if (finished)
		fprintf(stderr, "\r\033[K");
	else if (total)
		fprintf(stderr, "\r%s: %llu/%llu%s%s\033[K", what, (unsigned long long)done,
			(unsigned long long)total, extra ? " " : "", extra ? extra : "");
	else
		fprintf(stderr, "\r%s: %llu%s%s\033[K", what, (unsigned long long)done,
			extra ? " " : "", extra ? extra : "");
}

/* "'x' is not an omen command", with the nearest command name. */
static int unknown_command(const char *name)
{
	size_t i, d, best = (size_t)-1, at = 0;
	for (i = 0; i < sizeof(commands) / sizeof(commands[0]); i++)
		if ((d = cli_edit_distance(name, commands[i].name)) < best) {
			best = d;
			at = i;
		}
	if (best <= 2 && best < strlen(name))
		fprintf(stderr, "git omen: '%s' is not an omen command; did you mean '%s'?\n", name,
			commands[at].name);
	else
		fprintf(stderr, "git omen: '%s' is not an omen command; see 'git omen --help'\n", name);
	return EXIT_USAGE;
}

int main(int argc, char **argv)
{
	size_t i;
	int rc;
	malloc_setup();
	if (isatty(2) && !getenv("OMEN_NO_PROGRESS"))
		omen_progress_set_sink(progress_line, NULL);
	if (argc < 2) {
		usage(stderr);
		return EXIT_USAGE;
	}
	if (!strcmp(argv[1], "--help") || !strcmp(argv[1], "-h") || !strcmp(argv[1], "help")) {
		if (argc > 2 && strcmp(argv[1], "help") == 0) {
			char *args[] = {argv[2], "--help", NULL};
			for (i = 0; i < sizeof(commands) / sizeof(commands[0]); i++)
				if (!strcmp(argv[2], commands[i].name))
					return commands[i].fn(2, args);
		}
		usage(stdout);
		return EXIT_OK;
	}
	if (!strcmp(argv[1], "--version"))
		return cmd_version(argc - 1, argv + 1);
	for (i = 0; i < sizeof(commands) / sizeof(commands[0]); i++) {
		if (!strcmp(argv[1], commands[i].name)) {
			if (omen_mpi_init(&argc, &argv))
				return cli_fatal(NULL);
			if (omen_mpi_size() > 1 && commands[i].fn != cmd_train && commands[i].fn != cmd_label) {
				rc = omen_mpi_rank() ? EXIT_USAGE : cli_usage(commands[i].name,
					"runs as one process; under mpirun only 'git omen train' and 'git omen label' "
					"run in parallel");
				omen_mpi_finalize();
				return rc;
			}
			git_libgit2_init();
			rc = commands[i].fn(argc - 1, argv + 1);
			git_libgit2_shutdown();
			/* a failed rank ends the whole run (the others may be waiting in
			 * a collective); its error line is already written. A usage error
			 * comes from the command line, which every rank parses alike
			 * before any collective: every rank returns it, none waits. */
			if (rc != EXIT_OK && rc != EXIT_USAGE && omen_mpi_size() > 1)
				omen_mpi_abort(rc);
			omen_mpi_finalize();
			return rc;
		}
	}
	return unknown_command(argv[1]);
}

void cli_blob_notice(omen_repo *r)
{
	const omen_blob_stats *st;
	if (!r)
		return;
	st = omen_repo_blob_stats(r);
	if (st->notice[0])
		cli_notice("%s", st->notice);
	if (st->skipped_files)
		cli_notice("%zu file changes with an absent blob were read without lines "
			"(omen.missingBlobs)", st->skipped_files);
}
