/* The dataset cache ($GIT_DIR/omen/dataset.cache) on a small labelled
 * repository made with the git CLI. The reference is the dataset built from
 * history with the cache off: a cache written and read back must give it
 * sample for sample, and a damaged cache (truncated, a flipped byte, or a
 * count that disagrees with the columns under a recomputed CRC) must never
 * be loaded: cache_only builds report it missing, ordinary builds rebuild it
 * from history and write it again byte for byte. A cache of an older
 * history or other labels is extended instead (ds_extend) when the history
 * only grew and no commit changed its fix status: the reference for that
 * is the same build from history, and the same cache bytes. */
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
#include "omen/error.h"
#include "omen/features.h"
#include "omen/history.h"
#include "omen/label.h"
#include "omen/util.h"

#include "git_repo.h"

static char cache_path[512];

/* 40 weekly commits over 4 files; every third repairs the line the one
 * before it added, so there are inducing, clean and unknown labels. */
static int setup(void **st)
{
	omen_label_opts lo;
	omen_label_summary sum;
	(void)st;
	test_repo_make("dscache",
		"git init -q -b main . && mkdir src && for i in $(seq 1 40); do "
		"d=\"@$((1600000000 + i * 604800)) +0000\"; "
		"if [ $((i % 3)) -eq 0 ]; then p=$((i - 1)); "
		"sed -i \"s/^int v$p = /int v$p = 1 + /\" src/m$((p % 4)).c; m=\"fix overflow in v$p\"; "
		"else printf 'int v%d = %d;\\n' $i $i >>src/m$((i % 4)).c; m=\"add v$i\"; fi; "
		"git add -A && GIT_AUTHOR_DATE=\"$d\" GIT_COMMITTER_DATE=\"$d\" git commit -q -m \"$m\"; done");
	omen_label_opts_init(&lo);
	assert_int_equal(omen_label_run(&sum, repo, &lo, NULL), 0);
	snprintf(cache_path, sizeof(cache_path), "%s/.git/omen/dataset.cache", dir);
	return 0;
}

static int build(omen_dataset **out, int use_cache, int cache_only)
{
	omen_dataset_opts o;
	omen_caps caps = OMEN_CAPS_DEFAULT;
	memset(&o, 0, sizeof(o));
	o.caps = caps;
	o.use_cache = use_cache;
	o.cache_only = cache_only;
	return omen_dataset_build(out, repo, &o);
}

static void same_dataset(const omen_dataset *a, const omen_dataset *b)
{
	size_t i, n = omen_dataset_size(a);
	int j;
	assert_int_equal(omen_dataset_size(b), n);
	assert_int_equal(omen_dataset_capped(a), omen_dataset_capped(b));
	assert_string_equal(omen_dataset_tip(a), omen_dataset_tip(b));
	for (i = 0; i < n; i++) {
		const omen_sample *x = omen_dataset_get(a, i), *y = omen_dataset_get(b, i);
		assert_string_equal(x->id, y->id);
		assert_true(x->time == y->time);
		assert_int_equal(x->label, y->label);
		assert_int_equal(x->is_fix, y->is_fix);
		assert_int_equal(x->la, y->la);
		assert_int_equal(x->ld, y->ld);
		assert_memory_equal(x->metrics, y->metrics, sizeof(x->metrics));
		assert_int_equal(x->nfiles, y->nfiles);
		assert_int_equal(x->nhunks, y->nhunks);
		assert_int_equal(x->ntok, y->ntok);
		assert_int_equal(x->nmsg, y->nmsg);
		assert_memory_equal(x->file_off, y->file_off, (size_t)(x->nfiles + 1) * sizeof(int32_t));
		assert_memory_equal(x->hunk_off, y->hunk_off, (size_t)(x->nhunks + 1) * sizeof(int32_t));
		if (x->ntok) {
			assert_memory_equal(x->tok, y->tok, (size_t)x->ntok * sizeof(uint32_t));
			assert_memory_equal(x->tok_line, y->tok_line, (size_t)x->ntok * sizeof(int32_t));
		}
		if (x->nmsg)
			assert_memory_equal(x->msg, y->msg, (size_t)x->nmsg * sizeof(uint32_t));
		if (x->nfiles)
			assert_memory_equal(x->file_facts, y->file_facts,
				(size_t)x->nfiles * OMEN_NFACTS * sizeof(float));
		if (x->nhunks) {
			assert_memory_equal(x->hunk_new_start, y->hunk_new_start, (size_t)x->nhunks * 4);
			assert_memory_equal(x->hunk_old_lines, y->hunk_old_lines, (size_t)x->nhunks * 4);
		}
		for (j = 0; j < x->nfiles; j++)
			assert_string_equal(x->file_path[j], y->file_path[j]);
	}
}

