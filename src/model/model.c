/* The hierarchical commit model: forward and backward passes composed from
 * the kernels of src/nn/ (DEVELOPERS.md "Model" has the
 * dimension table and the derivations).
 *
 *   tokens [T] -> embed [T,D] -> conv1d k=3 per hunk [T,C] -> ReLU
 *     -> attnpool per hunk [H,C] -> attnpool per file [F,C]
 *     + facts [F,NFN] W_f + b_f + ext_emb[ext] -> attnpool per commit [B,C]
 *   message tokens -> embedding bag (mean) [B,D]
 *   [commit | message | standardized metrics] [B,C+D+NM]
 *     -> linear [B,C] -> GELU -> dropout -> linear [B,1]
 *   logit = that + metrics [B,NM] W_lin (a linear "wide" skip, after Cheng
 *   et al., "Wide & Deep Learning for Recommender Systems", DLRS 2016)
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/base.h"
#include "model/internal.h"

static const char *const tensor_names[P_COUNT] = {
	"tok_emb", "conv_w", "conv_b", "q_tok", "q_hunk", "fact_w", "fact_b", "ext_emb",
	"q_file", "msg_emb", "h1_w", "h1_b", "h2_w", "h2_b", "lin_w"
};

#define ALIGNF 16   /* floats per 64 bytes */

int omen_model_layout(omen_model *m)
{
	int shapes[P_COUNT][3] = {
		{m->V, m->D, 1}, {m->K, m->D, m->C}, {m->C, 1, 1}, {m->C, 1, 1}, {m->C, 1, 1},
		{m->NFN, m->C, 1}, {m->C, 1, 1}, {m->NE, m->C, 1}, {m->C, 1, 1}, {m->VM, m->D, 1},
		{m->HIN, m->HH, 1}, {m->HH, 1, 1}, {m->HH, 1, 1}, {1, 1, 1}, {m->NM, 1, 1}
	};
	static const int decay[P_COUNT] = {0, 1, 0, 0, 0, 1, 0, 0, 0, 0, 1, 0, 1, 0, 1};
	size_t off = 0;
	int i;
	for (i = 0; i < P_COUNT; i++) {
		omen_ptensor *t = &m->t[i];
		t->name = tensor_names[i];
		memcpy(t->shape, shapes[i], sizeof(t->shape));
		t->n = (size_t)shapes[i][0] * shapes[i][1] * shapes[i][2];
		t->off = off;
		t->decay = decay[i];
		off += (t->n + ALIGNF - 1) / ALIGNF * ALIGNF;
	}
	m->nparams = off;
	free(m->params);
	m->params = aligned_alloc(64, off * sizeof(float));
	if (!m->params)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	memset(m->params, 0, off * sizeof(float));
	return 0;
}

int omen_model_alloc(omen_model **out, int D, int C)
{
	omen_model *m;
	int j, e;
	*out = NULL;
	if (D < 1 || D > 1024 || C < 1 || C > 1024)
		return omen_error_set(OMEN_EINVAL, "bad model dimensions: D=%d C=%d", D, C);
	m = calloc(1, sizeof(*m));
	if (!m)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	m->D = D;
	m->C = C;
	m->V = OMEN_VOCAB;
	m->VM = OMEN_MSG_VOCAB;
	m->NE = OMEN_EXT_BUCKETS;
	m->NM = OMEN_NMETRICS;
	m->NFN = OMEN_MODEL_NFN;
	m->HIN = C + D + OMEN_NMETRICS;
	m->HH = C;
	m->K = OMEN_MODEL_KW;
	for (j = 0; j < OMEN_NMETRICS; j++) {
		m->metric_mean[j] = 0;
		m->metric_scale[j] = 1;
	}
	for (j = 0; j < OMEN_MODEL_NFN; j++) {
		m->fact_mean[j] = 0;
		m->fact_scale[j] = 1;
	}
	m->platt_a = 1;
	m->platt_b = 0;
	m->threshold = 0.5f;
	{
		omen_caps c = OMEN_CAPS_DEFAULT;
		m->caps = c;
	}
	if ((e = omen_model_layout(m))) {
		omen_model_free(m);
		return e;
	}
	*out = m;
	return 0;
}

