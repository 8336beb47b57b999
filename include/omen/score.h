/* Scoring: commits, ranges and staged changes scored with a saved model,
 * using the same sample code as training (features.h omen_sample_build);
 * reasons and explanations; the pre-push protocol and the hook installer;
 * JSON Lines and SARIF 2.1.0 writers. Never prints: writers fill buffers.
 * Scores are advisory. */
#ifndef OMEN_SCORE_H
#define OMEN_SCORE_H

#include <stddef.h>
#include <stdint.h>
#include "omen/history.h"
#include "omen/features.h"
#include "omen/model.h"
#include "omen/label.h"

/* ---- pre-push protocol ----------------------------------------------------
 * git feeds a pre-push hook one line per ref to update (githooks(5)):
 *   <local ref> SP <local object name> SP <remote ref> SP <remote object name> LF
 * A deletion has local ref "(delete)" and an all-zero local id; a new remote
 * ref has an all-zero remote id. Object names are 40 (SHA-1) or 64 (SHA-256)
 * hex digits. */
#define OMEN_PREPUSH_MAX_LINES 65536
#define OMEN_PREPUSH_MAX_REF 4096
#define OMEN_HEX_MAX 64

typedef struct {
	const char *local_ref;          /* owned by the list */
	const char *remote_ref;
	char local_id[OMEN_HEX_MAX + 1];
	char remote_id[OMEN_HEX_MAX + 1];
	int id_len;                     /* 40 or 64 */
	int is_delete;                  /* local id all zeros */
	int is_new;                     /* remote id all zeros */
} omen_push_update;

typedef struct {
	omen_push_update *v;
	size_t n, cap;
	omen_arena arena;
} omen_push_list;

/* Parses the whole of git's pre-push input through a bounded cursor. Bad
 * input is OMEN_EINVAL "bad pre-push input: line N: <why>"; *out is then
 * empty (and still to be freed). */
int omen_prepush_parse(omen_push_list *out, const void *data, size_t n);
void omen_prepush_free(omen_push_list *l);

/* Commits new to the remote, oldest first: for each update that is not a
 * deletion, its local id, hiding the remote id when that object exists
 * locally. When it does not (a new ref, or someone else pushed), what the
 * remote has comes from, in this order (issue 15): refs/remotes/<remote>/
 * when there are any; else `git ls-remote -- <url>` within ls_ms (0: not
 * asked); else every remote-tracking ref; else every ref but the pushed
 * local refs (only commits on no other ref are new). *how (may be NULL)
 * says which was used: OMEN_PUSH_BY_*. Deletions add nothing. Merges are
 * left out (they are not scored). *out malloc'd. */
enum {
	OMEN_PUSH_BY_ID,            /* every remote id was known here */
	OMEN_PUSH_BY_TRACKING,      /* refs/remotes/<remote>/ */
	OMEN_PUSH_BY_LS_REMOTE,     /* the remote's own list */
	OMEN_PUSH_BY_ANY_TRACKING,  /* every remote-tracking ref */
	OMEN_PUSH_BY_OTHER_REFS     /* nothing known about the remote */
};
int omen_push_select(git_oid **out, size_t *n, int *how, omen_repo *r, const char *remote,
	const char *url, int ls_ms, const omen_push_list *l);

/* ---- revision arguments -------------------------------------------------- */
/* The commits named by the score/explain arguments, oldest first. An
 * argument with "..", or starting with '^', makes all arguments one range
 * (as git rev-list); otherwise each argument names one commit. No
 * arguments: "@{upstream}..HEAD" when HEAD has an upstream, else "HEAD".
 * *out_desc (malloc'd) says what was resolved, for messages. A name that
 * does not resolve is OMEN_ENOTFOUND "unknown revision 'x'". */
int omen_score_resolve(git_oid **out, size_t *n, char **out_desc, omen_repo *r,
	const char *const *args, size_t nargs);

/* ---- scoring ------------------------------------------------------------- */
typedef enum { OMEN_BAND_LOW, OMEN_BAND_MEDIUM, OMEN_BAND_HIGH } omen_band;
extern const char *const omen_band_names[3];   /* "low", "medium", "high" */

typedef enum {
	OMEN_REASON_HUNK,        /* file and hunk with most attention */
	OMEN_REASON_LARGE,       /* many lines changed against the typical commit */
	OMEN_REASON_DIFFUSE,     /* many files/directories, or spread thinly */
	OMEN_REASON_FIX_HISTORY, /* a file that needed fixes before */
	OMEN_REASON_METRIC       /* another change metric far above typical */
} omen_reason_kind;
extern const char *const omen_reason_names[5];  /* "hunk", "large", ... */

