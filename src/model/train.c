/* Training loop: weighted BCE, AdamW, gradient clipping, early stopping on
 * a time-later validation slice, Platt calibration, the two baselines and
 * the refit of the shipped model (DEVELOPERS.md "Training (train.c)").
 *
 * Determinism: each batch is split into OMEN_TRAIN_CHUNKS fixed chunks
 * whatever the thread count; every chunk has its own gradient buffer and
 * dropout stream (seeded by seed, step and chunk), and the buffers are
 * summed in chunk order (omen_reduce_fixed). So 1 and 2 threads give
 * bit-identical weights. Data-parallel processes (issue 13) split the same
 * fixed chunks between them (omen_train_opts.part/parts) and exchange the
 * chunk gradients before that sum, so any process count gives the weights
 * of one process too. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>
#include "omen/error.h"
#include "omen/rank.h"
#include "model/internal.h"

#define OMEN_TRAIN_CHUNKS 2
#define MIN_LABELLED 50
#define MIN_POSITIVES 10
#define MIN_CHECK 5       /* inducing and clean commits the shipped model's calibration needs */

void omen_train_opts_init(omen_train_opts *o)
{
	memset(o, 0, sizeof(*o));
	o->epochs = OMEN_EPOCHS_DEFAULT;
	o->patience = 5;
	o->batch = 32;
	o->lr = 5e-4f;
	o->weight_decay = 1e-2f;
	o->clip = 1.0f;
	o->dropout = 0.1f;
	o->threads = 0;
	o->seed = OMEN_SEED_DEFAULT;
	o->valid_frac = 0.15;
	o->test_frac = 0.15;
	o->refit = 1;
	o->warm_start = 1;
	o->warn_share = OMEN_WARN_SHARE_DEFAULT;
	o->dim = 32;
	o->channels = 32;
	{
		omen_caps c = OMEN_CAPS_DEFAULT;
		o->caps = c;
	}
}

/* Worker threads: the option, else the online cores; never more than the
 * fixed chunks of a batch. */
static int resolve_threads(int threads)
{
	long n = threads > 0 ? threads : sysconf(_SC_NPROCESSORS_ONLN);
	if (n < 1)
		n = 1;
	return n > OMEN_TRAIN_CHUNKS ? OMEN_TRAIN_CHUNKS : (int)n;
}

static int train_threads(const omen_train_opts *o)
{
	return resolve_threads(o->threads);
}

/* ---- one step over a batch ----------------------------------------------- */
typedef struct {
	const omen_model *m;
	const omen_dataset *ds;
	const size_t *idx;
	const int8_t *lab;      /* labels per dataset commit (NULL: the samples') */
	int nb, nthreads, train, part, parts;
	float p, pw;
	uint64_t seed, step;
	omen_ws ws[OMEN_TRAIN_CHUNKS];
	float *grad[OMEN_TRAIN_CHUNKS];
	float loss[OMEN_TRAIN_CHUNKS];
	float *logits;          /* eval: out [nb] */
	int err[OMEN_TRAIN_CHUNKS];
	const omen_sample **sp[OMEN_TRAIN_CHUNKS];
	float *yb[OMEN_TRAIN_CHUNKS];
} step_ctx;

/* Label of dataset commit i: lab when given, else the sample's own. */
static int pos_of(const omen_dataset *ds, const int8_t *lab, size_t i)
{
	return lab ? lab[i] > 0 : omen_dataset_get(ds, i)->label > 0;
}

static void chunk_run(step_ctx *x, int c)
{
	int lo = (int)((long)x->nb * c / OMEN_TRAIN_CHUNKS);
	int hi = (int)((long)x->nb * (c + 1) / OMEN_TRAIN_CHUNKS), n = hi - lo, i;
	omen_ws *w = &x->ws[c];
	omen_rng rng;
	x->loss[c] = 0;
	if (n <= 0 || (x->train && x->parts > 1 && c % x->parts != x->part))
		return;
	for (i = 0; i < n; i++) {
		x->sp[c][i] = omen_dataset_get(x->ds, x->idx[lo + i]);
		if (x->lab)
			x->yb[c][i] = (float)(x->lab[x->idx[lo + i]] > 0);
	}
	if (omen_ws_load(w, x->m, x->sp[c], x->lab ? x->yb[c] : NULL, n)) {
		x->err[c] = 1;
		return;
	}
	omen_rng_seed(&rng, x->seed ^ (x->step * 0x9e3779b97f4a7c15ull) ^ ((uint64_t)c << 56));
	omen_model_forward(x->m, w, x->train ? x->p : 0, x->train ? &rng : NULL);
	if (!x->train) {
		memcpy(x->logits + lo, w->z, (size_t)n * sizeof(float));
		return;
	}
	/* mean over the whole batch = sum over chunks of (n/nb) * chunk mean */
	x->loss[c] = omen_bce_forward(w->z, w->y, NULL, x->pw, n) * n / x->nb;
	omen_bce_backward(w->g_z, w->z, w->y, NULL, x->pw, n, (float)n / x->nb);
	omen_model_backward(x->m, w, x->grad[c], x->train ? x->p : 0);
}

static void step_worker(int tid, void *payload)
{
	step_ctx *x = payload;
	int c;
	for (c = tid; c < OMEN_TRAIN_CHUNKS; c += x->nthreads)
		chunk_run(x, c);
}

#define EVAL_BATCH 64   /* samples per forward-only step */

/* Workspaces, gradients and sample lists for batches of up to `batch`
 * samples (and of EVAL_BATCH, for ctx_logits). */
