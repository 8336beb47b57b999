/* Refs, upstreams and commit subjects: the repository look-ups that score/
 * needs besides walking (so that only history/ talks to libgit2). */
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/history.h"
#include "internal.h"

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

static int refs_glob(git_oid **out, size_t *n, omen_repo *r, const char *glob)
{
	remote_ctx g;
	*out = NULL;
	*n = 0;
	memset(&g, 0, sizeof(g));
	g.repo = omen_repo_git(r);
	git_reference_foreach_glob(g.repo, glob, add_remote_ref, &g);
	git_error_clear();
	if (g.err) {
		free(g.ids);
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	}
	*out = g.ids;
	*n = g.n;
	return 0;
}

int omen_history_remote_refs(git_oid **out, size_t *n, omen_repo *r, const char *remote)
{
	omen_buf glob = OMEN_BUF_INIT;
	int e;
	*out = NULL;
	*n = 0;
	if (!(e = omen_buf_printf(&glob, "refs/remotes/%s/*", remote)))
		e = refs_glob(out, n, r, glob.ptr);
	omen_buf_free(&glob);
	return e;
}

int omen_history_tracking_refs(git_oid **out, size_t *n, omen_repo *r)
{
	return refs_glob(out, n, r, "refs/remotes/*");
}

typedef struct {
	remote_ctx g;
	const char *const *except;
	size_t nexcept;
} other_ctx;

static int add_other_ref(const char *name, void *payload)
{
	other_ctx *o = payload;
	size_t i;
	for (i = 0; i < o->nexcept; i++)
		if (o->except[i] && !strcmp(name, o->except[i]))
			return 0;
	return add_remote_ref(name, &o->g);
}

int omen_history_other_refs(git_oid **out, size_t *n, omen_repo *r, const char *const *except,
	size_t nexcept)
{
	other_ctx o;
	*out = NULL;
	*n = 0;
	memset(&o, 0, sizeof(o));
	o.g.repo = omen_repo_git(r);
	o.except = except;
	o.nexcept = nexcept;
	git_reference_foreach_name(o.g.repo, add_other_ref, &o);
	git_error_clear();
	if (o.g.err) {
		free(o.g.ids);
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	}
	*out = o.g.ids;
	*n = o.g.n;
	return 0;
}

/* `git ls-remote` lines: "<id> TAB <ref>", 40 hex digits (libgit2 1.5 reads
 * SHA-1 repositories); through the cursor, one line at a time */
int omen_history_ls_remote(git_oid **out, size_t *n, omen_repo *r, const char *url, int timeout_ms)
{
	static char no_prompt[] = "GIT_TERMINAL_PROMPT=0";
	extern char **environ;
	omen_buf o = OMEN_BUF_INIT, err = OMEN_BUF_INIT;
	const char *argv[] = {"git", "ls-remote", "--", url, NULL};
	char **envp = NULL, line[256];
	git_oid *ids = NULL;
	size_t nids = 0, cap = 0, k = 0, i;
	omen_cursor c;
	const char *l;
	size_t len;
	int e, st = -1;

	*out = NULL;
	*n = 0;
	while (environ[k])
		k++;
	if (!(envp = calloc(k + 2, sizeof(*envp))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0, k = 0; environ[i]; i++)
		if (strncmp(environ[i], "GIT_TERMINAL_PROMPT=", 20))
			envp[k++] = environ[i];
	envp[k] = no_prompt;  /* never ask for a password in the push path */
	e = hist_git_run_env(&st, &o, &err, argv, envp, 64u << 20, timeout_ms);
	if (e)
		goto out;
	if (st != 0) {
		hist_git_first_line(line, sizeof(line), &err);
		e = omen_error_set(OMEN_ENOTFOUND, "cannot list the refs of '%s': %s", url,
			*line ? line : "'git ls-remote' failed");
		goto out;
	}
	omen_cursor_init(&c, o.ptr, o.len);
	while ((e = omen_cursor_line(&c, &l, &len)) > 0) {
		git_oid id;
		git_object *obj = NULL, *commit = NULL;
		if (len < GIT_OID_HEXSZ + 1 || l[GIT_OID_HEXSZ] != '\t' ||
		    git_oid_fromstrn(&id, l, GIT_OID_HEXSZ)) {
			git_error_clear();
			continue;   /* not a ref line (or a hash libgit2 cannot read) */
		}
		/* only what we have locally can hide anything */
		if (git_object_lookup(&obj, omen_repo_git(r), &id, GIT_OBJECT_ANY) == 0 &&
		    git_object_peel(&commit, obj, GIT_OBJECT_COMMIT) == 0) {
			if (OMEN_ARRAY_RESERVE(ids, cap, nids + 1)) {
				git_object_free(commit);
				git_object_free(obj);
				e = omen_error_set(OMEN_ENOMEM, "out of memory");
				goto out;
			}
			git_oid_cpy(&ids[nids++], git_object_id(commit));
		}
		git_object_free(commit);
		git_object_free(obj);
		git_error_clear();
	}
	if (e < 0)
		goto out;
	e = 0;
	*out = ids;
	*n = nids;
	ids = NULL;
out:
	free(ids);
	free(envp);
	omen_buf_free(&o);
	omen_buf_free(&err);
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
