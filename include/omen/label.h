/* Labeller: fix-commit identification, one oldest-first line-origin pass
 * (SZZ, Sliwerski, Zimmermann & Zeller, MSR 2005, with the refinements in
 * DEVELOPERS.md "Labeller"), label file I/O. */
#ifndef OMEN_LABEL_H
#define OMEN_LABEL_H

#include <stdint.h>
#include "omen/history.h"

typedef enum {
	OMEN_LABEL_UNKNOWN = -1,
	OMEN_LABEL_CLEAN = 0,
	OMEN_LABEL_INDUCING = 1
} omen_label_value;
/* The label's name in every file and output: "inducing", "clean", else
 * "unknown". */
const char *omen_label_name(int label);

/* How a commit was identified as a fix (bit set). */
enum {
	OMEN_FIXBY_PATTERN = 1 << 0,   /* message matched omen.fixPattern */
	OMEN_FIXBY_LIST = 1 << 1,      /* listed in the user's fix file */
	OMEN_FIXBY_ISSUE = 1 << 2,     /* references an issue id from the fix file */
	OMEN_FIXBY_NAMED = 1 << 3      /* names the commit it repairs (Fixes:, revert) */
};

/* Fix identification rules. */
typedef struct omen_fixrules omen_fixrules;
/* The fix rules of issue 10; each rule is on by default (zero fields). */
typedef struct {
	const char *pattern;   /* NULL = the default fix pattern */
	const char *cosmetic;  /* NULL = omen_fix_default_cosmetic, "" = rule off */
	int closing_refs;      /* 1 = "closes #12" alone makes a fix (rule off; default pattern only) */
	int whole_message;     /* 1 = trailers, quoted text and a revert's subject count (rule off) */
	int feature_subjects;  /* 1 = a subject announcing new work may be a fix without "fix"/"bug" (rule off) */
} omen_fixrule_opts;
#define OMEN_FIXRULE_OPTS_INIT {NULL, NULL, 0, 0, 0}
/* A bad regex is OMEN_EINVAL "bad fix pattern 'x': <regerror text>" (or
 * "bad cosmetic pattern ..."). */
int omen_fixrules_new_opts(omen_fixrules **out, const omen_fixrule_opts *o);
/* pattern NULL = default, other rules at their defaults. */
int omen_fixrules_new(omen_fixrules **out, const char *pattern);
/* One id per line: a commit id (hex, >= 7) or an issue id ("#123", "PROJ-9"),
 * optionally followed by whitespace and an ISO date (the issue's open date). */
int omen_fixrules_load_list(omen_fixrules *fr, const char *path);
void omen_fixrules_free(omen_fixrules *fr);
/* Returns OMEN_FIXBY_* bits (0 = not a fix). Named commits (hex prefixes
 * found in "Fixes:"/revert lines) are appended to named[] up to max_named. */
unsigned omen_fix_classify(const omen_fixrules *fr, const omen_commit *c,
	char named[][OMEN_OID_HEX + 1], int max_named, int *n_named);
/* What omen_fix_classify_ex saw beside the fix bits. */
typedef struct {
	int cosmetic;      /* a fix whose subject matches the cosmetic pattern */
	int outside_only;  /* not a fix: the fix pattern matched only trailers or quoted text */
	int closing_only;  /* not a fix: only a closing word with a number matched */
	int feature_only;  /* not a fix: a subject announcing new work, no "fix"/"bug" */
} omen_fix_info;
unsigned omen_fix_classify_ex(const omen_fixrules *fr, const omen_commit *c,
	char named[][OMEN_OID_HEX + 1], int max_named, int *n_named, omen_fix_info *info);
/* The author's description of a message: the message without its trailer
 * block (the last paragraph when all its lines are "Token: value" trailers
 * or their continuations), without quoted lines ("> ...") and, on a
 * 'Revert "..."' subject, without the quoted subject. */
int omen_fix_description(omen_buf *out, const char *msg);
extern const char omen_fix_default_cosmetic[];
/* Earliest issue date (seconds, UTC) the fix list gives for this commit:
 * its own listed date or that of a listed issue its message references;
 * 0 when none is known. */
