/* Opening a repository the way git does, and where omen keeps its files. */
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/history.h"

struct omen_repo {
	git_repository *git;
	char *gitdir;   /* the common dir (shared by worktrees), trailing '/' */
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
	if (!(r = calloc(1, sizeof(*r))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
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
