/* omen_label_run: one oldest-first pass over the history (merges included so
 * that line-origin state flows through them), tracing every fix's deleted
 * lines to the commits that introduced them (SZZ, Sliwerski, Zimmermann &
 * Zeller, MSR 2005; refinements of Kim et al., ASE 2006 and da Costa et al.,
 * TSE 2017), then labelling and writing the label file atomically.
 *
 * Reference counting of file versions: a version is held while a "live"
 * commit (one whose children are not all walked yet) has it in its tree. In a
 * straight line the parent dies as its only child is born, so only the
 * changed files move references (+1 new, -1 old). At a fork (parent stays
 * live) the child's whole tree gains a reference, and when a merge retires a
 * side parent that parent's whole tree loses one: both read the tree from
 * git, which happens once per fork or merge, not per commit. */
#include <ctype.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <cJSON.h>
#include "omen/error.h"
#include "omen/label.h"
#include "label/internal.h"
#include "label/run.h"
#include "label/trace.h"

void omen_label_opts_init(omen_label_opts *o)
{
	memset(o, 0, sizeof(*o));
	o->window_days = -1;   /* -1: omen.window, else 90 */
	o->max_fix_files = -1; /* -1: omen.maxFixFiles, else 50 */
	o->skip_blank = 1;
	o->skip_comments = 1;
	o->ws_keeps_origin = 1;
	o->follow_renames = 1;
	o->use_issue_dates = 1;
	o->incremental = 1;
	o->closing_refs = -1;
	o->whole_message = -1;
	o->feature_subjects = -1;
	o->named_decides = -1;
	o->insertion_context = -1;
	o->min_line_share = -1;
	o->horizon_days = -1;
}

static long lookup(const lbl_run *R, const char *hex)
{
	uintptr_t v = (uintptr_t)omen_strmap_get(&R->index, hex);
	return v ? (long)v - 1 : -1;
}

long lbl_lookup_oid(const lbl_run *R, const git_oid *id)
{
	char hex[OMEN_OID_HEX + 1];
	git_oid_tostr(hex, sizeof(hex), id);
	return lookup(R, hex);
}

/* ---- tree references ----------------------------------------------------- */
typedef struct {
	lbl_run *R;
	int delta;
} tree_ref_ctx;

static int tree_ref_cb(const char *root, const git_tree_entry *e, void *p)
{
	tree_ref_ctx *x = p;
	if (git_tree_entry_type(e) != GIT_OBJECT_BLOB)
		return 0;
	omen_buf_clear(&x->R->path);
	omen_buf_puts(&x->R->path, root);
	omen_buf_puts(&x->R->path, git_tree_entry_name(e));
	lbl_tracer_ref(x->R->tr, x->R->path.ptr, git_tree_entry_id(e), x->delta);
	return 0;
}

static int tree_ref(lbl_run *R, uint32_t ci, int delta)
{
	git_commit *cm = NULL;
	git_tree *tree = NULL;
	tree_ref_ctx x = {R, delta};
	int e = 0;
	if (git_commit_lookup(&cm, omen_repo_git(R->repo), &R->ids[ci]) ||
	    git_commit_tree(&tree, cm) ||
	    git_tree_walk(tree, GIT_TREEWALK_PRE, tree_ref_cb, &x)) {
		const git_error *ge = git_error_last();
		char hex[OMEN_OID_HEX + 1];
		git_oid_tostr(hex, sizeof(hex), &R->ids[ci]);
		e = omen_error_set(OMEN_EGIT, "cannot read tree of '%s': %s", hex,
			ge && ge->message ? ge->message : "libgit2 error");
	}
	git_tree_free(tree);
	git_commit_free(cm);
	return e;
}

/* ---- tracing callback ------------------------------------------------------ */
/* origin is behind lines more of the fix's lines. */
static int add_cand_n(lbl_run *R, uint32_t origin, uint32_t lines)
{
	size_t i;
	for (i = 0; i < R->ncand; i++) {
		if (R->cand[i] == origin) {
			R->cand_lines[i] += lines;
			return 0;
		}
	}
	if (OMEN_ARRAY_RESERVE(R->cand, R->cand_cap, R->ncand + 1) ||
	    OMEN_ARRAY_RESERVE(R->cand_lines, R->cand_lines_cap, R->ncand + 1))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	R->cand[R->ncand] = origin;
	R->cand_lines[R->ncand++] = lines;
	return 0;
}

static int add_cand(lbl_run *R, uint32_t origin)
{
	return add_cand_n(R, origin, 1);
}

static int line_cb(const omen_change *c, const omen_file *f, const omen_line *l,
	uint32_t origin, int skip, void *payload)
{
	lbl_run *R = payload;
	lbl_commit *fx = &R->cs[R->cur_fix];
	if (R->nc_file != f) {
		R->nc_file = f;
		R->nc_hit = omen_pathset_match(R->nc, f->old_path);
	}
	if (R->dump) {
		int ds = fx->skipped ? LBL_SKIP_FIX : skip == LBL_TRACED && R->nc_hit ? LBL_SKIP_NONCODE : skip;
		if (OMEN_ARRAY_RESERVE(R->dent, R->dent_cap, R->ndent + 1))
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		R->dent[R->ndent++] = (lbl_dump_ent){origin, l->old_lineno, ds, f->old_path};
	}
	if (fx->skipped)
		return 0;
	if (skip == LBL_TRACED && R->nc_hit) {
		R->sum->noncode_lines++;
		return 0;
	}
	if (skip == LBL_SKIP_NOSTATE)
		R->sum->untraced_missing++;
	if (skip != LBL_TRACED)
		return 0;
	R->fix_lines_total++;
	if (origin >= R->n || R->cs[origin].merge || R->cs[origin].boundary) {
		R->dropped_noncand++;
		return 0;
	}
	if (R->o->use_issue_dates && fx->issue_date && R->cs[origin].time > fx->issue_date) {
		R->dropped_issue_date++;
		return 0;
	}
	return add_cand(R, origin);
}

/* A line with nothing but braces, parentheses and separators. */
static int trivial_line(const char *s, size_t n)
{
	size_t i;
	for (i = 0; i < n; i++)
		if (!strchr(" \t\r{}();,", s[i]))
			return 0;
	return 1;
}

/* An add-only fix (a missing check, a missing call) deletes nothing for
 * SZZ to trace. Its insertions sit where the old code was incomplete, so
 * the code lines just above and below each insertion point (in the fix's
 * parent; blank, comment-only and brace-only lines left out) are traced
 * instead (issue 10, measured against developer-named links in README
 * "Labels that mark real repairs"). Code files only. */