typedef struct {
	int kind;           /* omen_reason_kind */
	double strength;    /* for ordering; larger = stronger */
	char text[192];     /* "src/a.c:120-134 (41% of attention)" */
} omen_reason;

typedef struct {
	const char *path;   /* owned by the set */
	int32_t new_start, new_lines, old_start, old_lines;
	float weight;       /* file attention x hunk attention, sums to ~1 per commit */
	float contrib;      /* gradient x input of the hunk vector */
} omen_hunk_score;

typedef struct {
	char id[OMEN_OID_HEX + 1];   /* all zeros for staged changes */
	const char *summary;         /* first message line, owned by the set */
	int64_t time;
	float prob, logit;           /* calibrated probability, raw logit */
	float lr_prob;               /* metrics-only baseline probability */
	int band;                    /* omen_band */
	int is_fix;
	int capped;
	int32_t la, ld, nfiles, nhunks;
	int32_t nskipped;            /* files over omen.maxBlobBytes: lines not read */
	const char *skipped_path;    /* the first of them, owned by the set */
	float metrics[OMEN_NMETRICS];
	int nreasons;
	omen_reason reasons[2];
	size_t hunk_off, nhunk_scores;   /* into omen_score_set.hunks, by weight */
} omen_score_result;

typedef struct {
	omen_score_result *v;
	size_t n, cap;
	omen_hunk_score *hunks;
	size_t nhunks, hunks_cap;
	omen_arena arena;
	float threshold;      /* probability at or above which a commit is risky */
	int stopped;          /* the deadline stopped scoring early */
	size_t from_cache;    /* of them, scored from the training samples in the dataset cache */
} omen_score_set;

void omen_score_set_init(omen_score_set *s);
void omen_score_set_free(omen_score_set *s);

typedef struct omen_scorer omen_scorer;
typedef struct {
	const char *model_path;  /* NULL: omen.model, else $GIT_DIR/omen/model.omen */
	double threshold;        /* < 0: omen.threshold, else the model's */
	double deadline;         /* omen_now() after which work stops with OMEN_ELIMIT; 0 none */
	int detail;              /* keep every hunk (explain, sarif); else the top 3 */
	int lazy;                /* the hook's fast mode: attention and gradients only
	                          * for commits at or over the threshold (the others'
	                          * hunks are weighted by size), and commits at or
	                          * before the model's head scored against the saved
	                          * state instead of replaying the history */
} omen_score_opts;
#define OMEN_SCORE_OPTS_INIT {NULL, -1.0, 0.0, 0, 0}

/* The model path the scorer would use (never creates directories). */
int omen_score_model_path(char **out, omen_repo *r, const char *override);
/* Loads the model, the fix rules (omen.fixPattern, omen.fixList) and the
 * metrics state saved with the model. A missing model file is
 * OMEN_ENOTFOUND "no model at 'p': run 'git omen train' first". */
int omen_scorer_open(omen_scorer **out, omen_repo *r, const omen_score_opts *o);
void omen_scorer_free(omen_scorer *s);
const omen_model *omen_scorer_model(const omen_scorer *s);
float omen_scorer_threshold(const omen_scorer *s);
/* About which share of commits the threshold fires on (the model's
 * calibration slice), NAN for a model without a warning curve. */
double omen_scorer_fires(const omen_scorer *s);
/* Notices for the user, one line each (without the "git omen: notice: "
 * tag the command adds), NULL if none. */
const char *omen_scorer_notices(const omen_scorer *s);
/* The warning budget settings: omen.warnShare (default
 * OMEN_WARN_SHARE_DEFAULT) and omen.warnPrecision (-1 unset); a value
 * outside (0, 1) is OMEN_EINVAL naming the setting. */
int omen_warn_config(double *share, double *precision, omen_repo *r);
/* "1 in 10" style rate of a share (buf of at least 32 bytes). */
const char *omen_warn_rate_text(char *buf, size_t n, double share);
const char *omen_scorer_model_path(const omen_scorer *s);
/* The base model scored with when the repository has no model of its own
 * (issue 11; NULL otherwise), and the commits it was standardized on. */
const char *omen_scorer_base_fallback(const omen_scorer *s, size_t *commits);
/* Scores ids (results come oldest first). The metrics state is the
 * model's, then fed every commit between the model's head and each scored
 * commit, oldest first, so each commit's metrics use only commits before
 * it, exactly as in training. Commits at or before the model's head are
 * scored from the samples training built when the dataset cache holding
 * them is still valid (same history up to the head, labels and caps), else
 * by replaying the history from its start (as training did, with the
 * labels' fix flags); lazy mode does neither. Merges are not scored. */
