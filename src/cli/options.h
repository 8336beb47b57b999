/* The option table of every command (issue 14): each option is one
 * cli_option with its name, kind, bounds, default and help line; a command
 * lists the options it takes as cli_use rows that say where each value goes.
 * Parsing, validation, the two usage-error templates, the notices for old
 * spellings and the -h text all come from these rows (DEVELOPERS.md, "The
 * option table"). */
#ifndef OMEN_CLI_OPTIONS_H
#define OMEN_CLI_OPTIONS_H

#include <stddef.h>
#include <stdio.h>

/* A plain integer macro as a string literal, for help lines. */
#define OMEN_STR_(x) #x
#define OMEN_STR(x) OMEN_STR_(x)

typedef enum {
	CLI_FLAG,     /* no value; *(int *)dst = 1 */
	CLI_STRING,   /* any value; *(const char **)dst */
	CLI_INT,      /* decimal integer in [lo, hi]; *(long long *)dst */
	CLI_PROB,     /* real number in [0, 1]; *(double *)dst */
	CLI_CHOICE    /* one word of a list; *(const char **)dst = the canonical word */
} cli_kind;

typedef struct {
	const char *name;     /* "--threads" or "-o" */
	cli_kind kind;
	const char *arg;      /* "<n>" in the help line; NULL for flags */
	long long lo, hi;     /* CLI_INT bounds */
	const char *expect;   /* what a value must be, for the bad-value message */
	const char *help;     /* the help line, default included */
} cli_option;

/* One option as a command takes it. choices (CLI_CHOICE) is the command's
 * NULL-ended word list; help replaces the option's help line when the
 * command's meaning is narrower (NULL: the option's own). set, when not
 * NULL, becomes 1 when the option is given. */
typedef struct {
	const cli_option *opt;
	void *dst;
	const char *const *choices;
	const char *help;
	int *set;
} cli_use;

/* A command's table. usage is printed before the option lines, footer (or
 * NULL) after them; -h and --help are added to every command. */
typedef struct {
	const char *name;            /* "label" */
	const char *usage;
	const char *footer;
	const cli_use *uses;
	size_t nuses;
} cli_command;

/* The shared options: defined once here, taken by several commands. */
extern const cli_option cli_opt_threads, cli_opt_seed, cli_opt_epochs, cli_opt_format,
	cli_opt_labels, cli_opt_model, cli_opt_output, cli_opt_window, cli_opt_no_cache;

/* Format words, one per format across commands ("json" is JSON Lines). */
extern const char *const cli_formats_text_json[];        /* text json */
extern const char *const cli_formats_score[];            /* text json sarif */
extern const char *const cli_formats_features[];         /* csv json */

/* Parses argv[1..argc) against c. The arguments that are not options (and
 * every argument after "--") go to *pos, NULL-ended, *npos of them; free()
 * *pos. Returns -1 to go on, or the exit code to return at once: 0 after
 * printing the help, 129 after one usage-error line on stderr (bad value,
 * unknown option). Old spellings are accepted with one notice each. */
int cli_parse(const cli_command *c, int argc, char **argv, const char ***pos, size_t *npos);
/* cli_parse for a command that takes no arguments: one argument is the
 * usage error "takes no arguments ('a')" (129). Returns -1 to go on, or the
 * exit code to return at once. */
int cli_parse_no_args(const cli_command *c, int argc, char **argv);

/* The help text of c on fp. */
void cli_print_help(const cli_command *c, FILE *fp);

/* "git omen <cmd>: bad value 'v' for <opt>: expected <expect>"; returns 129. */
int cli_bad_value(const char *cmd, const char *opt, const char *val, const char *expect);

/* Levenshtein distance of a and b (at most 255 bytes each are compared). */
size_t cli_edit_distance(const char *a, const char *b);

#endif