static int trace_insertions(lbl_run *R, const omen_change *c)
{
	size_t fi;
	int e = 0;
	for (fi = 0; fi < c->nfiles && !e; fi++) {
		const omen_file *f = &c->files[fi];
		const uint32_t *orig;
		git_blob *blob = NULL;
		const char *data, *p, *end;
		uint32_t n = 0, hi, ln, cur = 0;
		int any = 0;
		if (!f->old_path || f->status == OMEN_FILE_ADDED || !f->new_path ||
		    (f->flags & (OMEN_FILE_BINARY | OMEN_FILE_TOO_LARGE | OMEN_FILE_SUBMODULE)) ||
		    omen_pathset_match(R->nc, f->old_path))
			continue;
		for (hi = 0; hi < f->nhunks; hi++)
			any |= c->hunks[f->hunk_off + hi].old_lines == 0 && c->hunks[f->hunk_off + hi].new_lines > 0;
		if (!any || !(orig = lbl_tracer_get(R->tr, f->old_path, &f->old_blob, &n)) || !n)
			continue;
		if (git_blob_lookup(&blob, omen_repo_git(R->repo), &f->old_blob))
			continue; /* unreadable: nothing to trace, as for a missing version */
		data = git_blob_rawcontent(blob);
		end = data + git_blob_rawsize(blob);
		p = data;
		cur = 1; /* p is at the start of line cur */
		for (hi = 0; hi < f->nhunks && !e; hi++) {
			const omen_hunk *h = &c->hunks[f->hunk_off + hi];
			if (h->old_lines != 0 || h->new_lines <= 0)
				continue;
			/* -U0: an insertion after old line a shows "-a,0" */
			for (ln = (uint32_t)(h->old_start > 0 ? h->old_start : 1); ln <= (uint32_t)h->old_start + 1; ln++) {
				const char *eol;
				uint32_t origin;
				if (ln < 1 || ln > n)
					continue;
				if (ln < cur) { /* hunks ascend; a line may serve two */
					p = data;
					cur = 1;
				}
				while (cur < ln && p < end) {
					const char *nl = memchr(p, '\n', (size_t)(end - p));
					p = nl ? nl + 1 : end;
					cur++;
				}
				if (p >= end)
					break;
				eol = memchr(p, '\n', (size_t)(end - p));
				if (!eol)
					eol = end;
				if (omen_line_is_blank(p, (size_t)(eol - p)) || trivial_line(p, (size_t)(eol - p)) ||
				    (R->o->skip_comments && omen_line_is_comment(p, (size_t)(eol - p))))
					continue;
				origin = orig[ln - 1];
				if (R->dump) {
					if (OMEN_ARRAY_RESERVE(R->dent, R->dent_cap, R->ndent + 1)) {
						e = omen_error_set(OMEN_ENOMEM, "out of memory");
						break;
					}
					R->dent[R->ndent++] = (lbl_dump_ent){origin, (int32_t)ln, LBL_TRACED, f->old_path};
				}
				if (origin == LBL_NONE || origin >= R->n || R->cs[origin].merge || R->cs[origin].boundary)
					continue;
				if (R->o->use_issue_dates && R->cs[R->cur_fix].issue_date &&
				    R->cs[origin].time > R->cs[R->cur_fix].issue_date)
					continue;
				e = add_cand(R, origin);
			}
		}
		git_blob_free(blob);
	}
	return e;
}

/* Writes the fix's --dump-origins lines; a line whose origin the line
 * share dropped is marked LBL_SKIP_MINOR. */
static void flush_dump(lbl_run *R, const char *fix_hex)
{
	size_t i, k;
	for (i = 0; i < R->ndent; i++) {
		const lbl_dump_ent *d = &R->dent[i];
		char hex[OMEN_OID_HEX + 1] = "-";
		int skip = d->skip;
		if (d->origin != LBL_NONE && d->origin < R->n)
			git_oid_tostr(hex, sizeof(hex), &R->ids[d->origin]);
		for (k = 0; skip == LBL_TRACED && k < R->nminor; k++)
			if (R->minor[k] == d->origin)
				skip = LBL_SKIP_MINOR;
		fprintf(R->dump, "%s %d %s %d %s\n", fix_hex, (int)d->lineno, hex, skip, d->path);
	}
	R->ndent = 0;
}

/* Resolves an abbreviated id named by a fix to an earlier walked commit. */
static long resolve_named(lbl_run *R, const char *hex)
{
	git_object *obj = NULL;
	git_oid id;
	long i = -1;
	size_t n = strlen(hex);
	if (n == OMEN_OID_HEX)
		return lookup(R, hex);
	if (git_oid_fromstrn(&id, hex, n) == 0 &&
	    git_object_lookup_prefix(&obj, omen_repo_git(R->repo), &id, n, GIT_OBJECT_COMMIT) == 0)
		i = lbl_lookup_oid(R, git_object_id(obj));
	git_object_free(obj);
	return i;
}

/* Reference moves after commit ci (see the top of this file), then frees
 * the versions no live commit holds. */
static int ref_step(lbl_run *R, const omen_change *c, long ci, lbl_commit *cm)
{
	int e, i, live;
	long p1;
	live = cm->pending > 0;
	p1 = cm->parent1;
	if (p1 >= 0) {
		int p1_dies = --R->cs[p1].pending == 0;
		if (live && p1_dies) {
			lbl_tracer_step(R->tr, c);
		} else if (live) {
			if ((e = tree_ref(R, (uint32_t)ci, +1)))
				return e;
		} else if (p1_dies) {
			if ((e = tree_ref(R, (uint32_t)p1, -1)))
				return e;
		}
	} else if (live) {
		size_t fi;
		for (fi = 0; fi < c->nfiles; fi++)
			if (c->files[fi].new_path && c->files[fi].status != OMEN_FILE_DELETED)
				lbl_tracer_ref(R->tr, c->files[fi].new_path, &c->files[fi].new_blob, +1);
	}
	for (i = 1; i < (int)c->commit.nparents; i++) {
		long pk = lbl_lookup_oid(R, &c->commit.parents[i]);
		if (pk >= 0 && pk != p1 && R->cs[pk].pending && --R->cs[pk].pending == 0)
			if ((e = tree_ref(R, (uint32_t)pk, -1)))
				return e;
	}
	lbl_tracer_sweep(R->tr);
	R->done++;
	if (R->o->max_bytes > 0 && (int64_t)lbl_tracer_bytes(R->tr) > R->o->max_bytes)
		return omen_error_set(OMEN_ELIMIT, "label state over the memory limit (%lld bytes)",
			(long long)R->o->max_bytes);
	omen_progress_update(&R->prog, R->done, NULL);
	return 0;
}

/* ---- merges ----------------------------------------------------------------
 * The history is walked without merges (their diffs against the first
 * parent repeat the side branch's work); each merge is handled here, in its
 * place in the walk order: the files it changes against its first parent
 * (a tree diff, no blob diffs) reuse the side branch's version when the
 * merge took it unchanged, and only the others (conflict resolutions, files
 * changed on both sides) are diffed. */
static int do_merge(lbl_run *R, uint32_t mi)
{
	git_commit *cm = NULL;
	git_oid *parents = NULL;
	omen_change files;
	size_t i;
	unsigned k, np;
	int e = 0;
	lbl_commit *c = &R->cs[mi];
	omen_change_init(&files);
	if (git_commit_lookup(&cm, omen_repo_git(R->repo), &R->ids[mi])) {
		const git_error *ge = git_error_last();
		char hex[OMEN_OID_HEX + 1];
		git_oid_tostr(hex, sizeof(hex), &R->ids[mi]);
		return omen_error_set(OMEN_EGIT, "cannot read merge '%s': %s", hex,
			ge && ge->message ? ge->message : "libgit2 error");
	}
	np = git_commit_parentcount(cm);
	c->time = git_commit_author(cm)->when.time;
	c->merge = 1;
	c->walked = 1;
	if (!(parents = calloc(np + 1, sizeof(*parents)))) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	for (k = 0; k < np; k++)
		parents[k] = *git_commit_parent_id(cm, k);
	if ((e = omen_history_tree_files(&files, R->repo, c->parent1 >= 0 ? &R->ids[c->parent1] : NULL,
			&R->ids[mi])))
		goto out;
	for (i = 0; i < files.nfiles; i++) {
		omen_file *f = &files.files[i];
		if (f->new_path && (!R->sh || lbl_shard_mine(R->sh, f)) &&
		    !lbl_tracer_get(R->tr, f->new_path, &f->new_blob, NULL)) {
			uint32_t nold = 0;
			if (f->old_path && lbl_tracer_get(R->tr, f->old_path, &f->old_blob, &nold))
				f->old_nlines = nold;
			else
				f->old_path = NULL; /* no state for the old side: a new file */
			size_t before = omen_repo_blob_stats(R->repo)->skipped_files;
			if ((e = lbl_apply_blobs(R->tr, R->repo, f, mi)))
				goto out;
			R->sum->file_changes++;
			R->sum->files_absent += omen_repo_blob_stats(R->repo)->skipped_files != before;
		}
	}
	files.commit.nparents = np;
	files.commit.parents = parents;
	e = ref_step(R, &files, (long)mi, c);
out:
	omen_change_free(&files);
	git_commit_free(cm);
	free(parents);
	return e;
}

