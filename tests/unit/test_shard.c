/* Shards and the multi-history dataset (issue 11) on two small labelled
 * repositories made with the git CLI. The reference for every sample is the
 * single-history dataset that src/features/dataset.c builds: read back from
 * its shard through the corpus, each sample must equal it byte for byte
 * (record, metrics and every array). The comparable metrics are checked
 * against a two-pass mean and standard deviation of the same history's
 * earlier commits, computed here independently of Welford's update. A
 * damaged shard is refused with a message; the balancer's draws are checked
 * for balance and coverage; base training gives the same model bytes at one
 * and two threads and on a rerun. */
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <cmocka.h>
#include "omen/omen.h"
#include "omen/base.h"
#include "omen/error.h"
#include "omen/features.h"
#include "omen/history.h"
#include "omen/label.h"
#include "omen/model.h"
#include "omen/shard.h"
#include "omen/util.h"
#include "model/internal.h"

#include "git_repo.h"

static omen_repo *repo_b;
static char shard_a[600], shard_b[600];

#define HIST_A "git init -q -b main . && mkdir src && for i in $(seq 1 90); do " \
	"d=\"@$((1600000000 + i * 604800)) +0000\"; " \
	"if [ $((i % 3)) -eq 0 ]; then p=$((i - 1)); " \
	"sed -i \"s/^int v$p = /int v$p = 1 + /\" src/m$((p % 4)).c; m=\"fix overflow in v$p\"; " \
	"else printf 'int v%d = %d;\\n' $i $i >>src/m$((i % 4)).c; m=\"add v$i\"; fi; " \
	"git add -A && GIT_AUTHOR_DATE=\"$d\" GIT_COMMITTER_DATE=\"$d\" git commit -q -m \"$m\"; done"
/* a second history, in an untracked directory of the first: other files,
 * other rhythm */
#define HIST_B "mkdir b && cd b && git init -q -b main . && mkdir lib && " \
	"for i in $(seq 1 36); do d=\"@$((1500000000 + i * 432000)) +0000\"; " \
	"if [ $((i % 4)) -eq 0 ]; then p=$((i - 1)); " \
	"sed -i \"s/^def f$p(): return /def f$p(): return -/\" lib/k$((p % 3)).py; " \
	"m=\"fix sign bug in f$p\"; " \
	"else printf 'def f%d(): return %d\\n' $i $((i * 7)) >>lib/k$((i % 3)).py; " \
	"printf '# note %d\\n' $i >>lib/notes$((i % 2)).py; m=\"add f$i\"; fi; " \
	"git add -A && GIT_AUTHOR_DATE=\"$d\" GIT_COMMITTER_DATE=\"$d\" git commit -q -m \"$m\"; done"

static void build_ds(omen_dataset **out, omen_repo *r)
{
	omen_dataset_opts o;
	omen_caps caps = OMEN_CAPS_DEFAULT;
	memset(&o, 0, sizeof(o));
	o.caps = caps;
	assert_int_equal(omen_dataset_build(out, r, &o), 0);
}

static int setup(void **st)
{
	omen_label_opts lo;
	omen_label_summary sum;
	char bdir[512];
	omen_dataset *d;
	omen_caps caps = OMEN_CAPS_DEFAULT;
	(void)st;
	test_repo_make("shard", HIST_A " && " HIST_B);
	snprintf(bdir, sizeof(bdir), "%s/b", dir);
	assert_int_equal(omen_repo_open(&repo_b, bdir), 0);
	omen_label_opts_init(&lo);
	assert_int_equal(omen_label_run(&sum, repo, &lo, NULL), 0);
	assert_int_equal(omen_label_run(&sum, repo_b, &lo, NULL), 0);
	snprintf(shard_a, sizeof(shard_a), "%s/a.shard", dir);
	snprintf(shard_b, sizeof(shard_b), "%s/b.shard", dir);
	build_ds(&d, repo);
	assert_int_equal(omen_shard_write(d, &caps, shard_a), 0);
	omen_dataset_free(d);
	build_ds(&d, repo_b);
	assert_int_equal(omen_shard_write(d, &caps, shard_b), 0);
	omen_dataset_free(d);
	return 0;
}

static int teardown(void **st)
{
	omen_repo_free(repo_b);
	return test_repo_drop(st);
}

