/* The multi-history dataset of the base model (issue 11): the shards of many
 * histories opened side by side (only their indexes in memory), the change
 * metrics of every sample made comparable across histories from its own
 * history's past, and the sampler that balances batches across histories. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "omen/base.h"
#include "omen/error.h"
#include "omen/util.h"

/* ---- comparable metrics ----------------------------------------------------- */
void omen_relative_init(omen_relative_state *st)
{
	memset(st, 0, sizeof(*st));
}

void omen_relative_apply(float out[OMEN_NMETRICS], const omen_relative_state *st,
	const float raw[OMEN_NMETRICS])
{
	double t[OMEN_NMETRICS];
	int j;
	omen_metrics_transform(t, raw);
	for (j = 0; j < OMEN_NMETRICS; j++) {
		double var = st->n > 0 ? st->m2[j] / st->n : 0, z = 0;
		if (st->n >= 2 && var > 1e-12) {
			z = (t[j] - st->mean[j]) / sqrt(var);
			if (z > OMEN_REL_CLIP)
				z = OMEN_REL_CLIP;
			else if (z < -OMEN_REL_CLIP)
				z = -OMEN_REL_CLIP;
		}
		out[j] = (float)z;
	}
}

/* Welford (1962): one pass, mean and sum of squared deviations. */
void omen_relative_update(omen_relative_state *st, const float raw[OMEN_NMETRICS])
{
	double t[OMEN_NMETRICS];
	int j;
	omen_metrics_transform(t, raw);
	st->n += 1;
	for (j = 0; j < OMEN_NMETRICS; j++) {
		double d = t[j] - st->mean[j];
		st->mean[j] += d / st->n;
		st->m2[j] += d * (t[j] - st->mean[j]);
	}
}

/* ---- the corpus ---------------------------------------------------------------- */
struct omen_corpus {
	size_t n;
	omen_shard **sh;
	char **name;
	float **rel;   /* [n][size * OMEN_NMETRICS] */
};

void omen_corpus_free(omen_corpus *c)
{
	size_t h;
	if (!c)
		return;
	for (h = 0; h < c->n; h++) {
		if (c->sh)
			omen_shard_close(c->sh[h]);
		if (c->name)
			free(c->name[h]);
		if (c->rel)
			free(c->rel[h]);
	}
	free(c->sh);
	free(c->name);
	free(c->rel);
	free(c);
}

int omen_corpus_open(omen_corpus **out, const char *const *paths, const char *const *names,
	size_t n)
{
	omen_corpus *c = calloc(1, sizeof(*c));
	size_t h, i;
	int e = 0;
	*out = NULL;
	if (!c)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	c->n = n;
	c->sh = calloc(n ? n : 1, sizeof(*c->sh));
	c->name = calloc(n ? n : 1, sizeof(*c->name));
	c->rel = calloc(n ? n : 1, sizeof(*c->rel));
	if (!c->sh || !c->name || !c->rel) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto fail;
	}
	for (h = 0; h < n; h++) {
		omen_relative_state st;
		size_t ns;
		if ((e = omen_shard_open(&c->sh[h], paths[h])))
			goto fail;
		if (!(c->name[h] = strdup(names && names[h] ? names[h] : paths[h]))) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto fail;
		}
		ns = omen_shard_size(c->sh[h]);
		if (!(c->rel[h] = malloc((ns ? ns : 1) * OMEN_NMETRICS * sizeof(float)))) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto fail;
		}
		omen_relative_init(&st);
		for (i = 0; i < ns; i++) {
			const omen_shard_entry *en = omen_shard_entry_at(c->sh[h], i);
			omen_relative_apply(c->rel[h] + i * OMEN_NMETRICS, &st, en->metrics);
			omen_relative_update(&st, en->metrics);
		}
	}
	*out = c;
	return 0;
fail:
	omen_corpus_free(c);
	return e;
}

