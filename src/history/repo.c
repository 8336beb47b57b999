/* Opening a repository the way git does, and where omen keeps its files. */
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include "omen/error.h"
#include "omen/history.h"
#include "internal.h"

struct omen_repo {
	git_repository *git;
	char *gitdir;   /* the common dir (shared by worktrees), trailing '/' */
	hist_settings settings;  /* read once at open (config.c) */
};

hist_settings *hist_repo_settings(omen_repo *r) { return &r->settings; }

struct trust {
	const char *key;
	const char *workdir, *gitdir;  /* without trailing '/' */
	int trusted;
};

static int safe_dir_cb(const char *key, const char *val, void *payload)
{
	struct trust *t = payload;
	if (strcasecmp(key, t->key))
		return 0;
	if (!val || !*val)
		t->trusted = 0;  /* an empty value resets the list, as in git */
	else if (!strcmp(val, "*") || (t->workdir && !strcmp(val, t->workdir)) ||
		 (t->gitdir && !strcmp(val, t->gitdir)))
		t->trusted = 1;
	return 0;
}

static char *strip_slash(const char *p)
{
	char *d;
	size_t n;
	if (!p || !(d = strdup(p)))
		return NULL;
	n = strlen(d);
	while (n > 1 && d[n - 1] == '/')
		d[--n] = '\0';
	return d;
}

/* libgit2 refused a repository that another user owns. git is the judge of
 * safe.directory (system, global and command-line settings: -c,
 * GIT_CONFIG_COUNT, GIT_CONFIG_GLOBAL...): `git rev-parse --git-dir` run
 * where we opened succeeds exactly when git would work there. Without git,
 * the environment's safe.directory pairs are checked here (libgit2 has
 * checked the files). 1 trusted, 0 not (message set), < 0 error. */
static int owner_trusted(const char *path, git_repository *repo)
{
	omen_buf out = OMEN_BUF_INIT, err = OMEN_BUF_INIT;
	const char *argv[6];
	char line[512];
	int st = -1, e, k = 0;
	struct trust t = {"safe.directory", NULL, NULL, 0};
	argv[k++] = "git";
	if (path) {
		argv[k++] = "-C";
		argv[k++] = path;
	}
	argv[k++] = "rev-parse";
	argv[k++] = "--git-dir";
	argv[k] = NULL;
	e = hist_git_run_env(&st, &out, &err, argv, NULL, 1u << 16, -1);
	if (e == 0) {
		hist_git_first_line(line, sizeof(line), &err);
		omen_buf_free(&out);
		omen_buf_free(&err);
		if (st == 0)
			return 1;
		return omen_error_set(OMEN_EINVAL, "%s", *line ? line :
			"git refuses this repository: its owner is another user");
	}
	omen_buf_free(&out);
	omen_buf_free(&err);
	if (e != OMEN_ENOTFOUND)
		return e;
	omen_error_clear();
	t.workdir = strip_slash(git_repository_workdir(repo));
	t.gitdir = strip_slash(git_repository_path(repo));
	e = hist_settings_from_env(safe_dir_cb, &t);
	if (!e && !t.trusted)
		e = omen_error_set(OMEN_EINVAL, "detected dubious ownership in repository at '%s'",
			t.workdir ? t.workdir : t.gitdir ? t.gitdir : ".");
	free((char *)t.workdir);
	free((char *)t.gitdir);
	return e < 0 ? e : t.trusted;
}

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
	if (e == GIT_ENOTFOUND || e == GIT_EOWNER) {
		/* libgit2 1.5 calls a repository owned by another user "not
		 * found": open it again without that check to tell the two apart,
		 * then let git's safe.directory rules decide */
		int t;
		git_libgit2_opts(GIT_OPT_SET_OWNER_VALIDATION, 0);
		if (git_repository_open_ext(&r->git, path, GIT_REPOSITORY_OPEN_FROM_ENV, NULL) == 0) {
			if ((t = owner_trusted(path, r->git)) <= 0) {
				/* the option is process-wide: back on for any other open */
				git_libgit2_opts(GIT_OPT_SET_OWNER_VALIDATION, 1);
				omen_repo_free(r);
				return t < 0 ? t : omen_error_set(OMEN_EINVAL, "untrusted repository");
			}
			/* trusted: stays off, so the diff workers can open it too */
			e = 0;
		} else {
			r->git = NULL;
			git_libgit2_opts(GIT_OPT_SET_OWNER_VALIDATION, 1);
			e = GIT_ENOTFOUND;
		}
	}
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
	if ((e = hist_settings_load(&r->settings, r->git))) {
		omen_repo_free(r);
		return e;
	}
	*out = r;
	return 0;
}

void omen_repo_free(omen_repo *r)
{
	if (!r)
		return;
	git_repository_free(r->git);
	free(r->gitdir);
	hist_settings_free(&r->settings);
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
