/* Absent blobs of partial clones (issue 12): the pre-pass that finds them
 * and the batched fetch through the user's own git.
 *
 * libgit2 1.5 cannot fetch from a promisor remote, so the blobs a walk will
 * read are collected first: for every commit, the tree comparison the walk
 * itself makes (hist_list_trees, against the first parent; nothing is
 * diffed), every regular-file or symlink side whose id the object database
 * does not hold (git_odb_exists_ext without a pack refresh: one index
 * lookup). The distinct ids then go to
 *
 *   git --git-dir=<dir> -c fetch.negotiationAlgorithm=noop fetch --no-tags
 *       --no-write-fetch-head --recurse-submodules=no --filter=blob:none
 *       --stdin --quiet -- <remote>
 *
 * with the ids on standard input, which is the command git's own lazy fetch
 * runs (promisor-remote.c, checked with git 2.39: the wanted blobs arrive in
 * a new promisor pack), a batch at a time so that a terminal shows progress
 * and a dead remote costs one try. The child gets GIT_TERMINAL_PROMPT=0, so
 * it never waits for a password; its standard input and error are temporary
 * files, so nothing can block on a pipe. */
#include <errno.h>
#include <spawn.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/time.h>
#include <sys/wait.h>
#include <fcntl.h>
#include <unistd.h>
#include "history/internal.h"
#include "omen/error.h"

extern char **environ;

#define MODE_TYPE(m) ((m) & 0170000)
#define MODE_REG 0100000
#define MODE_LINK 0120000
#define FETCH_BATCH 8192

/* ---- a set of object ids (open addressing) -------------------------------- */
typedef struct {
	git_oid *ids;     /* insertion order */
	size_t n, cap;
	uint32_t *slots;  /* index + 1, 0 empty */
	size_t nslots;
} oid_set;

static size_t oid_slot(const git_oid *id, size_t nslots)
{
	uint64_t h;
	memcpy(&h, id->id + 4, sizeof(h));
	return (size_t)(h & (nslots - 1));
}

static int set_add(oid_set *s, const git_oid *id)
{
	size_t k;
	if ((s->n + 1) * 2 > s->nslots) {
		size_t ns = s->nslots ? s->nslots * 2 : 4096;
		uint32_t *t = calloc(ns, sizeof(*t));
		if (!t)
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		for (size_t i = 0; i < s->n; i++) {
			k = oid_slot(&s->ids[i], ns);
			while (t[k])
				k = (k + 1) & (ns - 1);
			t[k] = (uint32_t)(i + 1);
		}
		free(s->slots);
		s->slots = t;
		s->nslots = ns;
	}
	for (k = oid_slot(id, s->nslots); s->slots[k]; k = (k + 1) & (s->nslots - 1))
		if (git_oid_equal(&s->ids[s->slots[k] - 1], id))
			return 0;
	if (s->n >= UINT32_MAX - 1 || OMEN_ARRAY_RESERVE(s->ids, s->cap, s->n + 1) < 0)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	git_oid_cpy(&s->ids[s->n], id);
	s->slots[k] = (uint32_t)++s->n;
	return 0;
}

static int set_has(const oid_set *s, const git_oid *id)
{
	if (!s->nslots)
		return 0;
	for (size_t k = oid_slot(id, s->nslots); s->slots[k]; k = (k + 1) & (s->nslots - 1))
		if (git_oid_equal(&s->ids[s->slots[k] - 1], id))
			return 1;
	return 0;
}

static void set_free(oid_set *s)
{
	free(s->ids);
	free(s->slots);
	memset(s, 0, sizeof(*s));
}

/* ---- the pre-pass ---------------------------------------------------------- */
static int blob_side(uint32_t mode)
{
	return MODE_TYPE(mode) == MODE_REG || MODE_TYPE(mode) == MODE_LINK;
}

static int want(oid_set *s, git_odb *odb, const git_oid *id)
{
	if (set_has(s, id) || git_odb_exists_ext(odb, id, GIT_ODB_LOOKUP_NO_REFRESH))
		return 0;
	return set_add(s, id);
}

