/* Shared by main.c and the cmd_*.c files. Only these print or exit. */
#ifndef OMEN_CLI_H
#define OMEN_CLI_H

#include <stdio.h>
#include "omen/omen.h"

/* Exit codes (DESIGN.md "Command line"). */
enum { EXIT_OK = 0, EXIT_RISK = 1, EXIT_FATAL = 128, EXIT_USAGE = 129 };

int cmd_label(int argc, char **argv);
int cmd_train(int argc, char **argv);
int cmd_score(int argc, char **argv);
int cmd_explain(int argc, char **argv);
int cmd_eval(int argc, char **argv);
int cmd_features(int argc, char **argv);
int cmd_hook(int argc, char **argv);
int cmd_version(int argc, char **argv);
/* train --base <dir> (src/cli/cmd_train_base.c) */
int cmd_train_base(const char *dir, const char *out_path, omen_train_opts *o, const char *format);

/* "git omen: <message>" on stderr for the last library error; returns 128. */
int cli_fatal(const char *what);
/* "git omen <cmd>: <message>" usage error on stderr; returns 129. */
int cli_usage(const char *cmd, const char *fmt, ...)
#if defined(__GNUC__)
	__attribute__((format(printf, 2, 3)))
#endif
	;
/* Option matching: "--name=value" or "--name value". Returns 1 and sets *val
 * when argv[*i] is the option (advancing *i past a separate value), -1 when
 * the value is missing, 0 otherwise. */
int cli_opt_value(int argc, char **argv, int *i, const char *name, const char **val);
/* A decimal integer from lo to hi, the whole of v; 0, or -1 when v is not one. */
int cli_parse_int(long long *out, const char *v, long long lo, long long hi);
/* Whether standard output should get colour (a terminal, NO_COLOR unset). */
int cli_use_color(FILE *fp);

#endif
