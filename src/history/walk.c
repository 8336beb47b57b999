/* Revision walking and the streaming history walk.
 *
 * Commits are listed by hand rather than with git_revwalk, which in libgit2
 * 1.5 fails on a shallow clone's missing parents: a commit-date priority
 * queue as in git's revision.c (limit_list with its "slop" of extra steps for
 * clock skew), uninteresting marks propagated to ancestors, then a
 * topological order (parents first, older commit time first among the ready
 * ones). A missing parent is a boundary.
 *
 * The walk lists ids first, then diff workers, each with its own
 * git_repository (libgit2 objects are not shared between threads), fill a
 * ring of slots; the caller's thread hands the slots to the callback in walk
 * order. The ring holds 4 commits per worker, so memory is bounded by a few
 * commits, not by the history. */
#include <pthread.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <unistd.h>
#include "history/internal.h"
#include "omen/error.h"

enum {
	N_LOADED = 1, N_QUEUED = 2, N_UNINT = 4, N_MISSING = 8, N_INQ = 16, N_START = 32
};

typedef struct {
	git_oid id;
	int64_t time;
	uint32_t poff, np;   /* parent ids in lst.pids (followed ones only) */
	uint32_t nparents;   /* real parent count */
	uint32_t seq;        /* insertion order, ties in the queue */
	uint8_t flags;
} node;

typedef struct {
	git_repository *repo;
	node *nodes; size_t n, cap;
	git_oid *pids; size_t npids, pids_cap;
	omen_index index;   /* oid -> node index */
	int32_t *heap; size_t hn, hcap;
	size_t interesting_in_queue;
	int first_parent;
} lister;

static uint64_t oid_hash(const git_oid *id)
{
	uint64_t h;
	memcpy(&h, id->id, sizeof(h));
	return h;
}

static uint64_t node_hash(int32_t v, const void *ctx)
{
	return oid_hash(&((const lister *)ctx)->nodes[v].id);
}

static int node_is(int32_t v, const void *key, const void *ctx)
{
	return git_oid_equal(&((const lister *)ctx)->nodes[v].id, key);
}

static const omen_index_ops node_ops = {node_hash, node_is};

/* Node index of id, created (unloaded) when absent. */
static int node_get(lister *l, const git_oid *id, int32_t *out)
{
	int32_t v = omen_index_find(&l->index, id, oid_hash(id), &node_ops, l);
	if (v >= 0) {
		*out = v;
		return 0;
	}
	if (OMEN_ARRAY_RESERVE(l->nodes, l->cap, l->n + 1) < 0)
		return OMEN_ENOMEM;
	memset(&l->nodes[l->n], 0, sizeof(node));
	git_oid_cpy(&l->nodes[l->n].id, id);
	l->nodes[l->n].seq = (uint32_t)l->n;
	if (omen_index_add(&l->index, (int32_t)l->n, oid_hash(id), &node_ops, l) < 0)
		return OMEN_ENOMEM;
	*out = (int32_t)l->n++;
	return 0;
}

/* The date queue: newest first, FIFO among equal times (time, then -seq). */
static int queue_before(int32_t a, int32_t b, const void *ctx)
{
	const lister *l = ctx;
	const node *x = &l->nodes[a], *y = &l->nodes[b];
	if (x->time != y->time)
		return x->time > y->time;
	return x->seq < y->seq;
}

static int heap_push(lister *l, int32_t v)
{
	if (OMEN_ARRAY_RESERVE(l->heap, l->hcap, l->hn + 1) < 0)
		return OMEN_ENOMEM;
	omen_heap_push(l->heap, l->hn++, v, queue_before, l);
	l->nodes[v].flags |= N_INQ | N_QUEUED;
	if (!(l->nodes[v].flags & N_UNINT))
		l->interesting_in_queue++;
	return 0;
}

static int32_t heap_pop(lister *l)
{
	int32_t top = omen_heap_pop(l->heap, l->hn--, queue_before, l);
	l->nodes[top].flags &= (uint8_t)~N_INQ;
	if (!(l->nodes[top].flags & N_UNINT))
		l->interesting_in_queue--;
	return top;
}

