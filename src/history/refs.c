/* Refs, upstreams and commit subjects: the repository look-ups that score/
 * needs besides walking (so that only history/ talks to libgit2). */
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/history.h"

typedef struct {
	git_repository *repo;
	git_oid *ids;
	size_t n, cap;
	int err;
} remote_ctx;

static int add_remote_ref(const char *name, void *payload)
{
	remote_ctx *g = payload;
	git_object *o = NULL;
	if (git_revparse_single(&o, g->repo, name) == 0) {
		git_object *c = NULL;
		if (git_object_peel(&c, o, GIT_OBJECT_COMMIT) == 0) {
			if (OMEN_ARRAY_RESERVE(g->ids, g->cap, g->n + 1))
				g->err = OMEN_ENOMEM;
			else
				git_oid_cpy(&g->ids[g->n++], git_object_id(c));
			git_object_free(c);
		}
		git_object_free(o);
	}
	git_error_clear();
	return g->err ? -1 : 0;
}

int omen_history_remote_refs(git_oid **out, size_t *n, omen_repo *r, const char *remote)
{
	omen_buf glob = OMEN_BUF_INIT;
	remote_ctx g;
	int e = 0;

	*out = NULL;
	*n = 0;
	memset(&g, 0, sizeof(g));
	g.repo = omen_repo_git(r);
	if ((e = omen_buf_printf(&glob, "refs/remotes/%s/*", remote)))
		goto out;
	git_reference_foreach_glob(g.repo, glob.ptr, add_remote_ref, &g);
	git_error_clear();
	if (g.err) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	*out = g.ids;
	*n = g.n;
	g.ids = NULL;
out:
	free(g.ids);
	omen_buf_free(&glob);
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

/* Done by hand rather than with git_revparse("@{upstream}"), whose remote
 * lookup in libgit2 1.5 leaks. */
int omen_history_upstream(git_oid *out, omen_repo *r)
{
	git_repository *repo = omen_repo_git(r);
	git_reference *head = NULL;
	git_config *cfg = NULL;
	git_buf remote = GIT_BUF_INIT, merge = GIT_BUF_INIT;
	omen_buf key = OMEN_BUF_INIT;
	fetch_ctx f;
	const char *target, *branch;
	int e = 0, found = 0;

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
	if ((e = omen_buf_printf(&key, "branch.%s.remote", branch)) ||
	    git_config_get_string_buf(&remote, cfg, key.ptr) < 0)
		goto out;
	omen_buf_clear(&key);
	if ((e = omen_buf_printf(&key, "branch.%s.merge", branch)) ||
	    git_config_get_string_buf(&merge, cfg, key.ptr) < 0)
		goto out;
	if (!strcmp(remote.ptr, ".")) {
		found = git_reference_name_to_id(out, repo, merge.ptr) == 0;
		goto out;
	}
	omen_buf_clear(&key);
	if ((e = omen_buf_printf(&key, "remote.%s.fetch", remote.ptr)))
		goto out;
	f.name = merge.ptr;
	git_config_get_multivar_foreach(cfg, key.ptr, NULL, map_fetch, &f);
	if (f.found)
		found = git_reference_name_to_id(out, repo, f.dst.ptr) == 0;
out:
	git_error_clear();
	if (!e && !found)
		e = omen_error_set(OMEN_ENOTFOUND, "no upstream for the current branch");
	git_buf_dispose(&f.dst);
	git_buf_dispose(&remote);
	git_buf_dispose(&merge);
	omen_buf_free(&key);
	git_config_free(cfg);
	git_reference_free(head);
	return e;
}

int omen_history_subject(char **out, omen_repo *r, const git_oid *id)
{
	git_commit *c = NULL;
	const char *sum;
	char hex[GIT_OID_HEXSZ + 1];
	int e = 0;

	*out = NULL;
	if (git_commit_lookup(&c, omen_repo_git(r), id) < 0) {
		const git_error *ge = git_error_last();
		git_oid_tostr(hex, sizeof(hex), id);
		e = omen_error_set(OMEN_ENOTFOUND, "cannot read commit '%s': %s", hex,
			ge && ge->message ? ge->message : "not found");
		git_error_clear();
		goto out;
	}
	if (!(sum = git_commit_summary(c))) {
		git_oid_tostr(hex, sizeof(hex), id);
		e = omen_error_set(OMEN_ENOMEM, "cannot read subject of '%s': out of memory", hex);
		git_error_clear();
		goto out;
	}
	if (!(*out = strdup(sum)))
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
out:
	git_commit_free(c);
	return e;
}

int omen_history_parent_count(size_t *out, omen_repo *r, const git_oid *id)
{
	git_commit *c = NULL;
	char hex[GIT_OID_HEXSZ + 1];

	*out = 0;
	if (git_commit_lookup(&c, omen_repo_git(r), id) < 0) {
		const git_error *ge = git_error_last();
		int e;
		git_oid_tostr(hex, sizeof(hex), id);
		e = omen_error_set(OMEN_ENOTFOUND, "cannot read commit '%s': %s", hex,
			ge && ge->message ? ge->message : "not found");
		git_error_clear();
		return e;
	}
	*out = git_commit_parentcount(c);
	git_commit_free(c);
	return 0;
}

void omen_oid_hex(char *out, size_t n, const git_oid *id)
{
	git_oid_tostr(out, n, id);
}

int omen_oid_parse(git_oid *out, const char *hex)
{
	if (strlen(hex) != GIT_OID_HEXSZ || git_oid_fromstr(out, hex) < 0) {
		git_error_clear();
		return omen_error_set(OMEN_EINVAL, "bad commit id '%s'", hex);
	}
	return 0;
}

int omen_oid_equal(const git_oid *a, const git_oid *b)
{
	return git_oid_equal(a, b) ? 1 : 0;
}
