/* Internal to src/score/: shared by score.c and explain.c. */
#ifndef OMEN_SCORE_INTERNAL_H
#define OMEN_SCORE_INTERNAL_H

#include "omen/label.h"
#include "omen/score.h"

/* Called for each scored commit while its change, sample and explanation
 * are alive; r is its result in the set. Non-zero stops the walk. */
typedef int (*score_visit_fn)(void *payload, const omen_change *c, const omen_sample *sm,
	const omen_explain *ex, const omen_score_result *r);

int score_walk(omen_score_set *set, omen_scorer *s, const git_oid *ids, size_t n,
	score_visit_fn visit, void *payload);
int score_one(omen_score_set *set, const omen_scorer *s, const omen_change *c,
	const omen_metrics *state, int is_fix, omen_sample_buf *sb, omen_explain *ex,
	omen_sample *out_sample);
void score_reasons(omen_score_result *r, const omen_scorer *s, const omen_sample *sm,
	const omen_explain *ex, const omen_hunk_score *top);
int score_is_fix(const omen_scorer *s, const omen_commit *c);
/* z-scores in the model's standardized space; 0 when the model has none. */
int score_standardize(double z[OMEN_NMETRICS], const omen_scorer *s, const float raw[OMEN_NMETRICS]);
/* The training history's typical raw value of metric j (NAN if unknown). */
float score_typical(const omen_scorer *s, int j);
/* The label file (omen.labels, else $GIT_DIR/omen/labels.jsonl); *out NULL
 * when it cannot be read, with no error left set. */
void score_load_labels(omen_labels **out, omen_repo *r);
omen_repo *score_repo(const omen_scorer *s);
void score_set_detail(omen_scorer *s, int detail);
/* A fresh copy of the metrics state at the model's head (empty without one). */
int score_state_clone(omen_metrics **out, const omen_scorer *s);
/* The model's head when it is a commit of this repository, else NULL. */
const git_oid *score_head(const omen_scorer *s);
/* The notices omen_scorer_notices returns, for health.c to add to. */
omen_buf *score_notices(omen_scorer *s);

#endif