/* Reads the commit behind node v (time, parents). Missing: N_MISSING. */
static int node_load(lister *l, int32_t v)
{
	git_commit *c = NULL;
	node *nd = &l->nodes[v];
	uint32_t np, follow;
	int e;
	if (nd->flags & (N_LOADED | N_MISSING))
		return 0;
	e = git_commit_lookup(&c, l->repo, &nd->id);
	if (e == GIT_ENOTFOUND) {
		l->nodes[v].flags |= N_MISSING;
		return 0;
	}
	if (e < 0) {
		char hex[OMEN_OID_HEX + 1];
		git_oid_tostr(hex, sizeof(hex), &nd->id);
		return hist_git_fail("cannot read commit", hex);
	}
	np = git_commit_parentcount(c);
	follow = l->first_parent && np > 1 ? 1 : np;
	if (OMEN_ARRAY_RESERVE(l->pids, l->pids_cap, l->npids + follow + 1) < 0) {
		git_commit_free(c);
		return OMEN_ENOMEM;
	}
	nd = &l->nodes[v];
	nd->time = git_commit_time(c);
	nd->nparents = np;
	nd->poff = (uint32_t)l->npids;
	nd->np = follow;
	for (uint32_t i = 0; i < follow; i++)
		git_oid_cpy(&l->pids[l->npids++], git_commit_parent_id(c, i));
	nd->flags |= N_LOADED;
	git_commit_free(c);
	return 0;
}

/* Marks v and its known ancestors uninteresting. */
static int mark_unint(lister *l, int32_t v)
{
	int32_t *stack = NULL;
	size_t sn = 0, scap = 0;
	int rc = 0;
	if (OMEN_ARRAY_RESERVE(stack, scap, 1) < 0)
		return OMEN_ENOMEM;
	stack[sn++] = v;
	while (sn) {
		int32_t x = stack[--sn];
		node *nd = &l->nodes[x];
		if (nd->flags & N_UNINT)
			continue;
		nd->flags |= N_UNINT;
		if (nd->flags & N_INQ)
			l->interesting_in_queue--;
		if (!(nd->flags & N_LOADED))
			continue;
		for (uint32_t i = 0; i < l->nodes[x].np; i++) {
			int32_t p;
			if ((rc = node_get(l, &l->pids[l->nodes[x].poff + i], &p)) < 0)
				goto out;
			if (l->nodes[p].flags & N_UNINT)
				continue;
			if (OMEN_ARRAY_RESERVE(stack, scap, sn + 1) < 0) {
				rc = OMEN_ENOMEM;
				goto out;
			}
			stack[sn++] = p;
		}
	}
out:
	free(stack);
	return rc;
}

static int add_start(lister *l, const git_oid *id, int unint)
{
	int32_t v;
	int rc;
	if ((rc = node_get(l, id, &v)) < 0 || (rc = node_load(l, v)) < 0)
		return rc;
	if (l->nodes[v].flags & N_MISSING) {
		char hex[OMEN_OID_HEX + 1];
		git_oid_tostr(hex, sizeof(hex), id);
		return omen_error_set(OMEN_ENOTFOUND, "cannot read commit '%s': object missing", hex);
	}
	l->nodes[v].flags |= N_START;
	if (unint && (rc = mark_unint(l, v)) < 0)
		return rc;
	if (!(l->nodes[v].flags & N_QUEUED))
		return heap_push(l, v);
	return 0;
}

static int peel_commit(git_oid *out, git_repository *repo, const git_object *o, const char *spec)
{
	git_object *c = NULL;
	if (git_object_peel(&c, o, GIT_OBJECT_COMMIT) < 0)
		return omen_error_set(OMEN_EINVAL, "cannot resolve '%s': not a commit", spec);
	git_oid_cpy(out, git_object_id(c));
	git_object_free(c);
	(void)repo;
	return 0;
}

static int unborn_error(git_repository *repo, const char *spec)
{
	git_reference *h = NULL;
	const char *target = NULL;
	int rc;
	if (git_reference_lookup(&h, repo, "HEAD") == 0 && git_reference_type(h) == GIT_REFERENCE_SYMBOLIC)
		target = git_reference_symbolic_target(h);
	if (target && !strncmp(target, "refs/heads/", 11))
		target += 11;
	rc = omen_error_set(OMEN_ENOTFOUND, "cannot resolve '%s': branch '%s' has no commits yet",
		spec, target ? target : "HEAD");
	git_reference_free(h);
	return rc;
}

