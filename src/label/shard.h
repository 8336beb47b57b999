/* Internal to src/label/: path-sharded label passes (issue 13; DEVELOPERS.md
 * "MPI"). Every rank walks the same commits; a file is diffed, traced and
 * given origins only on the rank that owns its path. Ownership follows the
 * file's lineage, not its name: a path first seen gets the owner its hash
 * gives, and a renamed path (an exact rename in the tree diff, or a rename
 * with edits paired by rename.c) takes its old path's owner. Every rank sees
 * every tree diff and makes the same pairing decisions, so every rank keeps
 * the same owner map without talking to the others. At the end rank 0
 * gathers the other ranks' per-commit flags and raw per-fix candidates and
 * decides every fix over all of them (run.c, decide_shards). */
#ifndef OMEN_LABEL_SHARD_H
#define OMEN_LABEL_SHARD_H

#include <stdint.h>
#include "omen/label.h"
#include "omen/util.h"

typedef struct {
	uint32_t ind, fix, lines;
} lbl_pair;

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
	LBL_SF_LINES = 4     /* a fix: this rank traced lines */
};

/* The counters summed over the ranks: untraced_missing, files_absent,
 * file_changes, noncode_lines. */
#define LBL_SHARD_COUNTERS 4

/* One rank's results of a sharded pass, and on rank 0 everyone's. The
 * pairs are the fix's raw traced candidates (inducing, fix, lines; no rule
 * that decides over a whole fix applied yet) and its named pairs (0 lines,
 * the same on every rank: rank 0's own are kept, the others not sent); ins
 * holds the insertion candidates a rank found for a fix of which it traced
 * no line (issue 10's insertion context, used on rank 0 only when no rank
 * traced a line of that fix). */
typedef struct {
	uint8_t *flags;             /* LBL_SF_* per commit */
	size_t n;
	lbl_pair **pairs;
	size_t *npairs, *pairs_cap;
	lbl_pair **ins;
	size_t *nins, *ins_cap;
	uint64_t counters[LBL_SHARD_COUNTERS];
} lbl_shard_part;

/* Combines every rank's results on rank 0 through opts->gather: flags
 * OR-ed, the pairs and insertion candidates of the other ranks appended,
 * sorted by (inducing, fix) and the lines of one (inducing, fix) summed,
 * the counters summed. Other ranks' results are left as they are. Returns
 * 0 or negative OMEN_E*. */
int lbl_shard_gather(const lbl_shard *s, const omen_label_opts *o, lbl_shard_part *io);

#endif
