/* Training the base model over a corpus of histories (issue 11). It reuses
 * the model's forward and backward passes, the weighted BCE and AdamW of
 * src/nn/, and the way src/model/train.c makes results independent of the
 * thread count: every batch is cut into BASE_CHUNKS fixed chunks, each with
 * its own gradient buffer and dropout stream (seeded by seed, step and
 * chunk), summed in chunk order. Samples are read from the shards into
 * per-slot buffers batch by batch; nothing holds the corpus in memory.
 *
 * Differences from per-history training, on purpose: the metrics the model
 * sees are the comparable ones (omen/base.h), written over the workspace's
 * standardized metrics after loading; batches are balanced across
 * histories; AdamW steps every parameter (dense), as torch.optim.AdamW does,
 * rather than train.c's lazy rows. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <sys/stat.h>
#include <unistd.h>
#include "omen/base.h"
#include "omen/history.h"
#include "omen/error.h"
#include "omen/rank.h"
#include "model/internal.h"

#define BASE_CHUNKS 2
#define BASE_EVAL_BATCH 64
#define FACT_SAMPLE 1000   /* commits a history gives to the file-fact statistics, at most */

typedef struct {
	const omen_model *m;
	const omen_corpus *c;
	const omen_corpus_ref *ref;
	int nb, nthreads, train, cap, part, parts;
	float p, pw;
	uint64_t seed, step;
	omen_ws ws[BASE_CHUNKS];
	float *grad[BASE_CHUNKS];
	float loss[BASE_CHUNKS];
	float *logits;
	int err[BASE_CHUNKS];
	char msg[BASE_CHUNKS][256];
	omen_shard_buf *buf[BASE_CHUNKS];   /* [cap] per chunk */
	omen_sample *smp[BASE_CHUNKS];
	const omen_sample **sp[BASE_CHUNKS];
} bctx;

static void bchunk(bctx *x, int c)
{
	int lo = (int)((long)x->nb * c / BASE_CHUNKS);
	int hi = (int)((long)x->nb * (c + 1) / BASE_CHUNKS), n = hi - lo, i, j;
	omen_ws *w = &x->ws[c];
	omen_rng rng;
	x->loss[c] = 0;
	if (n <= 0 || (x->train && x->parts > 1 && c % x->parts != x->part))
		return;   /* another data-parallel process's chunk (issue 13) */
	for (i = 0; i < n; i++) {
		const omen_corpus_ref *r = &x->ref[lo + i];
		int e = omen_shard_read(&x->smp[c][i], omen_corpus_shard(x->c, r->h), r->i,
			&x->buf[c][i]);
		if (e) {
			x->err[c] = e;
			snprintf(x->msg[c], sizeof(x->msg[c]), "%s", omen_error_last());
			return;
		}
		x->sp[c][i] = &x->smp[c][i];
	}
	if (omen_ws_load(w, x->m, x->sp[c], NULL, n)) {
		x->err[c] = OMEN_ENOMEM;
		snprintf(x->msg[c], sizeof(x->msg[c]), "out of memory");
		return;
	}
	/* the comparable metrics replace the standardized raw ones */
	for (i = 0; i < n; i++) {
		const omen_corpus_ref *r = &x->ref[lo + i];
		const float *rel = omen_corpus_relative(x->c, r->h, r->i);
		for (j = 0; j < x->m->NM; j++)
			w->xm[(size_t)i * x->m->NM + j] = rel[j];
	}
	omen_rng_seed(&rng, x->seed ^ (x->step * 0x9e3779b97f4a7c15ull) ^ ((uint64_t)c << 56));
	omen_model_forward(x->m, w, x->train ? x->p : 0, x->train ? &rng : NULL);
	if (!x->train) {
		memcpy(x->logits + lo, w->z, (size_t)n * sizeof(float));
		return;
	}
	x->loss[c] = omen_bce_forward(w->z, w->y, NULL, x->pw, n) * n / x->nb;
	omen_bce_backward(w->g_z, w->z, w->y, NULL, x->pw, n, (float)n / x->nb);
	omen_model_backward(x->m, w, x->grad[c], x->p);
}

static void bworker(int tid, void *payload)
{
	bctx *x = payload;
	int c;
	for (c = tid; c < BASE_CHUNKS; c += x->nthreads)
		bchunk(x, c);
}