int64_t omen_fix_issue_date(const omen_fixrules *fr, const omen_commit *c);
/* Entries of the loaded fix list that matched no commit (after a run). */
size_t omen_fixrules_unmatched(const omen_fixrules *fr);
size_t omen_fixrules_list_size(const omen_fixrules *fr);
/* The default fix pattern (POSIX extended regex, matched case-insensitively). */
extern const char omen_fix_default_pattern[];

/* Non-code paths (issue 10, src/label/paths.c): globs separated by commas
 * or spaces; "dir/" = a directory at any depth, no '/' = the base name,
 * else the whole path (fnmatch). Empty text = an empty set (rule off). */
typedef struct omen_pathset omen_pathset;
int omen_pathset_new(omen_pathset **out, const char *globs);
void omen_pathset_free(omen_pathset *ps);
int omen_pathset_match(const omen_pathset *ps, const char *path);
size_t omen_pathset_count(const omen_pathset *ps);
extern const char omen_noncode_default[];

/* Why a fix was not traced (fix_scope of a record). */
enum {
	OMEN_FIXSCOPE_CODE = 0,      /* traced */
	OMEN_FIXSCOPE_COSMETIC = 1,  /* cosmetic pattern: recorded, not traced */
	OMEN_FIXSCOPE_NONCODE = 2,   /* changes only non-code paths */
	OMEN_FIXSCOPE_LARGE = 3      /* more files than omen.maxFixFiles */
};

typedef struct {
	char id[OMEN_OID_HEX + 1];
	int64_t time;            /* author time */
	int label;               /* omen_label_value */
	int is_fix;
	unsigned fix_by;         /* OMEN_FIXBY_* when is_fix */
	uint32_t traced_lines;   /* lines traced to this commit */
	uint32_t nfixes;         /* fixes that traced to it */
	const char *const *fixes;/* their ids */
	int merge;               /* merge commit: never a candidate, label unknown */
	int boundary;            /* shallow boundary: label unknown */
	uint32_t named;          /* fixes that name it (Fixes:, revert): strong links */
	int fix_scope;           /* OMEN_FIXSCOPE_* when is_fix */
} omen_label_rec;

/* In-memory label set, looked up by commit id. */
typedef struct omen_labels omen_labels;
int omen_labels_load(omen_labels **out, const char *path);  /* JSON Lines */
/* The same with a ceiling on the file's size: max_bytes > 0 is
 * omen.memoryLimit (named in the error), else OMEN_READ_MAX. A FIFO or a
 * device is refused (omen_file_open_read). */
int omen_labels_load_max(omen_labels **out, const char *path, int64_t max_bytes);
/* Parses label file bytes (exposed for the fuzz target). A broken line is
 * OMEN_ECORRUPT "bad label file 'p': line N: <why>". */
int omen_labels_parse(omen_labels **out, const char *name, const char *data, size_t n);
void omen_labels_free(omen_labels *l);
const omen_label_rec *omen_labels_get(const omen_labels *l, const char *hex);
size_t omen_labels_count(const omen_labels *l);
const omen_label_rec *omen_labels_at(const omen_labels *l, size_t i); /* file order */
/* The header's counts and the labels of the newest `tail` labelled records,
 * read without parsing the whole file (git omen health). */
typedef struct {
	char head[OMEN_OID_HEX + 1];
	size_t commits, inducing, clean, unknown;
	size_t recent, recent_inducing;
} omen_labels_brief;
int omen_labels_brief_read(omen_labels_brief *out, const char *path, size_t tail);
/* The horizon the label file at path was written with ("horizon_days" of
 * its header's options; issue 10), reading only the header line; 0 when
 * none, or when the file is missing or unreadable. */
int64_t omen_labels_file_horizon(const char *path);
/* The history the labels cover (newest commit id), for cache keys. */
const char *omen_labels_head(const omen_labels *l);
/* The rule the file was labelled with, from the header's "options":
 * verification window (days, 90 when absent) and horizon (days, 0 when
 * absent: no horizon). */
void omen_labels_rule(const omen_labels *l, int64_t *out_window_days, int64_t *out_horizon_days);

/* ---- labels as known at a time t (issue 16; src/label/known.c) -----------
 * The one rule behind every training slice (train's split, each eval
 * fold): a commit is inducing at t when a fix dated before t traced to it
 * (within the horizon H of the commit, when the labels have one); clean
 * when it is older than the window at t (H when set, else the verification
 * window) and not inducing at t; otherwise unknown. A commit unknown now
 * (merge, shallow boundary, inside the window) is unknown at every t.
 * Nothing is dropped for being fixed later: it is what it was at t. */
