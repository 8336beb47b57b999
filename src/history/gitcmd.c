/* Running the git command line itself, for the few questions where git's
 * own answer is the reference and libgit2 1.5 answers differently: the
 * resolved settings (git config) and whether a repository owned by another
 * user is trusted (safe.directory). See DEVELOPERS.md, "Settings". */
#include <errno.h>
#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>
#include "omen/error.h"
#include "internal.h"

extern char **environ;

static void close_fd(int *fd)
{
	if (*fd >= 0)
		close(*fd);
	*fd = -1;
}

/* Reads both pipes until both are closed; at most max bytes of standard
 * output (more is OMEN_ELIMIT at once) and the first err_max bytes of
 * standard error (the rest is read and dropped); deadline > 0 (omen_now()
 * seconds) ends it with OMEN_ELIMIT. */
static int drain(int ofd, int efd, omen_buf *out, size_t max, omen_buf *err, size_t err_max,
	double deadline)
{
	char tmp[8192];
	int over = 0;
	while (ofd >= 0 || efd >= 0) {
		int wait_ms = -1;
		struct pollfd p[2];
		nfds_t np = 0;
		int oi = -1, ei = -1, k;
		if (ofd >= 0) { p[np].fd = ofd; p[np].events = POLLIN; p[np].revents = 0; oi = (int)np++; }
		if (efd >= 0) { p[np].fd = efd; p[np].events = POLLIN; p[np].revents = 0; ei = (int)np++; }
		if (deadline > 0) {
			double left = deadline - omen_now();
			if (left <= 0) {
				close_fd(&ofd);
				close_fd(&efd);
				return omen_error_set(OMEN_ELIMIT, "'git' ran past its time limit");
			}
			wait_ms = (int)(left * 1000) + 1;
		}
		if (poll(p, np, wait_ms) < 0) {
			if (errno == EINTR)
				continue;
			close_fd(&ofd);
			close_fd(&efd);
			return omen_error_set(OMEN_EIO, "cannot read from 'git': %s", strerror(errno));
		}
		for (k = 0; k < 2; k++) {
			int idx = k ? ei : oi, *fd = k ? &efd : &ofd;
			ssize_t n;
			if (idx < 0 || !p[idx].revents)
				continue;
			n = read(*fd, tmp, sizeof(tmp));
			if (n < 0 && errno == EINTR)
				continue;
			if (n <= 0) {
				close_fd(fd);
				continue;
			}
			if (!k) {
				if (out->len + (size_t)n > max) {
					/* stop at once: the caller kills the child */
					close_fd(&ofd);
					close_fd(&efd);
					return omen_error_set(OMEN_ELIMIT, "output of 'git' is over %zu bytes", max);
				}
				if (omen_buf_put(out, tmp, (size_t)n))
					over = 2;
			} else if (err->len < err_max) {
				size_t keep = (size_t)n < err_max - err->len ? (size_t)n : err_max - err->len;
				if (omen_buf_put(err, tmp, keep))
					over = 2;
			}
		}
	}
	if (over)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	return 0;
}

/* Which git to run: the one that ran us when git says so (GIT_EXEC_PATH,
 * set for `git omen` and for hooks: the same git, so the same answers), else
 * the first executable "git" in an absolute PATH directory. Empty and
 * relative PATH entries are skipped: they name the current directory, which
 * is the work tree of a repository someone else may have written, and a
 * committed "git" there must never run. 0 or OMEN_ENOTFOUND. */
int hist_git_find(char *out, size_t cap)
{
	const char *ep = getenv("GIT_EXEC_PATH"), *path = getenv("PATH"), *p, *end;
	if (ep && ep[0] == '/' && (size_t)snprintf(out, cap, "%s/git", ep) < cap &&
	    access(out, X_OK) == 0)
		return 0;
	for (p = path ? path : "/usr/bin:/bin"; *p; p = *end ? end + 1 : end) {
		size_t n;
		end = strchr(p, ':');
		if (!end)
			end = p + strlen(p);
		n = (size_t)(end - p);
		if (n == 0 || p[0] != '/' || n + 5 > cap)
			continue;
		memcpy(out, p, n);
		memcpy(out + n, "/git", 5);
		if (access(out, X_OK) == 0)
			return 0;
	}
	return omen_error_set(OMEN_ENOTFOUND, "cannot run 'git': not found on PATH");
}