static int brun(bctx *x)
{
	int c;
	if (x->nthreads > 1)
		omen_parallel_run(x->nthreads, bworker, x);
	else
		bworker(0, x);
	for (c = 0; c < BASE_CHUNKS; c++)
		if (x->err[c]) {
			int e = x->err[c];
			x->err[c] = 0;
			return omen_error_set(e, "%s", x->msg[c]);
		}
	return 0;
}

static void bctx_free(bctx *x)
{
	int c, i;
	for (c = 0; c < BASE_CHUNKS; c++) {
		omen_ws_free(&x->ws[c]);
		free(x->grad[c]);
		for (i = 0; x->buf[c] && i < x->cap; i++)
			omen_shard_buf_free(&x->buf[c][i]);
		free(x->buf[c]);
		free(x->smp[c]);
		free(x->sp[c]);
	}
}

static int bctx_init(bctx *x, const omen_model *m, const omen_corpus *c, int batch, int threads)
{
	int k;
	memset(x, 0, sizeof(*x));
	x->m = m;
	x->c = c;
	x->cap = batch > BASE_EVAL_BATCH ? batch : BASE_EVAL_BATCH;
	x->nthreads = threads < 1 ? 1 : threads > BASE_CHUNKS ? BASE_CHUNKS : threads;
	for (k = 0; k < BASE_CHUNKS; k++) {
		x->buf[k] = calloc((size_t)x->cap, sizeof(*x->buf[k]));
		x->smp[k] = calloc((size_t)x->cap, sizeof(*x->smp[k]));
		x->sp[k] = calloc((size_t)x->cap, sizeof(*x->sp[k]));
		x->grad[k] = aligned_alloc(64, (m->nparams * sizeof(float) + 63) / 64 * 64);
		if (!x->buf[k] || !x->smp[k] || !x->sp[k] || !x->grad[k])
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		memset(x->grad[k], 0, m->nparams * sizeof(float));
	}
	return 0;
}

/* Raw logits of refs[0..n). */
static int blogits(bctx *x, float *out, const omen_corpus_ref *refs, size_t n)
{
	size_t i;
	int e = 0, train = x->train;
	x->train = 0;
	for (i = 0; i < n && !e; i += BASE_EVAL_BATCH) {
		x->ref = refs + i;
		x->nb = (int)(n - i < BASE_EVAL_BATCH ? n - i : BASE_EVAL_BATCH);
		x->logits = out + i;
		e = brun(x);
	}
	x->train = train;
	return e;
}

/* Mean over histories (with both classes in their slice) of the AUC of the
 * logits z of refs, which come history by history; NaN when none has both. */
static double mean_auc(const float *z, const omen_corpus_ref *refs, size_t n,
	const omen_corpus *c)
{
	double *s = malloc((n + 1) * sizeof(double)), sum = 0;
	int *y = malloc((n + 1) * sizeof(int));
	size_t i = 0, k = 0;
	if (!s || !y) {
		free(s); free(y);
		return NAN;
	}
	while (i < n) {
		size_t j = i, pos = 0;
		while (j < n && refs[j].h == refs[i].h) {
			s[j - i] = z[j];
			y[j - i] = omen_shard_entry_at(omen_corpus_shard(c, refs[j].h), refs[j].i)->label > 0;
			pos += (size_t)y[j - i];
			j++;
		}
		if (pos && pos < j - i) {
			sum += omen_auc(s, y, j - i);
			k++;
		}
		i = j;
	}
	free(s); free(y);
	return k ? sum / (double)k : NAN;
}

/* File-fact standardization from up to FACT_SAMPLE training commits of each
 * history, evenly spaced (the metrics need none: they are comparable
 * already, so the model's metric mean is 0 and scale 1). */