int omen_label_at(int label_now, int64_t time, int64_t first_fix, int64_t t,
	int64_t window_days, int64_t horizon_days);

/* Per-commit inputs of that rule for n commits (index order is the
 * caller's, e.g. the dataset's). first_fix: author time of the earliest
 * fix that traced to the commit, INT64_MAX when none is listed, INT64_MIN
 * when its label is to count as known at every t (labels without fix
 * times, as in an in-memory dataset). */
typedef struct {
	size_t n;
	int64_t *time;
	int8_t *label;            /* label as known now (the label file's) */
	int64_t *first_fix;
	int64_t window_days, horizon_days;
} omen_label_clock;
/* Allocates the arrays for n commits (labels unknown, no fixes, window 90). */
int omen_label_clock_alloc(omen_label_clock *c, size_t n);
/* A clock for labels without fix times: every label counts as known at
 * every time (first_fix INT64_MIN for inducing commits), window 90. */
int omen_label_clock_known(omen_label_clock *c, const int64_t *time, const int8_t *label,
	size_t n);
void omen_label_clock_free(omen_label_clock *c);
/* The window that separates "old enough to be clean" from "unknown":
 * the horizon when set, else the verification window (days). */
int64_t omen_label_clock_window(const omen_label_clock *c);
/* out[i] = omen_label_at(...) for every commit, as known at t. */
void omen_label_clock_at(int8_t *out, const omen_label_clock *c, int64_t t);

/* The verification window, in days: commits newer than this before the
 * newest stay unknown, and eval leaves this gap between training and test.
 * omen.window overrides it; `--window` on the command line. A plain integer
 * (the help text is made from it). */
#define OMEN_WINDOW_DAYS 90

typedef struct {
	const char *const *revs;   /* NULL = HEAD */
	const char *fix_pattern;   /* NULL = omen.fixPattern or default */
	const char *fix_list;      /* NULL = none */
	int64_t window_days;       /* -1 (init): omen.window, else OMEN_WINDOW_DAYS */
	int max_fix_files;         /* -1 (init): omen.maxFixFiles, else 50; 0 = no limit */
	int skip_blank;            /* refinements: 1 on (default), 0 off */
	int skip_comments;
	int ws_keeps_origin;
	int follow_renames;
	int use_issue_dates;
	int incremental;           /* reuse the previous pass's state (saved as <labels>.state) */
	int64_t max_bytes;         /* ceiling on the tracer state, 0 = omen.memoryLimit or none */
	const char *dump_origins;  /* testing: write every traced fix line's origin here */
	/* issue 10 rules, each on by default */
	const char *cosmetic_pattern; /* NULL = omen.cosmeticPattern or default; "" = off */
	const char *noncode_paths;    /* NULL = omen.nonCodePaths or default; "" = off */
	int closing_refs;          /* -1 (init): omen.closingRefs, else 0 (rule on) */
	int whole_message;         /* -1 (init): omen.wholeMessage, else 0 (rule on) */
	int feature_subjects;      /* -1 (init): omen.featureSubjects, else 0 (rule on) */
	int named_decides;         /* -1 (init): omen.namedDecides, else 1 (rule on) */
	int insertion_context;     /* -1 (init): omen.insertionContext, else 1 (rule on) */
	int min_line_share;        /* -1 (init): omen.minLineShare, else 25 (percent); 0 = off */
	int64_t horizon_days;      /* -1 (init): omen.horizon, else the default (below); 0 = none */
	/* A path-sharded pass (issue 13, DEVELOPERS.md "MPI"): this is part
	 * `part` of `parts` (parts <= 1: one process, every path). Each part
	 * walks every commit but diffs and traces only the paths it owns; then
	 * gather brings every part's bytes to part 0 (*all malloc'd there, the
	 * parts' bytes in part order, counts[p] each; NULL elsewhere), and only
	 * part 0 writes the labels. A sharded pass never reads or writes the
	 * incremental state (<labels>.state): it is always a full pass. */
	int part, parts;
	int (*gather)(void *ctx, const void *send, size_t n, void **all, size_t *counts);
	void *gather_ctx;
} omen_label_opts;
/* Default horizon in days (README "Labels that mark real repairs"): 365
 * when the labelled history spans at least 5 times that, else none. */
