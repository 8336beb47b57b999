/* Hook installer: puts the shim of hooks/pre-push into the hooks directory
 * git uses (core.hooksPath honoured), keeping an existing user hook beside it
 * under OMEN_HOOK_CHAINED_NAME so the shim runs it after ours; uninstall
 * renames it back, so its bytes and mode come back unchanged. */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>
#include "omen/error.h"
#include "omen/score.h"

/* omen_hook_shim and omen_refresh_shim (the bytes of hooks/pre-push and
 * hooks/post-merge) are generated at build time: the Makefile's rule for
 * $(BUILD)/gen/hook_shim.c. The post-merge shim (issue 12) starts a refresh
 * in the background after a merge or a pull, then runs the hook that was
 * there before. */

typedef struct {
	const char *name, *chained, *shim, *mark;
} hook_kind;

static const hook_kind kinds[2] = {
	{"pre-push", OMEN_HOOK_CHAINED_NAME, omen_hook_shim, "\n" OMEN_HOOK_MARK "\n"},
	{"post-merge", OMEN_REFRESH_CHAINED_NAME, omen_refresh_shim, "\n" OMEN_REFRESH_MARK "\n"},
};

static int join(char **out, const char *dir, const char *name)
{
	omen_buf b = OMEN_BUF_INIT;
	size_t n = strlen(dir);
	int e = omen_buf_printf(&b, "%s%s%s", dir, n && dir[n - 1] == '/' ? "" : "/", name);
	*out = e ? NULL : omen_buf_detach(&b);
	omen_buf_free(&b);
	return e;
}

int omen_hook_dir(char **out, omen_repo *r)
{
	char *hp = NULL;
	omen_buf b = OMEN_BUF_INIT;
	int e;
	*out = NULL;
	if ((e = omen_config_string(&hp, r, "core.hooksPath")))
		goto out;
	if (!hp || !*hp) {
		e = omen_buf_printf(&b, "%shooks", omen_repo_gitdir(r));
	} else if (hp[0] == '~' && (hp[1] == '/' || hp[1] == '\0')) {
		const char *home = getenv("HOME");
		if (!home) {
			e = omen_error_set(OMEN_EINVAL, "bad config value 'core.hooksPath': '%s': HOME is not set", hp);
			goto out;
		}
		e = omen_buf_printf(&b, "%s%s", home, hp + 1);
	} else if (hp[0] == '/') {
		e = omen_buf_puts(&b, hp);
	} else {
		/* githooks(5): hooks run in the top of the working tree, or in
		 * GIT_DIR when bare; a relative hooksPath is taken from there. */
		const char *base = omen_repo_workdir(r);
		if (!base)
			base = omen_repo_gitdir(r);
		e = omen_buf_printf(&b, "%s%s%s", base,
			base[0] && base[strlen(base) - 1] == '/' ? "" : "/", hp);
	}
	if (!e)
		*out = omen_buf_detach(&b);
out:
	free(hp);
	omen_buf_free(&b);
	return e;
}

/* 1 when the file at path exists (lstat), 0 when not, <0 on error. */
static int exists(const char *path)
{
	struct stat st;
	if (lstat(path, &st) == 0)
		return 1;
	if (errno == ENOENT || errno == ENOTDIR)
		return 0;
	return omen_error_set(OMEN_EIO, "cannot read '%s': %s", path, strerror(errno));
}

/* Ours when the mark is one of the first lines (read at most 4 KiB: a
 * foreign hook may be any size, even a binary). */
static int is_ours(int *out, const char *path, const char *mark)
{
	char buf[4097];
	size_t n;
	FILE *fp = NULL;
	int e = omen_file_open_read(&fp, NULL, path, SIZE_MAX);
	*out = 0;
	if (e == OMEN_ENOTFOUND || e == OMEN_EINVAL) {
		omen_error_clear();
		return 0;   /* a dangling symlink, a FIFO, a device: someone else's */
	}
	if (e)
		return e;
	n = fread(buf, 1, sizeof(buf) - 1, fp);
	fclose(fp);
	buf[n] = '\0';
	*out = strstr(buf, mark) != NULL;
	return 0;
}

static int state_of(int *out, const char *hook, const char *chained, const char *mark)
{
	int e, ours;
	if ((e = exists(hook)) < 0)
		return e;
	if (!e) {
		*out = OMEN_HOOK_ABSENT;
		return 0;
	}
	if ((e = is_ours(&ours, hook, mark)))
		return e;
	if (!ours) {
		*out = OMEN_HOOK_FOREIGN;
		return 0;
	}
	if ((e = exists(chained)) < 0)
		return e;
	*out = e ? OMEN_HOOK_CHAINED : OMEN_HOOK_OURS;
	return 0;
}

