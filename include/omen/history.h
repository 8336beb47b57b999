/* History reader: the only module (with label/ for its own tracing needs and
 * cli/ for hooks) that talks to libgit2. Streams one omen_change per commit:
 * the commit's facts, every changed file, every -U0 hunk and every added and
 * deleted line. Memory is bounded by the largest commit, not the history. */
#ifndef OMEN_HISTORY_H
#define OMEN_HISTORY_H

#include <stddef.h>
#include <stdint.h>
#include <git2.h>
#include "omen/util.h"

#define OMEN_OID_HEX 40 /* libgit2 1.5 reads SHA-1 repositories */

typedef struct omen_repo omen_repo;

/* Opens the repository the way git does: GIT_DIR and friends from the
 * environment (GIT_REPOSITORY_OPEN_FROM_ENV), path may be a subdirectory;
 * path NULL means the current directory. Turns off strict hash
 * verification and enlarges the object cache for bulk reading. */
int omen_repo_open(omen_repo **out, const char *path);
void omen_repo_free(omen_repo *r);
git_repository *omen_repo_git(omen_repo *r);
const char *omen_repo_gitdir(const omen_repo *r);   /* with trailing '/' */
const char *omen_repo_workdir(const omen_repo *r);  /* NULL when bare */
int omen_repo_is_shallow(omen_repo *r);
/* $GIT_DIR/omen/<name>, directory created. Caller frees. */
int omen_repo_omen_path(char **out, omen_repo *r, const char *name);

/* ---- configuration (git config section "omen") --------------------------
 * Settings are read once per opened repository the way git reads them:
 * through `git config` itself when git runs (every file, includeIf,
 * GIT_CONFIG_GLOBAL/SYSTEM, GIT_CONFIG_COUNT/KEY_n/VALUE_n, `git -c`), else
 * from libgit2's config stack with GIT_CONFIG_COUNT and
 * GIT_CONFIG_PARAMETERS on top. Without a repository (r NULL) only those two
 * environment sources count. Key names are case-insensitive as in git
 * ("omen.maxFixFiles"). Missing key: returns 0 and leaves *out at the
 * caller's default. Every key is a row of the settings table, which gives
 * its kind and bounds; a bad value is OMEN_EINVAL with the value as written:
 * "bad config value 'omen.window': '-5' is not a number of days from 0 to
 * 100000". A key not in the table, or read as another kind, is OMEN_EUSAGE. */
typedef enum {
	OMEN_SETTING_TEXT,    /* any text: paths, patterns, lists */
	OMEN_SETTING_INT,     /* git's integer (k, m, g suffixes) within [min, max] */
	OMEN_SETTING_PROB,    /* a number from 0 to 1 (-0 read as 0) */
	OMEN_SETTING_SHARE,   /* a number strictly between 0 and 1 */
	OMEN_SETTING_CHOICE,  /* exactly one of choices */
	OMEN_SETTING_BOOL     /* git's boolean words; a key without a value is true */
} omen_setting_kind;

typedef struct {
	const char *key;             /* as documented: "omen.maxBlobBytes" */
	omen_setting_kind kind;
	int64_t min, max;            /* OMEN_SETTING_INT: inclusive bounds */
	const char *const *choices;  /* OMEN_SETTING_CHOICE: NULL-terminated */
	const char *what;            /* the rule in words: "'x' is not <what>" */
	const char *def;             /* the default in words */
} omen_setting;

typedef struct {
	const char *text;  /* as given (NULL: a key without a value) */
	int64_t i;         /* INT, BOOL (0 or 1) */
	double d;          /* PROB, SHARE */
	int choice;        /* CHOICE: index into choices */
} omen_setting_value;

/* Bounds shared with the command-line options of the same meaning. */
#define OMEN_WINDOW_MAX_DAYS 100000         /* omen.window, --window */
#define OMEN_THREADS_MAX 64                 /* omen.threads, --threads */
#define OMEN_HOOK_TIMEOUT_MAX_MS 3600000    /* omen.hookTimeout: one hour */