static int ctx_init(step_ctx *x, const omen_model *m, const omen_dataset *ds, int batch,
	int threads, int need_grad)
{
	int c;
	memset(x, 0, sizeof(*x));
	if (batch < EVAL_BATCH)
		batch = EVAL_BATCH;
	x->m = m;
	x->ds = ds;
	x->nthreads = threads < 1 ? 1 : threads > OMEN_TRAIN_CHUNKS ? OMEN_TRAIN_CHUNKS : threads;
	for (c = 0; c < OMEN_TRAIN_CHUNKS; c++) {
		x->sp[c] = malloc((size_t)(batch + 1) * sizeof(*x->sp[c]));
		x->yb[c] = malloc((size_t)(batch + 1) * sizeof(*x->yb[c]));
		if (!x->sp[c] || !x->yb[c])
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		if (need_grad) {
			x->grad[c] = aligned_alloc(64, (m->nparams * sizeof(float) + 63) / 64 * 64);
			if (!x->grad[c])
				return omen_error_set(OMEN_ENOMEM, "out of memory");
			/* kept zero between steps: only touched segments are cleared */
			memset(x->grad[c], 0, m->nparams * sizeof(float));
		}
	}
	return 0;
}

static void ctx_free(step_ctx *x)
{
	int c;
	for (c = 0; c < OMEN_TRAIN_CHUNKS; c++) {
		omen_ws_free(&x->ws[c]);
		free(x->grad[c]);
		free(x->sp[c]);
		free(x->yb[c]);
	}
}

static int run_chunks(step_ctx *x)
{
	int c;
	if (x->nthreads > 1)
		omen_parallel_run(x->nthreads, step_worker, x);
	else
		step_worker(0, x);
	for (c = 0; c < OMEN_TRAIN_CHUNKS; c++)
		if (x->err[c])
			return omen_error_set(OMEN_ENOMEM, "out of memory");
	return 0;
}

/* Raw logits of samples idx[0..n) through x's workspaces, which training
 * keeps between its validation passes (freeing and growing them again every
 * epoch left the allocator holding far more than they need). */
static int ctx_logits(step_ctx *x, float *out, const size_t *idx, size_t n)
{
	size_t i;
	int e = 0, train = x->train;
	x->train = 0;
	for (i = 0; i < n && !e; i += EVAL_BATCH) {
		x->idx = idx + i;
		x->nb = (int)(n - i < EVAL_BATCH ? n - i : EVAL_BATCH);
		x->logits = out + i;
		e = run_chunks(x);
	}
	x->train = train;
	return e;
}

static int eval_logits(float *out, const omen_model *m, const omen_dataset *ds, const size_t *idx,
	size_t n, int threads)
{
	step_ctx x;
	int e;
	if (!(e = ctx_init(&x, m, ds, EVAL_BATCH, threads, 0)))
		e = ctx_logits(&x, out, idx, n);
	ctx_free(&x);
	return e;
}

int omen_model_logits(float *out, const omen_model *m, const omen_dataset *ds, const size_t *idx,
	size_t n, int threads)
{
	return eval_logits(out, m, ds, idx, n, resolve_threads(threads));
}

static double auc_of(const float *z, const omen_dataset *ds, const int8_t *lab,
	const size_t *idx, size_t n)
{
	double *s = malloc((n + 1) * sizeof(double)), a;
	int *y = malloc((n + 1) * sizeof(int));
	size_t i;
	if (!s || !y) {
		free(s); free(y);
		return NAN;
	}
	for (i = 0; i < n; i++) {
		s[i] = z[i];
		y[i] = pos_of(ds, lab, idx[i]);
	}
	a = omen_auc(s, y, n);
	free(s); free(y);
	return a;
}