void omen_model_init_weights(omen_model *m, uint64_t seed)
{
	omen_rng r;
	float *p = m->params;
	omen_rng_seed(&r, seed);
	memset(p, 0, m->nparams * sizeof(float));
	omen_init_normal(p + m->t[P_TOK_EMB].off, m->t[P_TOK_EMB].n, 0.1f, &r);
	omen_init_xavier(p + m->t[P_CONV_W].off, m->t[P_CONV_W].n, m->K * m->D, m->C, 1.0f, &r);
	omen_init_normal(p + m->t[P_Q_TOK].off, m->C, 0.1f, &r);
	omen_init_normal(p + m->t[P_Q_HUNK].off, m->C, 0.1f, &r);
	omen_init_xavier(p + m->t[P_FACT_W].off, m->t[P_FACT_W].n, m->NFN, m->C, 1.0f, &r);
	omen_init_normal(p + m->t[P_EXT_EMB].off, m->t[P_EXT_EMB].n, 0.1f, &r);
	omen_init_normal(p + m->t[P_Q_FILE].off, m->C, 0.1f, &r);
	omen_init_normal(p + m->t[P_MSG_EMB].off, m->t[P_MSG_EMB].n, 0.1f, &r);
	omen_init_xavier(p + m->t[P_H1_W].off, m->t[P_H1_W].n, m->HIN, m->HH, 1.0f, &r);
	omen_init_xavier(p + m->t[P_H2_W].off, m->t[P_H2_W].n, m->HH, 1, 1.0f, &r);
}

int omen_model_new(omen_model **out, int dim, int channels, uint64_t seed)
{
	int e = omen_model_alloc(out, dim, channels);
	if (!e)
		omen_model_init_weights(*out, seed);
	return e;
}

void omen_model_free(omen_model *m)
{
	if (!m)
		return;
	free(m->params);
	omen_logreg_free(&m->lr);
	cJSON_Delete(m->meta);
	omen_metrics_free(m->mstate);
	omen_buf_free(&m->mstate_blob);
	free(m);
}

size_t omen_model_nparams(const omen_model *m) { return m->nparams; }
float *omen_model_params(omen_model *m) { return m->params; }

const char *omen_model_tensor(const omen_model *m, int i, size_t *off, size_t *n, int shape[3])
{
	if (i < 0 || i >= P_COUNT)
		return NULL;
	if (off) *off = m->t[i].off;
	if (n) *n = m->t[i].n;
	if (shape) memcpy(shape, m->t[i].shape, sizeof(m->t[i].shape));
	return m->t[i].name;
}

const cJSON *omen_model_meta(const omen_model *m) { return m->meta; }
float omen_model_threshold(const omen_model *m) { return m->threshold; }
const omen_metrics *omen_model_metrics_state(const omen_model *m) { return m->mstate; }
const char *omen_model_head(const omen_model *m) { return m->head; }

void omen_metrics_transform(double out[OMEN_NMETRICS], const float raw[OMEN_NMETRICS])
{
	int j;
	for (j = 0; j < OMEN_NMETRICS; j++) {
		double v = raw[j];
		if (!isfinite(v))
			v = 0;
		if (j != OMEN_M_ENTROPY && j != OMEN_M_FIX)
			v = log1p(v > 0 ? v : 0);
		out[j] = v;
	}
}

/* ---- workspace ----------------------------------------------------------- */
void omen_ws_free(omen_ws *w)
{
	if (!w)
		return;
	free(w->blk);
	memset(w, 0, sizeof(*w));
}

#define CARVE(ptr, count) do { \
		size_t bytes_ = ((size_t)(count) * sizeof(*(ptr)) + 63) / 64 * 64; \
		if (base) (ptr) = (void *)(base + used); \
		used += bytes_; \
	} while (0)

