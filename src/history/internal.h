/* Internal to src/history/: the per-thread differ that turns one commit (or
 * one pair of trees) into an omen_change. */
#ifndef OMEN_HISTORY_INTERNAL_H
#define OMEN_HISTORY_INTERNAL_H

#include <git2.h>
#include "omen/history.h"

/* One changed path before blobs are diffed. Mode 0 = side absent. */
typedef struct {
	const char *old_path, *new_path; /* in the change's arena */
	git_oid old_id, new_id;
	uint32_t old_mode, new_mode;
	int dropped;                     /* paired away as a rename source */
} hist_entry;

typedef struct {
	git_repository *repo;   /* not owned */
	git_odb *odb;           /* owned */
	int64_t max_blob;
	int detect_renames;     /* > 0 on */
	int with_lines;
	hist_entry *ents;
	size_t nents, ents_cap;
	omen_buf path;          /* scratch: current directory prefix */
	git_diff_options dopts;
	git_oid empty_blob;
	int missing;            /* OMEN_MISSING_*: what an absent blob does */
	size_t *skipped;        /* counter of skipped file changes (atomic), may be NULL */
	int (*filter)(const char *old_path, const char *new_path, int pairing, void *ctx);
	void *filter_ctx;       /* walk_opts.path_filter and its ctx */
	int pairing;            /* the change has an added and a deleted file (for filter) */
} hist_differ;

int hist_differ_init(hist_differ *d, git_repository *repo, const omen_walk_opts *o);
void hist_differ_free(hist_differ *d);

/* Fills out (cleared first) with commit id's facts and its diff against the
 * first parent (nothing for roots and shallow boundaries). */
int hist_diff_commit(hist_differ *d, omen_change *out, const git_oid *id);

/* Compares two trees (either may be NULL) into d->ents, then diffs the
 * blobs into out. */
int hist_diff_trees(hist_differ *d, omen_change *out, git_tree *old_tree, git_tree *new_tree);
/* Appends one raw entry (paths copied into out's arena). */
int hist_add_entry(hist_differ *d, omen_change *out, const char *old_path, const char *new_path,
	const git_oid *old_id, uint32_t old_mode, const git_oid *new_id, uint32_t new_mode);
/* The changed entries between two trees (either may be NULL) into d->ents,
 * no blob read. */
int hist_list_trees(hist_differ *d, omen_change *out, git_tree *old_tree, git_tree *new_tree);
/* Pairs renames and diffs every entry in d->ents into out's files. */
int hist_diff_entries(hist_differ *d, omen_change *out);

/* ---- repo.c: partial clones ---- */
/* Whether the repository is a partial clone (cached after the first call). */
int hist_repo_partial(omen_repo *r);
/* The promisor remotes in git's order: remote.<name>.promisor ones in
 * config order, then the extensions.partialClone one; names that exist as
 * remotes only. *out malloc'd array of malloc'd names (hist_strs_free). */
int hist_repo_promisors(char ***out, size_t *n, omen_repo *r);
void hist_strs_free(char **v, size_t n);
omen_blob_stats *hist_repo_stats(omen_repo *r);

/* o with omen.maxBlobBytes / omen.threads / omen.missingBlobs filled in
 * where 0. */
int hist_resolve_opts(omen_walk_opts *dst, omen_repo *r, const omen_walk_opts *o);

/* Sets an OMEN_EGIT error "<what> '<subject>': <libgit2's last message>"
 * and returns it. */
int hist_git_fail(const char *what, const char *subject);

/* ---- settings and the git command (config.c, gitcmd.c, repo.c) ---------- */
/* One entry of the settings snapshot, in git's order (the last one of a key
 * wins); val NULL for a key given without '=' (git -c k). */
typedef struct {
	char *key, *val;
} hist_setting_entry;

typedef struct {
	hist_setting_entry *v;
	size_t n, cap;
	int from_git;   /* 1: git config answered; 0: libgit2 and the environment */
} hist_settings;

#define HIST_SETTINGS_MAX_BYTES (4u << 20)  /* what git config may print for us */

/* Reads the omen.* keys and core.hooksPath of repo once: `git --git-dir=<repo>
 * config --null --get-regexp` when git runs, else libgit2's config stack
 * with the environment's pairs on top. */
int hist_settings_load(hist_settings *s, git_repository *repo);
void hist_settings_free(hist_settings *s);
hist_settings *hist_repo_settings(omen_repo *r);
/* The pairs of GIT_CONFIG_COUNT/KEY_n/VALUE_n, then of GIT_CONFIG_PARAMETERS. */
int hist_settings_from_env(int (*cb)(const char *key, const char *val, void *payload), void *payload);

/* Runs git (the one in GIT_EXEC_PATH, else the first in an absolute PATH
 * directory: never one in the current directory) with argv, standard input from /dev/null, and
 * collects its standard output (at most max bytes: OMEN_ELIMIT beyond) and
 * the start of its standard error. envp NULL: ours. *status is the exit
 * status (128 + signal when killed). OMEN_ENOTFOUND when git cannot be
 * started. timeout_ms > 0: the child is killed after that long
 * (OMEN_ELIMIT). */
int hist_git_run_env(int *status, omen_buf *out, omen_buf *err, const char *const *argv,
	char *const *envp, size_t max, int timeout_ms);
/* The git to run: $GIT_EXEC_PATH/git when set (the git that ran us), else
 * the first "git" in an absolute PATH directory; empty and relative PATH
 * entries (the current directory: a work tree someone else wrote) are
 * skipped. 0 or OMEN_ENOTFOUND. */
int hist_git_find(char *out, size_t cap);
/* git's first message line, its "fatal: "/"error: " tag removed and
 * control bytes shown as '?', cut to fit cap. */
void hist_git_first_line(char *dst, size_t cap, const omen_buf *err);

/* Normalised copy of an e-mail: lowercased, spaces and <> trimmed. */
char *hist_norm_email(omen_arena *a, const char *email);

#endif