static void same_sample(const omen_sample *a, const omen_sample *b)
{
	assert_string_equal(a->id, b->id);
	assert_true(a->time == b->time);
	assert_int_equal(a->label, b->label);
	assert_int_equal(a->is_fix, b->is_fix);
	assert_int_equal(a->capped, b->capped);
	assert_int_equal(a->la, b->la);
	assert_int_equal(a->ld, b->ld);
	assert_memory_equal(a->metrics, b->metrics, sizeof(a->metrics));
	assert_int_equal(a->nfiles, b->nfiles);
	assert_int_equal(a->nhunks, b->nhunks);
	assert_int_equal(a->ntok, b->ntok);
	assert_int_equal(a->nmsg, b->nmsg);
	assert_memory_equal(a->file_off, b->file_off, (size_t)(a->nfiles + 1) * 4);
	assert_memory_equal(a->hunk_off, b->hunk_off, (size_t)(a->nhunks + 1) * 4);
	if (a->ntok) {
		assert_memory_equal(a->tok, b->tok, (size_t)a->ntok * 4);
		assert_memory_equal(a->tok_line, b->tok_line, (size_t)a->ntok * 4);
	}
	if (a->nmsg)
		assert_memory_equal(a->msg, b->msg, (size_t)a->nmsg * 4);
	if (a->nfiles)
		assert_memory_equal(a->file_facts, b->file_facts,
			(size_t)a->nfiles * OMEN_NFACTS * sizeof(float));
	if (a->nhunks) {
		assert_memory_equal(a->hunk_new_start, b->hunk_new_start, (size_t)a->nhunks * 4);
		assert_memory_equal(a->hunk_new_lines, b->hunk_new_lines, (size_t)a->nhunks * 4);
		assert_memory_equal(a->hunk_old_start, b->hunk_old_start, (size_t)a->nhunks * 4);
		assert_memory_equal(a->hunk_old_lines, b->hunk_old_lines, (size_t)a->nhunks * 4);
	}
}

/* Per history, the corpus gives exactly the single-history build. */
static void test_corpus_equals_single_builds(void **st)
{
	const char *paths[2] = {shard_a, shard_b}, *names[2] = {"a", "b"};
	omen_repo *rs[2] = {repo, repo_b};
	omen_corpus *c;
	omen_shard_buf b = OMEN_SHARD_BUF_INIT;
	size_t h, i, labelled = 0, inducing = 0;
	(void)st;
	assert_int_equal(omen_corpus_open(&c, paths, names, 2), 0);
	assert_int_equal(omen_corpus_histories(c), 2);
	/* the tip is the commit git itself names HEAD */
	assert_memory_equal(omen_shard_tip(omen_corpus_shard(c, 0)), sh_out("git rev-parse HEAD"),
		OMEN_OID_HEX);
	for (h = 0; h < 2; h++) {
		omen_dataset *d;
		const omen_shard *s = omen_corpus_shard(c, h);
		build_ds(&d, rs[h]);
		assert_int_equal(omen_shard_size(s), omen_dataset_size(d));
		assert_true(omen_dataset_size(d) >= 30);
		assert_string_equal(omen_shard_tip(s), omen_dataset_tip(d));
		for (i = 0; i < omen_dataset_size(d); i++) {
			omen_sample got;
			const omen_sample *want = omen_dataset_get(d, i);
			const omen_shard_entry *en = omen_shard_entry_at(s, i);
			assert_int_equal(omen_shard_read(&got, s, i, &b), 0);
			same_sample(&got, want);
			assert_null(got.file_path);
			assert_int_equal(en->label, want->label);
			assert_true(en->time == want->time);
			labelled += want->label >= 0;
			inducing += want->label > 0;
		}
		omen_dataset_free(d);
	}
	/* the fixtures must exercise every label */
	assert_true(labelled > inducing && inducing >= 10);
	omen_shard_buf_free(&b);
	omen_corpus_free(c);
}

/* Comparable metrics: the z-score of each transformed metric against the
 * same history's earlier commits only (two-pass mean and population
 * variance here), clipped; 0 before two earlier commits or without spread. */