/* One pass sizes the block (base NULL), the second carves it. */
static size_t ws_carve(omen_ws *w, const omen_model *m, unsigned char *base)
{
	size_t used = 0;
	int B = w->B, F = w->F, H = w->H, T = w->T, M = w->M, C = m->C, D = m->D;
	int T1 = T ? T : 1, H1 = H ? H : 1, F1 = F ? F : 1, M1 = M ? M : 1;
	CARVE(w->file_off, B + 1); CARVE(w->hunk_off, F + 1); CARVE(w->tok_off, H + 1);
	CARVE(w->msg_off, B + 1);
	CARVE(w->tok, T1); CARVE(w->msg, M1); CARVE(w->ext, F1);
	CARVE(w->facts, (size_t)F1 * m->NFN); CARVE(w->xm, (size_t)B * m->NM); CARVE(w->y, B);
	CARVE(w->emb, (size_t)T1 * D); CARVE(w->conv, (size_t)T1 * C); CARVE(w->act, (size_t)T1 * C);
	CARVE(w->tattn, T1); CARVE(w->hvec, (size_t)H1 * C); CARVE(w->hattn, H1);
	CARVE(w->fpool, (size_t)F1 * C); CARVE(w->fvec, (size_t)F1 * C); CARVE(w->fattn, F1);
	CARVE(w->fproj, (size_t)F1 * C);
	CARVE(w->cvec, (size_t)B * C); CARVE(w->mvec, (size_t)B * D);
	CARVE(w->cm, (size_t)B * (C + D)); CARVE(w->hin, (size_t)B * m->HIN);
	CARVE(w->h1, (size_t)B * m->HH); CARVE(w->a1, (size_t)B * m->HH);
	CARVE(w->d1, (size_t)B * m->HH); CARVE(w->z, B); CARVE(w->zl, B);
	CARVE(w->mask, (size_t)B * m->HH);
	/* gradients: keep them together so one memset clears them */
	{
		size_t g0 = used;
		CARVE(w->g_emb, (size_t)T1 * D); CARVE(w->g_conv, (size_t)T1 * C);
		CARVE(w->g_act, (size_t)T1 * C); CARVE(w->g_hvec, (size_t)H1 * C);
		CARVE(w->g_fvec, (size_t)F1 * C); CARVE(w->g_cvec, (size_t)B * C);
		CARVE(w->g_mvec, (size_t)B * D); CARVE(w->g_cm, (size_t)B * (C + D));
		CARVE(w->g_hin, (size_t)B * m->HIN); CARVE(w->g_h1, (size_t)B * m->HH);
		CARVE(w->g_a1, (size_t)B * m->HH); CARVE(w->g_d1, (size_t)B * m->HH);
		CARVE(w->g_z, B); CARVE(w->g_xm, (size_t)B * m->NM);
		CARVE(w->g_tmp, (size_t)F1 * C);
		if (base)
			memset(base + g0, 0, used - g0);
	}
	return used;
}