static void put_file(const void *p, size_t n)
{
	FILE *f = fopen(cache_path, "wb");
	assert_non_null(f);
	assert_int_equal(fwrite(p, 1, n, f), n);
	assert_int_equal(fclose(f), 0);
}

/* A damaged cache: not loaded, rebuilt from history, written again. */
static void damaged(const omen_dataset *ref, const omen_buf *good, const void *bad, size_t n)
{
	omen_dataset *d = NULL;
	omen_buf now = OMEN_BUF_INIT;
	put_file(bad, n);
	assert_int_equal(build(&d, 1, 1), OMEN_ENOTFOUND);
	assert_null(d);
	assert_int_equal(build(&d, 1, 0), 0);
	same_dataset(ref, d);
	omen_dataset_free(d);
	assert_int_equal(omen_file_read(&now, cache_path, 0), 0);
	assert_int_equal(now.len, good->len);
	assert_memory_equal(now.ptr, good->ptr, good->len);
	omen_buf_free(&now);
}

static void test_cache_round_trip_and_damage(void **st)
{
	omen_dataset *ref = NULL, *d = NULL;
	omen_buf good = OMEN_BUF_INIT;
	unsigned char *bad;
	size_t cuts[6], flips[6], i, keylen, rec0;
	uint32_t crc;
	(void)st;

	unlink(cache_path);
	assert_int_equal(build(&ref, 0, 0), 0);
	assert_true(omen_dataset_size(ref) >= 30);
	assert_memory_equal(omen_dataset_tip(ref), sh_out("git rev-parse HEAD"), OMEN_OID_HEX);
	assert_int_equal(access(cache_path, F_OK), -1);   /* cache off: nothing written */
	assert_int_equal(build(&d, 1, 0), 0);             /* writes the cache */
	same_dataset(ref, d);
	omen_dataset_free(d);
	d = NULL;
	assert_int_equal(build(&d, 1, 1), 0);             /* cache_only: read back */
	same_dataset(ref, d);
	omen_dataset_free(d);
	assert_int_equal(omen_file_read(&good, cache_path, 0), 0);
	assert_true(good.len > 1000);
	bad = malloc(good.len);
	assert_non_null(bad);

	/* truncated anywhere: header, key, records, columns, metrics, trailer */
	cuts[0] = 0; cuts[1] = 7; cuts[2] = 30; cuts[3] = good.len / 3; cuts[4] = good.len / 2;
	cuts[5] = good.len - 1;
	for (i = 0; i < 6; i++)
		damaged(ref, &good, good.ptr, cuts[i]);
	/* one flipped byte: magic, version, key, a record, a column, the CRC */
	memcpy(&keylen, good.ptr + 16, sizeof(keylen));   /* u64le on a little-endian host */
	rec0 = 32 + keylen;
	flips[0] = 3; flips[1] = 8; flips[2] = 24 + keylen / 2; flips[3] = rec0 + 10;
	flips[4] = good.len * 3 / 4; flips[5] = good.len - 2;
	for (i = 0; i < 6; i++) {
		memcpy(bad, good.ptr, good.len);
		bad[flips[i]] ^= 0x10;
		damaged(ref, &good, bad, good.len);
	}
	/* a record's token count one more than its hunks hold, under a CRC that
	 * matches: only the consistency checks can refuse it (ntok is at byte
	 * 72 of a record: id[48], time, la, ld, nfiles, nhunks) */
	memcpy(bad, good.ptr, good.len);
	{
		int32_t ntok;
		memcpy(&ntok, bad + rec0 + 72, 4);
		ntok++;
		memcpy(bad + rec0 + 72, &ntok, 4);
	}
	crc = omen_crc32(0, bad, good.len - 4);
	for (i = 0; i < 4; i++)
		bad[good.len - 4 + i] = (unsigned char)(crc >> (8 * i));
	damaged(ref, &good, bad, good.len);

	free(bad);
	omen_buf_free(&good);
	omen_dataset_free(ref);
}

