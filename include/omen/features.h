/* Features: the 14 change metrics of Kamei et al. (TSE 2013) and the
 * per-commit model sample (ragged token arrays), plus the dataset cache.
 * Takes records from history/; never calls libgit2 itself. */
#ifndef OMEN_FEATURES_H
#define OMEN_FEATURES_H

#include <stddef.h>
#include <stdint.h>
#include "omen/history.h"

/* ---- change metrics ------------------------------------------------------ */
enum {
	OMEN_M_NS, OMEN_M_ND, OMEN_M_NF, OMEN_M_ENTROPY,
	OMEN_M_LA, OMEN_M_LD, OMEN_M_LT, OMEN_M_FIX,
	OMEN_M_NDEV, OMEN_M_AGE, OMEN_M_NUC,
	OMEN_M_EXP, OMEN_M_REXP, OMEN_M_SEXP,
	OMEN_NMETRICS
};
extern const char *const omen_metric_names[OMEN_NMETRICS]; /* "ns", "nd", ... */

/* History state for metrics: per file (last change time, developers,
 * change count, fix count), per developer (experience per subsystem and by
 * time). Feed commits oldest first. */
typedef struct omen_metrics omen_metrics;
int omen_metrics_new(omen_metrics **out);
void omen_metrics_free(omen_metrics *m);
/* Metrics of c from commits fed before it (strictly earlier ones only). */
int omen_metrics_compute(double out[OMEN_NMETRICS], const omen_metrics *m,
	const omen_change *c, int is_fix);
/* Adds c to the state. */
int omen_metrics_update(omen_metrics *m, const omen_change *c, int is_fix);

/* Serialised state (bounded-cursor loader: corrupt bytes give OMEN_ECORRUPT),
 * so scoring can resume from the state saved at training time and feed only
 * the commits after it. */
int omen_metrics_save(const omen_metrics *m, omen_buf *out);
int omen_metrics_load(omen_metrics **out, const void *data, size_t n);

/* File facts for the model, from the state before the commit. */
enum {
	OMEN_FF_LOG_CHANGES,   /* log1p(prior changes of the file) */
	OMEN_FF_LOG_FIXES,     /* log1p(prior fix commits touching it) */
	OMEN_FF_FIX_RATIO,     /* prior fixes / max(1, prior changes) */
	OMEN_FF_LOG_AGE_DAYS,  /* log1p(days since the file last changed) */
	OMEN_FF_LOG_NDEV,      /* log1p(distinct prior developers) */
	OMEN_FF_NEW_FILE,      /* 1 when added by this commit */
	OMEN_FF_LOG_SIZE,      /* log1p(lines before the change) */
	OMEN_FF_EXT_HASH,      /* extension bucket in [0, OMEN_EXT_BUCKETS) stored as float */
	OMEN_NFACTS
};
#define OMEN_EXT_BUCKETS 32
int omen_metrics_file_facts(float out[OMEN_NFACTS], const omen_metrics *m,
	const omen_change *c, size_t file_index);

/* ---- model sample ---------------------------------------------------------
 * Token ids: hash of the token text into [0, OMEN_VOCAB/2), with
 * OMEN_VOCAB/2 added for tokens of deleted lines (the add/delete marker).
 * Message tokens use their own table of OMEN_MSG_VOCAB. */
#define OMEN_VOCAB (1u << 15)
#define OMEN_MSG_VOCAB (1u << 12)
#define OMEN_HASH_SEED 0x6f6d656eull /* "omen" */

typedef struct {
	int32_t max_files;          /* largest files first (by lines changed) */
	int32_t max_hunks_per_file; /* largest hunks first */
	int32_t max_tokens_per_hunk;
	int32_t max_msg_tokens;
} omen_caps;
#define OMEN_CAPS_DEFAULT {32, 16, 256, 64}
/* Tokens of one commit at most: when its kept hunks would exceed it, each
 * hunk gets an equal share (never under 32 tokens). */
#define OMEN_SAMPLE_TOKEN_BUDGET 8192

/* One commit as the model sees it. All arrays are views into a dataset or
 * sample buffer. Offsets are relative to this sample. */
