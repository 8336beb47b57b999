/* Internal to src/label/: the state of one labelling pass (omen_label_run),
 * shared by the walk (run.c), the state saved beside the labels for
 * incremental runs (state.c) and the counts and latencies (stats.c). */
#ifndef OMEN_LABEL_RUN_H
#define OMEN_LABEL_RUN_H

#include <stdio.h>
#include <git2.h>
#include "omen/history.h"
#include "omen/label.h"
#include "omen/util.h"
#include "label/trace.h"
#include "label/shard.h"

#define MAX_NAMED 8

typedef struct {
	int64_t time;
	int64_t issue_date;
	uint32_t traced, named;
	uint32_t pending;      /* children not walked yet */
	int32_t parent1;       /* walk index of the first parent, -1 none */
	unsigned fix_by;
	uint8_t is_fix, merge, boundary, skipped, walked;
	uint8_t scope;         /* OMEN_FIXSCOPE_* of a fix */
	uint8_t is_merge_listed; /* > 1 parent in the history: handled by do_merge */
	uint8_t absent;        /* a file change with an absent blob was skipped (issue 12) */
	uint8_t sflags;        /* LBL_SF_* of this rank, combined in a sharded pass (issue 13) */
} lbl_commit;

/* One --dump-origins line of the fix being traced, written once the fix's
 * candidates are final (a minor candidate's lines are marked). */
typedef struct {
	uint32_t origin;
	int32_t lineno;
	int skip;
	const char *path;   /* the walk's change, alive until the fix is done */
} lbl_dump_ent;

typedef struct {
	omen_repo *repo;
	const omen_label_opts *o;
	omen_fixrules *fr;
	omen_pathset *nc;       /* non-code paths (issue 10) */
	const omen_file *nc_file; /* line_cb's cache: the last file looked up */
	int nc_hit;
	lbl_tracer *tr;
	git_oid *ids;
	size_t n, done;
	lbl_commit *cs;
	omen_strmap index;      /* hex -> walk index + 1 */
	lbl_pair *pairs;
	size_t npairs, pairs_cap;
	/* per fix scratch: candidate -> lines */
	uint32_t *cand, *cand_lines;
	size_t ncand, cand_cap, cand_lines_cap;
	uint32_t cur_fix;
	size_t fix_lines_total;
	size_t dropped_issue_date, dropped_noncand;
	FILE *dump;
	lbl_dump_ent *dent;
	size_t ndent, dent_cap;
	uint32_t *minor;        /* candidates the line share dropped, this fix */
	size_t nminor, minor_cap;
	omen_atomic_file dumpf; /* --dump-origins: the file rules of -o */
	omen_label_summary *sum;
	omen_progress prog;
	omen_buf path;          /* scratch for tree walks */
	size_t next_merge;      /* walk index up to which merges are handled */
	int8_t *lab;            /* omen_label_value per commit (count_labels) */
	uint32_t *tips;         /* commits without children: held as if live */
	size_t ntips;
	char old_head[OMEN_OID_HEX + 1]; /* head of the previous labels */
	lbl_shard *sh;          /* a path-sharded pass (issue 13), NULL: every path */
	lbl_pair *ins;          /* a sharded pass: insertion candidates (lbl_shard_part) */
	size_t nins, ins_cap;
} lbl_run;

/* The walk index of commit id, -1 when the pass does not hold it. */
long lbl_lookup_oid(const lbl_run *R, const git_oid *id);

/* Saves the pass state to path (atomically): options JSON opts, labelled
 * head hex head. 0 or < 0. */
int lbl_save_state(lbl_run *R, const char *path, const char *opts, const char *head);
/* Restores the state saved by the previous run when it covers exactly the
 * labelled head with the same options and every new commit's old parents
 * are saved tips. Returns 1 when restored, 0 when not usable (then the
 * caller runs a full pass on a fresh tracer), < 0 on error. */
int lbl_load_state(lbl_run *R, const char *path, const char *opts);

/* Labels every commit (R->lab) and fills the summary's counts. 0 or < 0. */
int lbl_count_labels(lbl_run *R);
/* The summary's inducing-to-fix latency quartiles, in days. 0 or < 0. */
int lbl_latency(lbl_run *R);

#endif