int omen_hook_status_as(int *out, const char *dir, int kind)
{
	const hook_kind *k = &kinds[kind == OMEN_HOOK_KIND_REFRESH];
	char *hook = NULL, *chained = NULL;
	int e;
	*out = OMEN_HOOK_ABSENT;
	if ((e = join(&hook, dir, k->name)) || (e = join(&chained, dir, k->chained)))
		goto out;
	e = state_of(out, hook, chained, k->mark);
out:
	free(hook);
	free(chained);
	return e;
}

static int write_shim(const char *hook, const char *shim)
{
	omen_atomic_file f;
	int e;
	if ((e = omen_atomic_open(&f, hook)))
		return e;
	if (fputs(shim, f.fp) == EOF || fchmod(fileno(f.fp), 0755)) {
		e = omen_error_set(OMEN_EIO, "cannot write hook '%s': %s", hook, strerror(errno));
		omen_atomic_abort(&f);
		return e;
	}
	return omen_atomic_commit(&f);
}

int omen_hook_install_as(int *out, const char *dir, int kind)
{
	const hook_kind *k = &kinds[kind == OMEN_HOOK_KIND_REFRESH];
	char *hook = NULL, *chained = NULL;
	int e, st, moved = 0;
	*out = OMEN_HOOK_ABSENT;
	if ((e = join(&hook, dir, k->name)) || (e = join(&chained, dir, k->chained)))
		goto out;
	if ((e = omen_mkdirs(dir, 1)) || (e = state_of(&st, hook, chained, k->mark)))
		goto out;
	if (st == OMEN_HOOK_FOREIGN) {
		if ((e = exists(chained)) != 0) {
			if (e > 0)
				e = omen_error_set(OMEN_EUSAGE,
					"cannot keep the existing hook '%s': '%s' is in the way", hook, chained);
			goto out;
		}
		if (rename(hook, chained)) {
			e = omen_error_set(OMEN_EIO, "cannot move hook '%s' to '%s': %s", hook, chained,
				strerror(errno));
			goto out;
		}
		moved = 1;
	}
	if ((e = write_shim(hook, k->shim))) {
		if (moved && rename(chained, hook) == 0)
			moved = 0;
		goto out;
	}
	e = state_of(out, hook, chained, k->mark);
out:
	free(hook);
	free(chained);
	return e;
}

int omen_hook_uninstall_as(int *out, const char *dir, int kind)
{
	const hook_kind *k = &kinds[kind == OMEN_HOOK_KIND_REFRESH];
	char *hook = NULL, *chained = NULL;
	int e, st;
	*out = OMEN_HOOK_ABSENT;
	if ((e = join(&hook, dir, k->name)) || (e = join(&chained, dir, k->chained)))
		goto out;
	if ((e = state_of(&st, hook, chained, k->mark)))
		goto out;
	switch (st) {
	case OMEN_HOOK_ABSENT:
		break;
	case OMEN_HOOK_FOREIGN:
		*out = st;
		e = omen_error_set(OMEN_EUSAGE, "%s hook '%s' is not omen's: left alone", k->name, hook);
		goto out;
	case OMEN_HOOK_OURS:
		if (unlink(hook)) {
			e = omen_error_set(OMEN_EIO, "cannot remove hook '%s': %s", hook, strerror(errno));
			goto out;
		}
		break;
	case OMEN_HOOK_CHAINED:
		/* rename() replaces our shim in one step and keeps the user's
		 * file itself: same bytes, mode and owner. */
		if (rename(chained, hook)) {
			e = omen_error_set(OMEN_EIO, "cannot restore hook '%s' from '%s': %s", hook, chained,
				strerror(errno));
			goto out;
		}
		*out = OMEN_HOOK_FOREIGN;
		break;
	}
out:
	free(hook);
	free(chained);
	return e;
}

int omen_hook_status(int *out, const char *dir) { return omen_hook_status_as(out, dir, OMEN_HOOK_KIND_PUSH); }
int omen_hook_install(int *out, const char *dir) { return omen_hook_install_as(out, dir, OMEN_HOOK_KIND_PUSH); }
int omen_hook_uninstall(int *out, const char *dir) { return omen_hook_uninstall_as(out, dir, OMEN_HOOK_KIND_PUSH); }
