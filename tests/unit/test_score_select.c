/* Which commits are scored: omen_push_select (commits new to the remote)
 * and omen_score_resolve (score/explain arguments), each checked against
 * `git rev-list` on a small repository made with the git CLI (reference:
 * git itself; githooks(5) for the pre-push lines). */
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
#include "omen/score.h"

#include "git_repo.h"

static int setup(void **st)
{
	(void)st;
	test_repo_make("select",
		"git init -q -b main . && git remote add origin /nonexistent.git && for i in 1 2 3 4; do echo $i >f$i && git add f$i && "
		"git commit -q -m c$i; done && git update-ref refs/remotes/origin/main HEAD~2 && "
		"git checkout -q -b topic && for i in 5 6; do echo $i >f$i && git add f$i && "
		"git commit -q -m c$i; done && git checkout -q main && git merge -q --no-ff -m m topic && "
		"git tag -a -m t v1 && git tag tree-tag 'HEAD^{tree}'");
	return 0;
}

/* ids as newline-separated hex, in the given order */
static char *hexlist(const git_oid *ids, size_t n)
{
	static char buf[65536];
	size_t i, k = 0;
	for (i = 0; i < n; i++) {
		git_oid_tostr(buf + k, GIT_OID_HEXSZ + 1, &ids[i]);
		k += GIT_OID_HEXSZ;
		buf[k++] = '\n';
	}
	buf[k] = '\0';
	return buf;
}

static void select_eq(const char *lines, const char *revlist)
{
	omen_push_list pl;
	git_oid *ids = NULL;
	size_t n = 0;
	char want[65536];
	assert_int_equal(omen_prepush_parse(&pl, lines, strlen(lines)), 0);
	assert_int_equal(omen_push_select(&ids, &n, NULL, repo, "origin", NULL, 0, &pl), 0);
	snprintf(want, sizeof(want), "%s", revlist[0] ? sh_out(revlist) : "");
	assert_string_equal(hexlist(ids, n), want);
	free(ids);
	omen_prepush_free(&pl);
}

static const char *rev(const char *r)
{
	static char b[8][64];
	static int k;
	char cmd[256];
	char *o;
	snprintf(cmd, sizeof(cmd), "git rev-parse '%s'", r);
	o = sh_out(cmd);
	k = (k + 1) % 8;
	snprintf(b[k], sizeof(b[k]), "%.40s", o);
	return b[k];
}

#define Z40 "0000000000000000000000000000000000000000"

static void test_update_hides_remote_id(void **st)
{
	char in[512];
	(void)st;
	/* remote id known here: rev-list --no-merges --reverse --topo-order main ^main~1 */
	snprintf(in, sizeof(in), "refs/heads/main %s refs/heads/main %s\n", rev("main"), rev("main~1"));
	select_eq(in, "git rev-list --no-merges --reverse --topo-order main ^main~1");
}

static void test_new_branch_hides_remote_tracking(void **st)
{
	char in[512];
	(void)st;
	snprintf(in, sizeof(in), "refs/heads/topic %s refs/heads/topic " Z40 "\n", rev("topic"));
	select_eq(in, "git rev-list --no-merges --reverse --topo-order topic --not --remotes=origin");
}

static void test_unknown_remote_id(void **st)
{
	char in[512];
	(void)st;
	/* someone else pushed: the remote id is not here; fall back to refs/remotes/origin/ */
	snprintf(in, sizeof(in), "refs/heads/main %s refs/heads/main 1234567890123456789012345678901234567890\n",
		rev("main"));
	select_eq(in, "git rev-list --no-merges --reverse --topo-order main --not --remotes=origin");
}

static void test_delete_and_tags(void **st)
{
	char in[1024];
	(void)st;
	snprintf(in, sizeof(in), "(delete) " Z40 " refs/heads/old %s\n", rev("main~1"));
	select_eq(in, "");
	/* an annotated tag: its commit and history new to the remote */
	snprintf(in, sizeof(in), "refs/tags/v1 %s refs/tags/v1 " Z40 "\n", rev("v1"));
	select_eq(in, "git rev-list --no-merges --reverse --topo-order v1 --not --remotes=origin");
	/* a tag of a tree sends no commits */
	snprintf(in, sizeof(in), "refs/tags/tree-tag %s refs/tags/tree-tag " Z40 "\n", rev("tree-tag"));
	select_eq(in, "");
	/* already on the remote: nothing */
	snprintf(in, sizeof(in), "refs/heads/main %s refs/heads/main %s\n", rev("main"), rev("main"));
	select_eq(in, "");
}

static void select_how(const char *lines, const char *remote, const char *url, int ls_ms,
	int want_how, const char *revlist)
{
	omen_push_list pl;
	git_oid *ids = NULL;
	size_t n = 0;
	int how = -1;
	char want[65536];
	assert_int_equal(omen_prepush_parse(&pl, lines, strlen(lines)), 0);
	assert_int_equal(omen_push_select(&ids, &n, &how, repo, remote, url, ls_ms, &pl), 0);
	assert_int_equal(how, want_how);
	snprintf(want, sizeof(want), "%s", revlist[0] ? sh_out(revlist) : "");
	assert_string_equal(hexlist(ids, n), want);
	free(ids);
	omen_prepush_free(&pl);
}