const omen_setting *omen_settings_table(size_t *n);
const omen_setting *omen_setting_find(const char *key);  /* NULL when not a row */
/* Checks text against s's kind and bounds; the error names s->key. */
int omen_setting_parse(omen_setting_value *out, const omen_setting *s, const char *text);

int omen_config_string(char **out, omen_repo *r, const char *key); /* TEXT or CHOICE; malloc'd or untouched */
/* (omen_config_string also reads a git key outside "omen." that is not a
 * row, such as remote.<name>.url: the environment's pairs, then libgit2's
 * stack, unchecked) */
int omen_config_int(int64_t *out, omen_repo *r, const char *key);  /* INT */
int omen_config_bool(int *out, omen_repo *r, const char *key);     /* BOOL */
int omen_config_double(double *out, omen_repo *r, const char *key); /* PROB or SHARE */
int omen_config_choice(int *out, omen_repo *r, const char *key);   /* CHOICE: the index */
/* The omen.* keys set for r (any source) that are not rows of the table,
 * each name once: typos such as omen.onRsik, which git and the typed reads
 * ignore. Start with *pos = 0; NULL when there are no more. */
const char *omen_config_next_unknown(omen_repo *r, size_t *pos);
/* Parses GIT_CONFIG_PARAMETERS text (exposed for the fuzz target):
 * calls cb for every key=value pair; returns OMEN_EINVAL on bad quoting. */
int omen_config_parse_params(const char *text,
	int (*cb)(const char *key, const char *val, void *payload), void *payload);

/* ---- records ------------------------------------------------------------- */
typedef enum {
	OMEN_FILE_ADDED = 'A',
	OMEN_FILE_DELETED = 'D',
	OMEN_FILE_MODIFIED = 'M',
	OMEN_FILE_RENAMED = 'R',
	OMEN_FILE_TYPECHANGE = 'T'
} omen_file_status;

enum {
	OMEN_FILE_BINARY = 1 << 0,
	OMEN_FILE_SUBMODULE = 1 << 1,
	OMEN_FILE_TOO_LARGE = 1 << 2, /* over max_blob_bytes: no hunks read */
	OMEN_FILE_SYMLINK = 1 << 3,
	OMEN_FILE_MODE_ONLY = 1 << 4,
	OMEN_FILE_MISSING = 1 << 5,   /* a side's blob is not in the repository and was
	                                 skipped (omen.missingBlobs): 0 0, no hunks */
	OMEN_FILE_FILTERED = 1 << 6   /* left out by walk_opts.path_filter: paths, blob ids
	                                 and status only; no blob read, 0 0, no hunks */
};

typedef struct {
	const char *old_path;  /* NULL for added files */
	const char *new_path;  /* NULL for deleted files */
	git_oid old_blob, new_blob;
	char status;           /* omen_file_status */
	unsigned flags;        /* OMEN_FILE_* */
	uint32_t hunk_off;     /* first hunk in omen_change.hunks */
	uint32_t nhunks;
	uint32_t added, deleted;  /* equal git log --numstat (0 0 for binary) */
	int64_t old_nlines;    /* lines in the old blob (0 when added/binary) */
} omen_file;

typedef struct {
	int32_t old_start, old_lines;  /* as in "@@ -a,b +c,d @@" of -U0 */
	int32_t new_start, new_lines;
	uint32_t line_off;   /* first line in omen_change.lines */
	uint32_t nlines;     /* deleted lines first, then added lines */
	uint32_t file;       /* index into omen_change.files */
} omen_hunk;

typedef struct {
	char origin;         /* '-' deleted, '+' added */
	int32_t old_lineno;  /* 1-based, -1 for added lines */
	int32_t new_lineno;  /* 1-based, -1 for deleted lines */
	uint32_t text_off;   /* into omen_change.text; no trailing newline */
	uint32_t text_len;
} omen_line;

typedef struct {
	git_oid id;
	char hex[OMEN_OID_HEX + 1];
	uint32_t nparents;
	const git_oid *parents;   /* nparents ids; a missing parent (shallow) is kept */
	int64_t author_time;      /* seconds since the epoch, UTC */
	int32_t author_tz;        /* minutes east of UTC */
	int64_t commit_time;
	int32_t commit_tz;
	const char *author_name;
	const char *author_email; /* lowercased, surrounding <> and spaces removed */
	const char *message;      /* raw bytes, may be invalid UTF-8 */
	int boundary;             /* 1 when a parent is missing (shallow edge) */
} omen_commit;

