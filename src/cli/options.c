/* The option table (issue 14): the shared options, defined once, and the one
 * parser every command uses. Two usage-error templates come from here:
 *   git omen <cmd>: bad value '<v>' for <opt>: expected <what>
 *   git omen <cmd>: unknown option '<o>'; did you mean '<near>'?
 * (or "; see 'git omen <cmd> --help'" when no name is near). Both exit 129.
 * How to add an option: DEVELOPERS.md, "The option table". */
#include <errno.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include "cli/cli.h"
#include "cli/options.h"

const cli_option cli_opt_threads = {
	"--threads", CLI_INT, "<n>", 1, OMEN_THREADS_MAX, "a count from 1 to " OMEN_STR(OMEN_THREADS_MAX),
	"worker threads (default omen.threads, else the online cores; training uses 2 at most)"};
const cli_option cli_opt_seed = {
	"--seed", CLI_INT, "<n>", 0, INT64_MAX, "a non-negative integer",
	"random seed (default " OMEN_STR(OMEN_SEED_DEFAULT) ")"};
const cli_option cli_opt_epochs = {
	"--epochs", CLI_INT, "<n>", 1, 10000, "a count from 1 to 10000",
	"most training epochs; early stopping may stop sooner (default " OMEN_STR(OMEN_EPOCHS_DEFAULT) ")"};
const cli_option cli_opt_format = {
	"--format", CLI_CHOICE, "<fmt>", 0, 0, NULL, NULL};
const cli_option cli_opt_labels = {
	"--labels", CLI_STRING, "<file>", 0, 0, NULL,
	"label file (default omen.labels, else $GIT_DIR/omen/labels.jsonl)"};
const cli_option cli_opt_model = {
	"--model", CLI_STRING, "<file>", 0, 0, NULL,
	"model file (default omen.model, else $GIT_DIR/omen/model.omen)"};
const cli_option cli_opt_output = {
	"-o", CLI_STRING, "<file>", 0, 0, NULL,
	"write to <file> (atomically) instead of standard output"};
const cli_option cli_opt_window = {
	"--window", CLI_INT, "<days>", 0, OMEN_WINDOW_MAX_DAYS,
	"a number of days from 0 to " OMEN_STR(OMEN_WINDOW_MAX_DAYS),
	"commits newer than this before the newest stay unknown (default omen.window, else "
	OMEN_STR(OMEN_WINDOW_DAYS) ")"};
const cli_option cli_opt_no_cache = {
	"--no-cache", CLI_FLAG, NULL, 0, 0, NULL,
	"rebuild the dataset instead of reading $GIT_DIR/omen/dataset.cache"};

const char *const cli_formats_text_json[] = {"text", "json", NULL};
const char *const cli_formats_score[] = {"text", "json", "sarif", NULL};
const char *const cli_formats_features[] = {"csv", "json", NULL};

/* Old spellings, hidden, for one release: each gives one notice. */
static const struct {
	const char *cmd, *old, *now;
} old_names[] = {
	{"eval", "--gap-days", "--window"},
	{"train", "-o", "--model"},
	{"label", "-o", "--labels"},
};

/* Old words for a value: "jsonl" was features' name for JSON Lines. */
static const struct {
	const char *old, *now;
} old_words[] = {
	{"jsonl", "json"},
};

static const cli_option opt_help = {"--help", CLI_FLAG, NULL, 0, 0, NULL, "show this help"};

/* "a, b or c" of a NULL-ended list, into buf. */
static void join_words(char *buf, size_t cap, const char *const *w, int mark_default)
{
	size_t n = 0, i, len = 0;
	while (w[n])
		n++;
	buf[0] = '\0';
	for (i = 0; i < n; i++) {
		const char *sep = i == 0 ? "" : i + 1 == n ? " or " : ", ";
		int k = snprintf(buf + len, cap - len, "%s%s%s", sep, w[i],
			mark_default && i == 0 ? " (default)" : "");
		if (k < 0 || (size_t)k >= cap - len)
			return;
		len += (size_t)k;
	}
}