int omen_scorer_commits(omen_score_set *out, omen_scorer *s, const git_oid *ids, size_t n);
/* Scores the staged changes (index against HEAD) as a commit with message
 * msg (NULL = empty), state fed up to HEAD. */
int omen_scorer_staged(omen_score_set *out, omen_scorer *s, const char *msg);
/* Per-commit explanation of the last sample scored by the calls above is
 * not kept; explain uses omen_score_explain below. */

/* ---- freshness and drift (issue 12, src/score/health.c) ------------------ */
#define OMEN_STALE_DAYS_DEFAULT 90
#define OMEN_STALE_COMMITS_DEFAULT 1000
enum { OMEN_STALE_AGE = 1, OMEN_STALE_BEHIND = 2, OMEN_STALE_FOREIGN = 4 };
typedef struct {
	int64_t trained_at;           /* training date (seconds, UTC), 0 unknown */
	double age_days;              /* NAN unknown */
	int head_known;               /* the model's head is a commit of this repository */
	int is_base;                  /* the base model (issue 11): no notice for a foreign head */
	int64_t behind;               /* non-merge commits of HEAD after the model's head, -1 unknown */
	int64_t stale_days, stale_commits;   /* omen.staleDays, omen.staleCommits (0 = off) */
	unsigned stale;               /* OMEN_STALE_* */
} omen_freshness;
/* The model says it is a base model: a "base" section in its metadata (as
 * src/model/base.c writes it) or "base_model": true. */
int omen_model_is_base(const omen_model *m);
/* The training date from the metadata, 0 when unknown. */
int64_t omen_model_trained_at(const omen_model *m);
int omen_freshness_check(omen_freshness *out, omen_scorer *s, int64_t now);
/* One notice line for a stale or foreign model, nothing otherwise. */
void omen_freshness_text(omen_buf *out, const omen_freshness *f);
/* Non-merge commits of HEAD that commit hex does not reach; OMEN_ENOTFOUND
 * when hex is not a commit here. */
int omen_commits_since(int64_t *out, omen_repo *r, const char *hex);
/* omen_freshness_check now, its notice added to omen_scorer_notices. */
int omen_scorer_check_fresh(omen_scorer *s);

typedef struct {
	int have;                     /* the model carries a drift reference */
	size_t window;                /* commits compared */
	size_t from_history;          /* of them, read after the model's head */
	size_t replay_skipped;        /* commits after the head not read: over max_replay */
	double psi[OMEN_NMETRICS];    /* NAN without a reference */
	size_t n_train;               /* commits of the training slice */
	double base_train;            /* inducing share of the training slice */
	double base_recent;           /* of the newest labelled commits (NAN without labels) */
	size_t recent_labelled;
} omen_drift;
/* PSI of each metric, training slice against the last `window` commits:
 * those after the model's head (read from history and fed to the model's
 * metrics state, at most max_replay of them, else none) and before them the
 * newest training commits from the reference. labels (may be NULL) read
 * with omen_labels_brief_read for the newest `window` labelled commits. */
int omen_drift_measure(omen_drift *out, omen_scorer *s, const omen_labels_brief *labels,
	size_t window, size_t max_replay);

/* ---- explanation --------------------------------------------------------- */
typedef struct {
	const char *path;
	int32_t line;        /* new line number for '+', old for '-' */
	char origin;         /* '+' or '-' */
	float contrib;       /* summed token gradient x input */
	const char *text;    /* owned by the explanation */
} omen_line_score;

typedef struct {
	const char *path;
	float weight;        /* file attention */
	float contrib;       /* sum of its hunks' gradient x input */
	int32_t added, deleted;
} omen_file_score;

typedef struct {
	int metric;          /* OMEN_M_* */
	float value, typical;/* this commit's raw value; the training history's typical
	                        value (back-transformed mean of log1p values), NAN if unknown */
	float contrib;       /* gradient x standardized input: > 0 pushed up */
} omen_metric_score;

typedef struct {
	char id[OMEN_OID_HEX + 1];
	const char *summary;
	float distance;      /* RMS distance of standardized log-metrics + 1 - Jaccard of files */
	int nfixes;          /* fixes that traced to it */
} omen_neighbour;