/* Handles the merges that come before walk index upto. */
static int catch_up(lbl_run *R, size_t upto)
{
	int e;
	for (; R->next_merge < upto; R->next_merge++) {
		size_t m = R->next_merge;
		if (R->cs[m].is_merge_listed && !R->cs[m].walked && (e = do_merge(R, (uint32_t)m)))
			return e;
	}
	return 0;
}

/* A fix's scope: OMEN_FIXSCOPE_LARGE over max_fix_files, COSMETIC by its
 * subject (a named commit overrules the subject), NONCODE when every file it
 * touches is a non-code path, else CODE. */
static uint8_t fix_scope(const lbl_run *R, const omen_change *c, unsigned by, int cosmetic)
{
	size_t fi, code = 0;
	if (R->o->max_fix_files > 0 && c->nfiles > (size_t)R->o->max_fix_files)
		return OMEN_FIXSCOPE_LARGE;
	if (cosmetic && !(by & OMEN_FIXBY_NAMED))
		return OMEN_FIXSCOPE_COSMETIC;
	if (!omen_pathset_count(R->nc))
		return OMEN_FIXSCOPE_CODE;
	for (fi = 0; fi < c->nfiles && !code; fi++) {
		const omen_file *f = &c->files[fi];
		code += !omen_pathset_match(R->nc, f->old_path ? f->old_path : f->new_path) ||
			(f->new_path && !omen_pathset_match(R->nc, f->new_path));
	}
	return code ? OMEN_FIXSCOPE_CODE : OMEN_FIXSCOPE_NONCODE;
}

/* Minor candidates (more than one candidate, min_line_share set): a commit
 * behind less than min_line_share percent of the fix's traced lines is
 * dropped (a neighbouring line tidied on the way; README "Labels that mark
 * real repairs" measures the effect against developer-named links). */
static int drop_minor(lbl_run *R)
{
	size_t k, tot = 0, keep = 0;
	uint32_t most = 0;
	for (k = 0; k < R->ncand; k++) {
		tot += R->cand_lines[k];
		if (R->cand_lines[k] > most)
			most = R->cand_lines[k];
	}
	for (k = 0; k < R->ncand; k++) {
		/* the commit(s) behind the most lines always stay */
		if ((uint64_t)R->cand_lines[k] * 100 >= (uint64_t)R->o->min_line_share * tot ||
		    R->cand_lines[k] == most) {
			R->cand[keep] = R->cand[k];
			R->cand_lines[keep++] = R->cand_lines[k];
		} else if (R->dump) {
			if (OMEN_ARRAY_RESERVE(R->minor, R->minor_cap, R->nminor + 1))
				return omen_error_set(OMEN_ENOMEM, "out of memory");
			R->minor[R->nminor++] = R->cand[k];
		}
	}
	R->sum->minor_dropped += R->ncand - keep;
	R->ncand = keep;
	return 0;
}

/* The named commits of fix ci (Fixes:, reverts...) that this pass walked:
 * each becomes a pair with no traced lines and its index goes to named_at
 * (*nat of them). 0 or < 0. */
static int link_named(lbl_run *R, long ci, char named[][OMEN_OID_HEX + 1], int nnamed,
	uint32_t *named_at, int *nat)
{
	int i;
	for (i = 0; i < nnamed; i++) {
		long t = resolve_named(R, named[i]);
		if (t >= 0 && t != ci && R->cs[t].walked && !R->cs[t].merge) {
			R->cs[t].named++;
			R->sum->named_links++;
			named_at[(*nat)++] = (uint32_t)t;
			if (OMEN_ARRAY_RESERVE(R->pairs, R->pairs_cap, R->npairs + 1))
				return omen_error_set(OMEN_ENOMEM, "out of memory");
			R->pairs[R->npairs++] = (lbl_pair){(uint32_t)t, (uint32_t)ci, 0};
		}
	}
	return 0;
}

/* The decisions over all of fix ci's files, on R->cand (its traced
 * candidates): an add-only fix (no traced line, lines = 0, and no absent
 * file) takes the insertion context (issue 10), traced now from change c in
 * one process, or, in a sharded pass on rank 0, given as the ranks' ins[0..
 * nins) (lbl_shard_part); then the line share, the named commits' say, and
 * the fix's pairs and counts. 0 or < 0. */
static int decide_fix(lbl_run *R, uint32_t ci, int lines, int absent, const uint32_t *named_at,
	int nat, const omen_change *c, const lbl_pair *ins, size_t nins)
{
	lbl_commit *cm = &R->cs[ci];
	size_t k;
	int e, i;
	if (!cm->skipped && !lines && absent && !R->ncand) {
		R->sum->fixes_absent++; /* its deleted lines cannot be read */
	} else if (!cm->skipped && !lines && !R->ncand) {
		R->sum->fixes_add_only++;
		if (R->o->insertion_context && c && (e = trace_insertions(R, c)))
			return e;
		for (k = 0; R->o->insertion_context && k < nins; k++)
			if ((e = add_cand_n(R, ins[k].ind, ins[k].lines)))
				return e;
		R->sum->fixes_insertion += R->ncand > 0;
	}
	if (R->o->min_line_share > 0 && R->ncand > 1 && (e = drop_minor(R)))
		return e;
	if (nat && R->o->named_decides) {
		/* the name decides (issue 10): drop the fix's other candidates */
		size_t keep = 0;
		for (k = 0; k < R->ncand; k++) {
			int hit = 0;
			for (i = 0; i < nat; i++)
				hit |= R->cand[k] == named_at[i];
			if (hit) {
				R->cand[keep] = R->cand[k];
				R->cand_lines[keep++] = R->cand_lines[k];
			}
		}
		R->sum->named_dropped += R->ncand - keep;
		R->ncand = keep;
	}
	if (R->ncand)
		R->sum->fixes_traced++;
	for (k = 0; k < R->ncand; k++) {
		uint32_t t = R->cand[k];
		R->cs[t].traced += R->cand_lines[k];
		R->sum->traced_lines += R->cand_lines[k];
		if (OMEN_ARRAY_RESERVE(R->pairs, R->pairs_cap, R->npairs + 1))
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		R->pairs[R->npairs++] = (lbl_pair){t, ci, R->cand_lines[k]};
	}
	return 0;
}

/* A sharded pass: keeps this rank's raw candidates of fix ci for rank 0
 * (decide_shards). When this rank traced no line of the fix (lines = 0)
 * and none of its files was absent, the insertion candidates of its files
 * (view v) are kept too: rank 0 takes them if no other rank traced a line
 * of the fix either. 0 or < 0. */