size_t omen_corpus_histories(const omen_corpus *c) { return c ? c->n : 0; }
const omen_shard *omen_corpus_shard(const omen_corpus *c, size_t h)
{
	return c && h < c->n ? c->sh[h] : NULL;
}
const char *omen_corpus_name(const omen_corpus *c, size_t h)
{
	return c && h < c->n ? c->name[h] : NULL;
}
const float *omen_corpus_relative(const omen_corpus *c, size_t h, size_t i)
{
	return c && h < c->n && i < omen_shard_size(c->sh[h]) ? c->rel[h] + i * OMEN_NMETRICS : NULL;
}

/* ---- the balancer ----------------------------------------------------------------- */
struct omen_balancer {
	size_t nh;          /* histories that have samples */
	uint32_t *hist;     /* [nh] their numbers */
	uint32_t *round;    /* [nh] the current round's order */
	size_t pos;         /* next slot in the round */
	size_t **perm;      /* [nh][n] sample order */
	size_t *n, *cur;
	omen_rng rng;
};

static void shuffle(size_t *p, size_t n, omen_rng *r)
{
	size_t i;
	for (i = n; i > 1; i--) {
		size_t j = (size_t)(omen_rng_next(r) % i), t = p[i - 1];
		p[i - 1] = p[j];
		p[j] = t;
	}
}

static void shuffle32(uint32_t *p, size_t n, omen_rng *r)
{
	size_t i;
	for (i = n; i > 1; i--) {
		size_t j = (size_t)(omen_rng_next(r) % i);
		uint32_t t = p[i - 1];
		p[i - 1] = p[j];
		p[j] = t;
	}
}

void omen_balancer_free(omen_balancer *b)
{
	size_t k;
	if (!b)
		return;
	for (k = 0; b->perm && k < b->nh; k++)
		free(b->perm[k]);
	free(b->perm);
	free(b->hist);
	free(b->round);
	free(b->n);
	free(b->cur);
	free(b);
}

int omen_balancer_new(omen_balancer **out, const size_t *const *idx, const size_t *n, size_t nh,
	uint64_t seed)
{
	omen_balancer *b = calloc(1, sizeof(*b));
	size_t h, k = 0;
	*out = NULL;
	if (!b)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	b->hist = calloc(nh ? nh : 1, sizeof(*b->hist));
	b->round = calloc(nh ? nh : 1, sizeof(*b->round));
	b->perm = calloc(nh ? nh : 1, sizeof(*b->perm));
	b->n = calloc(nh ? nh : 1, sizeof(*b->n));
	b->cur = calloc(nh ? nh : 1, sizeof(*b->cur));
	if (!b->hist || !b->round || !b->perm || !b->n || !b->cur)
		goto nomem;
	omen_rng_seed(&b->rng, seed ^ 0xba1a9ceull);
	for (h = 0; h < nh; h++) {
		if (!n[h])
			continue;
		b->hist[k] = (uint32_t)h;
		b->n[k] = n[h];
		if (!(b->perm[k] = malloc(n[h] * sizeof(size_t))))
			goto nomem;
		memcpy(b->perm[k], idx[h], n[h] * sizeof(size_t));
		shuffle(b->perm[k], n[h], &b->rng);
		k++;
	}
	b->nh = k;
	if (!b->nh) {
		omen_balancer_free(b);
		return omen_error_set(OMEN_EINVAL, "no history has samples to draw");
	}
	b->pos = b->nh;   /* the first draw starts a round */
	*out = b;
	return 0;
nomem:
	b->nh = nh;
	omen_balancer_free(b);
	return omen_error_set(OMEN_ENOMEM, "out of memory");
}

void omen_balancer_next(omen_balancer *b, omen_corpus_ref *out, size_t k)
{
	size_t s;
	for (s = 0; s < k; s++) {
		uint32_t q;
		if (b->pos == b->nh) {
			size_t j;
			for (j = 0; j < b->nh; j++)
				b->round[j] = (uint32_t)j;
			shuffle32(b->round, b->nh, &b->rng);
			b->pos = 0;
		}
		q = b->round[b->pos++];
		if (b->cur[q] == b->n[q]) {
			shuffle(b->perm[q], b->n[q], &b->rng);
			b->cur[q] = 0;
		}
		out[s].h = b->hist[q];
		out[s].i = (uint32_t)b->perm[q][b->cur[q]++];
	}
}
