/* Repository look-ups of src/history/refs.c: remote-tracking refs, the
 * current branch's upstream and commit subjects, each checked against the
 * git CLI on a small repository (reference: git for-each-ref, git rev-parse
 * @{upstream}, git log --format=%s). */
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <cmocka.h>
#include "omen/omen.h"

#include "git_repo.h"

static int setup(void **st)
{
	(void)st;
	test_repo_make("refs",
		"git init -q -b main . && git remote add origin /nonexistent.git && "
		"for i in 1 2 3 4; do echo $i >f$i && git add f$i && git commit -q -m \"c$i\"; done && "
		"printf 'two line\\nsubject\\n\\nbody text\\n' >msg && git commit -q --allow-empty -F msg && "
		"git update-ref refs/remotes/origin/main HEAD~3 && git update-ref refs/remotes/origin/side HEAD~1 && "
		"git tag -a -m t v1 HEAD~2 && git update-ref refs/remotes/origin/tagged v1 && "
		"git update-ref refs/remotes/other/main HEAD && git tag tree-tag 'HEAD^{tree}' && "
		"git update-ref refs/remotes/origin/tree tree-tag");
	return 0;
}

static int cmp_hex(const void *a, const void *b)
{
	return memcmp(a, b, GIT_OID_HEXSZ);
}

static void test_remote_refs(void **st)
{
	git_oid *ids = NULL;
	size_t n = 0, i;
	char got[16][GIT_OID_HEXSZ + 1], want[65536], all[65536];
	(void)st;
	assert_int_equal(omen_history_remote_refs(&ids, &n, repo, "origin"), 0);
	/* the annotated tag peels to its commit; the ref to a tree is skipped */
	assert_int_equal(n, 3);
	for (i = 0; i < n; i++)
		git_oid_tostr(got[i], sizeof(got[i]), &ids[i]);
	qsort(got, n, sizeof(got[0]), cmp_hex);
	all[0] = '\0';
	for (i = 0; i < n; i++) {
		strcat(all, got[i]);
		strcat(all, "\n");
	}
	snprintf(want, sizeof(want), "%s",
		sh_out("git rev-parse origin/main^{commit} origin/side^{commit} origin/tagged^{commit} | sort"));
	assert_string_equal(all, want);
	free(ids);
	/* a remote without refs: none, not an error */
	assert_int_equal(omen_history_remote_refs(&ids, &n, repo, "nowhere"), 0);
	assert_int_equal(n, 0);
	assert_null(ids);
}

static void upstream_eq(const char *want_rev)
{
	git_oid up;
	char hex[GIT_OID_HEXSZ + 1], cmd[256];
	assert_int_equal(omen_history_upstream(&up, repo), 0);
	git_oid_tostr(hex, sizeof(hex), &up);
	snprintf(cmd, sizeof(cmd), "git rev-parse '%s'", want_rev);
	assert_memory_equal(hex, sh_out(cmd), GIT_OID_HEXSZ);
}

static void test_upstream(void **st)
{
	git_oid up;
	(void)st;
	/* no branch.main.* keys */
	assert_int_equal(omen_history_upstream(&up, repo), OMEN_ENOTFOUND);
	assert_non_null(strstr(omen_error_last(), "no upstream"));
	omen_error_clear();
	/* the default refspec maps refs/heads/main to origin/main */
	sh("cd '%s' && git config branch.main.remote origin && git config branch.main.merge refs/heads/main", dir);
	upstream_eq("@{upstream}");
	upstream_eq("origin/main");
	/* a refspec that maps the merge ref onto another name */
	sh("cd '%s' && git config branch.main.merge refs/heads/x && git config --unset-all remote.origin.fetch && "
	   "git config remote.origin.fetch '+refs/heads/x:refs/remotes/origin/side'", dir);
	upstream_eq("@{upstream}");
	upstream_eq("origin/side");
	/* a merge ref no refspec maps: none (git rev-parse @{upstream} fails too) */
	sh("cd '%s' && git config --unset-all remote.origin.fetch && "
	   "git config remote.origin.fetch '+refs/heads/main:refs/remotes/origin/main'", dir);
	assert_int_equal(omen_history_upstream(&up, repo), OMEN_ENOTFOUND);
	omen_error_clear();
	/* "." as the remote: a local branch */
	sh("cd '%s' && git branch -q base HEAD~2 && git config branch.main.remote . && "
	   "git config branch.main.merge refs/heads/base", dir);
	upstream_eq("@{upstream}");
	upstream_eq("base");
	/* detached HEAD: none */
	sh("cd '%s' && git checkout -q --detach HEAD", dir);
	assert_int_equal(omen_history_upstream(&up, repo), OMEN_ENOTFOUND);
	omen_error_clear();
	sh("cd '%s' && git checkout -q main && git config --unset branch.main.remote && "
	   "git config --unset branch.main.merge", dir);
}