static int keep_raw(lbl_run *R, const omen_change *v, uint32_t ci, int lines)
{
	size_t k;
	int e;
	for (k = 0; k < R->ncand; k++) {
		if (OMEN_ARRAY_RESERVE(R->pairs, R->pairs_cap, R->npairs + 1))
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		R->pairs[R->npairs++] = (lbl_pair){R->cand[k], ci, R->cand_lines[k]};
	}
	if (lines || R->ncand || R->cs[ci].skipped || R->cs[ci].absent || !R->o->insertion_context)
		return 0;
	if ((e = trace_insertions(R, v)))
		return e;
	for (k = 0; k < R->ncand; k++) {
		if (OMEN_ARRAY_RESERVE(R->ins, R->ins_cap, R->nins + 1))
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		R->ins[R->nins++] = (lbl_pair){R->cand[k], ci, R->cand_lines[k]};
	}
	R->ncand = 0;
	return 0;
}

static int walk_cb(const omen_change *c, void *payload)
{
	lbl_run *R = payload;
	long ci = lookup(R, c->commit.hex);
	lbl_commit *cm;
	char named[MAX_NAMED][OMEN_OID_HEX + 1];
	uint32_t named_at[MAX_NAMED];
	int nnamed = 0, nat = 0, e, i;
	unsigned by;
	const omen_change *v = c; /* this rank's files (every file without sharding) */
	omen_fix_info info;
	if (ci < 0)
		return omen_error_set(OMEN_ERROR, "walk gave commit '%s' that the listing did not", c->commit.hex);
	if (R->sh && R->sh->err)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	if (R->sh && !(v = lbl_shard_view(R->sh, c)))
		return OMEN_ENOMEM;
	if ((e = catch_up(R, (size_t)ci)))
		return e;
	cm = &R->cs[ci];
	if (cm->walked)
		return 0; /* restored from the saved state */
	cm->time = c->commit.author_time;
	cm->merge = c->commit.nparents > 1;
	cm->boundary = c->commit.boundary != 0;
	cm->walked = 1;
	if (cm->boundary)
		R->sum->shallow = 1;
	for (i = 0; i < (int)v->nfiles; i++)
		if (v->files[i].flags & OMEN_FILE_MISSING) {
			cm->absent = 1;
			R->sum->files_absent++;
		}
	R->sum->file_changes += v->nfiles;
	memset(&info, 0, sizeof(info));
	by = cm->merge ? 0 : omen_fix_classify_ex(R->fr, &c->commit, named, MAX_NAMED, &nnamed, &info);
	if ((by & OMEN_FIXBY_NAMED) && (e = link_named(R, ci, named, nnamed, named_at, &nat)) < 0)
		return e;
	if ((by & OMEN_FIXBY_NAMED) && !nat)
		by &= ~(unsigned)OMEN_FIXBY_NAMED;
	if (!by) {
		R->sum->closing_only += info.closing_only;
		R->sum->outside_only += info.outside_only;
		R->sum->feature_only += info.feature_only;
	}
	if (by) {
		size_t before = R->fix_lines_total;
		cm->is_fix = 1;
		cm->fix_by = by;
		cm->issue_date = R->o->use_issue_dates ? omen_fix_issue_date(R->fr, &c->commit) : 0;
		cm->scope = fix_scope(R, c, by, info.cosmetic);
		cm->skipped = cm->scope != OMEN_FIXSCOPE_CODE;
		R->cur_fix = (uint32_t)ci;
		R->ncand = 0;
		R->nc_file = NULL;
		R->ndent = R->nminor = 0;
		if (!cm->skipped || R->dump)
			if ((e = lbl_tracer_trace(R->tr, v, line_cb, R)))
				return e;
		R->sum->fixes_skipped_large += cm->scope == OMEN_FIXSCOPE_LARGE;
		R->sum->fixes_cosmetic += cm->scope == OMEN_FIXSCOPE_COSMETIC;
		R->sum->fixes_noncode += cm->scope == OMEN_FIXSCOPE_NONCODE;
		if (R->sh) {
			/* a sharded pass: this rank's raw candidates go to rank 0, which
			 * decides the fix-wide rules over all of them (decide_shards) */
			cm->sflags |= R->fix_lines_total != before ? LBL_SF_LINES : 0;
			if ((e = keep_raw(R, v, (uint32_t)ci, R->fix_lines_total != before)))
				return e;
		} else if ((e = decide_fix(R, (uint32_t)ci, R->fix_lines_total != before, cm->absent,
				named_at, nat, c, NULL, 0))) {
			return e;
		}
		if (R->dump)
			flush_dump(R, c->commit.hex);
	}
	if (R->o->follow_renames && (e = lbl_rename_pairs(R->tr, R->repo, c, (uint32_t)ci, R->sh)))
		return e;
	if (R->sh && !(v = lbl_shard_view(R->sh, c))) /* renames with edits moved owners */
		return OMEN_ENOMEM;
	if ((e = lbl_tracer_apply(R->tr, v, (uint32_t)ci)))
		return e;
	return ref_step(R, c, ci, cm);
}