typedef struct {
	char id[OMEN_OID_HEX + 1];
	int64_t time;          /* author time */
	int8_t label;          /* 1 inducing, 0 clean, -1 unknown */
	int8_t is_fix;
	uint8_t capped;        /* 1 when caps dropped files, hunks or tokens */
	int32_t la, ld;        /* lines added / deleted (effort = la + ld) */
	float metrics[OMEN_NMETRICS];   /* raw (not standardized) */
	int32_t nfiles, nhunks, ntok, nmsg;
	const int32_t *file_off;   /* [nfiles+1] hunk offsets */
	const int32_t *hunk_off;   /* [nhunks+1] token offsets */
	const uint32_t *tok;       /* [ntok] */
	const int32_t *tok_line;   /* [ntok] new line number (>0) for added, -old line number for deleted */
	const uint32_t *msg;       /* [nmsg] */
	const float *file_facts;   /* [nfiles * OMEN_NFACTS] */
	const int32_t *hunk_new_start, *hunk_new_lines;   /* [nhunks] */
	const int32_t *hunk_old_start, *hunk_old_lines;   /* [nhunks] */
	const char *const *file_path;  /* [nfiles] new path (old path for deletions) */
} omen_sample;

/* Owns the memory behind one sample (scoring path). */
typedef struct omen_sample_buf omen_sample_buf;
int omen_sample_buf_new(omen_sample_buf **out);
void omen_sample_buf_free(omen_sample_buf *b);
/* Builds the sample of c. metrics/facts come from m (state before c). The
 * same function serves training and scoring, so there is no skew. */
int omen_sample_build(omen_sample *out, omen_sample_buf *b, const omen_change *c,
	const omen_metrics *m, int is_fix, const omen_caps *caps);

/* ---- dataset: every sample of a history, contiguous ---------------------- */
typedef struct omen_dataset omen_dataset;
typedef struct {
	const char *const *revs;  /* NULL = HEAD */
	const char *labels_path;  /* labels.jsonl to join (NULL: omen_labels_path) */
	omen_caps caps;
	int use_cache;            /* read/write $GIT_DIR/omen/dataset.cache */
	int cache_only;           /* with use_cache: OMEN_ENOTFOUND on a miss instead of a build */
	int64_t max_bytes;        /* memory ceiling (0 = none) */
	int labels_optional;      /* a missing labels file: every commit unlabelled (-1);
	                           * the base-model fallback of score (issue 11) */
} omen_dataset_opts;
int omen_dataset_build(omen_dataset **out, omen_repo *r, const omen_dataset_opts *o);
void omen_dataset_free(omen_dataset *d);
size_t omen_dataset_size(const omen_dataset *d);
/* Samples oldest first. */
const omen_sample *omen_dataset_get(const omen_dataset *d, size_t i);
/* Metrics state after the last commit (for scoring new commits). */
const omen_metrics *omen_dataset_metrics(const omen_dataset *d);
/* Commits whose sample was capped. */
size_t omen_dataset_capped(const omen_dataset *d);
/* Samples taken from the dataset cache rather than read from history: all
 * of them when it matched, the older ones when it was extended, else 0. */
size_t omen_dataset_reused(const omen_dataset *d);
/* The commit the history was read from (HEAD or the one revision given),
 * NULL for a range, several revisions or an in-memory dataset. Its
 * non-merge ancestors are the samples and what the metrics state counts. */
const char *omen_dataset_tip(const omen_dataset *d);
/* An in-memory dataset copied from n samples (tests, synthetic data); it
 * has no metrics state. */
int omen_dataset_from_samples(omen_dataset **out, const omen_sample *s, size_t n);

/* ---- tokenizers (language-agnostic, src/features/tokenize.c) -------------
 * Code: identifiers (also split into parts on camelCase and '_': the whole
 * identifier and, when it has several parts, each lowercased part),
 * keywords and identifiers alike, operators (longest match of common
 * multi-char operators), numbers bucketed ("<num0>", "<num1>", "<num2-9>",
 * "<num10-99>", "<numbig>", "<float>", "<hex>"), string and char literals
 * collapsed to "<str>", comments to "<comment>". The callback gets each token
 * (not NUL-terminated). Invalid UTF-8 bytes are skipped, never crash. */
typedef void (*omen_token_cb)(const char *tok, size_t len, void *payload);
void omen_tokenize_code(const char *s, size_t n, omen_token_cb cb, void *payload);
/* Message: lowercased words, numbers bucketed, "#123" -> "<issue>",
 * 7-40 hex digit words -> "<sha>", URLs -> "<url>". */
void omen_tokenize_message(const char *s, size_t n, omen_token_cb cb, void *payload);

#endif