static void subject_eq(const char *r)
{
	git_oid id;
	char *s = NULL, cmd[256], want[4096];
	size_t n;
	assert_int_equal(omen_history_resolve(&id, repo, r), 0);
	assert_int_equal(omen_history_subject(&s, repo, &id), 0);
	snprintf(cmd, sizeof(cmd), "git log -1 --format=%%s '%s'", r);
	snprintf(want, sizeof(want), "%s", sh_out(cmd));
	n = strlen(want);
	if (n && want[n - 1] == '\n')
		want[n - 1] = '\0';
	assert_string_equal(s, want);
	free(s);
}

static void test_subject(void **st)
{
	git_oid id;
	char *s = NULL;
	(void)st;
	subject_eq("HEAD~1");
	subject_eq("HEAD");   /* a two-line first paragraph joins with a space */
	assert_int_equal(git_oid_fromstr(&id, "0123456789012345678901234567890123456789"), 0);
	assert_int_equal(omen_history_subject(&s, repo, &id), OMEN_ENOTFOUND);
	assert_null(s);
	assert_non_null(strstr(omen_error_last(), "cannot read commit '0123456789012345678901234567890123456789'"));
	omen_error_clear();
}

/* git ls-remote through omen_history_ls_remote: what git lists, as local
 * commits (reference: git ls-remote itself); a git that hangs is killed at
 * the time limit, one that prints without end at the output cap, both
 * OMEN_ELIMIT (no time is asserted: only that each comes back). */
static void test_ls_remote(void **st)
{
	git_oid *ids = NULL;
	size_t n = 0;
	char url[400], fake[400], *path = getenv("PATH") ? strdup(getenv("PATH")) : NULL;
	(void)st;
	sh("cd '%s' && rm -rf lr.git && git init -q --bare lr.git && git push -q lr.git HEAD~1:refs/heads/x v1",
		dir);
	snprintf(url, sizeof(url), "%s/lr.git", dir);
	assert_int_equal(omen_history_ls_remote(&ids, &n, repo, url, 60000), 0);
	{   /* each listed id peeled to its commit, in git's order (v1 and
	     * v1^{} both name the tagged commit) */
		char got[4096] = "", hex[GIT_OID_HEXSZ + 2];
		size_t i;
		for (i = 0; i < n; i++) {
			git_oid_tostr(hex, GIT_OID_HEXSZ + 1, &ids[i]);
			strcat(hex, "\n");
			strcat(got, hex);
		}
		assert_int_equal(n, 3);
		assert_string_equal(got, sh_out("git ls-remote lr.git | while read id ref; do "
			"git rev-parse \"$id^{commit}\"; done"));
	}
	free(ids);
	assert_int_equal(omen_history_ls_remote(&ids, &n, repo, "/nonexistent-omen.git", 60000),
		OMEN_ENOTFOUND);
	assert_non_null(strstr(omen_error_last(), "cannot list the refs of '/nonexistent-omen.git'"));
	/* a git that never answers, then one that never stops */
	snprintf(fake, sizeof(fake), "%s/fakebin", dir);
	sh("mkdir -p '%s' && printf '#!/bin/sh\\nexec sleep 600\\n' >'%s/git' && chmod 755 '%s/git'",
		fake, fake, fake);
	{
		char np[2048];
		snprintf(np, sizeof(np), "%s:%s", fake, path ? path : "/usr/bin:/bin");
		setenv("PATH", np, 1);
	}
	assert_int_equal(omen_history_ls_remote(&ids, &n, repo, url, 300), OMEN_ELIMIT);
	sh("printf '#!/bin/sh\\nexec yes 0000000000000000000000000000000000000000\\n' >'%s/git'", fake);
	assert_int_equal(omen_history_ls_remote(&ids, &n, repo, url, 600000), OMEN_ELIMIT);
	assert_non_null(strstr(omen_error_last(), "output of 'git' is over"));
	/* a "git" in the current directory (a work tree someone else wrote)
	 * never runs, whatever PATH says: "." and empty entries are skipped */
	{
		char np[2048], cwd[1024], marker[512];
		assert_non_null(getcwd(cwd, sizeof(cwd)));
		snprintf(marker, sizeof(marker), "%s/ran", fake);
		sh("printf '#!/bin/sh\ntouch \"%s\"\nexit 0\n' >'%s/git'", marker, fake);
		snprintf(np, sizeof(np), ".::fakebin:%s", path ? path : "/usr/bin:/bin");
		setenv("PATH", np, 1);
		assert_int_equal(chdir(dir), 0);   /* fakebin/ is here, relative */
		assert_int_equal(chdir("fakebin"), 0);
		assert_int_equal(omen_history_ls_remote(&ids, &n, repo, url, 60000), 0);
		assert_int_equal(n, 3);            /* the real git answered */
		free(ids);
		ids = NULL;
		assert_int_equal(access(marker, F_OK), -1);
		assert_int_equal(chdir(cwd), 0);
	}
	if (path)
		setenv("PATH", path, 1);
	free(path);
	assert_null(ids);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_remote_refs),
		cmocka_unit_test(test_upstream),
		cmocka_unit_test(test_subject),
		cmocka_unit_test(test_ls_remote),
	};
	return cmocka_run_group_tests_name("history_refs", tests, setup, test_repo_drop);
}