/* ---- graph pre-pass ---------------------------------------------------------- */
static int load_graph(lbl_run *R)
{
	size_t i;
	int e = 0;
	if (!(R->cs = calloc(R->n ? R->n : 1, sizeof(*R->cs))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0; i < R->n; i++) {
		char hex[OMEN_OID_HEX + 1];
		git_oid_tostr(hex, sizeof(hex), &R->ids[i]);
		if ((e = omen_strmap_put(&R->index, hex, (void *)(uintptr_t)(i + 1))))
			return e;
		R->cs[i].parent1 = -1;
	}
	for (i = 0; i < R->n; i++) {
		git_commit *cm = NULL;
		unsigned k, np;
		if (git_commit_lookup(&cm, omen_repo_git(R->repo), &R->ids[i])) {
			const git_error *ge = git_error_last();
			return omen_error_set(OMEN_EGIT, "cannot read commit: %s", ge ? ge->message : "");
		}
		np = git_commit_parentcount(cm);
		R->cs[i].is_merge_listed = np > 1;
		for (k = 0; k < np; k++) {
			long p = lbl_lookup_oid(R, git_commit_parent_id(cm, k));
			if (p < 0)
				continue;
			if (k == 0)
				R->cs[i].parent1 = (int32_t)p;
			R->cs[p].pending++;
		}
		git_commit_free(cm);
	}
	/* tips keep their trees' versions (a virtual child), so the pass state
	 * at the end is the state at the tips, saved for the next run */
	if (!(R->tips = malloc((R->n ? R->n : 1) * sizeof(*R->tips))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0; i < R->n; i++)
		if (!R->cs[i].pending) {
			R->cs[i].pending = 1;
			R->tips[R->ntips++] = (uint32_t)i;
		}
	return 0;
}

static int pair_cmp(const void *a, const void *b)
{
	const lbl_pair *x = a, *y = b;
	if (x->ind != y->ind)
		return x->ind < y->ind ? -1 : 1;
	return x->fix < y->fix ? -1 : x->fix > y->fix;
}

/* ---- options and the previous run ---------------------------------------- */
static void json_str_or_null(omen_buf *b, const char *s)
{
	if (s)
		omen_buf_put_json_string(b, s, strlen(s));
	else
		omen_buf_puts(b, "null");
}

static int opts_json(omen_buf *b, const omen_label_opts *o, const char *pattern, const char *list)
{
	omen_buf_printf(b, "{\"fix_pattern\":");
	if (pattern)
		omen_buf_put_json_string(b, pattern, strlen(pattern));
	else
		omen_buf_puts(b, "null");
	omen_buf_puts(b, ",\"fix_list\":");
	if (list)
		omen_buf_put_json_string(b, list, strlen(list));
	else
		omen_buf_puts(b, "null");
	omen_buf_printf(b, ",\"window_days\":%lld,\"max_fix_files\":%d,\"skip_blank\":%d,"
		"\"skip_comments\":%d,\"ws_keeps_origin\":%d,\"follow_renames\":%d,\"use_issue_dates\":%d",
		(long long)o->window_days, o->max_fix_files, o->skip_blank, o->skip_comments,
		o->ws_keeps_origin, o->follow_renames, o->use_issue_dates);
	omen_buf_puts(b, ",\"cosmetic_pattern\":");
	json_str_or_null(b, o->cosmetic_pattern);
	omen_buf_puts(b, ",\"non_code_paths\":");
	json_str_or_null(b, o->noncode_paths);
	return omen_buf_printf(b, ",\"closing_refs\":%d,\"whole_message\":%d,\"feature_subjects\":%d,"
		"\"named_decides\":%d,\"insertion_context\":%d,\"min_line_share\":%d,\"horizon_days\":%lld}",
		o->closing_refs, o->whole_message, o->feature_subjects, o->named_decides, o->insertion_context,
		o->min_line_share, (long long)o->horizon_days);
}

static void summary_from_header(omen_label_summary *s, const char *json)
{
	cJSON *j = cJSON_Parse(json), *m, *v;
	if (!j)
		return;
	m = cJSON_GetObjectItemCaseSensitive(j, "summary");
#define GETN(k, f) if ((v = cJSON_GetObjectItemCaseSensitive(m, k)) && cJSON_IsNumber(v) && \
	v->valuedouble >= 0 && v->valuedouble <= 9007199254740992.0) s->f = (size_t)v->valuedouble
	GETN("commits", commits); GETN("fixes", fixes); GETN("inducing", inducing);
	GETN("clean", clean); GETN("unknown", unknown); GETN("fixes_by_pattern", fixes_by_pattern);
	GETN("fixes_by_list", fixes_by_list); GETN("fixes_by_issue", fixes_by_issue);
	GETN("fixes_by_named", fixes_by_named); GETN("fixes_add_only", fixes_add_only);
	GETN("fixes_skipped_large", fixes_skipped_large); GETN("traced_lines", traced_lines);
	GETN("merges", merges); GETN("boundary", boundary); GETN("named_links", named_links);
	GETN("fixes_traced", fixes_traced); GETN("closing_only", closing_only);
	GETN("outside_only", outside_only); GETN("feature_only", feature_only); GETN("fixes_cosmetic", fixes_cosmetic);
	GETN("fixes_non_code", fixes_noncode); GETN("non_code_lines", noncode_lines);
	GETN("named_dropped", named_dropped); GETN("fixes_insertion", fixes_insertion);
	GETN("minor_dropped", minor_dropped); GETN("beyond_horizon", beyond_horizon);
#undef GETN
	if ((v = cJSON_GetObjectItemCaseSensitive(j, "options")) &&
	    (v = cJSON_GetObjectItemCaseSensitive(v, "horizon_days")) && cJSON_IsNumber(v) &&
	    v->valuedouble >= 0 && v->valuedouble <= OMEN_WINDOW_MAX_DAYS)
		s->horizon_days = (int64_t)v->valuedouble;
	if ((v = cJSON_GetObjectItemCaseSensitive(m, "latency_days")) && cJSON_GetArraySize(v) == 3) {
		int k;
		for (k = 0; k < 3; k++)
			s->latency_days_q[k] = cJSON_GetArrayItem(v, k)->valuedouble;
	}
	if ((v = cJSON_GetObjectItemCaseSensitive(m, "shallow")))
		s->shallow = cJSON_IsTrue(v);
	cJSON_Delete(j);
}

/* Previous labels: 1 when they cover the same head with the same options. */
static int previous_run(omen_label_summary *sum, lbl_run *R, const char *path, const char *opts,
	const char *head)
{
	omen_labels *old = NULL;
	cJSON *j = NULL, *v;
	int same = 0;
	git_oid oh, nh;
	if (omen_labels_load_max(&old, path, R->o ? R->o->max_bytes : 0)) {
		omen_error_clear();
		return 0;
	}
	j = cJSON_Parse(lbl_labels_header(old));
	v = j ? cJSON_GetObjectItemCaseSensitive(j, "options") : NULL;
	if (*omen_labels_head(old) && !git_oid_fromstr(&oh, omen_labels_head(old)) &&
	    !git_oid_fromstr(&nh, head)) {
		char *prev_opts = v ? cJSON_PrintUnformatted(v) : NULL;
		cJSON *mine = cJSON_Parse(opts);
		char *my_opts = mine ? cJSON_PrintUnformatted(mine) : NULL;
		int same_opts = prev_opts && my_opts && !strcmp(prev_opts, my_opts);
		cJSON *sm = cJSON_GetObjectItemCaseSensitive(j, "summary");
		cJSON *mb = sm ? cJSON_GetObjectItemCaseSensitive(sm, "missing_blob_files") : NULL;
		/* labels made with absent blobs skipped are not reused: the blobs
		 * may be readable now (issue 12) */
		if (mb && cJSON_IsNumber(mb) && mb->valuedouble > 0)
			same_opts = 0;
		free(prev_opts);
		free(my_opts);
		cJSON_Delete(mine);
		if (git_oid_equal(&oh, &nh)) {
			sum->mode = same_opts ? OMEN_LABEL_MODE_UPTODATE : OMEN_LABEL_MODE_FULL;
			same = same_opts;
			if (same)
				summary_from_header(sum, lbl_labels_header(old));
		} else if (git_graph_descendant_of(omen_repo_git(R->repo), &nh, &oh) == 1) {
			size_t i, known = 0;
			sum->mode = OMEN_LABEL_MODE_GREW;
			if (same_opts)
				strcpy(R->old_head, omen_labels_head(old));
			for (i = 0; i < omen_labels_count(old); i++)
				known += lookup(R, omen_labels_at(old, i)->id) >= 0;
			sum->new_commits = R->n > known ? R->n - known : 0;
		} else {
			sum->mode = OMEN_LABEL_MODE_REWRITTEN;
		}
	}
	cJSON_Delete(j);
	omen_labels_free(old);
	return same;
}


/* ---- writing ---------------------------------------------------------------- */
static int write_labels(lbl_run *R, const char *path, const char *opts, const char *head)
{
	omen_atomic_file af;
	omen_buf b = OMEN_BUF_INIT;
	omen_label_summary *s = R->sum;
	const char **fixids = NULL;
	size_t i, pi = 0, nfixids = 0, fcap = 0;
	int e;
	if ((e = omen_atomic_open(&af, path)))
		return e;
	omen_buf_printf(&b, "{\"omen_labels\":1,\"head\":\"%s\",\"commits\":%zu,\"newest_time\":%lld,"
		"\"window_cut\":%lld,\"options\":%s,\"summary\":{\"commits\":%zu,\"fixes\":%zu,"
		"\"inducing\":%zu,\"clean\":%zu,\"unknown\":%zu,\"merges\":%zu,\"boundary\":%zu,"
		"\"fixes_by_pattern\":%zu,\"fixes_by_list\":%zu,\"fixes_by_issue\":%zu,"
		"\"fixes_by_named\":%zu,\"fixes_traced\":%zu,\"fixes_add_only\":%zu,"
		"\"fixes_skipped_large\":%zu,\"traced_lines\":%zu,\"named_links\":%zu,"
		"\"latency_days\":[%.3f,%.3f,%.3f],\"shallow\":%s,\"closing_only\":%zu,"
		"\"outside_only\":%zu,\"feature_only\":%zu,\"fixes_cosmetic\":%zu,\"fixes_non_code\":%zu,\"non_code_lines\":%zu,"
		"\"named_dropped\":%zu,\"fixes_insertion\":%zu,\"minor_dropped\":%zu,\"beyond_horizon\":%zu",
		head, R->n, (long long)s->newest_time, (long long)s->window_cut, opts, s->commits, s->fixes,
		s->inducing, s->clean, s->unknown, s->merges, s->boundary, s->fixes_by_pattern,
		s->fixes_by_list, s->fixes_by_issue, s->fixes_by_named, s->fixes_traced, s->fixes_add_only,
		s->fixes_skipped_large, s->traced_lines, s->named_links, s->latency_days_q[0],
		s->latency_days_q[1], s->latency_days_q[2], s->shallow ? "true" : "false", s->closing_only,
		s->outside_only, s->feature_only, s->fixes_cosmetic, s->fixes_noncode, s->noncode_lines, s->named_dropped,
		s->fixes_insertion, s->minor_dropped, s->beyond_horizon);
	/* only when blobs were skipped, so a complete history's file keeps its bytes */
	if (s->files_absent)
		omen_buf_printf(&b, ",\"missing_blob_files\":%zu", s->files_absent);
	omen_buf_printf(&b, "}}\n");
	if (fwrite(b.ptr, 1, b.len, af.fp) != b.len) {
		e = omen_error_set(OMEN_EIO, "cannot write '%s'", path);
		goto out;
	}
	for (i = 0; i < R->n; i++) {
		omen_label_rec rec;
		lbl_commit *c = &R->cs[i];
		char hexes[64][OMEN_OID_HEX + 1];
		memset(&rec, 0, sizeof(rec));
		git_oid_tostr(rec.id, sizeof(rec.id), &R->ids[i]);
		rec.time = c->time;
		rec.is_fix = c->is_fix;
		rec.fix_by = c->fix_by;
		rec.traced_lines = c->traced;
		rec.named = c->named;
		rec.merge = c->merge;
		rec.boundary = c->boundary;
		rec.fix_scope = c->scope;
		rec.label = R->lab[i];
		nfixids = 0;
		while (pi < R->npairs && R->pairs[pi].ind < i)
			pi++;
		for (; pi < R->npairs && R->pairs[pi].ind == i; pi++) {
			if (nfixids && R->pairs[pi].fix == R->pairs[pi - 1].fix)
				continue; /* traced and named by the same fix */
			if (nfixids >= 64)
				continue; /* the record lists at most 64 fixes */
			if (OMEN_ARRAY_RESERVE(fixids, fcap, nfixids + 1)) {
				e = omen_error_set(OMEN_ENOMEM, "out of memory");
				goto out;
			}
			git_oid_tostr(hexes[nfixids], OMEN_OID_HEX + 1, &R->ids[R->pairs[pi].fix]);
			fixids[nfixids] = hexes[nfixids];
			nfixids++;
		}
		rec.fixes = (const char *const *)fixids;
		rec.nfixes = (uint32_t)nfixids;
		omen_buf_clear(&b);
		if ((e = lbl_write_record(&b, &rec)))
			goto out;
		if (fwrite(b.ptr, 1, b.len, af.fp) != b.len) {
			e = omen_error_set(OMEN_EIO, "cannot write '%s'", path);
			goto out;
		}
	}
	e = omen_atomic_commit(&af);
	free(fixids);
	omen_buf_free(&b);
	return e;
out:
	free(fixids);
	omen_buf_free(&b);
	omen_atomic_abort(&af);
	return e;
}

/* Labels (DESIGN.md "Labels" 4, issue 10): with a horizon of H days, a
 * commit is inducing when a fix traced to it (or naming it) came within H
 * days of it, author times; clean when it is older than H at the newest
 * commit and no fix came within H; unknown otherwise. Without a horizon
 * (0) any fix makes it inducing and the verification window is the cut.
 * The latency a horizon bounds is the one da Costa et al. (TSE 2017, from
 * memory) propose to judge SZZ output by. */
/* ---- a path-sharded pass (issue 13) -------------------------------------------
 * Every rank has the same commits, fixes, named links and skipped fixes;
 * what depends on the files is this rank's share: the absent-blob and
 * traced-lines flags per commit, each fix's raw candidates (and insertion
 * candidates) and four counters. Rank 0 adds the other ranks' shares to its
 * own (label/shard.c) and then decides every fix as walk_cb does in one
 * process (decide_shards), so the rules that look at all of a fix's files
 * (the line share, the insertion context, the named commits' say) see the
 * same candidates as there. */
static int fix_cmp(const void *a, const void *b)
{
	const lbl_pair *x = a, *y = b;
	if (x->fix != y->fix)
		return x->fix < y->fix ? -1 : 1;
	if (x->ind != y->ind)
		return x->ind < y->ind ? -1 : 1;
	return (x->lines != 0) - (y->lines != 0);
}

/* Rank 0, after the gather: R->pairs holds every fix's named pairs and
 * summed raw candidates, R->ins the insertion candidates, flags[] the
 * combined LBL_SF_*; replaces R->pairs with the decided pairs. */
static int decide_shards(lbl_run *R, const uint8_t *flags)
{
	lbl_pair *raw = R->pairs;
	size_t nraw = R->npairs, pi = 0, ii = 0, i;
	int e = 0;
	R->pairs = NULL;
	R->npairs = R->pairs_cap = 0;
	if (nraw)
		qsort(raw, nraw, sizeof(*raw), fix_cmp);
	if (R->nins)
		qsort(R->ins, R->nins, sizeof(*R->ins), fix_cmp);
	for (i = 0; i < R->n && !e; i++) {
		uint32_t named_at[MAX_NAMED];
		size_t i0;
		int nat = 0;
		R->cs[i].absent = (flags[i] & LBL_SF_ABSENT) != 0;
		if (!R->cs[i].is_fix)
			continue;
		R->ncand = 0;
		for (; pi < nraw && raw[pi].fix == i; pi++) {
			if (raw[pi].lines) {
				e = add_cand_n(R, raw[pi].ind, raw[pi].lines);
			} else if (OMEN_ARRAY_RESERVE(R->pairs, R->pairs_cap, R->npairs + 1)) {
				e = omen_error_set(OMEN_ENOMEM, "out of memory");
			} else {
				R->pairs[R->npairs++] = raw[pi]; /* a named pair, as link_named made it */
				if (nat < MAX_NAMED)
					named_at[nat++] = raw[pi].ind;
			}
			if (e)
				break;
		}
		for (i0 = ii; ii < R->nins && R->ins[ii].fix == i; ii++)
			;
		if (!e)
			e = decide_fix(R, (uint32_t)i, (flags[i] & LBL_SF_LINES) != 0, R->cs[i].absent,
				named_at, nat, NULL, R->ins + i0, ii - i0);
	}
	free(raw);
	return e;
}

static int gather_shards(lbl_run *R)
{
	omen_label_summary *s = R->sum;
	uint8_t *flags = malloc(R->n ? R->n : 1);
	lbl_shard_part io = {flags, R->n, &R->pairs, &R->npairs, &R->pairs_cap, &R->ins, &R->nins,
		&R->ins_cap, {s->untraced_missing, s->files_absent, s->file_changes, s->noncode_lines}};
	size_t i;
	int e;
	if (!flags)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0; i < R->n; i++)
		flags[i] = (uint8_t)(R->cs[i].sflags | (R->cs[i].absent ? LBL_SF_ABSENT : 0));
	e = lbl_shard_gather(R->sh, R->o, &io);
	if (!e && R->sh->part == 0) {
		s->untraced_missing = (size_t)io.counters[0];
		s->files_absent = (size_t)io.counters[1];
		s->file_changes = (size_t)io.counters[2];
		s->noncode_lines = (size_t)io.counters[3];
		e = decide_shards(R, flags);
	}
	free(flags);
	return e;
}

