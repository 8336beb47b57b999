/* Scoring commits of the training history from the dataset cache: on a
 * small labelled repository made with the git CLI, a model is trained (its
 * dataset cache written), then commits at or before its head are scored
 * twice: with the cache (every one from the training samples) and without
 * it (the replay of the whole history). The reference is the replay, which
 * scores exactly as training built its samples: both must give the same
 * results, bit for bit. */
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
#include "omen/features.h"
#include "omen/history.h"
#include "omen/label.h"
#include "omen/model.h"
#include "omen/score.h"

#include "git_repo.h"

/* 72 weekly commits; every third repairs the line the one before it added,
 * so the labeller finds inducing commits, clean ones older than its window,
 * and unknown ones at the end. */
static int setup(void **st)
{
	(void)st;
	test_repo_make("scache",
		"git init -q -b main . && mkdir src && for i in $(seq 1 72); do "
		"d=\"@$((1600000000 + i * 604800)) +0000\"; "
		"if [ $((i % 3)) -eq 0 ]; then p=$((i - 1)); "
		"sed -i \"s/^int v$p = /int v$p = 1 + /\" src/m$((p % 6)).c; m=\"fix overflow in v$p\"; "
		"else printf 'int v%d = %d;\\n' $i $i >>src/m$((i % 6)).c; m=\"add v$i\"; fi; "
		"git add -A && GIT_AUTHOR_DATE=\"$d\" GIT_COMMITTER_DATE=\"$d\" git commit -q -m \"$m\"; done");
	return 0;
}

static size_t rev_list(git_oid *ids, size_t cap, const char *range)
{
	char cmd[256], *out, *line;
	size_t n = 0;
	snprintf(cmd, sizeof(cmd), "git rev-list --reverse %s", range);
	out = sh_out(cmd);
	for (line = strtok(out, "\n"); line && n < cap; line = strtok(NULL, "\n"))
		assert_int_equal(git_oid_fromstr(&ids[n++], line), 0);
	return n;
}

/* Labels the repository, builds its dataset (writing the cache), trains a
 * small model and saves it where the scorer looks; head gets the model's
 * head. */
static void label_train_save(char head[OMEN_OID_HEX + 1])
{
	omen_label_opts lo;
	omen_label_summary sum;
	omen_dataset_opts dopt;
	omen_dataset *ds = NULL;
	omen_train_opts to;
	omen_train_report rep;
	omen_model *m = NULL;
	omen_caps caps = OMEN_CAPS_DEFAULT;
	char path[512];

	omen_label_opts_init(&lo);
	assert_int_equal(omen_label_run(&sum, repo, &lo, NULL), 0);
	assert_true(sum.inducing >= 10 && sum.clean >= 10);
	memset(&dopt, 0, sizeof(dopt));
	dopt.caps = caps;
	dopt.use_cache = 1;
	assert_int_equal(omen_dataset_build(&ds, repo, &dopt), 0);
	omen_train_opts_init(&to);
	to.epochs = 2;
	to.dim = 8;
	to.channels = 8;
	to.caps = caps;
	assert_int_equal(omen_model_train(&m, &rep, ds, &to), 0);
	memcpy(head, omen_model_head(m), OMEN_OID_HEX + 1);
	snprintf(path, sizeof(path), "%s/.git/omen/model.omen", dir);
	assert_int_equal(omen_model_save(m, path), 0);
	omen_model_free(m);
	omen_dataset_free(ds);
}

