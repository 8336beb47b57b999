/* Opening a repository the way git does, and where omen keeps its files. */
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/history.h"
#include "history/internal.h"

struct omen_repo {
	git_repository *git;
	char *gitdir;   /* the common dir (shared by worktrees), trailing '/' */
	int partial;    /* -1 not looked up yet, else 0 / 1 */
	omen_blob_stats stats;
};

int omen_repo_open(omen_repo **out, const char *path)
{
	omen_repo *r;
	const char *dir;
	int e;
	*out = NULL;
	/* Bulk reading: object ids come from the repository itself, so the
	 * hash check on every read is skipped. The object cache is per
	 * git_repository, and a walk opens one per diff worker: 64 MiB each keeps
	 * the label pass on curl (39.5k commits, two workers) at 383 MB peak
	 * against 696 MB with 512 MiB, for 7-10% more wall time; on redis and jq
	 * the difference is 2-5% (git omen label and tests/bench/bench_history.c,
	 * 2026-12-02). */
	git_libgit2_opts(GIT_OPT_ENABLE_STRICT_HASH_VERIFICATION, 0);
	git_libgit2_opts(GIT_OPT_SET_CACHE_MAX_SIZE, (ssize_t)64 * 1024 * 1024);
	{
		/* git before 2.40 writes extensions.partialClone into a partial
		 * clone's config; libgit2 1.5 refuses to open a repository with an
		 * extension it does not know, though reading one needs nothing more
		 * (absent blobs are handled by the walk, see history.h) */
		const char *ext[] = {"partialclone"};
		git_libgit2_opts(GIT_OPT_SET_EXTENSIONS, ext, (size_t)1);
	}
	if (!(r = calloc(1, sizeof(*r))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	r->partial = -1;
	e = git_repository_open_ext(&r->git, path, GIT_REPOSITORY_OPEN_FROM_ENV, NULL);
	if (e) {
		const git_error *ge = git_error_last();
		if (e == GIT_ENOTFOUND)
			omen_error_set(OMEN_ENOTFOUND, "not a git repository: '%s'", path ? path : ".");
		else
			omen_error_set(OMEN_EGIT, "cannot open repository '%s': %s", path ? path : ".",
				ge ? ge->message : "unknown error");
		free(r);
		return omen_error_code();
	}
	dir = git_repository_commondir(r->git);
	if (!dir)
		dir = git_repository_path(r->git);
	r->gitdir = malloc(strlen(dir) + 2);
	if (!r->gitdir) {
		omen_repo_free(r);
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	}
	strcpy(r->gitdir, dir);
	if (r->gitdir[0] && r->gitdir[strlen(r->gitdir) - 1] != '/')
		strcat(r->gitdir, "/");
	*out = r;
	return 0;
}

void omen_repo_free(omen_repo *r)
{
	if (!r)
		return;
	git_repository_free(r->git);
	free(r->gitdir);
	free(r);
}

git_repository *omen_repo_git(omen_repo *r) { return r->git; }
const char *omen_repo_gitdir(const omen_repo *r) { return r->gitdir; }
const char *omen_repo_workdir(const omen_repo *r) { return git_repository_workdir(r->git); }
int omen_repo_is_shallow(omen_repo *r) { return git_repository_is_shallow(r->git) == 1; }

int omen_repo_omen_path(char **out, omen_repo *r, const char *name)
{
	omen_buf b = OMEN_BUF_INIT;
	int e;
	*out = NULL;
	if ((e = omen_buf_printf(&b, "%somen", r->gitdir)) || (e = omen_mkdirs(b.ptr, 1)) ||
	    (e = omen_buf_printf(&b, "/%s", name))) {
		omen_buf_free(&b);
		return e;
	}
	*out = omen_buf_detach(&b);
	return 0;
}

/* ---- partial clones ---------------------------------------------------- */
omen_blob_stats *hist_repo_stats(omen_repo *r) { return &r->stats; }
const omen_blob_stats *omen_repo_blob_stats(omen_repo *r)
{
	r->stats.partial = hist_repo_partial(r);
	return &r->stats;
}

void hist_strs_free(char **v, size_t n)
{
	if (!v)
		return;
	for (size_t i = 0; i < n; i++)
		free(v[i]);
	free(v);
}

typedef struct {
	char **names;
	size_t n, cap;
	int err;
} name_list;

static int name_add(name_list *l, const char *name, size_t len)
{
	char *c;
	for (size_t i = 0; i < l->n; i++)
		if (strlen(l->names[i]) == len && !memcmp(l->names[i], name, len))
			return 0;
	if (OMEN_ARRAY_RESERVE(l->names, l->cap, l->n + 1) < 0 || !(c = malloc(len + 1)))
		return l->err = OMEN_ENOMEM;
	memcpy(c, name, len);
	c[len] = '\0';
	l->names[l->n++] = c;
	return 0;
}

/* remote.<name>.promisor = true entries, in the order libgit2 lists them */
static int promisor_cb(const git_config_entry *e, void *payload)
{
	name_list *l = payload;
	const char *name = e->name + 7, *end = strrchr(e->name, '.');
	int yes = 0;
	/* by hand: git_config_foreach_match leaks its regex match data in
	 * libgit2 1.5 (valgrind) */
	if (strncmp(e->name, "remote.", 7) || !end || end < name || strcmp(end, ".promisor"))
		return 0;
	if (git_config_parse_bool(&yes, e->value) < 0) {
		git_error_clear();
		return 0;
	}
	if (yes)
		return name_add(l, name, (size_t)(end - name)) < 0 ? -1 : 0;
	return 0;
}

/* Whether remote.<name>.url is set (the remote can be fetched from). */
static int remote_has_url(omen_repo *r, const char *name)
{
	omen_buf k = OMEN_BUF_INIT;
	char *v = NULL;
	int e;
	if (omen_buf_printf(&k, "remote.%s.url", name) < 0)
		return 0;
	e = omen_config_string(&v, r, k.ptr);
	omen_buf_free(&k);
	if (e < 0)
		omen_error_clear();
	e = v && *v;
	free(v);
	return e;
}

int hist_repo_promisors(char ***out, size_t *n, omen_repo *r)
{
	name_list all = {0}, l = {0};
	git_config *cfg = NULL;
	char *ext = NULL;
	int e = 0;
	*out = NULL;
	*n = 0;
	if (git_repository_config_snapshot(&cfg, r->git) == 0) {
		if (git_config_foreach(cfg, promisor_cb, &all) < 0 && !all.err)
			git_error_clear();
		git_config_free(cfg);
	}
	if (all.err) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	if ((e = omen_config_string(&ext, r, "extensions.partialClone")) < 0)
		goto out;
	/* git moves the extensions.partialClone remote to the end */
	if (ext && *ext && name_add(&all, ext, strlen(ext)) < 0) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	for (size_t i = 0; i < all.n; i++)
		if (remote_has_url(r, all.names[i]) &&
		    name_add(&l, all.names[i], strlen(all.names[i])) < 0) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
	if (r->partial < 0)
		r->partial = all.n > 0;
	*out = l.names;
	*n = l.n;
	l.names = NULL;
	l.n = 0;
out:
	hist_strs_free(all.names, all.n);
	hist_strs_free(l.names, l.n);
	free(ext);
	return e;
}

int hist_repo_partial(omen_repo *r)
{
	if (r->partial < 0) {
		char **v = NULL;
		size_t n = 0;
		if (hist_repo_promisors(&v, &n, r) < 0) {
			omen_error_clear();
			r->partial = 0;
		}
		hist_strs_free(v, n);
	}
	return r->partial;
}
