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

/* Normalised copy of an e-mail: lowercased, spaces and <> trimmed. */
char *hist_norm_email(omen_arena *a, const char *email);

#endif