static int fit_facts(omen_model *m, const omen_corpus *c, size_t *const *tr, const size_t *ntr)
{
	double fm[OMEN_MODEL_NFN] = {0}, fq[OMEN_MODEL_NFN] = {0};
	size_t h, q, nf = 0;
	omen_shard_buf b = OMEN_SHARD_BUF_INIT;
	int j, e = 0;
	for (h = 0; h < omen_corpus_histories(c) && !e; h++) {
		size_t take = ntr[h] < FACT_SAMPLE ? ntr[h] : FACT_SAMPLE;
		for (q = 0; q < take && !e; q++) {
			omen_sample s;
			int f;
			if ((e = omen_shard_read(&s, omen_corpus_shard(c, h), tr[h][q * ntr[h] / take], &b)))
				break;
			for (f = 0; f < s.nfiles; f++) {
				const float *ff = s.file_facts + (size_t)f * OMEN_NFACTS;
				int k = 0;
				for (j = 0; j < OMEN_NFACTS; j++) {
					double v;
					if (j == OMEN_FF_EXT_HASH)
						continue;
					v = isfinite(ff[j]) ? ff[j] : 0;
					fm[k] += v;
					fq[k] += v * v;
					k++;
				}
				nf++;
			}
		}
	}
	omen_shard_buf_free(&b);
	for (j = 0; j < OMEN_NMETRICS; j++) {
		m->metric_mean[j] = 0;
		m->metric_scale[j] = 1;
	}
	for (j = 0; j < OMEN_MODEL_NFN; j++) {
		double mu = nf ? fm[j] / nf : 0, var = nf ? fq[j] / nf - mu * mu : 0;
		m->fact_mean[j] = (float)mu;
		m->fact_scale[j] = var > 1e-12 ? (float)sqrt(var) : 1.0f;
	}
	return e;
}

/* The warm start of train.c on the comparable metrics: the linear skip
 * takes the logistic regression's coefficients, the output bias its
 * intercept shifted by log(pos_weight), the deep output layer starts at
 * zero. The regression is not kept: the model's metrics baseline reads raw
 * metrics, which these coefficients do not fit. */
static int warm_start_rel(omen_model *m, const omen_corpus *c, size_t *const *tr,
	const size_t *ntr, size_t total, float pw)
{
	double *X = malloc((total + 1) * OMEN_NMETRICS * sizeof(double));
	double *y = malloc((total + 1) * sizeof(double));
	omen_logreg lr;
	size_t h, q, r = 0;
	int j, e;
	float *lin = m->params + m->t[P_LIN_W].off;
	memset(&lr, 0, sizeof(lr));
	if (!X || !y) {
		free(X); free(y);
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	}
	for (h = 0; h < omen_corpus_histories(c); h++)
		for (q = 0; q < ntr[h]; q++, r++) {
			const float *rel = omen_corpus_relative(c, h, tr[h][q]);
			for (j = 0; j < OMEN_NMETRICS; j++)
				X[r * OMEN_NMETRICS + j] = rel[j];
			y[r] = omen_shard_entry_at(omen_corpus_shard(c, h), tr[h][q])->label > 0;
		}
	e = omen_logreg_fit(&lr, X, y, (int)r, OMEN_NMETRICS, 1.0);
	if (!e) {
		double b = lr.b;
		for (j = 0; j < OMEN_NMETRICS; j++) {
			lin[j] = (float)(lr.w[j] / lr.scale[j]);
			b -= lr.w[j] * lr.mean[j] / lr.scale[j];
		}
		m->params[m->t[P_H2_B].off] = (float)(b + log(pw));
		memset(m->params + m->t[P_H2_W].off, 0, m->t[P_H2_W].n * sizeof(float));
	}
	omen_logreg_free(&lr);
	free(X); free(y);
	return e;
}

static int base_threads(int t)
{
	long n = t > 0 ? t : sysconf(_SC_NPROCESSORS_ONLN);
	return n < 1 ? 1 : n > BASE_CHUNKS ? BASE_CHUNKS : (int)n;
}

int omen_model_copy_weights(omen_model *dst, const omen_model *src)
{
	if (dst->D != src->D || dst->C != src->C || dst->V != src->V || dst->VM != src->VM ||
		dst->NE != src->NE || dst->NM != src->NM || dst->NFN != src->NFN ||
		dst->nparams != src->nparams)
		return omen_error_set(OMEN_EINVAL, "base model has D=%d C=%d V=%d, this training "
			"D=%d C=%d V=%d", src->D, src->C, src->V, dst->D, dst->C, dst->V);
	memcpy(dst->params, src->params, dst->nparams * sizeof(float));
	return 0;
}

int omen_model_base_on(omen_model **out, const omen_model *base, const omen_dataset *ds,
	const size_t *idx, size_t n)
{
	omen_model *m = NULL;
	int e;
	*out = NULL;
	if ((e = omen_model_alloc(&m, base->D, base->C)))
		return e;
	if ((e = omen_model_copy_weights(m, base))) {
		omen_model_free(m);
		return e;
	}
	omen_model_fit_standardization(m, ds, idx, n);
	m->caps = base->caps;
	m->platt_a = base->platt_a;
	m->platt_b = base->platt_b;
	m->threshold = base->threshold;
	*out = m;
	return 0;
}