int omen_history_resolve(git_oid *out, omen_repo *r, const char *spec)
{
	git_repository *repo = omen_repo_git(r);
	git_object *o = NULL;
	int e, rc;
	e = git_revparse_single(&o, repo, spec);
	if (e < 0) {
		if (git_repository_head_unborn(repo) == 1 && (!strcmp(spec, "HEAD") || !strcmp(spec, "@")))
			return unborn_error(repo, spec);
		if (e == GIT_ENOTFOUND || e == GIT_EAMBIGUOUS || e == GIT_EINVALIDSPEC) {
			const git_error *ge = git_error_last();
			return omen_error_set(e == GIT_EAMBIGUOUS ? OMEN_EINVAL : OMEN_ENOTFOUND,
				"cannot resolve '%s': %s", spec,
				e == GIT_EAMBIGUOUS ? "ambiguous revision" :
				ge && ge->message ? ge->message : "unknown revision");
		}
		return hist_git_fail("cannot resolve", spec);
	}
	rc = peel_commit(out, repo, o, spec);
	git_object_free(o);
	return rc;
}

static int add_rev(lister *l, omen_repo *r, const char *spec)
{
	git_repository *repo = omen_repo_git(r);
	git_oid a, b;
	int rc;
	if (spec[0] == '^') {
		if ((rc = omen_history_resolve(&a, r, spec + 1)) < 0)
			return rc;
		return add_start(l, &a, 1);
	}
	if (strstr(spec, "..")) {
		git_revspec rs;
		int sym = strstr(spec, "...") != NULL;
		if (git_revparse(&rs, repo, spec) < 0) {
			const git_error *ge = git_error_last();
			return omen_error_set(OMEN_ENOTFOUND, "cannot resolve '%s': %s", spec,
				ge && ge->message ? ge->message : "unknown revision");
		}
		rc = peel_commit(&a, repo, rs.from, spec);
		if (!rc)
			rc = peel_commit(&b, repo, rs.to, spec);
		git_object_free(rs.from);
		git_object_free(rs.to);
		if (rc < 0)
			return rc;
		if (sym) {
			git_oidarray bases = {0};
			if ((rc = add_start(l, &a, 0)) < 0 || (rc = add_start(l, &b, 0)) < 0)
				return rc;
			if (git_merge_bases(&bases, repo, &a, &b) == 0) {
				for (size_t i = 0; i < bases.count && !rc; i++)
					rc = add_start(l, &bases.ids[i], 1);
				git_oidarray_dispose(&bases);
			}
			return rc;
		}
		if ((rc = add_start(l, &a, 1)) < 0)
			return rc;
		return add_start(l, &b, 0);
	}
	if ((rc = omen_history_resolve(&a, r, spec)) < 0)
		return rc;
	return add_start(l, &a, 0);
}

static int add_all_refs(lister *l, omen_repo *r)
{
	git_repository *repo = omen_repo_git(r);
	git_reference_iterator *it = NULL;
	git_reference *ref;
	int rc = 0, any = 0;
	if (git_reference_iterator_new(&it, repo) < 0)
		return hist_git_fail("cannot list references of", omen_repo_gitdir(r));
	while (!rc && git_reference_next(&ref, it) == 0) {
		git_object *o = NULL, *c = NULL;
		if (git_reference_peel(&o, ref, GIT_OBJECT_ANY) == 0 &&
		    git_object_peel(&c, o, GIT_OBJECT_COMMIT) == 0) {
			rc = add_start(l, git_object_id(c), 0);
			any = 1;
		}
		git_error_clear();
		git_object_free(c);
		git_object_free(o);
		git_reference_free(ref);
	}
	git_reference_iterator_free(it);
	if (!rc) {
		git_oid h;
		if (git_reference_name_to_id(&h, repo, "HEAD") == 0) {
			rc = add_start(l, &h, 0);
			any = 1;
		}
	}
	if (!rc && !any)
		return omen_error_set(OMEN_ENOTFOUND, "cannot walk '--all': repository has no commits");
	return rc;
}