int hist_git_run_env(int *status, omen_buf *out, omen_buf *err, const char *const *argv,
	char *const *envp, size_t max, int timeout_ms)
{
	posix_spawn_file_actions_t fa;
	int op[2] = {-1, -1}, ep[2] = {-1, -1}, e = 0, st = 0, fa_ok = 0;
	pid_t pid = -1;
	double deadline = timeout_ms > 0 ? omen_now() + timeout_ms / 1000.0 : 0;
	char git[4096];

	*status = -1;
	omen_buf_clear(out);
	omen_buf_clear(err);
	if (pipe(op) || pipe(ep)) {
		e = omen_error_set(OMEN_EIO, "cannot run 'git': %s", strerror(errno));
		goto out;
	}
	fcntl(op[0], F_SETFD, FD_CLOEXEC);
	fcntl(ep[0], F_SETFD, FD_CLOEXEC);
	if (posix_spawn_file_actions_init(&fa)) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	fa_ok = 1;
	/* the hook's standard input is git's pre-push lines: never the child's */
	if (posix_spawn_file_actions_addopen(&fa, 0, "/dev/null", O_RDONLY, 0) ||
	    posix_spawn_file_actions_adddup2(&fa, op[1], 1) ||
	    posix_spawn_file_actions_adddup2(&fa, ep[1], 2)) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	if ((e = hist_git_find(git, sizeof(git))))
		goto out;
	e = posix_spawn(&pid, git, &fa, NULL, (char *const *)argv, envp ? envp : environ);
	if (e) {
		pid = -1;
		/* no git on PATH (or not runnable): the caller falls back */
		e = omen_error_set(OMEN_ENOTFOUND, "cannot run 'git': %s", strerror(e));
		goto out;
	}
	close_fd(&op[1]);
	close_fd(&ep[1]);
	e = drain(op[0], ep[0], out, max, err, 4096, deadline);
	if (e) {
		op[0] = ep[0] = -1;
		goto out;   /* killed and reaped below */
	}
	op[0] = ep[0] = -1;  /* drain closed them */
	while (waitpid(pid, &st, 0) < 0) {
		if (errno != EINTR) {
			if (!e)
				e = omen_error_set(OMEN_EIO, "cannot wait for 'git': %s", strerror(errno));
			goto out;
		}
	}
	pid = -1;
	if (WIFEXITED(st))
		*status = WEXITSTATUS(st);
	else
		*status = 128 + (WIFSIGNALED(st) ? WTERMSIG(st) : 0);
	/* posix_spawnp reports a failed exec as exit 127 on some C libraries */
	if (!e && *status == 127 && !out->len)
		e = omen_error_set(OMEN_ENOTFOUND, "cannot run 'git'");
	if (!e && omen_buf_grow(out, 0))
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
	if (!e && omen_buf_grow(err, 0))
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
out:
	if (fa_ok)
		posix_spawn_file_actions_destroy(&fa);
	close_fd(&op[0]);
	close_fd(&op[1]);
	close_fd(&ep[0]);
	close_fd(&ep[1]);
	if (pid > 0) {
		kill(pid, SIGKILL);
		while (waitpid(pid, &st, 0) < 0 && errno == EINTR)
			;
	}
	return e;
}

/* git's first message line without its "fatal: " / "error: " tag. */
void hist_git_first_line(char *dst, size_t cap, const omen_buf *err)
{
	const char *p = err->ptr ? err->ptr : "", *nl;
	size_t n;
	if (!strncmp(p, "fatal: ", 7))
		p += 7;
	else if (!strncmp(p, "error: ", 7))
		p += 7;
	nl = strchr(p, '\n');
	n = nl ? (size_t)(nl - p) : strlen(p);
	if (n >= cap)
		n = cap - 1;
	memcpy(dst, p, n);
	dst[n] = '\0';
	for (n = 0; dst[n]; n++)
		if ((unsigned char)dst[n] < 0x20 || dst[n] == 0x7f)
			dst[n] = '?';
}