/* The absent blobs commit id's diff against its first parent would read. */
static int scan_commit(hist_differ *d, omen_change *scratch, oid_set *s, const git_oid *id)
{
	git_commit *cm = NULL, *parent = NULL;
	git_tree *ta = NULL, *tb = NULL;
	char hex[OMEN_OID_HEX + 1];
	int rc = 0;
	omen_change_clear(scratch);
	if (git_commit_lookup(&cm, d->repo, id) < 0) {
		git_oid_tostr(hex, sizeof(hex), id);
		return hist_git_fail("cannot read commit", hex);
	}
	if (git_commit_parentcount(cm) && git_odb_exists(d->odb, git_commit_parent_id(cm, 0)) &&
	    (git_commit_parent(&parent, cm, 0) < 0 || git_commit_tree(&ta, parent) < 0)) {
		git_error_clear();
		goto out;
	}
	if (git_commit_tree(&tb, cm) < 0 || hist_list_trees(d, scratch, ta, tb) < 0) {
		/* a tree still absent: the walk reports it, with its path */
		git_error_clear();
		omen_error_clear();
		goto out;
	}
	for (size_t i = 0; i < d->nents && !rc; i++) {
		const hist_entry *e = &d->ents[i];
		if (e->old_mode && blob_side(e->old_mode))
			rc = want(s, d->odb, &e->old_id);
		if (!rc && e->new_mode && blob_side(e->new_mode) &&
		    !(e->old_mode && git_oid_equal(&e->old_id, &e->new_id)))
			rc = want(s, d->odb, &e->new_id);
	}
out:
	git_tree_free(ta);
	git_tree_free(tb);
	git_commit_free(parent);
	git_commit_free(cm);
	return rc;
}

/* ---- one git fetch ------------------------------------------------------------- */
/* Why git failed, from its standard error f: the first "fatal:" or
 * "error:" line without that tag (git may warn first), else the first line;
 * control characters dropped. */
static void why_failed(char *out, size_t cap, FILE *f)
{
	char line[400];
	int have = 0;
	out[0] = '\0';
	if (!f || fseek(f, 0, SEEK_SET) != 0)
		return;
	for (;;) {
		size_t k = 0;
		int ch;
		while ((ch = fgetc(f)) != EOF && ch != '\n')
			if (ch >= 0x20 && ch != 0x7f && k + 1 < sizeof(line))
				line[k++] = (char)ch;
		line[k] = '\0';
		if (ch == EOF && !k)
			break;
		if (!strncmp(line, "fatal: ", 7) || !strncmp(line, "error: ", 7)) {
			snprintf(out, cap, "%s", line + 7);
			return;
		}
		if (!have && k) {
			snprintf(out, cap, "%s", line);
			have = 1;
		}
		if (ch == EOF)
			break;
	}
}

/* Runs the fetch of ids[0..n) from remote; 0 when git exited 0, else 1
 * with why (one line) in err. Only running out of resources is < 0. */
static int run_fetch(const char *gitdir, const char *remote, const git_oid *ids, size_t n,
	char *err, size_t errcap, double *cpu)
{
	struct rusage ru;
	FILE *in = tmpfile(), *errf = tmpfile();
	posix_spawn_file_actions_t fa;
	char **envp = NULL, *dirarg = NULL;
	size_t ne = 0;
	pid_t pid;
	int status = 0, rc = 0, fa_ok = 0, devnull = -1;
	char hex[OMEN_OID_HEX + 2];
	err[0] = '\0';
	if (!in || !errf) {
		snprintf(err, errcap, "cannot create a temporary file: %s", strerror(errno));
		rc = 1;
		goto out;
	}
	for (size_t i = 0; i < n; i++) {
		git_oid_tostr(hex, OMEN_OID_HEX + 1, &ids[i]);
		hex[OMEN_OID_HEX] = '\n';
		if (fwrite(hex, 1, OMEN_OID_HEX + 1, in) != OMEN_OID_HEX + 1) {
			snprintf(err, errcap, "cannot write a temporary file: %s", strerror(errno));
			rc = 1;
			goto out;
		}
	}
	if (fflush(in) || fseek(in, 0, SEEK_SET)) {
		snprintf(err, errcap, "cannot write a temporary file: %s", strerror(errno));
		rc = 1;
		goto out;
	}
	while (environ && environ[ne])
		ne++;
	if (!(envp = calloc(ne + 2, sizeof(*envp))) ||
	    !(dirarg = malloc(strlen(gitdir) + sizeof("--git-dir=")))) {
		rc = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	sprintf(dirarg, "--git-dir=%s", gitdir);
	{
		size_t k = 0;
		for (size_t i = 0; i < ne; i++)
			if (strncmp(environ[i], "GIT_TERMINAL_PROMPT=", 20))
				envp[k++] = environ[i];
		envp[k++] = "GIT_TERMINAL_PROMPT=0";
		envp[k] = NULL;
	}
	if ((devnull = open("/dev/null", O_WRONLY)) < 0 || posix_spawn_file_actions_init(&fa)) {
		snprintf(err, errcap, "cannot open /dev/null: %s", strerror(errno));
		rc = 1;
		goto out;
	}
	fa_ok = 1;
	if (posix_spawn_file_actions_adddup2(&fa, fileno(in), 0) ||
	    posix_spawn_file_actions_adddup2(&fa, devnull, 1) ||
	    posix_spawn_file_actions_adddup2(&fa, fileno(errf), 2)) {
		snprintf(err, errcap, "cannot prepare the git child");
		rc = 1;
		goto out;
	}
	{
		char *argv[] = {"git", dirarg, "-c", "fetch.negotiationAlgorithm=noop", "fetch",
			"--no-tags", "--no-write-fetch-head", "--recurse-submodules=no",
			"--filter=blob:none", "--stdin", "--quiet", "--", (char *)remote, NULL};
		char git[4096];
		int se;
		/* never a "git" in the current directory (see hist_git_find) */
		if (hist_git_find(git, sizeof(git)) < 0) {
			omen_error_clear();
			snprintf(err, errcap, "cannot run git: not found on PATH");
			rc = 1;
			goto out;
		}
		se = posix_spawn(&pid, git, &fa, NULL, argv, envp);
		if (se) {
			snprintf(err, errcap, "cannot run git: %s", strerror(se));
			rc = 1;
			goto out;
		}
	}
	/* wait4: git's CPU time with that of the processes it waited for
	 * (upload-pack and pack-objects on a file:// remote, index-pack) */
	memset(&ru, 0, sizeof(ru));
	while (wait4(pid, &status, 0, &ru) < 0)
		if (errno != EINTR) {
			snprintf(err, errcap, "cannot wait for git: %s", strerror(errno));
			rc = 1;
			goto out;
		}
	*cpu += (double)ru.ru_utime.tv_sec + ru.ru_utime.tv_usec / 1e6 + (double)ru.ru_stime.tv_sec +
		ru.ru_stime.tv_usec / 1e6;
	if (!WIFEXITED(status) || WEXITSTATUS(status)) {
		why_failed(err, errcap, errf);
		if (!err[0])
			snprintf(err, errcap, "git fetch exited with status %d",
				WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status));
		rc = 1;
	}
out:
	if (fa_ok)
		posix_spawn_file_actions_destroy(&fa);
	if (devnull >= 0)
		close(devnull);
	if (in)
		fclose(in);
	if (errf)
		fclose(errf);
	free(envp);
	free(dirarg);
	return rc;
}