int omen_ws_load(omen_ws *w, const omen_model *m, const omen_sample *const *s, const float *y,
	int n)
{
	size_t need;
	int i, f, h, B = n, F = 0, H = 0, T = 0, M = 0;
	for (i = 0; i < n; i++) {
		F += s[i]->nfiles;
		H += s[i]->nhunks;
		T += s[i]->ntok;
		M += s[i]->nmsg;
	}
	w->B = B; w->F = F; w->H = H; w->T = T; w->M = M;
	need = ws_carve(w, m, NULL);
	if (need > w->cap) {
		unsigned char *nb = aligned_alloc(64, need);
		if (!nb)
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		free(w->blk);
		w->blk = nb;
		w->cap = need;
	}
	ws_carve(w, m, w->blk);
	F = H = T = M = 0;
	w->file_off[0] = 0;
	w->hunk_off[0] = 0;
	w->tok_off[0] = 0;
	w->msg_off[0] = 0;
	for (i = 0; i < n; i++) {
		const omen_sample *x = s[i];
		double tm[OMEN_NMETRICS];
		int j;
		for (f = 0; f < x->nfiles; f++) {
			const float *ff = x->file_facts + (size_t)f * OMEN_NFACTS;
			int k = 0, e;
			for (j = 0; j < OMEN_NFACTS; j++) {
				if (j == OMEN_FF_EXT_HASH)
					continue;
				w->facts[(size_t)(F + f) * m->NFN + k] = isfinite(ff[j])
					? (ff[j] - m->fact_mean[k]) / m->fact_scale[k] : 0.0f;
				k++;
			}
			e = (int)ff[OMEN_FF_EXT_HASH];
			w->ext[F + f] = (uint32_t)(e >= 0 && e < m->NE ? e : 0);
			w->hunk_off[F + f + 1] = H + x->file_off[f + 1];
		}
		for (h = 0; h < x->nhunks; h++)
			w->tok_off[H + h + 1] = T + x->hunk_off[h + 1];
		for (j = 0; j < x->ntok; j++) {
			uint32_t t = x->tok[j];
			w->tok[T + j] = t < (uint32_t)m->V ? t : t % (uint32_t)m->V;
		}
		for (j = 0; j < x->nmsg; j++) {
			uint32_t t = x->msg[j];
			w->msg[M + j] = t < (uint32_t)m->VM ? t : t % (uint32_t)m->VM;
		}
		omen_metrics_transform(tm, x->metrics);
		/* one rule for every model (issue 11, omen/base.h): a metric
		 * as a z-score against its repository's past, clipped like the
		 * base model's comparable metrics */
		for (j = 0; j < m->NM; j++) {
			double z = (tm[j] - m->metric_mean[j]) / m->metric_scale[j];
			z = z > OMEN_REL_CLIP ? OMEN_REL_CLIP : z < -OMEN_REL_CLIP ? -OMEN_REL_CLIP : z;
			w->xm[(size_t)i * m->NM + j] = (float)z;
		}
		F += x->nfiles;
		H += x->nhunks;
		T += x->ntok;
		M += x->nmsg;
		w->file_off[i + 1] = F;
		w->msg_off[i + 1] = M;
		w->y[i] = y ? y[i] : (float)(x->label > 0);
	}
	return 0;
}

/* ---- forward / backward -------------------------------------------------- */
#define PP(m, i) ((m)->params + (m)->t[i].off)

void omen_model_forward(const omen_model *m, omen_ws *w, float p, omen_rng *rng)
{
	int B = w->B, F = w->F, H = w->H, T = w->T, C = m->C, D = m->D;
	size_t i, nfc = (size_t)F * C;
	if (T) {
		omen_embed_forward(w->emb, PP(m, P_TOK_EMB), w->tok, T, D);
		omen_conv1d_forward(w->conv, w->emb, PP(m, P_CONV_W), PP(m, P_CONV_B), w->tok_off, H,
			D, C, m->K);
		omen_relu_forward(w->act, w->conv, T * C);
	}
	if (H)
		omen_attnpool_forward(w->hvec, w->tattn, w->act, PP(m, P_Q_TOK), w->tok_off, H, C);
	if (F) {
		omen_attnpool_forward(w->fpool, w->hattn, w->hvec, PP(m, P_Q_HUNK), w->hunk_off, F, C);
		omen_linear_forward(w->fproj, w->facts, PP(m, P_FACT_W), PP(m, P_FACT_B), F, m->NFN, C);
		omen_embed_forward(w->fvec, PP(m, P_EXT_EMB), w->ext, F, C);
		for (i = 0; i < nfc; i++)
			w->fvec[i] += w->fpool[i] + w->fproj[i];
	}
	omen_attnpool_forward(w->cvec, w->fattn, w->fvec, PP(m, P_Q_FILE), w->file_off, B, C);
	omen_embag_forward(w->mvec, PP(m, P_MSG_EMB), w->msg, w->msg_off, B, D);
	omen_concat_forward(w->cm, w->cvec, w->mvec, B, C, D);
	omen_concat_forward(w->hin, w->cm, w->xm, B, C + D, m->NM);
	omen_linear_forward(w->h1, w->hin, PP(m, P_H1_W), PP(m, P_H1_B), B, m->HIN, m->HH);
	omen_gelu_forward(w->a1, w->h1, B * m->HH);
	if (p > 0 && rng)
		omen_dropout_forward(w->d1, w->mask, w->a1, p, rng, B * m->HH);
	else
		memcpy(w->d1, w->a1, (size_t)B * m->HH * sizeof(float));
	omen_linear_forward(w->z, w->d1, PP(m, P_H2_W), PP(m, P_H2_B), B, m->HH, 1);
	omen_linear_forward(w->zl, w->xm, PP(m, P_LIN_W), NULL, B, m->NM, 1);
	for (i = 0; i < (size_t)B; i++)
		w->z[i] += w->zl[i];
}