static void test_cache_matches_replay(void **st)
{
	omen_score_opts so = OMEN_SCORE_OPTS_INIT;
	omen_scorer *s = NULL;
	omen_score_set a, b;
	git_oid ids[32];
	char path[512], head[OMEN_OID_HEX + 1];
	size_t n, i;
	(void)st;

	label_train_save(head);
	n = rev_list(ids, 32, "HEAD~20..HEAD");
	assert_int_equal(n, 20);
	assert_int_equal(omen_scorer_open(&s, repo, &so), 0);
	omen_score_set_init(&a);
	assert_int_equal(omen_scorer_commits(&a, s, ids, n), 0);
	assert_int_equal(a.n, n);
	assert_int_equal(a.from_cache, n);

	snprintf(path, sizeof(path), "%s/.git/omen/dataset.cache", dir);
	assert_int_equal(unlink(path), 0);
	omen_score_set_init(&b);
	assert_int_equal(omen_scorer_commits(&b, s, ids, n), 0);
	assert_int_equal(b.n, n);
	assert_int_equal(b.from_cache, 0);
	for (i = 0; i < n; i++) {
		assert_string_equal(a.v[i].id, b.v[i].id);
		assert_true(a.v[i].prob == b.v[i].prob);
		assert_true(a.v[i].lr_prob == b.v[i].lr_prob);
		assert_memory_equal(a.v[i].metrics, b.v[i].metrics, sizeof(a.v[i].metrics));
		assert_int_equal(a.v[i].is_fix, b.v[i].is_fix);
		assert_int_equal(a.v[i].nfiles, b.v[i].nfiles);
		assert_int_equal(a.v[i].nhunk_scores, b.v[i].nhunk_scores);
		assert_string_equal(a.v[i].summary, b.v[i].summary);
	}
	omen_score_set_free(&a);
	omen_score_set_free(&b);
	omen_scorer_free(s);
}

/* The model's head is the commit training read the history from, also
 * when that is a merge (the newest sample is then on a merged branch): a
 * commit made after it is scored with exactly the metrics a later training
 * would give it. With the newest sample as head, the walk from it to the
 * new commit fed the state again with the main line's commits since the
 * branch point (counted twice). Reference: the sample a fresh dataset
 * build gives the new commit. */
static void test_merge_tip_head(void **st)
{
	omen_dataset_opts dopt;
	omen_dataset *ds = NULL;
	omen_score_opts so = OMEN_SCORE_OPTS_INIT;
	omen_scorer *s = NULL;
	omen_score_set a;
	omen_caps caps = OMEN_CAPS_DEFAULT;
	const omen_sample *last;
	git_oid id;
	char head[OMEN_OID_HEX + 1];
	(void)st;

	sh("cd '%s' && git checkout -q -b side HEAD~6 && printf 'int w1;\n' >src/w.c && git add -A && "
		"GIT_AUTHOR_DATE='@1644000000 +0000' git commit -q -m 'add w1' && git checkout -q main && "
		"printf 'int v99 = 99;\n' >>src/m1.c && git add -A && "
		"GIT_AUTHOR_DATE='@1644100000 +0000' git commit -q -m 'add v99' && "
		"GIT_AUTHOR_DATE='@1644200000 +0000' git merge -q --no-ff -m 'merge side' side", dir);
	label_train_save(head);
	assert_memory_equal(head, sh_out("git rev-parse HEAD"), OMEN_OID_HEX);

	sh("cd '%s' && printf 'int v100 = 100;\n' >>src/m2.c && git add -A && "
		"GIT_AUTHOR_DATE='@1644300000 +0000' git commit -q -m 'add v100'", dir);
	assert_int_equal(omen_history_resolve(&id, repo, "HEAD"), 0);
	assert_int_equal(omen_scorer_open(&s, repo, &so), 0);
	omen_score_set_init(&a);
	assert_int_equal(omen_scorer_commits(&a, s, &id, 1), 0);
	assert_int_equal(a.n, 1);
	memset(&dopt, 0, sizeof(dopt));
	dopt.caps = caps;
	assert_int_equal(omen_dataset_build(&ds, repo, &dopt), 0);
	last = omen_dataset_get(ds, omen_dataset_size(ds) - 1);
	assert_memory_equal(last->id, a.v[0].id, OMEN_OID_HEX);
	assert_memory_equal(last->metrics, a.v[0].metrics, sizeof(last->metrics));
	omen_dataset_free(ds);
	omen_score_set_free(&a);
	omen_scorer_free(s);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_cache_matches_replay),
		cmocka_unit_test(test_merge_tip_head),
	};
	return cmocka_run_group_tests(tests, setup, test_repo_drop);
}
