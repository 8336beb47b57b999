/* Which commits to score: the score/explain arguments, and the commits a
 * push sends that the remote does not have yet. */
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/score.h"

typedef struct {
	char **v;
	size_t n, cap;
} strvec;

static int strvec_push(strvec *s, const char *a, const char *b)
{
	size_t la = strlen(a), lb = b ? strlen(b) : 0;
	char *p;
	if (OMEN_ARRAY_RESERVE(s->v, s->cap, s->n + 2))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	if (!(p = malloc(la + lb + 1)))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	memcpy(p, a, la);
	if (b)
		memcpy(p + la, b, lb);
	p[la + lb] = '\0';
	s->v[s->n++] = p;
	s->v[s->n] = NULL;
	return 0;
}

static void strvec_free(strvec *s)
{
	size_t i;
	for (i = 0; i < s->n; i++)
		free(s->v[i]);
	free(s->v);
	s->v = NULL;
	s->n = s->cap = 0;
}

typedef struct {
	strvec *hide;
	git_repository *repo;
	int err;
} glob_ctx;

static int hide_ref(const char *name, void *payload)
{
	glob_ctx *g = payload;
	git_object *o = NULL;
	char hex[GIT_OID_HEXSZ + 1];
	if (git_revparse_single(&o, g->repo, name) == 0) {
		git_object *c = NULL;
		if (git_object_peel(&c, o, GIT_OBJECT_COMMIT) == 0) {
			git_oid_tostr(hex, sizeof(hex), git_object_id(c));
			if (strvec_push(g->hide, "^", hex))
				g->err = OMEN_ENOMEM;
			git_object_free(c);
		}
		git_object_free(o);
	}
	git_error_clear();
	return g->err ? -1 : 0;
}

int omen_push_select(git_oid **out, size_t *n, omen_repo *r, const char *remote,
	const omen_push_list *l)
{
	strvec revs = {0}, hide = {0};
	omen_walk_opts wo = OMEN_WALK_OPTS_INIT;
	int e = 0, need_glob = 0;
	size_t i;
	git_oid tmp;

	*out = NULL;
	*n = 0;
	for (i = 0; i < l->n; i++) {
		const omen_push_update *u = &l->v[i];
		if (u->is_delete)
			continue;  /* a deletion sends no commits */
		/* a tag of a tree or blob sends no commits either */
		if (omen_history_resolve(&tmp, r, u->local_id) < 0) {
			omen_error_clear();
			continue;
		}
		if ((e = strvec_push(&revs, u->local_id, NULL)))
			goto out;
		if (!u->is_new && omen_history_resolve(&tmp, r, u->remote_id) == 0) {
			if ((e = strvec_push(&hide, "^", u->remote_id)))
				goto out;
		} else {
			omen_error_clear();
			need_glob = 1;
		}
	}
	if (!revs.n)
		goto out;
	if (need_glob && remote && *remote) {
		/* the remote id is unknown here (new ref, or someone else pushed):
		 * hide what we know the remote has, its remote-tracking refs */
		omen_buf glob = OMEN_BUF_INIT;
		glob_ctx g = {&hide, omen_repo_git(r), 0};
		if ((e = omen_buf_printf(&glob, "refs/remotes/%s/*", remote)))
			goto out;
		git_reference_foreach_glob(omen_repo_git(r), glob.ptr, hide_ref, &g);
		git_error_clear();
		omen_buf_free(&glob);
		if (g.err) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
	}
	for (i = 0; i < hide.n; i++)
		if ((e = strvec_push(&revs, hide.v[i], NULL)))
			goto out;
	wo.revs = (const char *const *)revs.v;
	e = omen_history_list(out, n, r, &wo);
out:
	strvec_free(&revs);
	strvec_free(&hide);
	return e;
}

typedef struct {
	const char *name;     /* "refs/heads/x" of branch.x.merge */
	git_buf dst;
	int found;
} fetch_ctx;

static int map_fetch(const git_config_entry *ent, void *payload)
{
	fetch_ctx *f = payload;
	git_refspec *spec = NULL;
	if (f->found || git_refspec_parse(&spec, ent->value, 1) < 0) {
		git_error_clear();
		return 0;
	}
	if (git_refspec_src_matches(spec, f->name) &&
	    git_refspec_transform(&f->dst, spec, f->name) == 0)
		f->found = 1;
	git_error_clear();
	git_refspec_free(spec);
	return 0;
}

/* The upstream of the current branch, as git's @{upstream}: branch.<b>.remote
 * and branch.<b>.merge, the merge ref mapped through the remote's fetch
 * refspecs ("." means a local branch). Done here rather than with
 * git_revparse("@{upstream}"), whose remote lookup in libgit2 1.5 leaks. */