static void lister_free(lister *l)
{
	free(l->nodes);
	free(l->pids);
	omen_index_free(&l->index);
	free(l->heap);
}

/* The ready queue of the topological order: older commit time first, then
 * position in the result set. */
typedef struct {
	const lister *l;
	const int32_t *res;
} ready_ctx;

static int ready_before(int32_t a, int32_t b, const void *ctx)
{
	const ready_ctx *r = ctx;
	int64_t ta = r->l->nodes[r->res[a]].time, tb = r->l->nodes[r->res[b]].time;
	return ta != tb ? ta < tb : a < b;
}

/* Kahn's order over the result set: parents first, oldest commit time first
 * among the ready ones (min-heap on (time, seq)). */
static int topo_order(lister *l, const int32_t *res, size_t nres, git_oid **out, size_t *nout,
	const omen_walk_opts *o)
{
	int32_t *pos = NULL, *indeg = NULL, *coff = NULL, *child = NULL, *heap = NULL;
	size_t nedges = 0, hn = 0, k = 0;
	git_oid *ids = NULL;
	ready_ctx rs = {l, res};
	int rc = 0;
	pos = malloc((l->n + 1) * sizeof(*pos));
	indeg = calloc(nres + 1, sizeof(*indeg));
	coff = calloc(nres + 2, sizeof(*coff));
	heap = malloc((nres + 1) * sizeof(*heap));
	ids = malloc((nres + 1) * sizeof(*ids));
	if (!pos || !indeg || !coff || !heap || !ids) {
		rc = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	memset(pos, 0xff, (l->n + 1) * sizeof(*pos));
	for (size_t i = 0; i < nres; i++)
		pos[res[i]] = (int32_t)i;
	/* count edges parent -> child */
	for (int pass = 0; pass < 2; pass++) {
		for (size_t i = 0; i < nres; i++) {
			node *nd = &l->nodes[res[i]];
			for (uint32_t j = 0; j < nd->np; j++) {
				int32_t p;
				if ((rc = node_get(l, &l->pids[nd->poff + j], &p)) < 0)
					goto out;
				nd = &l->nodes[res[i]];
				if (pos[p] < 0)
					continue;
				if (pass == 0) {
					coff[pos[p] + 1]++;
					indeg[i]++;
					nedges++;
				} else {
					child[coff[pos[p]]++] = (int32_t)i;
				}
			}
		}
		if (pass == 0) {
			for (size_t i = 0; i < nres; i++)
				coff[i + 1] += coff[i];
			if (!(child = malloc((nedges + 1) * sizeof(*child)))) {
				rc = omen_error_set(OMEN_ENOMEM, "out of memory");
				goto out;
			}
		}
	}
	/* after pass 1, coff[i] is the end of i's children; start = coff[i-1] */
	for (size_t i = 0; i < nres; i++)
		if (!indeg[i])
			omen_heap_push(heap, hn++, (int32_t)i, ready_before, &rs);
	while (hn) {
		int32_t v = omen_heap_pop(heap, hn--, ready_before, &rs);
		size_t start, end;
		node *nd = &l->nodes[res[v]];
		if (o->include_merges || nd->nparents <= 1)
			git_oid_cpy(&ids[k++], &nd->id);
		start = v ? (size_t)coff[v - 1] : 0;
		end = (size_t)coff[v];
		for (size_t e = start; e < end; e++) {
			int32_t ch = child[e];
			if (--indeg[ch])
				continue;
			omen_heap_push(heap, hn++, ch, ready_before, &rs);
		}
	}
	if (o->newest_first)
		for (size_t i = 0; i < k / 2; i++) {
			git_oid t = ids[i];
			ids[i] = ids[k - 1 - i];
			ids[k - 1 - i] = t;
		}
	*out = ids;
	*nout = k;
	ids = NULL;
out:
	free(pos);
	free(indeg);
	free(coff);
	free(child);
	free(heap);
	free(ids);
	return rc;
}

int omen_history_list(git_oid **out, size_t *n, omen_repo *r, const omen_walk_opts *o)
{
	static const omen_walk_opts defaults = OMEN_WALK_OPTS_INIT;
	lister l;
	int32_t *res = NULL;
	size_t nres = 0, rcap = 0;
	int rc = 0, slop = 5, any_unint = 0;
	*out = NULL;
	*n = 0;
	if (!o)
		o = &defaults;
	memset(&l, 0, sizeof(l));
	l.repo = omen_repo_git(r);
	l.first_parent = o->first_parent;
	if (o->all && (rc = add_all_refs(&l, r)) < 0)
		goto out;
	if (o->revs && o->revs[0]) {
		for (size_t i = 0; o->revs[i]; i++)
			if ((rc = add_rev(&l, r, o->revs[i])) < 0)
				goto out;
	} else if (!o->all) {
		if ((rc = add_rev(&l, r, "HEAD")) < 0)
			goto out;
	}
	for (size_t i = 0; i < l.n; i++)
		any_unint |= (l.nodes[i].flags & N_UNINT) != 0;
	while (l.hn) {
		int32_t v;
		if (any_unint && !l.interesting_in_queue) {
			if (--slop <= 0)
				break;
		} else {
			slop = 5;
		}
		v = heap_pop(&l);
		if ((rc = node_load(&l, v)) < 0)
			goto out;
		if (l.nodes[v].flags & N_MISSING)
			continue;
		int unint = (l.nodes[v].flags & N_UNINT) != 0;
		if (!unint) {
			if (OMEN_ARRAY_RESERVE(res, rcap, nres + 1) < 0) {
				rc = omen_error_set(OMEN_ENOMEM, "out of memory");
				goto out;
			}
			res[nres++] = v;
		}
		for (uint32_t j = 0; j < l.nodes[v].np; j++) {
			int32_t p;
			if ((rc = node_get(&l, &l.pids[l.nodes[v].poff + j], &p)) < 0 ||
			    (rc = node_load(&l, p)) < 0)
				goto out;
			if (l.nodes[p].flags & N_MISSING)
				continue;
			if (unint && (rc = mark_unint(&l, p)) < 0)
				goto out;
			if (!(l.nodes[p].flags & N_QUEUED) && (rc = heap_push(&l, p)) < 0)
				goto out;
		}
	}
	/* late uninteresting marks and the time bounds */
	{
		size_t k = 0;
		for (size_t i = 0; i < nres; i++) {
			node *nd = &l.nodes[res[i]];
			if (nd->flags & N_UNINT)
				continue;
			if (o->since && nd->time < o->since)
				continue;
			if (o->until && nd->time > o->until)
				continue;
			res[k++] = res[i];
		}
		nres = k;
	}
	rc = topo_order(&l, res, nres, out, n, o);
out:
	free(res);
	lister_free(&l);
	return rc;
}

/* Options with the configured defaults filled in: omen.maxBlobBytes when
 * max_blob_bytes is 0, omen.threads when threads is 0, omen.missingBlobs
 * (else fetch in a partial clone, error in a full one) when missing_blobs
 * is 0. */
int hist_resolve_opts(omen_walk_opts *dst, omen_repo *r, const omen_walk_opts *o)
{
	static const omen_walk_opts defaults = OMEN_WALK_OPTS_INIT;
	int64_t v;
	int rc;
	*dst = o ? *o : defaults;
	if (dst->missing_blobs <= 0 || dst->missing_blobs > OMEN_MISSING_FETCH) {
		/* the words and the message come from the settings table */
		int m = -1;
		if ((rc = omen_config_choice(&m, r, "omen.missingBlobs")) < 0)
			return rc;
		if (m < 0)
			dst->missing_blobs = hist_repo_partial(r) ? OMEN_MISSING_FETCH : OMEN_MISSING_ERROR;
		else
			dst->missing_blobs = m == 0 ? OMEN_MISSING_ERROR :
				m == 1 ? OMEN_MISSING_SKIP : OMEN_MISSING_FETCH;
	}
	if (dst->max_blob_bytes <= 0) {
		v = 0;
		if ((rc = omen_config_int(&v, r, "omen.maxBlobBytes")) < 0)
			return rc;
		if (v > 0)
			dst->max_blob_bytes = v;
	}
	if (dst->threads <= 0) {
		v = 0;
		if ((rc = omen_config_int(&v, r, "omen.threads")) < 0)
			return rc;
		if (v > 0)
			dst->threads = v > 16 ? 16 : (int)v;
	}
	return 0;
}

/* ---- single commits ------------------------------------------------------ */
int omen_history_change(omen_change *out, omen_repo *r, const git_oid *id, const omen_walk_opts *o)
{
	hist_differ d;
	omen_walk_opts ro;
	int rc;
	if ((rc = hist_resolve_opts(&ro, r, o)) < 0)
		return rc;
	if (!ro.no_prefetch && (rc = omen_history_prefetch(r, &ro, id, 1)) < 0)
		return rc;
	if ((rc = hist_differ_init(&d, omen_repo_git(r), &ro)) < 0)
		return rc;
	d.skipped = &hist_repo_stats(r)->skipped_files;
	rc = hist_diff_commit(&d, out, id);
	hist_differ_free(&d);
	return rc;
}

/* ---- the streaming walk -------------------------------------------------- */
typedef struct {
	omen_change change;
	size_t seq;
	int done;
	int rc;
	char err[512];
} slot;

typedef struct {
	pthread_mutex_t mu;
	pthread_cond_t filled, freed;
	const git_oid *ids;
	size_t n, next, cur;
	slot *slots;
	size_t nslots;
	int stop;
	const char *gitdir;
	const omen_walk_opts *o;
	size_t *skipped;
} walk_state;

typedef struct {
	walk_state *w;
	pthread_t th;
	int started;
} worker;

static void *worker_main(void *arg)
{
	worker *wk = arg;
	walk_state *w = wk->w;
	git_repository *repo = NULL;
	hist_differ d;
	int ready = 0, init_rc = 0;
	char init_err[512] = "";
	if (git_repository_open_ext(&repo, w->gitdir, GIT_REPOSITORY_OPEN_NO_SEARCH, NULL) < 0)
		init_rc = hist_git_fail("cannot open repository", w->gitdir);
	else if ((init_rc = hist_differ_init(&d, repo, w->o)) == 0)
		ready = 1, d.skipped = w->skipped;
	if (init_rc)
		snprintf(init_err, sizeof(init_err), "%s", omen_error_last());
	for (;;) {
		size_t i;
		slot *s;
		pthread_mutex_lock(&w->mu);
		while (!w->stop && w->next < w->n && w->next >= w->cur + w->nslots)
			pthread_cond_wait(&w->freed, &w->mu);
		if (w->stop || w->next >= w->n) {
			pthread_mutex_unlock(&w->mu);
			break;
		}
		i = w->next++;
		pthread_mutex_unlock(&w->mu);
		s = &w->slots[i % w->nslots];
		if (ready) {
			s->rc = hist_diff_commit(&d, &s->change, &w->ids[i]);
			if (s->rc)
				snprintf(s->err, sizeof(s->err), "%s", omen_error_last());
		} else {
			s->rc = init_rc;
			snprintf(s->err, sizeof(s->err), "%s", init_err);
		}
		pthread_mutex_lock(&w->mu);
		s->seq = i;
		s->done = 1;
		pthread_cond_broadcast(&w->filled);
		pthread_mutex_unlock(&w->mu);
	}
	if (ready)
		hist_differ_free(&d);
	git_repository_free(repo);
	return NULL;
}

/* Online cores, at most 2; but 1 when the one-minute load average says no
 * core is idle (as `make -l` holds back jobs): a second diff worker then
 * only adds the cost of a second object cache and of lock hand-offs.
 * omen.threads or walk_opts.threads overrides this. */
static int default_threads(void)
{
	long n = sysconf(_SC_NPROCESSORS_ONLN);
	double load = 0;
	if (n < 2)
		return 1;
	if (getloadavg(&load, 1) == 1 && load > (double)n - 1.0)
		return 1;
	return 2;
}

int omen_history_walk(omen_repo *r, const omen_walk_opts *o, omen_change_cb cb, void *payload)
{
	omen_walk_opts ro;
	git_oid *ids = NULL;
	size_t n = 0;
	int rc;
	if ((rc = hist_resolve_opts(&ro, r, o)) < 0)
		return rc;
	if ((rc = omen_history_list(&ids, &n, r, &ro)) < 0)
		return rc;
	rc = omen_history_walk_ids(r, &ro, ids, n, cb, payload);
	free(ids);
	return rc;
}

int omen_history_walk_ids(omen_repo *r, const omen_walk_opts *o, const git_oid *ids, size_t n,
	omen_change_cb cb, void *payload)
{
	omen_walk_opts ro;
	int rc, nth;
	if ((rc = hist_resolve_opts(&ro, r, o)) < 0)
		return rc;
	if (!ro.no_prefetch && (rc = omen_history_prefetch(r, &ro, ids, n)) < 0)
		return rc;
	o = &ro;
	nth = o->threads > 0 ? o->threads : default_threads();
	if (nth > 16)
		nth = 16;
	if ((size_t)nth > n)
		nth = (int)n;
	if (o->path_filter)
		nth = 1; /* the filter is called in walk order */
	if (nth <= 1) {
		hist_differ d;
		omen_change c;
		if ((rc = hist_differ_init(&d, omen_repo_git(r), o)) < 0)
			goto out;
		d.skipped = &hist_repo_stats(r)->skipped_files;
		omen_change_init(&c);
		for (size_t i = 0; i < n && !rc; i++) {
			if ((rc = hist_diff_commit(&d, &c, &ids[i])) < 0)
				break;
			rc = cb(&c, payload);
		}
		omen_change_free(&c);
		hist_differ_free(&d);
		goto out;
	}
	{
		walk_state w;
		worker wk[16];
		memset(&w, 0, sizeof(w));
		memset(wk, 0, sizeof(wk));
		pthread_mutex_init(&w.mu, NULL);
		pthread_cond_init(&w.filled, NULL);
		pthread_cond_init(&w.freed, NULL);
		w.ids = ids;
		w.n = n;
		w.o = o;
		w.gitdir = git_repository_path(omen_repo_git(r));
		w.skipped = &hist_repo_stats(r)->skipped_files;
		w.nslots = (size_t)nth * 4;
		w.slots = calloc(w.nslots, sizeof(slot));
		if (!w.slots) {
			rc = omen_error_set(OMEN_ENOMEM, "out of memory");
		} else {
			for (size_t i = 0; i < w.nslots; i++)
				omen_change_init(&w.slots[i].change);
			int started = 0;
			for (int t = 0; t < nth; t++) {
				wk[t].w = &w;
				if (pthread_create(&wk[t].th, NULL, worker_main, &wk[t]) == 0)
					wk[t].started = 1, started++;
			}
			if (!started)
				rc = omen_error_set(OMEN_ERROR, "cannot start diff threads");
			for (size_t i = 0; i < n && started; i++) {
				slot *s = &w.slots[i % w.nslots];
				pthread_mutex_lock(&w.mu);
				while (!(s->done && s->seq == i))
					pthread_cond_wait(&w.filled, &w.mu);
				pthread_mutex_unlock(&w.mu);
				if (s->rc)
					rc = omen_error_set(s->rc, "%s", s->err);
				else
					rc = cb(&s->change, payload);
				pthread_mutex_lock(&w.mu);
				s->done = 0;
				w.cur = i + 1;
				if (rc)
					w.stop = 1;
				pthread_cond_broadcast(&w.freed);
				pthread_mutex_unlock(&w.mu);
				if (rc)
					break;
			}
			pthread_mutex_lock(&w.mu);
			w.stop = 1;
			pthread_cond_broadcast(&w.freed);
			pthread_mutex_unlock(&w.mu);
			for (int t = 0; t < nth; t++)
				if (wk[t].started)
					pthread_join(wk[t].th, NULL);
			for (size_t i = 0; i < w.nslots; i++)
				omen_change_free(&w.slots[i].change);
			free(w.slots);
		}
		pthread_cond_destroy(&w.filled);
		pthread_cond_destroy(&w.freed);
		pthread_mutex_destroy(&w.mu);
	}
out:
	return rc;
}