typedef struct {
	omen_commit commit;
	omen_file *files;  size_t nfiles;
	omen_hunk *hunks;  size_t nhunks;
	omen_line *lines;  size_t nlines;
	const char *text;  /* line text storage */
	/* private */
	omen_arena arena;
	size_t files_cap, hunks_cap, lines_cap;
	omen_buf textbuf;
} omen_change;

void omen_change_init(omen_change *c);
void omen_change_clear(omen_change *c);   /* keeps capacity */
void omen_change_free(omen_change *c);
static inline const char *omen_line_text(const omen_change *c, const omen_line *l)
{
	return c->text + l->text_off;
}
/* The file's path: the new one, else the old one (deleted files), else "". */
static inline const char *omen_file_path(const omen_file *f)
{
	return f->new_path ? f->new_path : f->old_path ? f->old_path : "";
}

/* ---- walking ------------------------------------------------------------- */
typedef struct {
	const char *const *revs;  /* "A..B", "A...B", "^A", "B", NULL-terminated; NULL = HEAD */
	int all;                  /* every ref (as --all) */
	int64_t since, until;     /* commit-time bounds, 0 = none */
	int include_merges;       /* default 0; a merge is diffed against its first parent */
	int newest_first;         /* default 0: oldest first (topological, parents first) */
	int first_parent;         /* follow first parents only */
	int64_t max_blob_bytes;   /* larger blobs are skipped (OMEN_FILE_TOO_LARGE); 0 = 50 MiB */
	int detect_renames;       /* exact blob-id renames; default on (set -1 to turn off) */
	int threads;              /* diff workers; 0 = online cores (max 2) */
	int with_lines;           /* 0 = hunks and counts only, no line text */
	int missing_blobs;        /* OMEN_MISSING_*; 0 = omen.missingBlobs, else by clone kind */
	int no_prefetch;          /* 1: the caller ran omen_history_prefetch over these commits */
	/* Path filter (issue 13, a sharded label pass): called for every changed
	 * file after exact renames are paired (old_path NULL: added, new_path
	 * NULL: deleted; pairing 1 when the change still has both an added and a
	 * deleted file, the case where renames with edits are looked for); 0
	 * lists the file with OMEN_FILE_FILTERED and reads none of its blobs. It
	 * is called in walk order, file by file, so a walk with a filter diffs in
	 * the calling thread (threads is ignored). */
	int (*path_filter)(const char *old_path, const char *new_path, int pairing, void *ctx);
	void *path_filter_ctx;
} omen_walk_opts;

#define OMEN_WALK_OPTS_INIT {NULL, 0, 0, 0, 0, 0, 0, 0, 0, 0, 1, 0, 0, NULL, NULL}

/* ---- partial and incomplete clones (issue 12) ------------------------------
 * What a walk does with a blob that is not in the object database.
 * omen.missingBlobs = error | skip | fetch; unset: fetch in a partial clone
 * (a remote with remote.<name>.promisor, or extensions.partialClone), else
 * error, as git's own commands fail on a missing object.
 *  - error: the read fails with a one-line error that names the setting.
 *  - skip: the file change gets OMEN_FILE_MISSING (0 0, no hunks) and is
 *    counted in omen_blob_stats.skipped_files.
 *  - fetch: before a walk, a pre-pass over the tree diffs the walk will make
 *    collects the absent blobs, and the user's git fetches them from the
 *    promisor remote in batches (git's own lazy fetch command, with the ids
 *    on standard input); what still cannot be read is skipped as above,
 *    after one notice when fetching could not work. */
enum {
	OMEN_MISSING_ERROR = 1,
	OMEN_MISSING_SKIP = 2,
	OMEN_MISSING_FETCH = 3
};