/* Settings of the issue 10 rules: an option overrides its config key. */
static int read_rule_config(omen_label_opts *o, omen_repo *r, char **cos, char **nc)
{
	int e, b;
	int64_t v;
	if (!o->cosmetic_pattern) {
		if ((e = omen_config_string(cos, r, "omen.cosmeticPattern")))
			return e;
		o->cosmetic_pattern = *cos ? *cos : omen_fix_default_cosmetic;
	}
	if (!o->noncode_paths) {
		if ((e = omen_config_string(nc, r, "omen.nonCodePaths")))
			return e;
		o->noncode_paths = *nc ? *nc : omen_noncode_default;
	}
	if (o->closing_refs < 0) {
		b = 0;
		if ((e = omen_config_bool(&b, r, "omen.closingRefs")))
			return e;
		o->closing_refs = b;
	}
	if (o->whole_message < 0) {
		b = 0;
		if ((e = omen_config_bool(&b, r, "omen.wholeMessage")))
			return e;
		o->whole_message = b;
	}
	if (o->feature_subjects < 0) {
		b = 0;
		if ((e = omen_config_bool(&b, r, "omen.featureSubjects")))
			return e;
		o->feature_subjects = b;
	}
	if (o->insertion_context < 0) {
		b = 1;
		if ((e = omen_config_bool(&b, r, "omen.insertionContext")))
			return e;
		o->insertion_context = b;
	}
	if (o->min_line_share < 0) {
		v = 25;
		if ((e = omen_config_int(&v, r, "omen.minLineShare")))
			return e;
		if (v < 0 || v > 100)
			return omen_error_set(OMEN_EINVAL, "bad config value 'omen.minLineShare': '%lld' is not a "
				"percentage (0 to 100)", (long long)v);
		o->min_line_share = (int)v;
	}
	if (o->named_decides < 0) {
		b = 1;
		if ((e = omen_config_bool(&b, r, "omen.namedDecides")))
			return e;
		o->named_decides = b;
	}
	if (o->horizon_days < 0) {
		v = INT64_MIN; /* unset: the default, decided by the history's span */
		if ((e = omen_config_int(&v, r, "omen.horizon")))
			return e;
		if (v < 0 && v != INT64_MIN)
			return omen_error_set(OMEN_EINVAL, "bad config value 'omen.horizon': '%lld' is not a "
				"number of days (0 = no horizon)", (long long)v);
		o->horizon_days = v == INT64_MIN ? -1 : v;
	}
	return 0;
}