typedef struct {
	omen_score_result result;     /* its hunks are in hunks[] below */
	omen_file_score *files;    size_t nfiles;   /* by |contrib| + weight, strongest first */
	omen_hunk_score *hunks;    size_t nhunks;   /* by weight */
	omen_line_score *lines;    size_t nlines;   /* by |contrib| */
	omen_metric_score metrics[OMEN_NMETRICS];   /* by |contrib| */
	float message_contrib;
	omen_neighbour *neighbours; size_t nneighbours;
	int have_typical;          /* typical values came from labelled history */
	omen_arena arena;
	omen_score_set set;        /* private */
} omen_explanation;

/* Explains one commit: attention and gradient x input from the model,
 * metrics against the training history's typical values (the model's
 * standardization), and the top_n labelled inducing commits no newer than
 * it, nearest by the root mean square distance of the model's standardized
 * log-metrics plus one minus the Jaccard overlap of the files touched
 * (alike in shape and in place). Neighbours need
 * the labels file and the dataset (cache); without them they are empty. */
int omen_score_explain(omen_explanation *out, omen_scorer *s, omen_repo *r,
	const git_oid *id, int top_n);
void omen_explanation_free(omen_explanation *e);

/* ---- order ------------------------------------------------------------------ */
typedef enum {
	OMEN_SORT_HISTORY,   /* as scored: the range oldest first */
	OMEN_SORT_RISK,      /* probability, highest first */
	OMEN_SORT_PER_LINE   /* probability per changed line (la + ld, at least 1),
	                      * highest first: the order to review on a budget of
	                      * lines (Mende & Koschke, CSMR 2010) */
} omen_sort_key;
/* Reorders s->v; ties keep the history order. OMEN_ENOMEM only. */
int omen_score_set_sort(omen_score_set *s, omen_sort_key key);

/* ---- writers (append to out) ---------------------------------------------- */
/* One JSON object per commit, one per line (see git-omen-score(1)). */
int omen_score_write_json(omen_buf *out, const omen_score_set *s, const char *model_path);
/* SARIF 2.1.0 log: one result per hunk of each risky commit that carries a
 * noticeable share of the attention (at least 1/(2*hunks) and among the top
 * 5), with file and line region. */
int omen_score_write_sarif(omen_buf *out, const omen_score_set *s, const char *tool_version);

/* ---- hook installer ------------------------------------------------------ */
/* The shim installed as pre-push (identical to hooks/pre-push). */
extern const char omen_hook_shim[];
/* The line that marks a hook file as ours. */
#define OMEN_HOOK_MARK "# git-omen pre-push shim"
/* Name an existing user hook is kept under, beside it, while ours is installed. */
#define OMEN_HOOK_CHAINED_NAME "pre-push.omen-chained"

typedef enum {
	OMEN_HOOK_ABSENT,    /* no pre-push hook */
	OMEN_HOOK_OURS,      /* our shim, nothing chained */
	OMEN_HOOK_CHAINED,   /* our shim, the user's hook chained after it */
	OMEN_HOOK_FOREIGN    /* someone else's hook, ours not installed */
} omen_hook_state;

/* The hooks directory git uses: core.hooksPath (relative paths are taken
 * from the top of the working tree, or GIT_DIR when bare; "~/" expanded),
 * else $GIT_DIR/hooks. Caller frees. */
int omen_hook_dir(char **out, omen_repo *r);
int omen_hook_status(int *out, const char *dir);
/* Installs the shim in dir; an existing foreign pre-push is renamed to
 * OMEN_HOOK_CHAINED_NAME (bytes and mode kept). Installing over our own shim
 * refreshes it. *out is the state after. */
int omen_hook_install(int *out, const char *dir);
/* Removes our shim and renames a chained hook back, byte for byte. A
 * foreign hook is left alone (OMEN_EUSAGE). */
int omen_hook_uninstall(int *out, const char *dir);
/* The same for either hook: the pre-push shim, or the post-merge shim that
 * starts 'git omen refresh' in the background (issue 12), chained the same
 * way under OMEN_REFRESH_CHAINED_NAME. */
enum { OMEN_HOOK_KIND_PUSH, OMEN_HOOK_KIND_REFRESH };
extern const char omen_refresh_shim[];
#define OMEN_REFRESH_MARK "# git-omen post-merge shim"
#define OMEN_REFRESH_CHAINED_NAME "post-merge.omen-chained"
int omen_hook_status_as(int *out, const char *dir, int kind);
int omen_hook_install_as(int *out, const char *dir, int kind);
int omen_hook_uninstall_as(int *out, const char *dir, int kind);

#endif
