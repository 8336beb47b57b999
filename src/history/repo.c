/* Opening a repository the way git does, and where omen keeps its files. */
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include "omen/error.h"
#include "omen/history.h"
#include "history/internal.h"

struct omen_repo {
	git_repository *git;
	char *gitdir;   /* the common dir (shared by worktrees), trailing '/' */
	int partial;    /* -1 not looked up yet, else 0 / 1 */
	omen_blob_stats stats;
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