static int64_t author_time(omen_repo *r, const git_oid *id)
{
	git_commit *c = NULL;
	int64_t t = 0;
	if (git_commit_lookup(&c, omen_repo_git(r), id) == 0)
		t = git_commit_author(c)->when.time;
	git_commit_free(c);
	return t;
}

/* The default horizon (README "Labels that mark real repairs"): one year
 * when the history spans at least five of them (the oldest commit of the
 * walk to its head, author times), else none: a younger history would lose
 * too large a share of its known labels to the unknown newest year. */
static int64_t default_horizon(const lbl_run *R)
{
	int64_t span;
	if (!R->n)
		return 0;
	span = author_time(R->repo, &R->ids[R->n - 1]) - author_time(R->repo, &R->ids[0]);
	return span >= (int64_t)OMEN_LABEL_HORIZON_MIN_SPANS * OMEN_LABEL_HORIZON_DEFAULT * 86400 ?
		OMEN_LABEL_HORIZON_DEFAULT : 0;
}

/* The numeric limits an option leaves unset (< 0, or 0 for the memory
 * limit), from their config keys or the defaults. */
static int read_limits(omen_label_opts *o, omen_repo *r)
{
	int64_t v;
	int e;
	if (o->window_days < 0) {
		v = OMEN_WINDOW_DAYS;
		if ((e = omen_config_int(&v, r, "omen.window")))
			return e;
		o->window_days = v;
	}
	if (o->max_fix_files < 0) {
		v = 50;
		if ((e = omen_config_int(&v, r, "omen.maxFixFiles")))
			return e;
		o->max_fix_files = (int)v;
	}
	if (!o->max_bytes) {
		v = 0;
		if ((e = omen_config_int(&v, r, "omen.memoryLimit")))
			return e;
		o->max_bytes = v;
	}
	return 0;
}

/* The fix rules (pattern, the list file when given) and the non-code paths. */
static int make_rules(lbl_run *R, const char *pattern, const char *list)
{
	omen_fixrule_opts fo = OMEN_FIXRULE_OPTS_INIT;
	int e;
	fo.pattern = pattern;
	fo.cosmetic = R->o->cosmetic_pattern;
	fo.closing_refs = R->o->closing_refs;
	fo.whole_message = R->o->whole_message;
	fo.feature_subjects = R->o->feature_subjects;
	if ((e = omen_fixrules_new_opts(&R->fr, &fo)) ||
	    (e = omen_pathset_new(&R->nc, R->o->noncode_paths)))
		return e;
	R->sum->noncode_patterns = omen_pathset_count(R->nc);
	if (list && (e = omen_fixrules_load_list(R->fr, list)))
		return e;
	R->sum->list_entries = omen_fixrules_list_size(R->fr);
	return 0;
}

/* The saved state did not fit: a full pass on a clean table, keeping only
 * that the history grew. */
static int start_over(lbl_run *R, const char *head, const lbl_trace_opts *to)
{
	omen_label_summary *sum = R->sum;
	size_t grew = sum->new_commits;
	int e;
	memset(sum, 0, sizeof(*sum));
	sum->mode = OMEN_LABEL_MODE_GREW;
	sum->new_commits = grew;
	sum->list_entries = omen_fixrules_list_size(R->fr);
	strcpy(sum->head, head);
	lbl_tracer_free(R->tr);
	R->tr = NULL;
	free(R->cs);
	R->cs = NULL;
	free(R->tips);
	R->tips = NULL;
	R->ntips = R->npairs = 0;
	if ((e = load_graph(R)) || (e = lbl_tracer_new(&R->tr, to)))
		return e;
	return 0;
}

/* The revisions of an incremental walk: revs (HEAD when none) and
 * "^old_head", written into excl (OMEN_OID_HEX + 2 bytes). *out is freed by
 * the caller. */
