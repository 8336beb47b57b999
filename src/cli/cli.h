/* Shared by main.c and the cmd_*.c files. Only these print or exit. */
#ifndef OMEN_CLI_H
#define OMEN_CLI_H

#include <stdio.h>
#include "omen/omen.h"

/* Exit codes (DEVELOPERS.md "Error and ownership rules"). */
enum { EXIT_OK = 0, EXIT_RISK = 1, EXIT_FATAL = 128, EXIT_USAGE = 129 };

int cmd_label(int argc, char **argv);
int cmd_train(int argc, char **argv);
int cmd_score(int argc, char **argv);
int cmd_explain(int argc, char **argv);
int cmd_eval(int argc, char **argv);
int cmd_features(int argc, char **argv);
int cmd_hook(int argc, char **argv);
int cmd_health(int argc, char **argv);
int cmd_refresh(int argc, char **argv);
int cmd_version(int argc, char **argv);
/* train --base <dir> (src/cli/cmd_train_base.c) */
int cmd_train_base(const char *dir, const char *out_path, omen_train_opts *o, const char *format);
/* One notice when the scorer's model is a base model kept for a young
 * repository (issue 11); score and the hook call it after opening. */
void cli_note_base_model(const omen_scorer *sc);
void cli_print_base_model(void);

/* Message tags, one set (DEVELOPERS.md, "The option table"):
 *   git omen: error: <what failed>     the command stops, exit 128 (cli_fatal)
 *   git omen: warning: <...>           it finished, but part of the input looks
 *                                      wrong or was ignored; check it
 *   git omen: notice: <...>            how the result was made (an old option
 *                                      name, a capped commit, a shallow clone)
 *   git omen <cmd>: <usage error>      exit 129 (cli_usage, cli_bad_value)
 * cmd_* functions print these only through the helpers below. */

/* "git omen: error: <what>: <last library error>" (either part may be
 * absent) on stderr; returns 128. */
int cli_fatal(const char *what);
/* "git omen: error: <message>" on stderr; returns 128. The one writer of
 * error lines (cli_fatal and the hook's push-not-checked lines use it). */
int cli_error(const char *fmt, ...)
#if defined(__GNUC__)
	__attribute__((format(printf, 1, 2)))
#endif
	;
/* "git omen <cmd>: <message>" usage error on stderr; returns 129. */
int cli_usage(const char *cmd, const char *fmt, ...)
#if defined(__GNUC__)
	__attribute__((format(printf, 2, 3)))
#endif
	;
/* "git omen: warning: <message>" on stderr. */
void cli_warning(const char *fmt, ...)
#if defined(__GNUC__)
	__attribute__((format(printf, 1, 2)))
#endif
	;
/* "git omen: notice: <message>" on stderr. */
void cli_notice(const char *fmt, ...)
#if defined(__GNUC__)
	__attribute__((format(printf, 1, 2)))
#endif
	;
/* cli_notice for each line of lines (NULL or "" prints nothing). */
void cli_notices(const char *lines);
/* Absent blobs (issue 12): the fetch notice and the count of file changes
 * read without lines, on stderr, once at the end of a command. */
void cli_blob_notice(omen_repo *r);
/* Whether standard output should get colour (a terminal, NO_COLOR unset). */
int cli_use_color(FILE *fp);

#endif
