/* Internal to src/label/: path-sharded label passes (issue 13; DEVELOPERS.md
 * "MPI"). Every rank walks the same commits; a file is diffed, traced and
 * given origins only on the rank that owns its path. Ownership follows the
 * file's lineage, not its name: a path first seen gets the owner its hash
 * gives, and a renamed path (an exact rename in the tree diff, or a rename
 * with edits paired by rename.c) takes its old path's owner. Every rank sees
 * every tree diff and makes the same pairing decisions, so every rank keeps
 * the same owner map without talking to the others. At the end rank 0
 * gathers the other ranks' per-commit counts and (inducing, fix, lines)
 * pairs and combines them. */
#ifndef OMEN_LABEL_SHARD_H
#define OMEN_LABEL_SHARD_H

#include <stdint.h>
#include "omen/label.h"
#include "omen/util.h"

typedef struct {
	uint32_t ind, fix, lines;
} lbl_pair;

/* lines of a sharded pass's placeholder pair: a candidate the fix's named
 * commits dropped (issue 10), counted once per (candidate, fix) on rank 0 */
#define LBL_PAIR_DROPPED UINT32_MAX

typedef struct lbl_shard {
	int part, parts;      /* this rank, the number of ranks (parts > 1) */
	int renames;          /* renames with edits are followed (rename.c) */
	int err;              /* sticky: the filter ran out of memory */
	omen_strmap owner;    /* path -> owner + 1, for paths whose owner is not their hash's */
	omen_change view;     /* scratch: this rank's files of a change */
	size_t view_cap;
} lbl_shard;

void lbl_shard_init(lbl_shard *s, int part, int parts, int renames);
void lbl_shard_free(lbl_shard *s);
/* The rank that owns path now. */
int lbl_shard_owner(const lbl_shard *s, const char *path);
/* path now has owner (a rename keeps its lineage's owner). 0 or OMEN_ENOMEM. */
int lbl_shard_set(lbl_shard *s, const char *path, int owner);
/* Whether this rank owns f (by its old path when it has one, else its new). */
int lbl_shard_mine(const lbl_shard *s, const omen_file *f);
/* omen_walk_opts.path_filter: records exact renames in the owner map and
 * keeps this rank's files, plus every added and deleted file of a change
 * that has both (rename.c pairs them by their lines on every rank). */
int lbl_shard_filter(const char *old_path, const char *new_path, int pairing, void *ctx);
/* A view of c with this rank's files only (valid until the next call or
 * until c changes). NULL on out of memory (error set). */
const omen_change *lbl_shard_view(lbl_shard *s, const omen_change *c);

/* Per-commit flags combined over the ranks (OR). */
enum {
	LBL_SF_ABSENT = 1,   /* a file change of this rank had an absent blob */
	LBL_SF_CAND = 2,     /* a fix: this rank found candidates */
	LBL_SF_LINES = 4     /* a fix: this rank traced lines */
};

/* Combines every rank's results on rank 0 through opts->gather: traced[i]
 * summed, flags[i] OR-ed, the pairs with lines (traced pairs; named pairs,
 * the same on every rank, are rank 0's own) appended and the pairs of one
 * (inducing, fix) summed, counters summed. Other ranks' arrays are left as
 * they are. Returns 0 or negative OMEN_E*. */
int lbl_shard_gather(const lbl_shard *s, const omen_label_opts *o, uint32_t *traced,
	uint8_t *flags, size_t n, lbl_pair **pairs, size_t *npairs, size_t *pairs_cap,
	uint64_t *counters, int ncounters);

#endif