static int revs_after(const char ***out, const char *const *rv, char *excl, const char *old_head)
{
	const char **walk_revs;
	size_t k = 0;
	while (rv && rv[k])
		k++;
	if (!(walk_revs = calloc(k + 3, sizeof(*walk_revs))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (k = 0; rv && rv[k]; k++)
		walk_revs[k] = rv[k];
	if (!k)
		walk_revs[k++] = "HEAD";
	snprintf(excl, OMEN_OID_HEX + 2, "^%s", old_head);
	walk_revs[k++] = excl;
	*out = walk_revs;
	return 0;
}

/* Absent blobs of a partial clone (issue 12): one pre-pass and fetch over
 * every commit this pass reads, merges included (do_merge diffs some of
 * their files), instead of one per walk or per merge. */
static int prefetch_unwalked(lbl_run *R, omen_walk_opts *wo)
{
	git_oid *todo = NULL;
	size_t ntodo = 0;
	int e;
	if (!(todo = malloc((R->n ? R->n : 1) * sizeof(*todo))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (size_t i = 0; i < R->n; i++)
		if (!R->cs[i].walked)
			todo[ntodo++] = R->ids[i];
	e = omen_history_prefetch(R->repo, wo, todo, ntodo);
	free(todo);
	if (e)
		return e;
	wo->no_prefetch = 1;
	return 0;
}

/* Frees what the pass holds (R itself is the caller's). */
static void free_run(lbl_run *R)
{
	omen_fixrules_free(R->fr);
	lbl_tracer_free(R->tr);
	omen_strmap_free(&R->index, NULL);
	free(R->ids);
	free(R->cs);
	free(R->pairs);
	free(R->cand);
	free(R->cand_lines);
	free(R->ins);
	free(R->dent);
	free(R->minor);
	omen_buf_free(&R->path);
	free(R->tips);
	free(R->lab);
	omen_pathset_free(R->nc);
}

/* The label file: out_path, else omen_labels_path's. */
static int labels_file(char **path, omen_repo *r, const char *out_path)
{
	if (!out_path)
		return omen_labels_path(path, r, NULL);
	if (!(*path = strdup(out_path)))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	return 0;
}

/* The walk itself, with progress: the non-merge commits through walk_cb,
 * the merges (do_merge) caught up to the end. */
static int walk_all(lbl_run *R, omen_walk_opts *wo)
{
	int e;
	omen_progress_start(&R->prog, "label", R->n);
	wo->include_merges = 0; /* merges: do_merge */
	if (R->sh) {
		wo->path_filter = lbl_shard_filter;
		wo->path_filter_ctx = R->sh;
	}
	e = omen_history_walk(R->repo, wo, walk_cb, R);
	R->sum->blobs = *omen_repo_blob_stats(R->repo);
	if (!e)
		e = catch_up(R, R->n);
	omen_progress_end(&R->prog);
	return e;
}

/* A path-sharded pass (issue 13): this rank's part of o.parts. */
static int start_shard(lbl_run *R, lbl_shard *shard)
{
	const omen_label_opts *o = R->o;
	if (o->part < 0 || o->part >= o->parts || o->dump_origins)
		return omen_error_set(OMEN_EUSAGE, "a sharded label pass takes a part below its parts "
			"and no origin dump");
	lbl_shard_init(shard, o->part, o->parts, o->follow_renames);
	R->sh = shard;
	return 0;
}

/* The history only grew: restores the saved state (sp gets its path) into
 * R, *restored = 1; when it does not fit, starts over. 0 or < 0. */
static int restore(int *restored, lbl_run *R, omen_buf *sp, const char *path, const char *opts,
	const char *head, const lbl_trace_opts *to)
{
	int e;
	if ((e = omen_buf_printf(sp, "%s.state", path)))
		return e;
	if ((e = lbl_load_state(R, sp->ptr, opts)) < 0)
		return e;
	*restored = e;
	if (!*restored && (e = start_over(R, head, to)))
		return e;
	return 0;
}

int omen_label_run(omen_label_summary *sum, omen_repo *r, const omen_label_opts *opts,
	const char *out_path)
{
	omen_label_opts o = *opts;
	omen_walk_opts wo = OMEN_WALK_OPTS_INIT;
	lbl_run R;
	lbl_shard shard;
	lbl_trace_opts to;
	char *cfg_pattern = NULL, *cfg_list = NULL, *path = NULL;
	char *cfg_cosmetic = NULL, *cfg_noncode = NULL;
	const char *pattern, *list;
	omen_buf ob = OMEN_BUF_INIT, sp = OMEN_BUF_INIT;
	char head[OMEN_OID_HEX + 1] = "", excl[OMEN_OID_HEX + 2];
	const char **walk_revs = NULL;
	int restored = 0;
	double t0 = omen_now();
	int e;

	memset(sum, 0, sizeof(*sum));
	memset(&R, 0, sizeof(R));
	memset(&shard, 0, sizeof(shard));
	R.repo = r;
	R.o = &o;
	R.sum = sum;
	if (o.parts > 1 && (e = start_shard(&R, &shard)))
		goto out;
	if (!o.fix_pattern && (e = omen_config_string(&cfg_pattern, r, "omen.fixPattern")))
		goto out;
	if (!o.fix_list && (e = omen_config_string(&cfg_list, r, "omen.fixList")))
		goto out;
	if ((e = read_limits(&o, r)) || (e = read_rule_config(&o, r, &cfg_cosmetic, &cfg_noncode)))
		goto out;
	pattern = o.fix_pattern ? o.fix_pattern : cfg_pattern;
	list = o.fix_list ? o.fix_list : cfg_list;
	if ((e = make_rules(&R, pattern, list)))
		goto out;
	if ((e = labels_file(&path, r, out_path)))
		goto out;
	wo.revs = o.revs;
	wo.include_merges = 1;
	wo.detect_renames = o.follow_renames ? 1 : -1;
	wo.with_lines = 1;
	if ((e = omen_history_list(&R.ids, &R.n, r, &wo)))
		goto out;
	if (R.n == 0) {
		e = omen_error_set(OMEN_ENOTFOUND, "no commits to label");
		goto out;
	}
	git_oid_tostr(head, sizeof(head), &R.ids[R.n - 1]);
	strcpy(sum->head, head);
	if ((e = load_graph(&R)))
		goto out;
	if (o.horizon_days < 0)
		o.horizon_days = default_horizon(&R);
	if ((e = opts_json(&ob, &o, pattern, list)))
		goto out;
	if (o.incremental && previous_run(sum, &R, path, ob.ptr, head)) {
		e = 0;
		goto out;
	}
	to.skip_blank = o.skip_blank;
	to.skip_comments = o.skip_comments;
	to.ws_keeps_origin = o.ws_keeps_origin;
	if ((e = lbl_tracer_new(&R.tr, &to)))
		goto out;
	if (o.dump_origins) {
		if ((e = omen_output_open(&R.dumpf, o.dump_origins)))
			goto out;
		R.dump = R.dumpf.fp;
	}
	/* with a fix list the old commits would need classifying again (the
	 * list may have changed): no state reuse then */
	if (o.incremental && sum->mode == OMEN_LABEL_MODE_GREW && !list && !R.sh &&
	    (e = restore(&restored, &R, &sp, path, ob.ptr, head, &to)))
		goto out;
	if (restored) {
		if ((e = revs_after(&walk_revs, o.revs, excl, R.old_head)))
			goto out;
		wo.revs = walk_revs;
		sum->reused_commits = R.n - sum->new_commits;
	}
	if ((e = prefetch_unwalked(&R, &wo)) || (e = walk_all(&R, &wo)))
		goto out;
	if (R.sh && (e = gather_shards(&R)))
		goto out;
	if (R.sh && R.sh->part)
		goto out; /* only rank 0 writes */
	sum->list_unmatched = omen_fixrules_unmatched(R.fr);
	sum->state_peak_bytes = lbl_tracer_peak_bytes(R.tr) + R.n * (sizeof(*R.cs) + sizeof(*R.ids)) +
		R.pairs_cap * sizeof(*R.pairs);
	if (R.npairs)
		qsort(R.pairs, R.npairs, sizeof(*R.pairs), pair_cmp);
	if ((e = lbl_count_labels(&R)) || (e = lbl_latency(&R)))
		goto out;
	if ((e = write_labels(&R, path, ob.ptr, head)))
		goto out;
	omen_buf_clear(&sp);
	if (!R.sh && ((e = omen_buf_printf(&sp, "%s.state", path)) ||
	    (e = lbl_save_state(&R, sp.ptr, ob.ptr, head))))
		goto out;
out:
	if (R.dump && !e)
		e = omen_atomic_commit(&R.dumpf);
	else if (R.dump)
		omen_atomic_abort(&R.dumpf);
	sum->seconds = omen_now() - t0;
	free_run(&R);
	lbl_shard_free(&shard);
	omen_buf_free(&ob);
	omen_buf_free(&sp);
	free(walk_revs);
	free(cfg_cosmetic);
	free(cfg_noncode);
	free(cfg_pattern);
	free(cfg_list);
	free(path);
	return e;
}