/* Issue 15, item 6: a new ref pushed to a URL, or to a remote without
 * remote-tracking refs. Before, nothing was hidden and the whole history
 * counted as new (the newest 200 scored), although the remote had main. */
static void test_new_ref_sources(void **st)
{
	char in[512], url[400], feat[41], origin_main[41];
	(void)st;
	snprintf(origin_main, sizeof(origin_main), "%s", rev("refs/remotes/origin/main"));
	sh("cd '%s' && git init -q --bare r.git && git push -q r.git main && "
	   "c=$(git commit-tree -p main -m feat 'main^{tree}') && git update-ref refs/heads/feat $c", dir);
	snprintf(url, sizeof(url), "%s/r.git", dir);
	snprintf(feat, sizeof(feat), "%s", rev("feat"));
	/* the remote has main: a new name for it sends nothing */
	snprintf(in, sizeof(in), "refs/heads/main %s refs/heads/newmain " Z40 "\n", rev("main"));
	select_how(in, url, url, 60000, OMEN_PUSH_BY_LS_REMOTE, "");
	/* one commit on top of main: that one (git rev-list feat ^main) */
	snprintf(in, sizeof(in), "refs/heads/feat %s refs/heads/feat " Z40 "\n", feat);
	select_how(in, url, url, 60000, OMEN_PUSH_BY_LS_REMOTE,
		"git rev-list --no-merges --reverse --topo-order feat ^main");
	/* a remote that cannot be listed: what any remote-tracking ref holds */
	select_how(in, "nowhere", "/nonexistent-omen-remote.git", 60000, OMEN_PUSH_BY_ANY_TRACKING,
		"git rev-list --no-merges --reverse --topo-order feat --not --remotes");
	/* not asked (no time left): the same */
	select_how(in, url, url, 0, OMEN_PUSH_BY_ANY_TRACKING,
		"git rev-list --no-merges --reverse --topo-order feat --not --remotes");
	/* no remote-tracking ref at all: only commits on no ref but feat */
	sh("cd '%s' && git update-ref -d refs/remotes/origin/main", dir);
	select_how(in, "nowhere", "/nonexistent-omen-remote.git", 60000, OMEN_PUSH_BY_OTHER_REFS,
		"git rev-list --no-merges --reverse --topo-order feat --not "
		"$(git for-each-ref --format='%(refname)' | grep -v '^refs/heads/feat$')");
	sh("cd '%s' && git update-ref refs/remotes/origin/main %s && git update-ref -d refs/heads/feat && "
	   "rm -rf r.git", dir, origin_main);
}

static void test_resolve(void **st)
{
	git_oid *ids = NULL;
	size_t n = 0;
	char *desc = NULL;
	const char *range[] = {"main~3..main"};
	const char *two[] = {"main~1", "main~2", "main~1"};
	const char *bad[] = {"no-such-rev"};
	const char *empty[] = {"main..main"};
	(void)st;
	assert_int_equal(omen_score_resolve(&ids, &n, &desc, repo, range, 1), 0);
	assert_string_equal(hexlist(ids, n), sh_out("git rev-list --no-merges --reverse --topo-order main~3..main"));
	assert_string_equal(desc, "main~3..main");
	free(ids); free(desc);
	/* single commits, duplicates once, in argument order */
	assert_int_equal(omen_score_resolve(&ids, &n, &desc, repo, two, 3), 0);
	assert_int_equal(n, 2);
	assert_string_equal(hexlist(ids, n), sh_out("git rev-parse main~1 main~2"));
	free(ids); free(desc);
	/* no arguments and no upstream: HEAD */
	assert_int_equal(omen_score_resolve(&ids, &n, &desc, repo, NULL, 0), 0);
	assert_int_equal(n, 1);
	assert_string_equal(hexlist(ids, n), sh_out("git rev-parse HEAD"));
	assert_string_equal(desc, "HEAD");
	free(ids); free(desc);
	/* with an upstream: @{upstream}..HEAD */
	sh("cd '%s' && git config branch.main.remote origin && git config branch.main.merge refs/heads/main", dir);
	assert_int_equal(omen_score_resolve(&ids, &n, &desc, repo, NULL, 0), 0);
	assert_string_equal(desc, "@{upstream}..HEAD");
	assert_string_equal(hexlist(ids, n), sh_out("git rev-list --no-merges --reverse --topo-order @{upstream}..HEAD"));
	free(ids); free(desc);
	sh("cd '%s' && git config --unset branch.main.remote && git config --unset branch.main.merge", dir);
	/* a range that names nothing: zero commits, not an error */
	assert_int_equal(omen_score_resolve(&ids, &n, &desc, repo, empty, 1), 0);
	assert_int_equal(n, 0);
	free(ids); free(desc);
	/* an unknown name: one-line error naming it */
	assert_int_equal(omen_score_resolve(&ids, &n, &desc, repo, bad, 1), OMEN_ENOTFOUND);
	assert_non_null(strstr(omen_error_last(), "'no-such-rev'"));
	assert_null(ids);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_update_hides_remote_id),
		cmocka_unit_test(test_new_branch_hides_remote_tracking),
		cmocka_unit_test(test_unknown_remote_id),
		cmocka_unit_test(test_delete_and_tags),
		cmocka_unit_test(test_new_ref_sources),
		cmocka_unit_test(test_resolve),
	};
	return cmocka_run_group_tests_name("score_select", tests, setup, test_repo_drop);
}