/* ---- standardization ----------------------------------------------------- */
static void fit_standardization(omen_model *m, const omen_dataset *ds, const size_t *idx, size_t n)
{
	double sm[OMEN_NMETRICS] = {0}, sq[OMEN_NMETRICS] = {0};
	double fm[OMEN_MODEL_NFN] = {0}, fq[OMEN_MODEL_NFN] = {0};
	size_t i, nf = 0;
	int j, f;
	for (i = 0; i < n; i++) {
		const omen_sample *s = omen_dataset_get(ds, idx[i]);
		double t[OMEN_NMETRICS];
		omen_metrics_transform(t, s->metrics);
		for (j = 0; j < OMEN_NMETRICS; j++) {
			sm[j] += t[j];
			sq[j] += t[j] * t[j];
		}
		for (f = 0; f < s->nfiles; f++) {
			const float *ff = s->file_facts + (size_t)f * OMEN_NFACTS;
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
	for (j = 0; j < OMEN_NMETRICS; j++) {
		double mu = n ? sm[j] / n : 0, var = n ? sq[j] / n - mu * mu : 0;
		m->metric_mean[j] = (float)mu;
		m->metric_scale[j] = var > 1e-12 ? (float)sqrt(var) : 1.0f;
	}
	for (j = 0; j < OMEN_MODEL_NFN; j++) {
		double mu = nf ? fm[j] / nf : 0, var = nf ? fq[j] / nf - mu * mu : 0;
		m->fact_mean[j] = (float)mu;
		m->fact_scale[j] = var > 1e-12 ? (float)sqrt(var) : 1.0f;
	}
}

/* The standardization of m fitted on samples idx[0..n) of ds (shared with
 * src/model/base.c, which adopts a base model for a young repository). */
void omen_model_fit_standardization(omen_model *m, const omen_dataset *ds, const size_t *idx,
	size_t n)
{
	fit_standardization(m, ds, idx, n);
}

static int fit_lr(omen_logreg *out, const omen_dataset *ds, const int8_t *lab, const size_t *idx,
	size_t n)
{
	double *X = malloc((n + 1) * OMEN_NMETRICS * sizeof(double)), *y = malloc((n + 1) * sizeof(double));
	size_t i;
	int e;
	if (!X || !y) {
		free(X); free(y);
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	}
	for (i = 0; i < n; i++) {
		const omen_sample *s = omen_dataset_get(ds, idx[i]);
		omen_metrics_transform(X + i * OMEN_NMETRICS, s->metrics);
		y[i] = pos_of(ds, lab, idx[i]);
	}
	e = omen_logreg_fit(out, X, y, (int)n, OMEN_NMETRICS, 1.0);
	free(X); free(y);
	return e;
}

/* ---- sparse steps ----------------------------------------------------------
 * A batch touches few rows of the two embedding tables (V x D, VM x D), so
 * the reduce, the clipping norm, the optimiser step and the clearing of the
 * chunk buffers run over segments: every dense tensor, plus each embedding
 * row the batch uses. Rows a batch does not use keep their moments as they
 * are (the "lazy" Adam of TensorFlow Addons and torch.optim.SparseAdam);
 * embeddings carry no weight decay, so nothing else differs from AdamW. */
typedef omen_span seg;

typedef struct {
	seg *s;
	size_t n, cap;
	uint32_t *stamp_tok, *stamp_msg;   /* step that last listed the row */
} seglist;

static int seg_push(seglist *l, size_t off, size_t n)
{
	if (OMEN_ARRAY_RESERVE(l->s, l->cap, l->n + 1))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	l->s[l->n].off = off;
	l->s[l->n].n = n;
	l->n++;
	return 0;
}

static int seg_build(seglist *l, const omen_model *m, const omen_dataset *ds, const size_t *idx,
	int nb, uint32_t step)
{
	int t, i, j, e;
	l->n = 0;
	for (t = 0; t < P_COUNT; t++)
		if (t != P_TOK_EMB && t != P_MSG_EMB && (e = seg_push(l, m->t[t].off, m->t[t].n)))
			return e;
	for (i = 0; i < nb; i++) {
		const omen_sample *s = omen_dataset_get(ds, idx[i]);
		for (j = 0; j < s->ntok; j++) {
			uint32_t r = s->tok[j] < (uint32_t)m->V ? s->tok[j] : s->tok[j] % (uint32_t)m->V;
			if (l->stamp_tok[r] == step)
				continue;
			l->stamp_tok[r] = step;
			if ((e = seg_push(l, m->t[P_TOK_EMB].off + (size_t)r * m->D, (size_t)m->D)))
				return e;
		}
		for (j = 0; j < s->nmsg; j++) {
			uint32_t r = s->msg[j] < (uint32_t)m->VM ? s->msg[j] : s->msg[j] % (uint32_t)m->VM;
			if (l->stamp_msg[r] == step)
				continue;
			l->stamp_msg[r] = step;
			if ((e = seg_push(l, m->t[P_MSG_EMB].off + (size_t)r * m->D, (size_t)m->D)))
				return e;
		}
	}
	return 0;
}

/* Sums the chunk gradients into g over the segments, clears the chunk
 * buffers there, clips g to max_norm (as torch.nn.utils.clip_grad_norm_)
 * and returns the norm before clipping. */
static float seg_reduce_clip(float *g, float *const *src, const seglist *l, float max_norm)
{
	float *p[OMEN_TRAIN_CHUNKS];
	double ss = 0;
	float norm;
	size_t i, k;
	int c;
	for (i = 0; i < l->n; i++) {
		const seg *q = &l->s[i];
		for (c = 0; c < OMEN_TRAIN_CHUNKS; c++)
			p[c] = src[c] + q->off;
		omen_reduce_fixed(g + q->off, p, OMEN_TRAIN_CHUNKS, q->n);
		for (c = 0; c < OMEN_TRAIN_CHUNKS; c++)
			memset(p[c], 0, q->n * sizeof(float));
		for (k = 0; k < q->n; k++)
			ss += (double)g[q->off + k] * g[q->off + k];
	}
	norm = (float)sqrt(ss);
	if (max_norm > 0 && norm > max_norm && isfinite(norm)) {
		float sc = max_norm / (norm + 1e-6f);
		for (i = 0; i < l->n; i++)
			for (k = 0; k < l->s[i].n; k++)
				g[l->s[i].off + k] *= sc;
	}
	return norm;
}

/* ---- the loop ------------------------------------------------------------ */
typedef struct {
	int epochs_run, best_epoch;
	double best_auc;
} fit_info;

/* Trains m (already standardized and initialised) on train_idx; with a
 * validation slice, early-stops on its AUC and restores the best epoch;
 * without one, runs exactly o->epochs epochs. */
static int fit(omen_model *m, fit_info *fi, const omen_dataset *ds, const int8_t *lab,
	const size_t *train_idx,
	size_t n_train, const size_t *valid_idx, size_t n_valid, const omen_train_opts *o,
	int epochs, int report)
{
	step_ctx x;
	seglist sl;
	omen_adamw aw = OMEN_ADAMW_DEFAULT;
	float *g = NULL, *mom = NULL, *vel = NULL, *best = NULL, *vz = NULL;
	uint8_t *decay = NULL;
	size_t *order = NULL, i, npos = 0, step = 0;
	int e, ep, threads = train_threads(o), since_best = 0, t;
	double t0 = omen_now();
	omen_rng rng;
	float pw;
	int use_valid = 0;

	memset(fi, 0, sizeof(*fi));
	memset(&sl, 0, sizeof(sl));
	fi->best_auc = -1;
	if ((e = ctx_init(&x, m, ds, o->batch, threads, 1)))
		goto out;
	sl.stamp_tok = calloc((size_t)m->V, sizeof(uint32_t));
	sl.stamp_msg = calloc((size_t)m->VM, sizeof(uint32_t));
	if (!sl.stamp_tok || !sl.stamp_msg) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	g = aligned_alloc(64, (m->nparams * sizeof(float) + 63) / 64 * 64);
	mom = calloc(m->nparams, sizeof(float));
	vel = calloc(m->nparams, sizeof(float));
	best = malloc(m->nparams * sizeof(float));
	decay = calloc(m->nparams, 1);
	order = malloc((n_train + 1) * sizeof(size_t));
	vz = malloc((n_valid + 1) * sizeof(float));
	if (!g || !mom || !vel || !best || !decay || !order || !vz) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	for (t = 0; t < P_COUNT; t++)
		if (m->t[t].decay)
			memset(decay + m->t[t].off, 1, m->t[t].n);
	for (i = 0; i < n_train; i++) {
		order[i] = train_idx[i];
		npos += (size_t)pos_of(ds, lab, train_idx[i]);
	}
	if (n_valid) {
		size_t vp = 0;
		for (i = 0; i < n_valid; i++)
			vp += (size_t)pos_of(ds, lab, valid_idx[i]);
		use_valid = vp > 0 && vp < n_valid;
	}
	pw = npos ? (float)(n_train - npos) / (float)npos : 1.0f;
	x.pw = pw;
	x.lab = lab;
	x.p = o->dropout;
	x.train = 1;
	x.seed = o->seed;
	x.part = o->part;
	x.parts = o->exchange ? o->parts : 1;
	aw.lr = o->lr;
	aw.weight_decay = o->weight_decay;
	memcpy(best, m->params, m->nparams * sizeof(float));
	if (use_valid && (o->warm_start || o->init)) {
		/* epoch 0 (the warm start) is a candidate too */
		if ((e = ctx_logits(&x, vz, valid_idx, n_valid)))
			goto out;
		fi->best_auc = auc_of(vz, ds, lab, valid_idx, n_valid);
		fi->best_epoch = 0;
	}
	omen_rng_seed(&rng, o->seed ^ 0x5eedull);
	for (ep = 1; ep <= epochs; ep++) {
		double loss_sum = 0;
		size_t nb = 0;
		/* Fisher-Yates shuffle of the training order */
		for (i = n_train; i > 1; i--) {
			size_t j = (size_t)(omen_rng_next(&rng) % i), tmp = order[i - 1];
			order[i - 1] = order[j];
			order[j] = tmp;
		}
		for (i = 0; i < n_train; i += (size_t)o->batch) {
			float loss = 0, norm;
			int c;
			x.idx = order + i;
			x.nb = (int)(n_train - i < (size_t)o->batch ? n_train - i : (size_t)o->batch);
			x.step = ++step;
			if ((e = run_chunks(&x)))
				goto out;
			if ((e = seg_build(&sl, m, ds, x.idx, x.nb, (uint32_t)step)))
				goto out;
			if (x.parts > 1 && (e = o->exchange(o->exchange_ctx, x.grad, x.loss,
					OMEN_TRAIN_CHUNKS, sl.s, sl.n)))
				goto out;
			for (c = 0; c < OMEN_TRAIN_CHUNKS; c++)
				loss += x.loss[c];
			norm = seg_reduce_clip(g, x.grad, &sl, o->clip);
			if (!isfinite(loss) || !isfinite(norm)) {
				e = omen_error_set(OMEN_ERROR, "training diverged at step %zu (epoch %d): "
					"non-finite %s; nothing saved", step, ep, isfinite(loss) ? "gradient" : "loss");
				goto out;
			}
			for (c = 0; c < (int)sl.n; c++) {
				const seg *q = &sl.s[c];
				omen_adamw_step(m->params + q->off, g + q->off, mom + q->off, vel + q->off, q->n,
					&aw, (int)step, decay + q->off);
			}
			loss_sum += loss;
			nb++;
		}
		fi->epochs_run = ep;
		if (use_valid) {
			double auc;
			if ((e = ctx_logits(&x, vz, valid_idx, n_valid)))
				goto out;
			auc = auc_of(vz, ds, lab, valid_idx, n_valid);
			if (auc > fi->best_auc + 1e-4) {
				fi->best_auc = auc;
				fi->best_epoch = ep;
				since_best = 0;
				memcpy(best, m->params, m->nparams * sizeof(float));
			} else {
				since_best++;
			}
		} else {
			fi->best_epoch = ep;
			memcpy(best, m->params, m->nparams * sizeof(float));
		}
		if (report && o->progress) {
			double el = omen_now() - t0;
			int left = use_valid && epochs - ep > o->patience - since_best
				? o->patience - since_best : epochs - ep;
			o->progress(o->payload, ep, epochs, nb ? (float)(loss_sum / nb) : 0,
				use_valid ? (float)fi->best_auc : NAN, el / ep * left);
		}
		if (use_valid && since_best >= o->patience)
			break;
	}
	memcpy(m->params, best, m->nparams * sizeof(float));
	if (!use_valid)
		fi->best_epoch = fi->epochs_run;
out:
	ctx_free(&x);
	free(sl.s); free(sl.stamp_tok); free(sl.stamp_msg);
	free(g); free(mom); free(vel); free(best); free(decay); free(order); free(vz);
	return e;
}

/* Platt scaling and the threshold (warning budget, calib.c) of m on idx;
 * labels from lab (NULL: the samples'). */
static int calibrate(omen_model *m, const omen_dataset *ds, const int8_t *lab, const size_t *idx,
	size_t n, int threads, double share, const size_t *fire_idx, size_t nfire)
{
	size_t nz = n > nfire ? n : nfire;
	float *z = malloc((nz + 1) * sizeof(float));
	double *f = malloc((n + 1) * sizeof(double)), *p = malloc((n + 1) * sizeof(double));
	double *q = malloc((nfire + 1) * sizeof(double));
	int *y = malloc((n + 1) * sizeof(int)), e = 0;
	size_t i, pos = 0;
	if (!z || !f || !p || !y || !q) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	m->platt_a = 1;
	m->platt_b = 0;
	m->threshold = 0.5f;
	if ((e = eval_logits(z, m, ds, idx, n, threads)))
		goto out;
	for (i = 0; i < n; i++) {
		f[i] = z[i];
		y[i] = pos_of(ds, lab, idx[i]);
		pos += (size_t)y[i];
	}
	if (pos == 0 || pos == n)
		goto out;   /* nothing to calibrate against: identity */
	if (omen_platt_fit(&m->platt_a, &m->platt_b, f, y, n)) {
		omen_error_clear();
		m->platt_a = 1;
		m->platt_b = 0;
	}
	for (i = 0; i < n; i++)
		p[i] = omen_platt_apply(m->platt_a, m->platt_b, f[i]);
	if (nfire && (e = eval_logits(z, m, ds, fire_idx, nfire, threads)))
		goto out;
	for (i = 0; i < nfire; i++)
		q[i] = omen_platt_apply(m->platt_a, m->platt_b, z[i]);
	e = omen_calib_threshold(m, p, y, n, nfire ? q : NULL, nfire, share);
out:
	free(z); free(f); free(p); free(y); free(q);
	return e;
}

/* Starts the network at the logistic regression on the metrics: the
 * linear skip takes its coefficients (both standardize the same
 * log1p-transformed metrics with the train split's mean and population
 * std), the output bias its intercept shifted by log(pos_weight) for the
 * weighted loss, and the deep output layer starts at zero, so the deep part
 * learns what the metrics miss (zero-initialised last layer: Goyal et al.,
 * "Accurate, Large Minibatch SGD", 2017). */
static void warm_start(omen_model *m, const omen_dataset *ds, const int8_t *lab, const size_t *idx,
	size_t n)
{
	size_t i, pos = 0;
	int j;
	float *lin = m->params + m->t[P_LIN_W].off;
	for (i = 0; i < n; i++)
		pos += (size_t)pos_of(ds, lab, idx[i]);
	for (j = 0; j < OMEN_NMETRICS; j++)
		lin[j] = (float)(m->lr.w[j] * m->metric_scale[j] / m->lr.scale[j]);
	/* the model centres with its own mean: fold the difference into the bias */
	{
		double b = m->lr.b;
		for (j = 0; j < OMEN_NMETRICS; j++)
			b += m->lr.w[j] * (m->metric_mean[j] - m->lr.mean[j]) / m->lr.scale[j];
		if (pos && pos < n)
			b += log((double)(n - pos) / (double)pos);
		m->params[m->t[P_H2_B].off] = (float)b;
	}
	memset(m->params + m->t[P_H2_W].off, 0, m->t[P_H2_W].n * sizeof(float));
}

static int train_core(omen_model **out, fit_info *fi, const omen_dataset *ds, const int8_t *lab,
	const size_t *train_idx, size_t n_train, const size_t *valid_idx, size_t n_valid,
	const omen_train_opts *o, int epochs, int report)
{
	omen_model *m = NULL;
	int e;
	*out = NULL;
	if ((e = omen_model_new(&m, o->dim, o->channels, o->seed)))
		return e;
	m->caps = o->caps;
	fit_standardization(m, ds, train_idx, n_train);
	if ((e = fit_lr(&m->lr, ds, lab, train_idx, n_train)))
		goto out;
	if (o->init) {
		if ((e = omen_model_copy_weights(m, o->init)))
			goto out;
	} else if (o->warm_start) {
		warm_start(m, ds, lab, train_idx, n_train);
	}
	if ((e = fit(m, fi, ds, lab, train_idx, n_train, valid_idx, n_valid, o, epochs, report)))
		goto out;
	if (n_valid && (e = calibrate(m, ds, lab, valid_idx, n_valid, train_threads(o), o->warn_share,
			NULL, 0)))
		goto out;
	*out = m;
	m = NULL;
out:
	omen_model_free(m);
	return e;
}

int omen_model_train_subset(omen_model **out, const omen_dataset *ds,
	const size_t *train_idx, size_t n_train, const size_t *valid_idx, size_t n_valid,
	const omen_train_opts *o)
{
	fit_info fi;
	if (!n_train)
		return omen_error_set(OMEN_EINVAL, "cannot train: no training commits");
	return train_core(out, &fi, ds, o->labels, train_idx, n_train, valid_idx, n_valid, o,
		o->epochs, 1);
}

/* ---- whole run ----------------------------------------------------------- */
static void slice_scores(omen_slice_scores *out, const double *score, const double *prob,
	const int *y, const double *effort, size_t n)
{
	size_t i;
	omen_effort_scores ef;
	memset(out, 0, sizeof(*out));
	out->n = n;
	for (i = 0; i < n; i++)
		out->positives += (size_t)y[i];
	out->auc = omen_auc(score, y, n);
	out->ap = omen_average_precision(score, y, n);
	out->brier = prob ? omen_brier(prob, y, n) : NAN;
	ef = omen_effort(score, y, effort, n);
	out->recall20 = ef.recall_at_20;
}

static cJSON *scores_json(const omen_slice_scores *s)
{
	cJSON *o = cJSON_CreateObject();
	cJSON_AddNumberToObject(o, "n", (double)s->n);
	cJSON_AddNumberToObject(o, "positives", (double)s->positives);
	if (isfinite(s->auc)) cJSON_AddNumberToObject(o, "auc", s->auc);
	if (isfinite(s->ap)) cJSON_AddNumberToObject(o, "ap", s->ap);
	if (isfinite(s->brier)) cJSON_AddNumberToObject(o, "brier", s->brier);
	if (isfinite(s->recall20)) cJSON_AddNumberToObject(o, "recall_at_20_effort", s->recall20);
	return o;
}

static void iso_time(char *buf, size_t n, int64_t t)
{
	time_t tt = (time_t)t;
	struct tm tm;
	gmtime_r(&tt, &tm);
	strftime(buf, n, "%Y-%m-%dT%H:%M:%SZ", &tm);
}

typedef struct {
	int64_t t;
	size_t i;
} tkey;

static int cmp_tkey(const void *a, const void *b)
{
	const tkey *x = a, *y = b;
	if (x->t != y->t)
		return x->t < y->t ? -1 : 1;
	return (x->i > y->i) - (x->i < y->i);
}

/* The shipped model's check on the tail of the test slice (see
 * omen_ship_check): calibrated probabilities against the labels known now. */
static int ship_check(omen_ship_check *c, const omen_model *m, const omen_dataset *ds,
	const size_t *idx, size_t n, double base, int threads)
{
	float *z = malloc((n + 1) * sizeof(float));
	double *p = malloc((n + 1) * sizeof(double));
	int *y = malloc((n + 1) * sizeof(int)), e = 0;
	size_t i;
	omen_cls_scores cs;
	double bb[1];
	if (!z || !p || !y) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	if ((e = eval_logits(z, m, ds, idx, n, threads)))
		goto out;
	c->n = n;
	c->mean_prob = 0;
	for (i = 0; i < n; i++) {
		p[i] = omen_platt_apply(m->platt_a, m->platt_b, z[i]);
		y[i] = omen_dataset_get(ds, idx[i])->label > 0;
		c->positives += (size_t)y[i];
		c->mean_prob += p[i] / (double)n;
	}
	c->start = n ? omen_dataset_get(ds, idx[0])->time : 0;
	c->brier = omen_brier(p, y, n);
	bb[0] = base;
	c->brier_base = 0;
	for (i = 0; i < n; i++)
		c->brier_base += (bb[0] - y[i]) * (bb[0] - y[i]) / (double)n;
	c->ece = omen_ece(p, y, n, 10, NULL, NULL, NULL);
	c->threshold = m->threshold;
	cs = omen_classify_at(p, y, n, m->threshold);
	c->tp = cs.tp;
	c->fp = cs.fp;
	c->fn = cs.fn;
	c->precision = cs.tp + cs.fp ? cs.precision : NAN;
	c->recall = cs.tp + cs.fn ? cs.recall : NAN;
	c->f1 = cs.tp + cs.fp && cs.tp + cs.fn ? cs.f1 : NAN;
out:
	free(z); free(p); free(y);
	return e;
}

int omen_model_train(omen_model **out, omen_train_report *rep, const omen_dataset *ds,
	const omen_train_opts *o)
{
	size_t n = omen_dataset_size(ds), nl = 0, pos = 0, i, n_test, n_valid, n_train, ncand;
	size_t npool = 0, n_calib;
	int held;
	size_t *idx = NULL;
	tkey *ord = NULL;
	int8_t *cut = NULL, *lnow = NULL;
	int64_t *tm = NULL, t_s, gap, newest_clean = INT64_MIN;
	omen_label_clock own;
	const omen_label_clock *clk = o->clock;
	omen_model *eval_m = NULL, *m = NULL;
	float *z = NULL;
	double *sc = NULL, *pr = NULL, *ef = NULL, *lrp = NULL, *la = NULL, t0 = omen_now();
	int *y = NULL, e = 0, threads = train_threads(o);
	fit_info fi, fi2;
	cJSON *meta = NULL, *tr, *te;
	char date[32];

	*out = NULL;
	memset(rep, 0, sizeof(*rep));
	memset(&own, 0, sizeof(own));
	memset(&fi, 0, sizeof(fi));
	idx = malloc((n + 1) * sizeof(size_t));
	ord = malloc((n + 1) * sizeof(*ord));
	cut = malloc(n + 1);
	lnow = malloc(n + 1);
	tm = malloc((n + 1) * sizeof(*tm));
	if (!idx || !ord || !cut || !lnow || !tm) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	for (i = 0; i < n; i++) {
		const omen_sample *s = omen_dataset_get(ds, i);
		ord[i].t = tm[i] = s->time;
		ord[i].i = i;
		lnow[i] = (int8_t)(s->label < 0 ? -1 : s->label > 0);
		if (s->label < 0)
			continue;
		nl++;
		pos += s->label > 0;
		if (s->label == 0 && s->time > newest_clean)
			newest_clean = s->time;
	}
	if (nl < MIN_LABELLED || pos < MIN_POSITIVES || nl - pos < MIN_POSITIVES) {
		e = omen_error_set(OMEN_EINVAL, "too few labelled commits to train: %zu labelled "
			"(%zu inducing, %zu clean), need at least %d labelled with %d inducing and %d clean",
			nl, pos, nl - pos, MIN_LABELLED, MIN_POSITIVES, MIN_POSITIVES);
		goto out;
	}
	if (clk && clk->n != n) {
		e = omen_error_set(OMEN_EINVAL, "cannot train: the label clock covers %zu commits, "
			"not %zu", clk->n, n);
		goto out;
	}
	if (!clk) {
		if ((e = omen_label_clock_known(&own, tm, lnow, n)))
			goto out;
		clk = &own;
	}
	gap = omen_label_clock_window(clk) * 86400;
	rep->gap_days = omen_label_clock_window(clk);
	/* 1. the test slice: the newest test_frac of the commits labelled now,
	 * up to the newest clean one (after it, inside the verification
	 * window, only inducing commits have a label) */
	qsort(ord, n, sizeof(*ord), cmp_tkey);
	ncand = 0;
	for (i = 0; i < n; i++) {
		size_t j = ord[i].i;
		if (lnow[j] < 0)
			continue;
		if (tm[j] > newest_clean) {
			rep->n_window_left_out++;
			continue;
		}
		idx[ncand++] = j;   /* candidates, oldest first */
	}
	if (o->test_start) {
		t_s = o->test_start;
	} else {
		n_test = (size_t)(nl * o->test_frac + 0.5);
		if (n_test < 1) n_test = 1;
		if (n_test >= ncand) n_test = ncand ? ncand - 1 : 0;
		t_s = ncand ? tm[idx[ncand - n_test]] : 0;
	}
	n_test = 0;
	for (i = 0; i < ncand; i++)
		if (tm[idx[i]] >= t_s)
			idx[n_test++] = idx[i];   /* the test slice, oldest first */
	memmove(idx + n - n_test, idx, n_test * sizeof(size_t));
	rep->test_start = t_s;
	rep->test_end = n_test ? tm[idx[n - 1]] : t_s;
	rep->labels_known = t_s;
	/* 2. training and validation: every commit older than the cut less the
	 * window, labelled as known at the cut */
	omen_label_clock_at(cut, clk, t_s);
	for (i = 0; i < n; i++) {
		size_t j = ord[i].i;
		if (tm[j] >= t_s) {
			break;
		} else if (tm[j] >= t_s - gap) {
			rep->n_gap += lnow[j] >= 0;
		} else if (cut[j] >= 0) {
			idx[npool++] = j;
			rep->n_relabelled += lnow[j] > 0 && cut[j] == 0;
		}
	}
	/* validation keeps the shares of the default split (valid : train) */
	n_valid = (size_t)((double)npool * o->valid_frac / (1.0 - o->test_frac > 0 ?
		1.0 - o->test_frac : 1.0) + 0.5);
	if (n_valid < 1) n_valid = 1;
	if (n_valid > npool / 2) n_valid = npool / 2;
	n_train = npool - n_valid;
	rep->n_train = n_train; rep->n_valid = n_valid; rep->n_test = n_test;
	for (i = 0; i < npool; i++) {
		int p = cut[idx[i]] > 0;
		if (i < n_train) rep->pos_train += (size_t)p;
		else rep->pos_valid += (size_t)p;
	}
	for (i = 0; i < n_test; i++)
		rep->pos_test += lnow[idx[n - n_test + i]] > 0;
	for (i = 0; i < n; i++)
		rep->capped_commits += omen_dataset_get(ds, i)->capped != 0;
	if (rep->pos_train < 5 || rep->pos_valid < 1 || rep->pos_test < 1 || n_test < 2) {
		char d1[16];
		omen_format_date(d1, t_s);
		e = omen_error_set(OMEN_EINVAL, "too few inducing commits in the time-ordered split: "
			"train %zu, validation %zu (as known on %s), test %zu; need at least 5, 1 and 1",
			rep->pos_train, rep->pos_valid, d1, rep->pos_test);
		goto out;
	}
	/* 1. evaluation model: train on the oldest, early-stop on the next slice */
	if ((e = train_core(&eval_m, &fi, ds, cut, idx, n_train, idx + n_train, n_valid, o,
			o->epochs, 1)))
		goto out;
	rep->epochs_run = fi.epochs_run;
	rep->best_epoch = fi.best_epoch;
	/* 2. the three scorers on the test slice, with the labels known now */
	z = malloc((n_test + 1) * sizeof(float));
	sc = malloc((n_test + 1) * sizeof(double));
	pr = malloc((n_test + 1) * sizeof(double));
	ef = malloc((n_test + 1) * sizeof(double));
	lrp = malloc((n_test + 1) * sizeof(double));
	la = malloc((n_test + 1) * sizeof(double));
	y = malloc((n_test + 1) * sizeof(int));
	if (!z || !sc || !pr || !ef || !lrp || !la || !y) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	if ((e = eval_logits(z, eval_m, ds, idx + n - n_test, n_test, threads)))
		goto out;
	for (i = 0; i < n_test; i++) {
		const omen_sample *s = omen_dataset_get(ds, idx[n - n_test + i]);
		sc[i] = z[i];
		pr[i] = omen_platt_apply(eval_m->platt_a, eval_m->platt_b, z[i]);
		y[i] = s->label > 0;
		ef[i] = (double)s->la + s->ld;
		lrp[i] = omen_model_predict_lr(eval_m, s);
		la[i] = s->la;
	}
	slice_scores(&rep->model, sc, pr, y, ef, n_test);
	slice_scores(&rep->lr_metrics, lrp, lrp, y, ef, n_test);
	slice_scores(&rep->lines_added, la, NULL, y, ef, n_test);
	rep->threshold = eval_m->threshold;
	rep->threshold_f1 = eval_m->threshold_f1;
	rep->warn_share = o->warn_share;
	/* 3. shipped model: refit on train+valid (as known at the cut) for the
	 * chosen epoch count, calibrated and thresholded on the older half of
	 * the test slice, checked on its newer half (never trained nor
	 * calibrated on) */
	n_calib = n_test / 2;
	rep->refit = o->refit != 0;
	for (i = 0; i < n_calib; i++)
		rep->check.pos_calib += lnow[idx[n - n_test + i]] > 0;
	for (i = n_calib; i < n_test; i++)
		rep->check.positives += lnow[idx[n - n_test + i]] > 0;
	held = rep->check.pos_calib >= MIN_CHECK && n_calib - rep->check.pos_calib >= MIN_CHECK &&
		rep->check.positives >= 1;
	if (o->refit) {
		if ((e = train_core(&m, &fi2, ds, cut, idx, n_train + n_valid, NULL, 0, o,
				fi.best_epoch > 0 ? fi.best_epoch : 1, 1)))
			goto out;
		/* the warning budget counts its share on every commit newer than
		 * the last one this model trained on, labelled or not: the test
		 * slice and the unlabelled newest commits, what the hook sees
		 * next (issue 12) */
		size_t first = idx[n_train + n_valid - 1] + 1, nfire, *fire;
		if (n - first > OMEN_WARN_FIRE_MAX)
			first = n - OMEN_WARN_FIRE_MAX;   /* the newest of them */
		nfire = n - first;
		if (!(fire = malloc((nfire + 1) * sizeof(size_t)))) {
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
		for (i = 0; i < nfire; i++)
			fire[i] = first + i;
		e = held ? calibrate(m, ds, NULL, idx + n - n_test, n_calib, threads, o->warn_share,
			fire, nfire) : 0;
		/* a slope <= 0 is a calibration part too small to trust */
		if (!e && held && m->platt_a <= 0)
			held = 0;
		/* too few inducing or clean commits for a held-out check: calibrated
		 * on the whole test slice, as before issue 16, and no check */
		if (!e && !held)
			e = calibrate(m, ds, NULL, idx + n - n_test, n_test, threads, o->warn_share, fire,
				nfire);
		free(fire);
		if (e)
			goto out;
		omen_model_free(eval_m);
		eval_m = NULL;
	} else {
		m = eval_m;
		eval_m = NULL;
	}
	rep->check.positives = 0;
	if (held) {
		rep->check.n_calib = n_calib;
		if ((e = ship_check(&rep->check, m, ds, idx + n - n_test + n_calib, n_test - n_calib,
				n_calib ? (double)rep->check.pos_calib / (double)n_calib : 0, threads)))
			goto out;
	} else {
		memset(&rep->check, 0, sizeof(rep->check));
		rep->check.n_calib = o->refit ? n_test : 0;
		rep->check.threshold = m->threshold;
		rep->check.brier = rep->check.brier_base = rep->check.ece = NAN;
		rep->check.precision = rep->check.recall = rep->check.f1 = NAN;
	}
	/* metrics state and head: the whole dataset. The head is the commit
	 * the history was read from (its state counts every non-merge
	 * ancestor), which is not the newest sample when it is a merge; a
	 * range or an in-memory dataset falls back to the newest sample */
	if (omen_dataset_tip(ds)) {
		memcpy(m->head, omen_dataset_tip(ds), sizeof(m->head));
	} else if (n) {
		const omen_sample *last = omen_dataset_get(ds, n - 1);
		memcpy(m->head, last->id, sizeof(m->head));
	}
	if (omen_dataset_metrics(ds)) {
		if ((e = omen_metrics_save(omen_dataset_metrics(ds), &m->mstate_blob)) ||
			(e = omen_metrics_load(&m->mstate, m->mstate_blob.ptr, m->mstate_blob.len)))
			goto out;
	}
	rep->seconds = omen_now() - t0;
	/* metadata */
	meta = cJSON_CreateObject();
	tr = cJSON_CreateObject();
	{
		const omen_sample *first = omen_dataset_get(ds, idx[0]);
		const omen_sample *lastl = omen_dataset_get(ds, idx[n - 1]);
		time_t now = time(NULL);
		iso_time(date, sizeof(date), (int64_t)now);
		cJSON_AddStringToObject(tr, "date", date);
		cJSON_AddStringToObject(tr, "first", first->id);
		iso_time(date, sizeof(date), first->time);
		cJSON_AddStringToObject(tr, "first_time", date);
		cJSON_AddStringToObject(tr, "last_labelled", lastl->id);
		iso_time(date, sizeof(date), lastl->time);
		cJSON_AddStringToObject(tr, "last_labelled_time", date);
	}
	cJSON_AddNumberToObject(tr, "commits", (double)n);
	cJSON_AddNumberToObject(tr, "n_train", (double)n_train);
	cJSON_AddNumberToObject(tr, "n_valid", (double)n_valid);
	cJSON_AddNumberToObject(tr, "n_test", (double)n_test);
	cJSON_AddNumberToObject(tr, "pos_train", (double)rep->pos_train);
	cJSON_AddNumberToObject(tr, "pos_valid", (double)rep->pos_valid);
	cJSON_AddNumberToObject(tr, "pos_test", (double)rep->pos_test);
	cJSON_AddNumberToObject(tr, "capped_commits", (double)rep->capped_commits);
	cJSON_AddNumberToObject(tr, "epochs_run", fi.epochs_run);
	cJSON_AddNumberToObject(tr, "best_epoch", fi.best_epoch);
	cJSON_AddNumberToObject(tr, "valid_auc", fi.best_auc);
	cJSON_AddNumberToObject(tr, "seed", (double)o->seed);
	cJSON_AddNumberToObject(tr, "lr", o->lr);
	cJSON_AddNumberToObject(tr, "batch", o->batch);
	cJSON_AddNumberToObject(tr, "seconds", rep->seconds);
	cJSON_AddBoolToObject(tr, "refit", o->refit != 0);
	cJSON_AddStringToObject(tr, "calibrated_on", !o->refit ? "validation" :
		rep->check.n ? "test_older_half" : "test");
	iso_time(date, sizeof(date), rep->labels_known);
	cJSON_AddStringToObject(tr, "labels_known", date);
	cJSON_AddNumberToObject(tr, "gap_days", (double)rep->gap_days);
	cJSON_AddNumberToObject(tr, "relabelled_clean_at_cut", (double)rep->n_relabelled);
	cJSON_AddItemToObject(meta, "training", tr);
	if (o->init && o->init->meta) {   /* fine-tuned: say from which base (issue 11) */
		const cJSON *b = cJSON_GetObjectItemCaseSensitive(o->init->meta, "base");
		if (b)
			cJSON_AddItemToObject(meta, "from_base", cJSON_Duplicate(b, 1));
	}
	te = cJSON_CreateObject();
	cJSON_AddItemToObject(te, "model", scores_json(&rep->model));
	cJSON_AddItemToObject(te, "lr_metrics", scores_json(&rep->lr_metrics));
	cJSON_AddItemToObject(te, "lines_added", scores_json(&rep->lines_added));
	cJSON_AddNumberToObject(te, "threshold", rep->threshold);
	cJSON_AddItemToObject(meta, "test", te);
	if (rep->check.n) {
		cJSON *ck = cJSON_CreateObject();
		const omen_ship_check *c = &rep->check;
		iso_time(date, sizeof(date), c->start);
		cJSON_AddStringToObject(ck, "start", date);
		cJSON_AddNumberToObject(ck, "n", (double)c->n);
		cJSON_AddNumberToObject(ck, "positives", (double)c->positives);
		cJSON_AddNumberToObject(ck, "n_calib", (double)c->n_calib);
		if (isfinite(c->brier)) cJSON_AddNumberToObject(ck, "brier", c->brier);
		if (isfinite(c->brier_base)) cJSON_AddNumberToObject(ck, "brier_base", c->brier_base);
		if (isfinite(c->ece)) cJSON_AddNumberToObject(ck, "ece", c->ece);
		cJSON_AddNumberToObject(ck, "threshold", c->threshold);
		if (isfinite(c->precision)) cJSON_AddNumberToObject(ck, "precision", c->precision);
		if (isfinite(c->recall)) cJSON_AddNumberToObject(ck, "recall", c->recall);
		cJSON_AddItemToObject(meta, "check", ck);
	}
	{
		cJSON *dr = omen_drift_ref_json(ds, idx, n_train, OMEN_DRIFT_RECENT);
		if (dr)
			cJSON_AddItemToObject(meta, "drift", dr);
	}
	m->meta = meta;
	meta = NULL;
	*out = m;
	m = NULL;
out:
	cJSON_Delete(meta);
	omen_model_free(eval_m);
	omen_model_free(m);
	omen_label_clock_free(&own);
	free(idx); free(ord); free(cut); free(lnow); free(tm);
	free(z); free(sc); free(pr); free(ef); free(lrp); free(la); free(y);
	return e;
}