static int upstream_of_head(git_oid *out, omen_repo *r)
{
	git_repository *repo = omen_repo_git(r);
	git_reference *head = NULL;
	git_config *cfg = NULL;
	git_buf remote = GIT_BUF_INIT, merge = GIT_BUF_INIT;
	omen_buf key = OMEN_BUF_INIT;
	fetch_ctx f;
	const char *target, *branch;
	int found = 0;

	memset(&f, 0, sizeof(f));
	if (git_reference_lookup(&head, repo, "HEAD") < 0 ||
	    git_reference_type(head) != GIT_REFERENCE_SYMBOLIC)
		goto out;
	target = git_reference_symbolic_target(head);
	if (!target || strncmp(target, "refs/heads/", 11))
		goto out;
	branch = target + 11;
	if (git_repository_config_snapshot(&cfg, repo) < 0)
		goto out;
	if (omen_buf_printf(&key, "branch.%s.remote", branch) ||
	    git_config_get_string_buf(&remote, cfg, key.ptr) < 0)
		goto out;
	omen_buf_clear(&key);
	if (omen_buf_printf(&key, "branch.%s.merge", branch) ||
	    git_config_get_string_buf(&merge, cfg, key.ptr) < 0)
		goto out;
	if (!strcmp(remote.ptr, ".")) {
		found = git_reference_name_to_id(out, repo, merge.ptr) == 0;
		goto out;
	}
	omen_buf_clear(&key);
	if (omen_buf_printf(&key, "remote.%s.fetch", remote.ptr))
		goto out;
	f.name = merge.ptr;
	git_config_get_multivar_foreach(cfg, key.ptr, NULL, map_fetch, &f);
	if (f.found)
		found = git_reference_name_to_id(out, repo, f.dst.ptr) == 0;
out:
	git_error_clear();
	git_buf_dispose(&f.dst);
	git_buf_dispose(&remote);
	git_buf_dispose(&merge);
	omen_buf_free(&key);
	git_config_free(cfg);
	git_reference_free(head);
	return found;
}

int omen_score_resolve(git_oid **out, size_t *n, char **out_desc, omen_repo *r,
	const char *const *args, size_t nargs)
{
	omen_walk_opts wo = OMEN_WALK_OPTS_INIT;
	omen_buf desc = OMEN_BUF_INIT;
	strvec revs = {0};
	git_oid *ids = NULL;
	size_t i, k = 0;
	int e = 0, range = 0;

	*out = NULL;
	*n = 0;
	if (out_desc)
		*out_desc = NULL;
	if (nargs == 0) {
		git_oid up;
		char hex[GIT_OID_HEXSZ + 2];
		if (upstream_of_head(&up, r)) {
			/* the range is "@{upstream}..HEAD"; walk it by id */
			hex[0] = '^';
			git_oid_tostr(hex + 1, sizeof(hex) - 1, &up);
			if ((e = strvec_push(&revs, hex, NULL)) || (e = strvec_push(&revs, "HEAD", NULL)) ||
			    (e = omen_buf_puts(&desc, "@{upstream}..HEAD")))
				goto out;
			range = 1;
		} else {
			if ((e = strvec_push(&revs, "HEAD", NULL)))
				goto out;
		}
	} else {
		for (i = 0; i < nargs; i++) {
			if (strstr(args[i], "..") || args[i][0] == '^')
				range = 1;
			if ((e = strvec_push(&revs, args[i], NULL)))
				goto out;
		}
	}
	for (i = 0; i < revs.n && (nargs || !range); i++)
		if ((e = omen_buf_printf(&desc, "%s%s", i ? " " : "", revs.v[i])))
			goto out;
	if (range) {
		wo.revs = (const char *const *)revs.v;
		if ((e = omen_history_list(&ids, &k, r, &wo)))
			goto out;
	} else {
		if (!(ids = calloc(revs.n ? revs.n : 1, sizeof(*ids)))) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
		for (i = 0; i < revs.n; i++) {
			size_t j;
			git_oid id;
			if ((e = omen_history_resolve(&id, r, revs.v[i])))
				goto out;
			for (j = 0; j < k; j++)
				if (git_oid_equal(&ids[j], &id))
					break;
			if (j == k)
				ids[k++] = id;
		}
	}
	*out = ids;
	*n = k;
	ids = NULL;
	if (out_desc)
		*out_desc = omen_buf_detach(&desc);
out:
	free(ids);
	omen_buf_free(&desc);
	strvec_free(&revs);
	return e;
}
