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

int cli_fatal(const char *what)
{
	omen_buf m = OMEN_BUF_INIT;
	const char *msg;
	/* the message may quote history (paths, names): shown escaped */
	msg = omen_buf_puts_shown(&m, omen_error_last(), 0) ? omen_error_last() : m.ptr;
	if (what && *what)
		fprintf(stderr, "git omen: %s%s%s\n", what, *msg ? ": " : "", msg);
	else
		fprintf(stderr, "git omen: %s\n", *msg ? msg : "unknown error");
	omen_buf_free(&m);
	return EXIT_FATAL;
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

int cli_opt_value(int argc, char **argv, int *i, const char *name, const char **val)
{
	size_t n = strlen(name);
	const char *a = argv[*i];
	if (strncmp(a, name, n))
		return 0;
	if (a[n] == '=') {
		*val = a + n + 1;
		return 1;
	}
	if (a[n] != '\0')
		return 0;
	if (*i + 1 >= argc)
		return -1;
	*val = argv[++*i];
	return 1;
}

int cli_parse_int(long long *out, const char *v, long long lo, long long hi)
{
	char *end;
	long long x = strtoll(v, &end, 10);
	if (!*v || *end || x < lo || x > hi)
		return -1;
	*out = x;
	return 0;
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
	int maj, min, rev;
	(void)argc; (void)argv;
	git_libgit2_version(&maj, &min, &rev);
	printf("git-omen %s (libgit2 %d.%d.%d)\n", OMEN_VERSION, maj, min, rev);
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

int main(int argc, char **argv)
{
	size_t i;
	int rc;
	malloc_setup();
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
			git_libgit2_init();
			rc = commands[i].fn(argc - 1, argv + 1);
			git_libgit2_shutdown();
			return rc;
		}
	}
	fprintf(stderr, "git omen: '%s' is not an omen command; see 'git omen --help'\n", argv[1]);
	return EXIT_USAGE;
}