#define OMEN_LABEL_HORIZON_DEFAULT 365
#define OMEN_LABEL_HORIZON_MIN_SPANS 5
void omen_label_opts_init(omen_label_opts *o);

typedef struct {
	size_t commits, fixes, inducing, clean, unknown;
	size_t fixes_by_pattern, fixes_by_list, fixes_by_issue, fixes_by_named;
	size_t fixes_add_only;     /* fixes that only add lines: untraceable */
	size_t fixes_skipped_large;
	size_t traced_lines;
	double latency_days_q[3];  /* fix latency quartiles */
	int shallow;
	double seconds;
	size_t merges, boundary;
	size_t named_links;        /* fix -> named commit links resolved in the history */
	size_t list_entries, list_unmatched; /* fix list ids, and those that matched nothing */
	size_t untraced_missing;   /* deleted lines with no origin state (should be 0) */
	size_t fixes_traced;       /* fixes with >= 1 traced line */
	int mode;                  /* OMEN_LABEL_MODE_* */
	size_t new_commits;        /* commits added since the previous run (mode GREW) */
	size_t reused_commits;     /* commits whose pass state was reused (0 = full pass) */
	size_t state_peak_bytes;   /* peak of the tracer's origin arrays plus the commit table */
	char head[OMEN_OID_HEX + 1];
	int64_t newest_time, window_cut; /* newest author time, clean cut-off */
	/* issue 10 rules: what each did */
	size_t closing_only;       /* commits not fixes: only a closing word with a number */
	size_t outside_only;       /* commits not fixes: fix words only in trailers or quotes */
	size_t feature_only;       /* commits not fixes: a subject announcing new work */
	size_t fixes_cosmetic;     /* fixes recorded, not traced: cosmetic */
	size_t fixes_noncode;      /* fixes recorded, not traced: only non-code paths */
	size_t noncode_lines;      /* deleted lines of non-code paths not traced */
	size_t named_dropped;      /* candidates dropped because their fix named its commit */
	size_t fixes_insertion;    /* add-only fixes traced through the lines around their insertions */
	size_t minor_dropped;      /* candidates under min_line_share of their fix's traced lines */
	size_t beyond_horizon;     /* commits traced only by fixes later than the horizon */
	int64_t horizon_days;      /* the horizon used, 0 = none */
	size_t noncode_patterns;   /* globs in the non-code list */
	/* absent blobs (issue 12): pre-pass, fetch and skipped file changes;
	 * with files_absent > 0 the label file's summary says so
	 * ("missing_blob_files") and the next run relabels in full */
	omen_blob_stats blobs;
	size_t file_changes;       /* file changes read (walk, and merges' own diffs) */
	size_t files_absent;       /* of those, read with an absent blob skipped */
	size_t fixes_absent;       /* fixes with no traced line whose files had absent blobs */
} omen_label_summary;

enum {
	OMEN_LABEL_MODE_FULL = 0,      /* no previous labels (or --full) */
	OMEN_LABEL_MODE_GREW = 1,      /* the history only grew since the previous run */
	OMEN_LABEL_MODE_REWRITTEN = 2, /* previous head is not an ancestor: relabelled */
	OMEN_LABEL_MODE_UPTODATE = 3   /* same head and options: previous file kept */
};

/* Runs the pass and writes the label file atomically to out_path
 * (NULL = omen.labels or $GIT_DIR/omen/labels.jsonl), and the pass state
 * beside it (<path>.state) for the next incremental run. When the previous
 * labels cover the same head with the same options, nothing is rewritten
 * (sum->mode OMEN_LABEL_MODE_UPTODATE, counts from the file's header). */
int omen_label_run(omen_label_summary *sum, omen_repo *r, const omen_label_opts *o,
	const char *out_path);

/* ---- where the label file is (src/label/location.c) ------------------------ */
/* The label file every stage reads unless told otherwise: omen.labels when
 * set and not empty, else $GIT_DIR/omen/labels.jsonl. *configured (may be
 * NULL) says which. Caller frees. */
int omen_labels_path(char **out, omen_repo *r, int *configured);

#endif