static void test_relative_metrics_from_own_past(void **st)
{
	const char *paths[2] = {shard_a, shard_b};
	omen_corpus *c;
	size_t h, i, k, nonzero = 0;
	(void)st;
	assert_int_equal(omen_corpus_open(&c, paths, NULL, 2), 0);
	for (h = 0; h < 2; h++) {
		const omen_shard *s = omen_corpus_shard(c, h);
		size_t n = omen_shard_size(s);
		for (i = 0; i < n; i++) {
			const float *rel = omen_corpus_relative(c, h, i);
			double t[OMEN_NMETRICS], u[OMEN_NMETRICS];
			int j;
			omen_metrics_transform(t, omen_shard_entry_at(s, i)->metrics);
			for (j = 0; j < OMEN_NMETRICS; j++) {
				double mean = 0, var = 0, z = 0;
				for (k = 0; k < i; k++) {
					omen_metrics_transform(u, omen_shard_entry_at(s, k)->metrics);
					mean += u[j];
				}
				mean = i ? mean / (double)i : 0;
				for (k = 0; k < i; k++) {
					omen_metrics_transform(u, omen_shard_entry_at(s, k)->metrics);
					var += (u[j] - mean) * (u[j] - mean);
				}
				var = i ? var / (double)i : 0;
				if (i >= 2 && var > 1e-12)
					z = fmax(-OMEN_REL_CLIP, fmin(OMEN_REL_CLIP, (t[j] - mean) / sqrt(var)));
				assert_true(fabs(rel[j] - z) <= 1e-4 * (1 + fabs(z)));
				nonzero += rel[j] != 0;
			}
		}
	}
	assert_true(nonzero > 100);
	assert_null(omen_corpus_relative(c, 2, 0));
	omen_corpus_free(c);
}

/* The one standardization rule (omen/base.h): the frozen standardization a
 * model applied to one repository uses, fitted on a history's commits
 * before its last one, gives that last commit the same z-scores as the base
 * model's running ones. */
static void test_one_standardization_rule(void **st)
{
	const char *paths[1] = {shard_a};
	omen_corpus *c;
	omen_dataset *d;
	omen_model *m;
	size_t n, i, *idx;
	double t[OMEN_NMETRICS];
	const float *rel;
	int j, checked = 0;
	(void)st;
	assert_int_equal(omen_corpus_open(&c, paths, NULL, 1), 0);
	build_ds(&d, repo);
	n = omen_dataset_size(d);
	assert_int_equal(n, omen_shard_size(omen_corpus_shard(c, 0)));
	assert_non_null(idx = malloc(n * sizeof(*idx)));
	for (i = 0; i < n; i++)
		idx[i] = i;
	assert_int_equal(omen_model_alloc(&m, 8, 8), 0);
	omen_model_fit_standardization(m, d, idx, n - 1);
	omen_metrics_transform(t, omen_dataset_get(d, n - 1)->metrics);
	rel = omen_corpus_relative(c, 0, n - 1);
	for (j = 0; j < OMEN_NMETRICS; j++) {
		double z = (t[j] - m->metric_mean[j]) / m->metric_scale[j];
		if (m->metric_scale[j] == 1.0f && m->metric_mean[j] == (float)t[j])
			continue;   /* no spread: both give 0 (the frozen form divides by 1) */
		z = fmax(-OMEN_REL_CLIP, fmin(OMEN_REL_CLIP, z));
		assert_true(fabs(rel[j] - z) <= 1e-3 * (1 + fabs(z)));
		checked++;
	}
	assert_true(checked >= OMEN_NMETRICS / 2);
	free(idx);
	omen_model_free(m);
	omen_dataset_free(d);
	omen_corpus_free(c);
}

static void copy_file(const char *from, const char *to)
{
	omen_buf b = OMEN_BUF_INIT;
	assert_int_equal(omen_file_read(&b, from, 0), 0);
	assert_int_equal(omen_file_write_atomic(to, b.ptr, b.len), 0);
	omen_buf_free(&b);
}

static void flip_at(const char *path, long off)
{
	FILE *f = fopen(path, "r+b");
	int ch;
	assert_non_null(f);
	assert_int_equal(fseek(f, off, SEEK_SET), 0);
	ch = fgetc(f);
	assert_int_equal(fseek(f, off, SEEK_SET), 0);
	fputc(ch ^ 0x10, f);
	fclose(f);
}

/* Damaged shards: refused at open (header, index, length) or at the read
 * of the damaged sample (its own CRC), never read as data. */