int omen_model_adopt_base(omen_model **out, const omen_model *base, const omen_dataset *ds)
{
	size_t n = omen_dataset_size(ds), i, nl = 0, pos = 0, *idx = NULL;
	omen_model *m = NULL;
	cJSON *meta, *y;
	int e;
	*out = NULL;
	if (!n)
		return omen_error_set(OMEN_EINVAL, "cannot adopt the base model: no commits");
	if (!(idx = malloc(n * sizeof(*idx))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (i = 0; i < n; i++) {
		const omen_sample *s = omen_dataset_get(ds, i);
		idx[i] = i;
		nl += s->label >= 0;
		pos += s->label > 0;
	}
	if ((e = omen_model_base_on(&m, base, ds, idx, n)))
		goto out;
	if (omen_dataset_tip(ds))
		memcpy(m->head, omen_dataset_tip(ds), sizeof(m->head));
	else
		memcpy(m->head, omen_dataset_get(ds, n - 1)->id, sizeof(m->head));
	if (omen_dataset_metrics(ds) &&
		((e = omen_metrics_save(omen_dataset_metrics(ds), &m->mstate_blob)) ||
		(e = omen_metrics_load(&m->mstate, m->mstate_blob.ptr, m->mstate_blob.len))))
		goto out;
	meta = cJSON_CreateObject();
	y = cJSON_CreateObject();
	cJSON_AddNumberToObject(y, "commits", (double)n);
	cJSON_AddNumberToObject(y, "labelled", (double)nl);
	cJSON_AddNumberToObject(y, "inducing", (double)pos);
	cJSON_AddItemToObject(meta, "young", y);
	if (base->meta && cJSON_GetObjectItemCaseSensitive(base->meta, "base"))
		cJSON_AddItemToObject(meta, "from_base",
			cJSON_Duplicate(cJSON_GetObjectItemCaseSensitive(base->meta, "base"), 1));
	m->meta = meta;
	*out = m;
	m = NULL;
out:
	free(idx);
	omen_model_free(m);
	return e;
}

int omen_base_logits(float *out, const omen_model *m, const omen_corpus *c, size_t h,
	const size_t *idx, size_t n, int threads)
{
	omen_corpus_ref *refs = malloc((n + 1) * sizeof(*refs));
	size_t i;
	bctx x;
	int e;
	if (!refs)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	if (h >= omen_corpus_histories(c)) {
		free(refs);
		return omen_error_set(OMEN_EINVAL, "no history %zu in the corpus", h);
	}
	for (i = 0; i < n; i++) {
		if (idx[i] >= omen_shard_size(omen_corpus_shard(c, h))) {
			free(refs);
			return omen_error_set(OMEN_EINVAL, "sample %zu out of range", idx[i]);
		}
		refs[i].h = (uint32_t)h;
		refs[i].i = (uint32_t)idx[i];
	}
	if (!(e = bctx_init(&x, m, c, BASE_EVAL_BATCH, base_threads(threads))))
		e = blogits(&x, out, refs, n);
	bctx_free(&x);
	free(refs);
	return e;
}

static cJSON *base_meta(const omen_corpus *c, const omen_base_report *rep,
	const omen_train_opts *o, int64_t built_at, size_t *const *tr, const size_t *ntr)
{
	cJSON *meta = cJSON_CreateObject(), *b = cJSON_CreateObject(), *list = cJSON_CreateArray();
	size_t h;
	char date[32];
	time_t tt = (time_t)built_at;
	struct tm tm;
	(void)tr;
	gmtime_r(&tt, &tm);
	strftime(date, sizeof(date), "%Y-%m-%dT%H:%M:%SZ", &tm);
	for (h = 0; h < omen_corpus_histories(c); h++) {
		const omen_shard *s = omen_corpus_shard(c, h);
		cJSON *one = cJSON_CreateObject();
		size_t i, nl = 0;
		for (i = 0; i < omen_shard_size(s); i++)
			nl += omen_shard_entry_at(s, i)->label >= 0;
		cJSON_AddStringToObject(one, "name", omen_corpus_name(c, h));
		cJSON_AddStringToObject(one, "head", omen_shard_tip(s));
		cJSON_AddNumberToObject(one, "commits", (double)omen_shard_size(s));
		cJSON_AddNumberToObject(one, "labelled", (double)nl);
		cJSON_AddNumberToObject(one, "train", (double)ntr[h]);
		cJSON_AddItemToArray(list, one);
	}
	cJSON_AddStringToObject(b, "date", date);
	cJSON_AddNumberToObject(b, "histories", (double)rep->histories);
	cJSON_AddNumberToObject(b, "n_train", (double)rep->n_train);
	cJSON_AddNumberToObject(b, "n_valid", (double)rep->n_valid);
	cJSON_AddNumberToObject(b, "pos_train", (double)rep->pos_train);
	cJSON_AddNumberToObject(b, "pos_valid", (double)rep->pos_valid);
	cJSON_AddNumberToObject(b, "steps_per_epoch", (double)rep->steps_per_epoch);
	cJSON_AddNumberToObject(b, "epochs_run", rep->epochs_run);
	cJSON_AddNumberToObject(b, "best_epoch", rep->best_epoch);
	if (isfinite(rep->valid_auc))
		cJSON_AddNumberToObject(b, "valid_mean_auc", rep->valid_auc);
	cJSON_AddNumberToObject(b, "seed", (double)o->seed);
	cJSON_AddNumberToObject(b, "batch", o->batch);
	cJSON_AddNumberToObject(b, "lr", o->lr);
	cJSON_AddItemToObject(b, "corpus", list);
	cJSON_AddItemToObject(meta, "base", b);
	cJSON_AddStringToObject(meta, "metrics", "relative");
	return meta;
}

/* Over 120 lines: not split yet (issue 14, item 4, left for the next pass);
 *   the base model's training, from the corpus split to the report. */
int omen_base_train(omen_model **out, omen_base_report *rep, const omen_corpus *c,
	const omen_train_opts *o, int64_t built_at)
{
	size_t nh = omen_corpus_histories(c), h, i, k, total = 0, nval = 0, step = 0, steps;
	size_t **tr = NULL, *ntr = NULL;
	omen_corpus_ref *vref = NULL, *bref = NULL;
	omen_balancer *bal = NULL;
	omen_model *m = NULL;
	float *g = NULL, *mom = NULL, *vel = NULL, *best = NULL, *vz = NULL;
	uint8_t *decay = NULL;
	double frac_pos = 0, frac_neg = 0;
	omen_adamw aw = OMEN_ADAMW_DEFAULT;
	int e = 0, t, ep, since_best = 0, threads = base_threads(o->threads);
	bctx x;

	*out = NULL;
	memset(rep, 0, sizeof(*rep));
	memset(&x, 0, sizeof(x));
	rep->histories = nh;
	rep->valid_auc = NAN;
	tr = calloc(nh ? nh : 1, sizeof(*tr));
	ntr = calloc(nh ? nh : 1, sizeof(*ntr));
	if (!tr || !ntr) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	/* per history: labelled commits oldest first; the newest valid_frac
	 * validate */
	for (h = 0; h < nh; h++) {
		const omen_shard *s = omen_corpus_shard(c, h);
		size_t n = omen_shard_size(s), nl = 0, nv, pos = 0;
		if (!(tr[h] = malloc((n ? n : 1) * sizeof(size_t)))) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
		for (i = 0; i < n; i++)
			if (omen_shard_entry_at(s, i)->label >= 0)
				tr[h][nl++] = i;
		nv = (size_t)(nl * o->valid_frac + 0.5);
		ntr[h] = nl - nv;
		for (i = 0; i < ntr[h]; i++)
			pos += omen_shard_entry_at(s, tr[h][i])->label > 0;
		rep->pos_train += pos;
		for (i = ntr[h]; i < nl; i++)
			rep->pos_valid += omen_shard_entry_at(s, tr[h][i])->label > 0;
		if (ntr[h]) {   /* the class shares a balanced batch sees */
			frac_pos += (double)pos / (double)ntr[h];
			frac_neg += (double)(ntr[h] - pos) / (double)ntr[h];
		}
		total += ntr[h];
		nval += nv;
	}
	rep->n_train = total;
	rep->n_valid = nval;
	if (rep->pos_train < 10 || total - rep->pos_train < 10) {
		e = omen_error_set(OMEN_EINVAL, "too few labelled commits in the corpus to train: %zu "
			"(%zu inducing), need at least 10 inducing and 10 clean", total, rep->pos_train);
		goto out;
	}
	vref = malloc((nval + 1) * sizeof(*vref));
	bref = malloc(((size_t)o->batch + 1) * sizeof(*bref));
	vz = malloc((nval + 1) * sizeof(float));
	if (!vref || !bref || !vz) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	for (h = 0, k = 0; h < nh; h++) {
		const omen_shard *s = omen_corpus_shard(c, h);
		size_t n = omen_shard_size(s), seen = 0;
		for (i = 0; i < n; i++) {
			if (omen_shard_entry_at(s, i)->label < 0)
				continue;
			if (seen++ >= ntr[h]) {
				vref[k].h = (uint32_t)h;
				vref[k].i = (uint32_t)i;
				k++;
			}
		}
	}
	if ((e = omen_model_new(&m, o->dim, o->channels, o->seed)))
		goto out;
	m->caps = o->caps;
	if ((e = fit_facts(m, c, tr, ntr)))
		goto out;
	x.pw = frac_pos > 0 ? (float)(frac_neg / frac_pos) : 1.0f;
	if (o->warm_start && (e = warm_start_rel(m, c, tr, ntr, total, x.pw)))
		goto out;
	if ((e = omen_balancer_new(&bal, (const size_t *const *)tr, ntr, nh, o->seed)))
		goto out;
	{
		float pw = x.pw;
		if ((e = bctx_init(&x, m, c, o->batch, threads)))
			goto out;
		x.pw = pw;
	}
	x.p = o->dropout;
	x.train = 1;
	x.seed = o->seed;
	x.part = o->part;
	x.parts = o->exchange ? o->parts : 1;
	g = aligned_alloc(64, (m->nparams * sizeof(float) + 63) / 64 * 64);
	mom = calloc(m->nparams, sizeof(float));
	vel = calloc(m->nparams, sizeof(float));
	best = malloc(m->nparams * sizeof(float));
	decay = calloc(m->nparams, 1);
	if (!g || !mom || !vel || !best || !decay) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	for (t = 0; t < P_COUNT; t++)
		if (m->t[t].decay)
			memset(decay + m->t[t].off, 1, m->t[t].n);
	aw.lr = o->lr;
	aw.weight_decay = o->weight_decay;
	memcpy(best, m->params, m->nparams * sizeof(float));
	rep->best_epoch = 0;
	if (nval) {   /* the warm start is a candidate too */
		if ((e = blogits(&x, vz, vref, nval)))
			goto out;
		rep->valid_auc = mean_auc(vz, vref, nval, c);
	}
	steps = (total + (size_t)o->batch - 1) / (size_t)o->batch;
	rep->steps_per_epoch = steps;
	for (ep = 1; ep <= o->epochs; ep++) {
		double loss_sum = 0;
		size_t st;
		for (st = 0; st < steps; st++) {
			float loss = 0, norm;
			int q;
			omen_balancer_next(bal, bref, (size_t)o->batch);
			x.ref = bref;
			x.nb = o->batch;
			x.step = ++step;
			if ((e = brun(&x)))
				goto out;
			if (x.parts > 1) {   /* the other processes' chunks (issue 13): dense */
				omen_span all = {0, m->nparams};
				if ((e = o->exchange(o->exchange_ctx, x.grad, x.loss, BASE_CHUNKS, &all, 1)))
					goto out;
			}
			for (q = 0; q < BASE_CHUNKS; q++)
				loss += x.loss[q];
			omen_reduce_fixed(g, x.grad, BASE_CHUNKS, m->nparams);
			for (q = 0; q < BASE_CHUNKS; q++)
				memset(x.grad[q], 0, m->nparams * sizeof(float));
			norm = omen_clip_grad_norm(g, m->nparams, o->clip);
			if (!isfinite(loss) || !isfinite(norm)) {
				e = omen_error_set(OMEN_ERROR, "base training diverged at step %zu (epoch %d): "
					"non-finite %s; nothing saved", step, ep, isfinite(loss) ? "gradient" : "loss");
				goto out;
			}
			omen_adamw_step(m->params, g, mom, vel, m->nparams, &aw, (int)step, decay);
			loss_sum += loss;
		}
		rep->epochs_run = ep;
		if (nval) {
			double auc;
			if ((e = blogits(&x, vz, vref, nval)))
				goto out;
			auc = mean_auc(vz, vref, nval, c);
			if (isnan(rep->valid_auc) || auc > rep->valid_auc + 1e-4) {
				rep->valid_auc = auc;
				rep->best_epoch = ep;
				since_best = 0;
				memcpy(best, m->params, m->nparams * sizeof(float));
			} else {
				since_best++;
			}
		} else {
			rep->best_epoch = ep;
			memcpy(best, m->params, m->nparams * sizeof(float));
		}
		if (o->progress)
			o->progress(o->payload, ep, o->epochs, steps ? (float)(loss_sum / steps) : 0,
				(float)rep->valid_auc, 0);
		if (nval && since_best >= o->patience)
			break;
	}
	memcpy(m->params, best, m->nparams * sizeof(float));
	/* Platt scaling and the max-F1 threshold on every validation slice */
	m->platt_a = 1;
	m->platt_b = 0;
	m->threshold = 0.5f;
	if (nval) {
		double *f = malloc(nval * sizeof(double)), *p = malloc(nval * sizeof(double));
		int *y = malloc(nval * sizeof(int));
		if (!f || !p || !y) {
			free(f); free(p); free(y);
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
		if (!(e = blogits(&x, vz, vref, nval))) {
			for (i = 0; i < nval; i++) {
				f[i] = vz[i];
				y[i] = omen_shard_entry_at(omen_corpus_shard(c, vref[i].h), vref[i].i)->label > 0;
			}
			if (rep->pos_valid && rep->pos_valid < nval &&
				!omen_platt_fit(&m->platt_a, &m->platt_b, f, y, nval)) {
				for (i = 0; i < nval; i++)
					p[i] = omen_platt_apply(m->platt_a, m->platt_b, f[i]);
				m->threshold = (float)omen_threshold_max_f1(p, y, nval);
			} else {
				omen_error_clear();
				m->platt_a = 1;
				m->platt_b = 0;
			}
		}
		free(f); free(p); free(y);
		if (e)
			goto out;
	}
	m->meta = base_meta(c, rep, o, built_at, tr, ntr);
	*out = m;
	m = NULL;
out:
	bctx_free(&x);
	omen_balancer_free(bal);
	omen_model_free(m);
	for (h = 0; tr && h < nh; h++)
		free(tr[h]);
	free(tr); free(ntr); free(vref); free(bref); free(vz);
	free(g); free(mom); free(vel); free(best); free(decay);
	return e;
}

#ifndef OMEN_DATADIR
#define OMEN_DATADIR "/usr/local/share/git-omen"
#endif

/* path/base.omen when it is a regular file: *out malloc'd, else NULL. */
static int base_candidate(char **out, const char *dir, size_t dlen)
{
	static const char name[] = "/base.omen";
	struct stat st;
	char *p = malloc(dlen + sizeof(name));
	if (!p)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	memcpy(p, dir, dlen);
	memcpy(p + dlen, name, sizeof(name));
	if (stat(p, &st) == 0 && S_ISREG(st.st_mode)) {
		char *rp = realpath(p, NULL);   /* <bindir>/.. said plainly */
		if (rp) {
			free(p);
			p = rp;
		}
		*out = p;
		return 0;
	}
	free(p);
	return 0;
}

int omen_base_model_path(char **out, int *configured, omen_repo *r)
{
	char *cfg = NULL, exe[4096];
	ssize_t n;
	int e;
	*out = NULL;
	*configured = 0;
	if (r && (e = omen_config_string(&cfg, r, "omen.baseModel")))
		return e;
	if (cfg && *cfg) {
		*out = cfg;
		*configured = 1;
		return 0;
	}
	free(cfg);
	/* beside the binary: <bindir>/../share/git-omen */
	n = readlink("/proc/self/exe", exe, sizeof(exe) - 1);
	if (n > 0 && (size_t)n < sizeof(exe) - 32) {
		static const char rel[] = "/../share/git-omen";
		char *slash;
		exe[n] = '\0';
		if ((slash = strrchr(exe, '/'))) {
			memcpy(slash, rel, sizeof(rel));
			if ((e = base_candidate(out, exe, strlen(exe))) || *out)
				return e;
		}
	}
	return base_candidate(out, OMEN_DATADIR, strlen(OMEN_DATADIR));
}

omen_caps omen_model_caps(const omen_model *m)
{
	return m->caps;
}
