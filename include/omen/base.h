/* The base model (issue 11): one dataset over many histories, read from
 * their shards (omen/shard.h) one commit at a time, with change metrics made
 * comparable across histories, batches balanced across histories, and the
 * training loop that learns one model from all of them. */
#ifndef OMEN_BASE_H
#define OMEN_BASE_H

#include <stddef.h>
#include <stdint.h>
#include "omen/model.h"
#include "omen/shard.h"

/* ---- metrics comparable across histories ----------------------------------
 * Each metric, after the model's transform (omen_metrics_transform), as a
 * z-score against the commits of the same history before it: mean and
 * population standard deviation of those earlier commits only (Welford's
 * running update), clipped to [-OMEN_REL_CLIP, OMEN_REL_CLIP]; 0 while
 * fewer than 2 earlier commits are known or they do not vary. So a commit
 * is described against its own history's past, never its future.
 *
 * The one rule for every model (DEVELOPERS.md, "Base model"): a commit's
 * metrics are z-scores against the commits of its own repository that come
 * before it, clipped to +-OMEN_REL_CLIP. Training the base model uses the
 * running form above, because its training commits are spread over each
 * history's whole life; a model applied to one repository (per-repository,
 * fine-tuned, a young repository kept on the base, score's fallback to the
 * base) uses the frozen form, the mean and scale of the repository's commits
 * before the ones it scores: its training split, or every commit up to the
 * tip when nothing is trained. The running statistics at a history's last
 * commit are exactly the frozen ones over all its earlier commits, so the
 * base model meets the same scale it learned; the frozen form needs no
 * replay of the history at score time. */
#define OMEN_REL_CLIP 8.0
typedef struct {
	double n;
	double mean[OMEN_NMETRICS], m2[OMEN_NMETRICS];
} omen_relative_state;
void omen_relative_init(omen_relative_state *st);
void omen_relative_apply(float out[OMEN_NMETRICS], const omen_relative_state *st,
	const float raw[OMEN_NMETRICS]);
void omen_relative_update(omen_relative_state *st, const float raw[OMEN_NMETRICS]);

/* ---- the corpus: many shards, one per history ----------------------------- */
typedef struct omen_corpus omen_corpus;
/* Opens every shard (header and index only) and computes the comparable
 * metrics of every sample from its history's index, oldest first. names[h]
 * names history h in messages and metadata (NULL: the shard's path). */
int omen_corpus_open(omen_corpus **out, const char *const *paths, const char *const *names,
	size_t n);
void omen_corpus_free(omen_corpus *c);
size_t omen_corpus_histories(const omen_corpus *c);
const omen_shard *omen_corpus_shard(const omen_corpus *c, size_t h);
const char *omen_corpus_name(const omen_corpus *c, size_t h);
/* The comparable metrics of sample i of history h [OMEN_NMETRICS]. */
const float *omen_corpus_relative(const omen_corpus *c, size_t h, size_t i);

/* ---- batches balanced across histories ------------------------------------
 * Draws (history, sample) pairs: the histories are visited in rounds, each
 * round a fresh seeded permutation of all of them, so any run of k draws
 * holds every history floor(k/H) or ceil(k/H) times up to one round's edge;
 * within a history its samples come in a seeded shuffled order, reshuffled
 * when used up. Deterministic for a seed. */
typedef struct { uint32_t h, i; } omen_corpus_ref;
typedef struct omen_balancer omen_balancer;
/* idx[h][0..n[h]) are the samples history h may give (histories with none
 * are skipped). */
int omen_balancer_new(omen_balancer **out, const size_t *const *idx, const size_t *n, size_t nh,
	uint64_t seed);
void omen_balancer_free(omen_balancer *b);
void omen_balancer_next(omen_balancer *b, omen_corpus_ref *out, size_t k);

/* ---- training ------------------------------------------------------------- */
typedef struct {
	size_t histories, n_train, n_valid, pos_train, pos_valid;
	size_t steps_per_epoch;
	int epochs_run, best_epoch;
	double valid_auc;   /* mean over histories of their validation slice's AUC */
} omen_base_report;

/* Trains one model on every history of c: per history, its labelled
 * commits oldest first, the newest o->valid_frac of them kept for
 * validation (early stopping on the mean AUC over histories, Platt scaling
 * on all of them pooled); batches of o->batch balanced across histories;
 * an epoch is as many steps as the training commits fill. The model reads
 * comparable metrics (its metadata says "metrics": "relative"); every seed
 * is o->seed, and a rerun at the same thread count gives the same bytes
 * (and so does another thread count: the chunks are fixed). The metadata
 * lists the corpus (names, tips, commits, labelled commits) and built_at
 * (seconds since the epoch) as the build date: the caller passes a fixed
 * one (SOURCE_DATE_EPOCH) for a reproducible file. */
int omen_base_train(omen_model **out, omen_base_report *rep, const omen_corpus *c,
	const omen_train_opts *o, int64_t built_at);

/* Raw logits of a base model on samples idx[0..n) of history h of c,
 * reading the comparable metrics as training did (the model's own
 * omen_model_logits reads raw ones). */
int omen_base_logits(float *out, const omen_model *m, const omen_corpus *c, size_t h,
	const size_t *idx, size_t n, int threads);

/* A young repository (too few labelled commits to train): the base model's
 * weights, calibration and threshold, with the metrics and file facts
 * standardized on every commit of ds (no labels needed), and ds's metrics
 * state and head, so that scoring resumes from it like from a trained
 * model. The metadata says so ("young") and names the base ("from_base"). */
int omen_model_adopt_base(omen_model **out, const omen_model *base, const omen_dataset *ds);

/* The base model as it comes, for samples idx[0..n) of ds as its past:
 * its weights, calibration and threshold, with the metrics and file facts
 * standardized on those samples only (eval's base_model column, fitted on
 * a fold's training split). No metadata, head nor metrics state. */
int omen_model_base_on(omen_model **out, const omen_model *base, const omen_dataset *ds,
	const size_t *idx, size_t n);

/* ---- the installed base model -----------------------------------------------
 * `make install` puts the committed base model (fixtures/base-model/) at
 * $PREFIX/share/git-omen/base.omen. The base model of a repository r: the
 * file omen.baseModel names, else the installed one, looked for beside the
 * running binary (<bindir>/../share/git-omen/, so a DESTDIR or relocated
 * install finds its own) and then under the compiled-in OMEN_DATADIR. *out
 * is malloc'd, or NULL when there is none (not an error). *configured is
 * set when the path came from omen.baseModel. */
int omen_base_model_path(char **out, int *configured, omen_repo *r);
/* The caps the model's dataset was built with. */
omen_caps omen_model_caps(const omen_model *m);

#endif