/* A remote name git would take as an option, or with control bytes, is not
 * passed on. */
static int usable_remote(const char *name)
{
	if (!*name || *name == '-')
		return 0;
	for (const char *p = name; *p; p++)
		if ((unsigned char)*p < 0x20 || *p == 0x7f)
			return 0;
	return 1;
}

/* "blob" for one, what ("blobs", "trees") otherwise. */
static const char *noun(const char *what, size_t n)
{
	if (n != 1)
		return what;
	return !strcmp(what, "trees") ? "tree" : "blob";
}

/* Fetches s's ids (what: "blobs" or "trees"), batch by batch, from the
 * promisor remotes in order; a remote that fails is dropped for the rest
 * (one line in st->notice). *got: how many of them are present after. */
static int fetch_all(omen_repo *r, hist_differ *d, const oid_set *s, const char *what,
	omen_blob_stats *st, size_t *got)
{
	char **remotes = NULL, err[400], label[32];
	size_t nr = 0, ri = 0, done = 0;
	omen_progress prog;
	double t0 = omen_now();
	int rc;
	*got = 0;
	if ((rc = hist_repo_promisors(&remotes, &nr, r)) < 0)
		return rc;
	while (ri < nr && !usable_remote(remotes[ri]))
		ri++;
	if (ri == nr) {
		snprintf(st->notice, sizeof(st->notice), "no usable promisor remote to fetch %zu absent "
			"%s from; skipping %s", s->n, noun(what, s->n), s->n == 1 ? "it" : "them");
		goto out;
	}
	snprintf(label, sizeof(label), "fetch absent %s", what);
	omen_progress_start(&prog, label, s->n);
	omen_progress_update(&prog, 0, NULL);
	while (done < s->n && ri < nr) {
		size_t k = s->n - done < FETCH_BATCH ? s->n - done : FETCH_BATCH;
		snprintf(st->remote, sizeof(st->remote), "%s", remotes[ri]);
		if ((rc = run_fetch(git_repository_path(d->repo), remotes[ri], s->ids + done, k, err,
				sizeof(err), &st->fetch_cpu_seconds)) < 0)
			break;
		st->batches++;
		if (rc) {
			/* this remote cannot serve: the next one, or the skip path */
			rc = 0;
			snprintf(st->notice, sizeof(st->notice), "cannot fetch absent %s from promisor "
				"remote '%s': %s; skipping %zu absent %s", what, remotes[ri], err, s->n - done,
				noun(what, s->n - done));
			do
				ri++;
			while (ri < nr && !usable_remote(remotes[ri]));
			continue;
		}
		done += k;
		omen_progress_update(&prog, done, what);
	}
	omen_progress_end(&prog);
	if (rc < 0)
		goto out;
	/* what arrived: the packs are new, so look again after a refresh */
	git_odb_refresh(d->odb);
	for (size_t i = 0; i < s->n; i++)
		*got += git_odb_exists_ext(d->odb, &s->ids[i], GIT_ODB_LOOKUP_NO_REFRESH) != 0;
	if (done == s->n && *got < s->n)
		snprintf(st->notice, sizeof(st->notice), "promisor remote '%s' did not send %zu of %zu "
			"absent %s; skipping them", st->remote, s->n - *got, s->n, noun(what, s->n));
	else if (st->notice[0] && *got)
		/* a later remote served what the first one could not */
		snprintf(st->notice + strlen(st->notice), sizeof(st->notice) - strlen(st->notice),
			" (%zu fetched from '%s')", *got, st->remote);
out:
	st->fetch_seconds += omen_now() - t0;
	hist_strs_free(remotes, nr);
	return rc;
}

