/* Shared by unit tests that need a small repository made with the git CLI:
 * `sh` runs a command (failing the test if it fails), `sh_out` captures a
 * command's output run inside the repository, `test_repo_make` creates the
 * repository in a temporary directory with pinned identities and opens it.
 * Include after <cmocka.h> and "omen/omen.h"; one repository per binary. */
#ifndef OMEN_TEST_GIT_REPO_H
#define OMEN_TEST_GIT_REPO_H

static char dir[256];
static omen_repo *repo;

static void sh(const char *fmt, ...)
{
	char cmd[4096];
	va_list ap;
	va_start(ap, fmt);
	vsnprintf(cmd, sizeof(cmd), fmt, ap);
	va_end(ap);
	if (system(cmd) != 0)
		fail_msg("command failed: %s", cmd);
}

static char *sh_out(const char *cmd)
{
	static char buf[65536];
	char full[4096];
	FILE *p;
	size_t n;
	snprintf(full, sizeof(full), "cd '%s' && %s", dir, cmd);
	p = popen(full, "r");
	assert_non_null(p);
	n = fread(buf, 1, sizeof(buf) - 1, p);
	buf[n] = '\0';
	assert_int_equal(pclose(p), 0);
	return buf;
}

/* Makes $TMPDIR/omen-<name>-XXXXXX, runs script there (after "cd '<dir>' && "),
 * then opens the repository into `repo`. */
static void test_repo_make(const char *name, const char *script)
{
	snprintf(dir, sizeof(dir), "%s/omen-%s-XXXXXX", getenv("TMPDIR") ? getenv("TMPDIR") : "/tmp", name);
	assert_non_null(mkdtemp(dir));
	setenv("GIT_CONFIG_NOSYSTEM", "1", 1);
	setenv("GIT_CONFIG_GLOBAL", "/dev/null", 1);
	setenv("GIT_AUTHOR_NAME", "T", 1);
	setenv("GIT_AUTHOR_EMAIL", "t@example.invalid", 1);
	setenv("GIT_COMMITTER_NAME", "T", 1);
	setenv("GIT_COMMITTER_EMAIL", "t@example.invalid", 1);
	sh("cd '%s' && %s", dir, script);
	git_libgit2_init();
	assert_int_equal(omen_repo_open(&repo, dir), 0);
}

static int test_repo_drop(void **st)
{
	(void)st;
	omen_repo_free(repo);
	git_libgit2_shutdown();
	sh("rm -rf '%s'", dir);
	return 0;
}

#endif