#define GG(m, g, i) ((g) + (m)->t[i].off)

void omen_model_backward(const omen_model *m, omen_ws *w, float *g, float p)
{
	int B = w->B, F = w->F, H = w->H, T = w->T, C = m->C, D = m->D;
	omen_linear_backward(w->g_d1, GG(m, g, P_H2_W), GG(m, g, P_H2_B), w->g_z, w->d1,
		PP(m, P_H2_W), B, m->HH, 1);
	omen_linear_backward(w->g_xm, GG(m, g, P_LIN_W), NULL, w->g_z, w->xm, PP(m, P_LIN_W),
		B, m->NM, 1);
	if (p > 0)
		omen_dropout_backward(w->g_a1, w->g_d1, w->mask, p, B * m->HH);
	else
		memcpy(w->g_a1, w->g_d1, (size_t)B * m->HH * sizeof(float));
	omen_gelu_backward(w->g_h1, w->g_a1, w->h1, B * m->HH);
	omen_linear_backward(w->g_hin, GG(m, g, P_H1_W), GG(m, g, P_H1_B), w->g_h1, w->hin,
		PP(m, P_H1_W), B, m->HIN, m->HH);
	omen_concat_backward(w->g_cm, w->g_xm, w->g_hin, B, C + D, m->NM);
	omen_concat_backward(w->g_cvec, w->g_mvec, w->g_cm, B, C, D);
	omen_embag_backward(GG(m, g, P_MSG_EMB), w->g_mvec, w->msg, w->msg_off, B, D);
	omen_attnpool_backward(w->g_fvec, GG(m, g, P_Q_FILE), w->g_cvec, w->fvec, PP(m, P_Q_FILE),
		w->fattn, w->file_off, B, C);
	if (!F)
		return;
	/* fvec = fpool + fproj + ext_emb[ext]: the same gradient reaches all three */
	omen_linear_backward(NULL, GG(m, g, P_FACT_W), GG(m, g, P_FACT_B), w->g_fvec, w->facts,
		PP(m, P_FACT_W), F, m->NFN, C);
	omen_embed_backward(GG(m, g, P_EXT_EMB), w->g_fvec, w->ext, F, C);
	if (!H)
		return;
	omen_attnpool_backward(w->g_hvec, GG(m, g, P_Q_HUNK), w->g_fvec, w->hvec, PP(m, P_Q_HUNK),
		w->hattn, w->hunk_off, F, C);
	if (!T)
		return;
	omen_attnpool_backward(w->g_act, GG(m, g, P_Q_TOK), w->g_hvec, w->act, PP(m, P_Q_TOK),
		w->tattn, w->tok_off, H, C);
	omen_relu_backward(w->g_conv, w->g_act, w->conv, T * C);
	omen_conv1d_backward(w->g_emb, GG(m, g, P_CONV_W), GG(m, g, P_CONV_B), w->g_conv, w->emb,
		PP(m, P_CONV_W), w->tok_off, H, D, C, m->K);
	omen_embed_backward(GG(m, g, P_TOK_EMB), w->g_emb, w->tok, T, D);
}

int omen_model_loss_grad(float *out_loss, float *grad, float *logits, const omen_model *m,
	const omen_sample *const *s, const float *y, int n, float pw)
{
	omen_ws w;
	int e;
	memset(&w, 0, sizeof(w));
	if ((e = omen_ws_load(&w, m, s, y, n)))
		return e;
	omen_model_forward(m, &w, 0, NULL);
	*out_loss = omen_bce_forward(w.z, w.y, NULL, pw, n);
	if (logits)
		memcpy(logits, w.z, (size_t)n * sizeof(float));
	if (grad) {
		memset(grad, 0, m->nparams * sizeof(float));
		omen_bce_backward(w.g_z, w.z, w.y, NULL, pw, n, 1.0f);
		omen_model_backward(m, &w, grad, 0);
	}
	omen_ws_free(&w);
	return 0;
}