typedef struct {
	int partial;              /* a promisor remote or extensions.partialClone is configured */
	char remote[128];         /* the promisor remote fetched from last, "" none */
	size_t scanned;           /* commits the pre-passes looked at */
	size_t wanted;            /* absent blobs they found (distinct) */
	size_t fetched;           /* of those, present after the fetches */
	size_t trees_wanted;      /* absent root trees (a --filter=tree:0 clone), fetched first */
	size_t trees_fetched;
	size_t batches;           /* git fetch runs */
	double scan_seconds;      /* pre-pass time */
	double fetch_seconds;     /* git fetch time (wall) */
	double fetch_cpu_seconds; /* CPU time of git fetch and the processes it waited for */
	size_t skipped_files;     /* file changes read with a blob skipped (OMEN_FILE_MISSING) */
	char notice[512];         /* why fetching could not work, one line; "" none */
} omen_blob_stats;

/* Counts of this repository handle since it was opened (pre-passes, fetches
 * and skipped reads of every walk made through it). */
const omen_blob_stats *omen_repo_blob_stats(omen_repo *r);

/* The pre-pass and fetch for the given commits (merges are compared with
 * their first parent, other commits as the walk diffs them): a no-op unless
 * the policy is fetch. Absent blobs are fetched in batches through
 * `git fetch --stdin` from the promisor remotes in git's order (the
 * remote.<name>.promisor ones, then the extensions.partialClone one), with
 * a progress line on a terminal. Fetching that cannot work (no promisor
 * remote, git missing, the remote unreachable) is not an error: the notice
 * in omen_blob_stats says why, and the walk skips what is absent. Errors:
 * a commit or tree that cannot be read (OMEN_EGIT), a bad omen.missingBlobs
 * (OMEN_EINVAL), out of memory. */
int omen_history_prefetch(omen_repo *r, const omen_walk_opts *o, const git_oid *ids, size_t n);

/* Called once per commit in walk order; returning non-zero stops the walk
 * and that value is returned. The change is only valid during the call. */
typedef int (*omen_change_cb)(const omen_change *c, void *payload);

/* Walks revs and streams each commit's change. A shallow clone is walked to
 * its boundary (commits there get boundary=1 and a diff against nothing is
 * NOT produced: their files are listed as added). */
int omen_history_walk(omen_repo *r, const omen_walk_opts *o, omen_change_cb cb, void *payload);

/* The same stream for the given commits, in the given order (for example a
 * part of what omen_history_list returned). */
int omen_history_walk_ids(omen_repo *r, const omen_walk_opts *o, const git_oid *ids, size_t n,
	omen_change_cb cb, void *payload);

/* Commit ids only, in walk order (cheap: no diffs). *out malloc'd. */
int omen_history_list(git_oid **out, size_t *n, omen_repo *r, const omen_walk_opts *o);

/* Reads one commit's change (against its first parent). */
int omen_history_change(omen_change *out, omen_repo *r, const git_oid *id, const omen_walk_opts *o);
/* The staged changes (index against HEAD, or against nothing when unborn),
 * as a change whose commit has a zero id, the configured identity and now. */
int omen_history_staged(omen_change *out, omen_repo *r, const omen_walk_opts *o);

/* The files that differ between the trees of two commits (old_commit NULL:
 * against nothing), in tree order, with paths, blob ids and status (added,
 * deleted, modified) only: no blob is read, no hunk made and no rename
 * paired, and equal subtrees are skipped unread. A submodule side counts as
 * absent. out is cleared first. A commit or tree that cannot be read is
 * OMEN_EGIT. */
int omen_history_tree_files(omen_change *out, omen_repo *r, const git_oid *old_commit,
	const git_oid *new_commit);

/* Diffs one pair of blobs exactly as the walk diffs a changed regular file
 * (-U0, git's common-tail trim, binary probe, omen.maxBlobBytes): out is
 * cleared and gets that one file (OMEN_FILE_BINARY or OMEN_FILE_TOO_LARGE and
 * no hunks when so), its hunks and, unless o->with_lines is 0, its lines.
 * A NULL or zero old_blob is an added file, a NULL or zero new_blob a deleted
 * one; each present side needs its path (equal paths: modified, else
 * renamed). o as for omen_history_change (NULL: defaults). A blob that
 * cannot be read is OMEN_EGIT. */