/* The root trees of the commits (and of their first parents) that the
 * object database lacks: a tree-less partial clone (--filter=tree:0).
 * A fetch of a root tree with --filter=blob:none brings its subtrees. */
static int absent_trees(hist_differ *d, oid_set *t, const git_oid *ids, size_t n)
{
	int rc = 0;
	for (size_t i = 0; i < n && !rc; i++) {
		git_commit *cm = NULL, *parent = NULL;
		if (git_commit_lookup(&cm, d->repo, &ids[i]) < 0) {
			git_error_clear();
			continue; /* the walk reports it */
		}
		if (!git_odb_exists_ext(d->odb, git_commit_tree_id(cm), GIT_ODB_LOOKUP_NO_REFRESH))
			rc = set_add(t, git_commit_tree_id(cm));
		if (!rc && git_commit_parentcount(cm) && git_commit_parent(&parent, cm, 0) == 0 &&
		    !git_odb_exists_ext(d->odb, git_commit_tree_id(parent), GIT_ODB_LOOKUP_NO_REFRESH))
			rc = set_add(t, git_commit_tree_id(parent));
		git_error_clear();
		git_commit_free(parent);
		git_commit_free(cm);
	}
	return rc;
}

static void refresh_repo(omen_repo *r)
{
	git_odb *odb = NULL;
	/* the walk's own handle must see the new packs too */
	if (git_repository_odb(&odb, omen_repo_git(r)) == 0)
		git_odb_refresh(odb);
	git_odb_free(odb);
}

int omen_history_prefetch(omen_repo *r, const omen_walk_opts *o, const git_oid *ids, size_t n)
{
	omen_walk_opts ro;
	omen_blob_stats *st = hist_repo_stats(r);
	hist_differ d;
	omen_change scratch;
	oid_set s = {0}, t = {0};
	omen_progress prog;
	double t0;
	size_t got = 0;
	int rc;
	if ((rc = hist_resolve_opts(&ro, r, o)) < 0)
		return rc;
	if (ro.missing_blobs != OMEN_MISSING_FETCH || !n)
		return 0;
	if ((rc = hist_differ_init(&d, omen_repo_git(r), &ro)) < 0)
		return rc;
	d.detect_renames = 0;
	omen_change_init(&scratch);
	t0 = omen_now();
	if ((rc = absent_trees(&d, &t, ids, n)) < 0)
		goto out;
	if (t.n) {
		st->scan_seconds += omen_now() - t0;
		if ((rc = fetch_all(r, &d, &t, "trees", st, &got)) < 0)
			goto out;
		st->trees_wanted += t.n;
		st->trees_fetched += got;
		refresh_repo(r);
		t0 = omen_now();
	}
	omen_progress_start(&prog, "find absent blobs", n);
	for (size_t i = 0; i < n && !rc; i++) {
		rc = scan_commit(&d, &scratch, &s, &ids[i]);
		omen_progress_update(&prog, i + 1, "commits");
	}
	omen_progress_end(&prog);
	st->scanned += n;
	st->scan_seconds += omen_now() - t0;
	if (rc < 0)
		goto out;
	if (s.n) {
		char tree_notice[sizeof(st->notice)];
		snprintf(tree_notice, sizeof(tree_notice), "%s", st->notice);
		st->notice[0] = '\0';
		if ((rc = fetch_all(r, &d, &s, "blobs", st, &got)) < 0)
			goto out;
		st->wanted += s.n;
		st->fetched += got;
		if (!st->notice[0])
			snprintf(st->notice, sizeof(st->notice), "%s", tree_notice);
		refresh_repo(r);
	}
out:
	omen_change_free(&scratch);
	hist_differ_free(&d);
	set_free(&s);
	set_free(&t);
	return rc;
}