size_t cli_edit_distance(const char *a, const char *b)
{
	size_t la = strnlen(a, 255), lb = strnlen(b, 255), i, j;
	size_t row[256];
	for (j = 0; j <= lb; j++)
		row[j] = j;
	for (i = 1; i <= la; i++) {
		size_t diag = row[0], up;
		row[0] = i;
		for (j = 1; j <= lb; j++) {
			size_t best = diag + (a[i - 1] != b[j - 1]);
			up = row[j];
			if (up + 1 < best)
				best = up + 1;
			if (row[j - 1] + 1 < best)
				best = row[j - 1] + 1;
			diag = up;
			row[j] = best;
		}
	}
	return row[lb];
}

int cli_bad_value(const char *cmd, const char *opt, const char *val, const char *expect)
{
	if (val)
		return cli_usage(cmd, "bad value '%s' for %s: expected %s", val, opt, expect);
	return cli_usage(cmd, "bad value (none) for %s: expected %s", opt, expect);
}

static void expect_of(char *buf, size_t cap, const cli_use *u)
{
	if (u->opt->kind == CLI_CHOICE) {
		join_words(buf, cap, u->choices, 0);
	} else if (u->opt->expect) {
		snprintf(buf, cap, "%s", u->opt->expect);
	} else if (u->opt->kind == CLI_PROB) {
		snprintf(buf, cap, "a probability from 0 to 1");
	} else {
		snprintf(buf, cap, "a %s", u->opt->arg ? u->opt->arg : "value");
	}
}

/* Stores v through u; 0, or -1 when v is not a value u takes. */
static int store(const cli_use *u, const char *v, const char **word_old)
{
	const cli_option *o = u->opt;
	*word_old = NULL;
	switch (o->kind) {
	case CLI_FLAG:
		*(int *)u->dst = 1;
		return 0;
	case CLI_STRING:
		*(const char **)u->dst = v;
		return 0;
	case CLI_INT: {
		char *end;
		long long x;
		errno = 0;
		x = strtoll(v, &end, 10);
		if (!*v || *end || errno || x < o->lo || x > o->hi)
			return -1;
		*(long long *)u->dst = x;
		return 0;
	}
	case CLI_PROB: {
		char *end;
		double x = strtod(v, &end);
		if (end == v || *end || !(x >= 0 && x <= 1))
			return -1;
		*(double *)u->dst = x == 0 ? 0.0 : x;  /* -0 is 0, as omen.threshold */
		return 0;
	}
	case CLI_CHOICE: {
		size_t i, k;
		for (i = 0; u->choices[i]; i++)
			if (!strcmp(v, u->choices[i])) {
				*(const char **)u->dst = u->choices[i];
				return 0;
			}
		for (k = 0; k < sizeof(old_words) / sizeof(old_words[0]); k++) {
			if (strcmp(v, old_words[k].old))
				continue;
			for (i = 0; u->choices[i]; i++)
				if (!strcmp(old_words[k].now, u->choices[i])) {
					*(const char **)u->dst = u->choices[i];
					*word_old = old_words[k].old;
					return 0;
				}
		}
		return -1;
	}
	}
	return -1;
}

/* The row whose name is the option in a (up to '=' or its end); *alias set
 * to the old spelling when a used one. */
static const cli_use *find_use(const cli_command *c, const char *a, size_t n, const char **alias)
{
	size_t i, k;
	*alias = NULL;
	for (i = 0; i < c->nuses; i++)
		if (strlen(c->uses[i].opt->name) == n && !strncmp(c->uses[i].opt->name, a, n))
			return &c->uses[i];
	for (k = 0; k < sizeof(old_names) / sizeof(old_names[0]); k++) {
		if (strcmp(old_names[k].cmd, c->name) || strlen(old_names[k].old) != n ||
		    strncmp(old_names[k].old, a, n))
			continue;
		for (i = 0; i < c->nuses; i++)
			if (!strcmp(c->uses[i].opt->name, old_names[k].now)) {
				*alias = old_names[k].old;
				return &c->uses[i];
			}
	}
	return NULL;
}

static int unknown(const cli_command *c, const char *a)
{
	char name[256];
	const char *best = NULL;
	size_t n = strcspn(a, "="), bestd = (size_t)-1, i, d;
	snprintf(name, sizeof(name), "%.*s", (int)(n < 255 ? n : 255), a);
	for (i = 0; i <= c->nuses; i++) {
		const char *cand = i < c->nuses ? c->uses[i].opt->name : opt_help.name;
		d = cli_edit_distance(name, cand);
		if (d < bestd) {
			bestd = d;
			best = cand;
		}
	}
	/* near: up to a third of the longer name wrong, at least 1, at most 3 */
	if (best) {
		size_t len = strlen(name) > strlen(best) ? strlen(name) : strlen(best);
		size_t lim = len / 3 < 1 ? 1 : len / 3 > 3 ? 3 : len / 3;
		if (bestd <= lim)
			return cli_usage(c->name, "unknown option '%s'; did you mean '%s'?", name, best);
	}
	return cli_usage(c->name, "unknown option '%s'; see 'git omen %s --help'", name, c->name);
}