int omen_history_diff_blobs(omen_change *out, omen_repo *r, const char *old_path,
	const git_oid *old_blob, const char *new_path, const git_oid *new_blob,
	const omen_walk_opts *o);

/* Resolves a revision string (anything git_revparse_single takes). */
int omen_history_resolve(git_oid *out, omen_repo *r, const char *spec);

/* ---- refs and commit facts (src/history/refs.c) -------------------------- */
/* The commits of the remote-tracking refs refs/remotes/<remote>/STAR, each
 * peeled to its commit, in ref order; refs that do not name a commit are
 * skipped, and a remote without refs gives *n = 0. *out malloc'd (NULL when
 * none). Only running out of memory fails (OMEN_ENOMEM). */
int omen_history_remote_refs(git_oid **out, size_t *n, omen_repo *r, const char *remote);
/* The same for every remote-tracking ref (refs/remotes/STAR). */
int omen_history_tracking_refs(git_oid **out, size_t *n, omen_repo *r);
/* The same for every ref but those named in except (full names such as
 * "refs/heads/main"; NULL entries ignored). */
int omen_history_other_refs(git_oid **out, size_t *n, omen_repo *r, const char *const *except,
	size_t nexcept);
/* What `git ls-remote -- <url>` lists, as the local commits those ids name
 * (ids not in this repository are dropped), asked of git with
 * GIT_TERMINAL_PROMPT=0 and killed after timeout_ms (> 0): OMEN_ELIMIT.
 * git failing (unreachable, no such repository) is OMEN_ENOTFOUND with git's
 * first line; no git to run is OMEN_ENOTFOUND too. */
int omen_history_ls_remote(git_oid **out, size_t *n, omen_repo *r, const char *url, int timeout_ms);
/* The commit of the current branch's upstream, as git's @{upstream}:
 * branch.<b>.remote and branch.<b>.merge from the config, the merge ref
 * mapped through remote.<remote>.fetch refspecs ("." as the remote means a
 * local branch). Read by hand because libgit2 1.5's own @{upstream} lookup
 * leaks. OMEN_ENOTFOUND "no upstream for the current branch" when HEAD is
 * not on a branch, a key is missing, no refspec maps the merge ref,
 * or the mapped ref does not exist; OMEN_ENOMEM when out of memory. */
int omen_history_upstream(git_oid *out, omen_repo *r);
/* A commit's subject as git's %s (first paragraph of the message, lines
 * joined by spaces, leading blank lines dropped). *out malloc'd.
 * OMEN_ENOTFOUND "cannot read commit '<id>': ..." when it is not there. */
int omen_history_subject(char **out, omen_repo *r, const git_oid *id);
/* How many parents a commit has (a merge has two or more). OMEN_ENOTFOUND
 * "cannot read commit '<id>': ..." when it is not there. */
int omen_history_parent_count(size_t *out, omen_repo *r, const git_oid *id);

/* ---- object ids: the stages above history/ use these, never libgit2 ------ */
/* The id's hex digits, at most n - 1 of them, NUL-terminated (n >= 1). */
void omen_oid_hex(char *out, size_t n, const git_oid *id);
/* A full 40-digit hex id. OMEN_EINVAL "bad commit id '<text>'" otherwise. */
int omen_oid_parse(git_oid *out, const char *hex);
/* 1 when the ids are the same, else 0. */
int omen_oid_equal(const git_oid *a, const git_oid *b);

/* ---- line classes (src/history/lines.c) --------------------------------- */
/* Whether a line is blank/whitespace-only, or a comment only line in the
 * common syntaxes (//, #, /ASTERISK, ASTERISK, --, ;, %). Used by the labeller. */
int omen_line_is_blank(const char *s, size_t n);
int omen_line_is_comment(const char *s, size_t n);
/* Whether s, the text after a line's '#', starts with a C preprocessor
 * directive (include, define, if, pragma, ...): such a line is code. */
int omen_line_is_directive(const char *s, size_t n);

#endif