/* ---- prediction and explanation ----------------------------------------- */
void omen_explain_free(omen_explain *e)
{
	if (!e)
		return;
	free(e->file_attn);
	free(e->hunk_attn);
	free(e->hunk_contrib);
	free(e->tok_contrib);
	memset(e, 0, sizeof(*e));
}

static int explain_fill(omen_explain *ex, const omen_model *m, omen_ws *w)
{
	float *grad = NULL;
	int f, h, t, j, e = 0, need;
	/* gradient of the logit: one backward pass from dz = 1 */
	grad = aligned_alloc(64, (m->nparams * sizeof(float) + 63) / 64 * 64);
	if (!grad)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	memset(grad, 0, m->nparams * sizeof(float));
	w->g_z[0] = 1.0f;
	omen_model_backward(m, w, grad, 0);
	need = w->F > w->H ? w->F : w->H;
	if (w->T > need)
		need = w->T;
	if (need < 1)
		need = 1;
	if (ex->cap < need) {
		free(ex->file_attn); free(ex->hunk_attn); free(ex->hunk_contrib); free(ex->tok_contrib);
		ex->file_attn = malloc((size_t)need * sizeof(float));
		ex->hunk_attn = malloc((size_t)need * sizeof(float));
		ex->hunk_contrib = malloc((size_t)need * sizeof(float));
		ex->tok_contrib = malloc((size_t)need * sizeof(float));
		ex->cap = need;
		if (!ex->file_attn || !ex->hunk_attn || !ex->hunk_contrib || !ex->tok_contrib) {
			omen_explain_free(ex);
			e = omen_error_set(OMEN_ENOMEM, "out of memory");
			goto out;
		}
	}
	ex->nfiles = w->F;
	ex->nhunks = w->H;
	ex->ntok = w->T;
	for (f = 0; f < w->F; f++)
		ex->file_attn[f] = w->fattn[f];
	for (h = 0; h < w->H; h++) {
		float s = 0;
		for (j = 0; j < m->C; j++)
			s += w->hvec[(size_t)h * m->C + j] * w->g_hvec[(size_t)h * m->C + j];
		ex->hunk_attn[h] = w->hattn[h];
		ex->hunk_contrib[h] = s;
	}
	for (t = 0; t < w->T; t++) {
		float s = 0;
		for (j = 0; j < m->D; j++)
			s += w->emb[(size_t)t * m->D + j] * w->g_emb[(size_t)t * m->D + j];
		ex->tok_contrib[t] = s;
	}
	for (j = 0; j < OMEN_NMETRICS; j++)
		ex->metric_contrib[j] = w->xm[j] * w->g_xm[j];
	ex->message_contrib = 0;
	for (j = 0; j < m->D; j++)
		ex->message_contrib += w->mvec[j] * w->g_mvec[j];
out:
	free(grad);
	return e;
}

int omen_model_predict(float *out_prob, float *out_logit, const omen_model *m,
	const omen_sample *s, omen_explain *ex)
{
	omen_ws w;
	const omen_sample *one[1];
	int e;
	memset(&w, 0, sizeof(w));
	one[0] = s;
	if ((e = omen_ws_load(&w, m, one, NULL, 1)))
		return e;
	omen_model_forward(m, &w, 0, NULL);
	if (out_logit)
		*out_logit = w.z[0];
	if (out_prob)
		*out_prob = omen_model_calibrated(m, w.z[0]);
	if (ex)
		e = explain_fill(ex, m, &w);
	omen_ws_free(&w);
	return e;
}

float omen_model_calibrated(const omen_model *m, float logit)
{
	return (float)omen_platt_apply(m->platt_a, m->platt_b, logit);
}

float omen_model_predict_lr(const omen_model *m, const omen_sample *s)
{
	double x[OMEN_NMETRICS];
	if (!m->lr.p)
		return NAN;
	omen_metrics_transform(x, s->metrics);
	return (float)omen_logreg_predict(&m->lr, x);
}
