/* Internal to src/label/: the one-pass line-origin tracer.
 *
 * State: one origin array per file version, keyed by (path, blob id): for
 * every line of that version, the index (in walk order) of the commit that
 * introduced it. Versions are refcounted by the caller (run.c counts the
 * live commits whose tree holds each version) and freed once no live commit
 * holds them, so memory follows the live trees, not the history. All state
 * is per path: a sharded run can trace disjoint path sets independently. */
#ifndef OMEN_LABEL_TRACE_H
#define OMEN_LABEL_TRACE_H

#include <stdint.h>
#include "omen/history.h"

#define LBL_NONE UINT32_MAX  /* origin unknown (no state for that version) */

typedef struct {
	int skip_blank;       /* blank / whitespace-only deleted lines are not traced */
	int skip_comments;    /* comment-only deleted lines are not traced */
	int ws_keeps_origin;  /* whitespace-only rewrite keeps the old origin */
} lbl_trace_opts;

enum {
	LBL_TRACED = 0,
	LBL_SKIP_BLANK = 1,
	LBL_SKIP_COMMENT = 2,
	LBL_SKIP_WS = 3,      /* re-added with only whitespace changed */
	LBL_SKIP_NOSTATE = 4, /* no origin state for the old version */
	/* set by run.c, seen in --dump-origins only (issue 10): */
	LBL_SKIP_NONCODE = 5, /* a line of a non-code path */
	LBL_SKIP_FIX = 6,     /* the fix is not traced (cosmetic, non-code only, too large) */
	LBL_SKIP_MINOR = 7    /* its origin is under the fix's minimum line share */
};

typedef struct lbl_tracer lbl_tracer;

int lbl_tracer_new(lbl_tracer **out, const lbl_trace_opts *o);
void lbl_tracer_free(lbl_tracer *t);

/* Origins of a version, NULL when not held. */
const uint32_t *lbl_tracer_get(const lbl_tracer *t, const char *path, const git_oid *blob,
	uint32_t *nlines);
/* Adds delta to a version's refcount (ignored when the version is not held). */
void lbl_tracer_ref(lbl_tracer *t, const char *path, const git_oid *blob, int delta);
/* Frees every version whose refcount is <= 0 among those created or
 * unreferenced since the last sweep. */
void lbl_tracer_sweep(lbl_tracer *t);

/* Calls cb for every deleted line of c (in its first parent's versions),
 * with the origin and why it is skipped (LBL_TRACED when it counts). Files
 * that are binary, too large or submodules are not visited. */
typedef int (*lbl_line_cb)(const omen_change *c, const omen_file *f, const omen_line *l,
	uint32_t origin, int skip, void *payload);
int lbl_tracer_trace(lbl_tracer *t, const omen_change *c, lbl_line_cb cb, void *payload);

/* Builds the new versions of every file c changes; added lines get origin
 * ci. New versions start with refcount 0 (the caller adds references). A
 * version already held is kept as is. */
int lbl_tracer_apply(lbl_tracer *t, const omen_change *c, uint32_t ci);
/* Renames with edits (rename.c): pairs added files without state with
 * deleted files of c at >= 50% line similarity and gives the new versions
 * the old origins through a -U0 diff of the two blobs. Before apply.
 * sh (NULL: one process) is a sharded pass (label/shard.h): every rank
 * makes the same pairs (an added file counts as without state, a deleted
 * one as with state), the added path takes the deleted path's owner, and
 * only that owner builds the new version. */
typedef struct lbl_shard lbl_shard;
int lbl_rename_pairs(lbl_tracer *t, omen_repo *r, const omen_change *c, uint32_t ci,
	lbl_shard *sh);

/* Diffs f's two blobs -U0 with omen_history_diff_blobs (old side may be
 * absent) and builds f's new version from it; binary blobs, blobs over
 * omen.maxBlobBytes and unreadable ones get no version. */
int lbl_apply_blobs(lbl_tracer *t, omen_repo *r, const omen_file *f, uint32_t ci);

/* The linear step: +1 on every new version, -1 on every old one. */
void lbl_tracer_step(lbl_tracer *t, const omen_change *c);

/* Saving and restoring the pass state (run.c): every held version, and
 * putting one back (orig is taken over; path key as the tracer computes it). */
typedef int (*lbl_version_cb)(uint64_t pkey, const git_oid *blob, const uint32_t *orig, uint32_t n,
	int32_t ref, void *payload);
int lbl_tracer_each(const lbl_tracer *t, lbl_version_cb cb, void *payload);
int lbl_tracer_put(lbl_tracer *t, uint64_t pkey, const git_oid *blob, uint32_t *orig, uint32_t n, int32_t ref);

size_t lbl_tracer_versions(const lbl_tracer *t);  /* held versions */
size_t lbl_tracer_bytes(const lbl_tracer *t);     /* origin bytes held */
size_t lbl_tracer_peak_bytes(const lbl_tracer *t);

#endif