static int is_option(const char *a)
{
	/* "-" alone is an argument; "-5" or "-.." are not options either */
	return a[0] == '-' && (a[1] == '-' ? a[2] != '\0' : ((a[1] >= 'a' && a[1] <= 'z') ||
		(a[1] >= 'A' && a[1] <= 'Z')));
}

int cli_parse(const cli_command *c, int argc, char **argv, const char ***pos, size_t *npos)
{
	const char **p;
	char expect[256];
	int i, rc;
	*pos = NULL;
	*npos = 0;
	if (!(p = calloc((size_t)argc + 1, sizeof(*p)))) {
		omen_error_set(OMEN_ENOMEM, "out of memory");
		return cli_fatal(NULL);
	}
	for (i = 1; i < argc; i++) {
		const char *a = argv[i], *val = NULL, *alias, *word_old;
		const cli_use *u;
		size_t n;
		if (!strcmp(a, "--")) {
			for (i++; i < argc; i++)
				p[(*npos)++] = argv[i];
			break;
		}
		if (!is_option(a)) {
			p[(*npos)++] = a;
			continue;
		}
		if (!strcmp(a, "-h") || !strcmp(a, "--help")) {
			cli_print_help(c, stdout);
			free(p);
			*npos = 0;
			return EXIT_OK;
		}
		n = strcspn(a, "=");
		if (!(u = find_use(c, a, n, &alias))) {
			rc = unknown(c, a);
			goto fail;
		}
		if (u->opt->kind == CLI_FLAG) {
			if (a[n] == '=') {
				rc = cli_bad_value(c->name, u->opt->name, a + n + 1, "no value");
				goto fail;
			}
		} else if (a[n] == '=') {
			val = a + n + 1;
		} else if (i + 1 < argc) {
			val = argv[++i];
		} else {
			expect_of(expect, sizeof(expect), u);
			rc = cli_bad_value(c->name, u->opt->name, NULL, expect);
			goto fail;
		}
		if (store(u, val, &word_old) < 0) {
			expect_of(expect, sizeof(expect), u);
			rc = cli_bad_value(c->name, u->opt->name, val, expect);
			goto fail;
		}
		if (u->set)
			*u->set = 1;
		if (alias)
			cli_notice("'%s' is now '%s'; the old name goes in a later release", alias,
				u->opt->name);
		if (word_old)
			cli_notice("%s '%s' is now '%s'; the old word goes in a later release",
				u->opt->name, word_old, *(const char **)u->dst);
	}
	*pos = p;
	return -1;
fail:
	free(p);
	*npos = 0;
	return rc;
}

static void help_line(FILE *fp, const cli_option *o, const char *help)
{
	char left[64];
	if (o == &opt_help)
		snprintf(left, sizeof(left), "-h, --help");
	else if (o->arg)
		snprintf(left, sizeof(left), "%s %s", o->name, o->arg);
	else
		snprintf(left, sizeof(left), "%s", o->name);
	if (strlen(left) > 22)
		fprintf(fp, "  %s\n  %-22s %s\n", left, "", help);
	else
		fprintf(fp, "  %-22s %s\n", left, help);
}

void cli_print_help(const cli_command *c, FILE *fp)
{
	size_t i;
	fputs(c->usage, fp);
	fputs("\n", fp);
	for (i = 0; i < c->nuses; i++) {
		const cli_use *u = &c->uses[i];
		const char *help = u->help ? u->help : u->opt->help;
		char words[256], line[320];
		if (u->opt->kind == CLI_CHOICE && !help) {
			join_words(words, sizeof(words), u->choices, 1);
			snprintf(line, sizeof(line), "output as %s", words);
			help = line;
		}
		help_line(fp, u->opt, help ? help : "");
	}
	help_line(fp, &opt_help, opt_help.help);
	if (c->footer) {
		fputs("\n", fp);
		fputs(c->footer, fp);
	}
}