static void test_damaged_shard_refused(void **st)
{
	char bad[700];
	omen_shard *s;
	omen_sample smp;
	omen_shard_buf b = OMEN_SHARD_BUF_INIT;
	size_t i, failed = 0;
	long size;
	FILE *f;
	(void)st;
	snprintf(bad, sizeof(bad), "%s/bad.shard", dir);
	/* a flipped byte in the first sample: open works, that read fails */
	copy_file(shard_a, bad);
	flip_at(bad, 128 + 50);
	assert_int_equal(omen_shard_open(&s, bad), 0);
	for (i = 0; i < omen_shard_size(s); i++)
		if (omen_shard_read(&smp, s, i, &b)) {
			assert_int_equal(omen_error_code(), OMEN_ECORRUPT);
			assert_non_null(strstr(omen_error_last(), "sample 0: bad checksum"));
			failed++;
		}
	assert_int_equal(failed, 1);
	omen_shard_close(s);
	/* a flipped byte in the index, in the header, or a cut file: open fails */
	f = fopen(shard_a, "rb");
	assert_non_null(f);
	fseek(f, 0, SEEK_END);
	size = ftell(f);
	fclose(f);
	copy_file(shard_a, bad);
	flip_at(bad, size - 30);
	assert_int_equal(omen_shard_open(&s, bad), OMEN_ECORRUPT);
	assert_non_null(strstr(omen_error_last(), "bad checksum"));
	copy_file(shard_a, bad);
	flip_at(bad, 9);
	assert_int_equal(omen_shard_open(&s, bad), OMEN_ECORRUPT);
	assert_non_null(strstr(omen_error_last(), "unsupported version"));
	copy_file(shard_a, bad);
	assert_int_equal(truncate(bad, size - 1), 0);
	assert_int_equal(omen_shard_open(&s, bad), OMEN_ECORRUPT);
	assert_non_null(strstr(omen_error_last(), "cannot read shard '"));
	assert_int_equal(omen_shard_open(&s, "/nonexistent/x.shard"), OMEN_ENOTFOUND);
	omen_shard_buf_free(&b);
}

/* Every round of H draws holds each history once; each history's first
 * n[h] draws are all of its samples; the same seed draws the same. */
static void test_balancer(void **st)
{
	size_t a[5], bb[50], cc[7], n[4] = {5, 50, 0, 7}, i, r;
	const size_t *idx[4] = {a, bb, NULL, cc};
	omen_balancer *b1, *b2;
	omen_corpus_ref d1[3 * 60], d2[3 * 60];
	int seen[4][64];
	(void)st;
	for (i = 0; i < 5; i++) a[i] = 100 + i;
	for (i = 0; i < 50; i++) bb[i] = 200 + i;
	for (i = 0; i < 7; i++) cc[i] = 300 + i;
	assert_int_equal(omen_balancer_new(&b1, idx, n, 4, 7), 0);
	assert_int_equal(omen_balancer_new(&b2, idx, n, 4, 7), 0);
	/* uneven batch sizes: the rounds carry over between calls */
	omen_balancer_next(b1, d1, 100);
	omen_balancer_next(b1, d1 + 100, 80);
	omen_balancer_next(b2, d2, 180);
	assert_memory_equal(d1, d2, sizeof(d1));
	memset(seen, 0, sizeof(seen));
	for (r = 0; r < 60; r++) {
		int cnt[4] = {0};
		for (i = 0; i < 3; i++)
			cnt[d1[r * 3 + i].h]++;
		assert_int_equal(cnt[0], 1);
		assert_int_equal(cnt[1], 1);
		assert_int_equal(cnt[2], 0);
		assert_int_equal(cnt[3], 1);
	}
	/* history 1 gave 60 draws: its first 50 are its 50 samples */
	for (i = 0, r = 0; i < 180 && r < 50; i++)
		if (d1[i].h == 1) {
			assert_true(d1[i].i >= 200 && d1[i].i < 250);
			assert_int_equal(seen[1][d1[i].i - 200]++, 0);
			r++;
		}
	assert_int_equal(r, 50);
	omen_balancer_free(b1);
	omen_balancer_free(b2);
	assert_int_equal(omen_balancer_new(&b1, idx, n, 4, 8), 0);
	omen_balancer_next(b1, d2, 180);
	assert_true(memcmp(d1, d2, sizeof(d1)) != 0);
	omen_balancer_free(b1);
}

static void base_train_to(const char *path, int threads, omen_base_report *rep)
{
	const char *paths[2] = {shard_a, shard_b}, *names[2] = {"example/a", "example/b"};
	omen_corpus *c;
	omen_model *m;
	omen_train_opts o;
	omen_train_opts_init(&o);
	o.epochs = 4;
	o.patience = 4;
	o.batch = 8;
	o.dim = 8;
	o.channels = 8;
	o.threads = threads;
	o.valid_frac = 0.3;
	assert_int_equal(omen_corpus_open(&c, paths, names, 2), 0);
	assert_int_equal(omen_base_train(&m, rep, c, &o, 1700000000), 0);
	assert_int_equal(omen_model_save(m, path), 0);
	omen_model_free(m);
	omen_corpus_free(c);
}