static void relabel(const char *fix_pattern, int64_t window_days)
{
	omen_label_opts lo;
	omen_label_summary sum;
	omen_label_opts_init(&lo);
	lo.fix_pattern = fix_pattern;
	lo.window_days = window_days;
	assert_int_equal(omen_label_run(&sum, repo, &lo, NULL), 0);
}

/* The cache of the history before (the key's first part, ds_extend) serves
 * a grown history and new labels; the result, and the cache written from
 * it, are what a build from history gives, byte for byte. */
static void extended_equals_full(size_t want_reused, size_t want_n)
{
	omen_dataset *ext = NULL, *ref = NULL, *again = NULL;
	omen_buf a = OMEN_BUF_INIT, b = OMEN_BUF_INIT;
	assert_int_equal(build(&ext, 1, 0), 0);
	assert_int_equal(omen_dataset_size(ext), want_n);
	assert_int_equal(omen_dataset_reused(ext), want_reused);
	assert_int_equal(omen_file_read(&a, cache_path, 0), 0);
	assert_int_equal(build(&ref, 0, 0), 0);
	assert_int_equal(omen_dataset_reused(ref), 0);
	same_dataset(ref, ext);
	assert_int_equal(unlink(cache_path), 0);
	assert_int_equal(build(&again, 1, 0), 0);   /* from history, cache written */
	assert_int_equal(omen_dataset_reused(again), 0);
	assert_int_equal(omen_file_read(&b, cache_path, 0), 0);
	assert_int_equal(a.len, b.len);
	assert_memory_equal(a.ptr, b.ptr, a.len);
	omen_dataset_free(ext);
	omen_dataset_free(ref);
	omen_dataset_free(again);
	omen_buf_free(&a);
	omen_buf_free(&b);
}

static void test_cache_extended(void **st)
{
	omen_dataset *d = NULL;
	size_t n;
	(void)st;
	relabel(NULL, -1);
	assert_int_equal(build(&d, 1, 0), 0);   /* a cache of this history and labels */
	n = omen_dataset_size(d);
	omen_dataset_free(d);
	/* new labels only (another verification window): all samples reused */
	relabel(NULL, 30);
	extended_equals_full(n, n);
	/* six more commits, one of them a fix of a line of the old history */
	sh("cd '%s' && for i in $(seq 41 46); do d=\"@$((1600000000 + i * 604800)) +0000\"; "
		"if [ $i -eq 44 ]; then sed -i 's/^int v2 = /int v2 = 2 + /' src/m2.c; m='fix v2 again'; "
		"else printf 'int v%%d = %%d;\\n' $i $i >>src/m$((i %% 4)).c; m=\"add v$i\"; fi; "
		"git add -A && GIT_AUTHOR_DATE=\"$d\" GIT_COMMITTER_DATE=\"$d\" git commit -q -m \"$m\"; done",
		dir);
	relabel(NULL, 30);
	extended_equals_full(n, n + 6);
	/* other fix rules: old commits change fix status, so the metrics do: rebuilt */
	relabel("\\badd\\b", 30);
	extended_equals_full(0, n + 6);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_cache_round_trip_and_damage),
		cmocka_unit_test(test_cache_extended),   /* last: it adds commits */
	};
	return cmocka_run_group_tests_name("dataset_cache", tests, setup, test_repo_drop);
}