/* Same bytes at one and two threads and on a rerun; the report adds up. */
static void test_base_train_reproducible(void **st)
{
	char p1[700], p2[700];
	omen_buf b1 = OMEN_BUF_INIT, b2 = OMEN_BUF_INIT;
	omen_base_report rep;
	omen_model *m;
	const cJSON *meta, *base;
	(void)st;
	snprintf(p1, sizeof(p1), "%s/base1.omen", dir);
	snprintf(p2, sizeof(p2), "%s/base2.omen", dir);
	base_train_to(p1, 1, &rep);
	assert_int_equal(rep.histories, 2);
	assert_true(rep.n_train > 0 && rep.n_valid > 0 && rep.pos_train > 0);
	assert_int_equal(rep.steps_per_epoch, (rep.n_train + 7) / 8);
	assert_true(rep.epochs_run >= 1 && rep.epochs_run <= 4);
	base_train_to(p2, 2, &rep);
	assert_int_equal(omen_file_read(&b1, p1, 0), 0);
	assert_int_equal(omen_file_read(&b2, p2, 0), 0);
	assert_int_equal(b1.len, b2.len);
	assert_memory_equal(b1.ptr, b2.ptr, b1.len);
	base_train_to(p2, 1, &rep);
	omen_buf_free(&b2);
	assert_int_equal(omen_file_read(&b2, p2, 0), 0);
	assert_memory_equal(b1.ptr, b2.ptr, b1.len);
	/* the metadata names the corpus and says how metrics are read */
	assert_int_equal(omen_model_load(&m, p1), 0);
	meta = omen_model_meta(m);
	assert_string_equal(cJSON_GetObjectItem(meta, "metrics")->valuestring, "relative");
	base = cJSON_GetObjectItem(meta, "base");
	assert_non_null(base);
	assert_string_equal(cJSON_GetObjectItem(base, "date")->valuestring, "2023-11-14T22:13:20Z");
	assert_int_equal(cJSON_GetArraySize(cJSON_GetObjectItem(base, "corpus")), 2);
	omen_model_free(m);
	omen_buf_free(&b1);
	omen_buf_free(&b2);
}

/* Fine-tuning starts from the base model's weights: with a zero learning
 * rate (AdamW then moves nothing) the trained weights are the base's, bit
 * for bit, and the metadata names the base; from scratch they are not. */
static void test_fine_tune_starts_from_base(void **st)
{
	char p[700];
	omen_base_report rep;
	omen_model *base, *m;
	omen_dataset *d;
	omen_train_report tr;
	omen_train_opts o;
	(void)st;
	snprintf(p, sizeof(p), "%s/base-ft.omen", dir);
	base_train_to(p, 1, &rep);
	assert_int_equal(omen_model_load(&base, p), 0);
	build_ds(&d, repo);
	omen_train_opts_init(&o);
	o.dim = 8;
	o.channels = 8;
	o.epochs = 2;
	o.lr = 0;
	o.init = base;
	o.threads = 1;
	assert_int_equal(omen_model_train(&m, &tr, d, &o), 0);
	assert_int_equal(omen_model_nparams(m), omen_model_nparams(base));
	assert_memory_equal(omen_model_params(m), omen_model_params(base),
		omen_model_nparams(m) * sizeof(float));
	assert_non_null(cJSON_GetObjectItem(omen_model_meta(m), "from_base"));
	omen_model_free(m);
	o.init = NULL;
	assert_int_equal(omen_model_train(&m, &tr, d, &o), 0);
	assert_true(memcmp(omen_model_params(m), omen_model_params(base),
		omen_model_nparams(m) * sizeof(float)) != 0);
	assert_null(cJSON_GetObjectItem(omen_model_meta(m), "from_base"));
	omen_model_free(m);
	/* other dimensions: refused, saying which */
	o.dim = 16;
	o.init = base;
	assert_int_equal(omen_model_train(&m, &tr, d, &o), OMEN_EINVAL);
	assert_non_null(strstr(omen_error_last(), "base model has D=8 C=8"));
	omen_dataset_free(d);
	omen_model_free(base);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_corpus_equals_single_builds),
		cmocka_unit_test(test_relative_metrics_from_own_past),
		cmocka_unit_test(test_one_standardization_rule),
		cmocka_unit_test(test_damaged_shard_refused),
		cmocka_unit_test(test_balancer),
		cmocka_unit_test(test_base_train_reproducible),
		cmocka_unit_test(test_fine_tune_starts_from_base),
	};
	return cmocka_run_group_tests(tests, setup, teardown);
}
