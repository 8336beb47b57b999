/* Explanations: files, hunks and lines ranked by the model's attention and
 * gradient x input (Simonyan, Vedaldi & Zisserman 2014; Shrikumar et al.
 * 2016), metrics against the training history's typical values, and the
 * labelled inducing commits nearest in standardized log-metric space. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/label.h"
#include "omen/score.h"
#include "score/internal.h"

typedef struct {
	omen_explanation *x;
	int top_n;
	int seen;
	int err;
} ex_ctx;

typedef struct {
	int32_t hunk, line;
	char origin;
	float contrib;
} line_acc;

static int cmp_line_acc(const void *a, const void *b)
{
	float x = fabsf(((const line_acc *)a)->contrib), y = fabsf(((const line_acc *)b)->contrib);
	return x < y ? 1 : x > y ? -1 : 0;
}

static int cmp_file(const void *a, const void *b)
{
	const omen_file_score *x = a, *y = b;
	float kx = x->weight + fabsf(x->contrib), ky = y->weight + fabsf(y->contrib);
	return kx < ky ? 1 : kx > ky ? -1 : 0;
}

static int cmp_metric(const void *a, const void *b)
{
	float x = fabsf(((const omen_metric_score *)a)->contrib);
	float y = fabsf(((const omen_metric_score *)b)->contrib);
	return x < y ? 1 : x > y ? -1 : 0;
}

/* The change's file for a sample path. */
static const omen_file *file_of(const omen_change *c, const char *path)
{
	size_t i;
	for (i = 0; i < c->nfiles; i++) {
		const omen_file *f = &c->files[i];
		if ((f->new_path && !strcmp(f->new_path, path)) || (!f->new_path && f->old_path &&
		    !strcmp(f->old_path, path)))
			return f;
	}
	return NULL;
}

static const char *line_text(omen_arena *a, const omen_change *c, const omen_file *f, char origin,
	int32_t lineno)
{
	uint32_t h, k;
	if (!f)
		return "";
	for (h = f->hunk_off; h < f->hunk_off + f->nhunks; h++) {
		const omen_hunk *hk = &c->hunks[h];
		for (k = hk->line_off; k < hk->line_off + hk->nlines; k++) {
			const omen_line *l = &c->lines[k];
			if (l->origin == origin && (origin == '+' ? l->new_lineno : l->old_lineno) == lineno) {
				size_t n = l->text_len > 200 ? 200 : l->text_len;
				char *p = omen_arena_strndup(a, omen_line_text(c, l), n);
				size_t i;
				if (!p)
					return "";
				for (i = 0; i < n; i++)
					if (p[i] == '\t')
						p[i] = ' ';
					else if ((unsigned char)p[i] < 0x20)
						p[i] = '?';
				return p;
			}
		}
	}
	return "";
}

static int visit(void *payload, const omen_change *c, const omen_sample *sm,
	const omen_explain *ex, const omen_score_result *r)
{
	ex_ctx *cx = payload;
	omen_explanation *x = cx->x;
	line_acc *acc = NULL;
	size_t nacc = 0, i;
	int f, h, t, e = 0;

	cx->seen = 1;
	x->result = *r;
	/* files */
	x->nfiles = (size_t)sm->nfiles;
	x->files = omen_arena_alloc(&x->arena, (x->nfiles ? x->nfiles : 1) * sizeof(*x->files));
	if (!x->files)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (f = 0; f < sm->nfiles; f++) {
		omen_file_score *fs = &x->files[f];
		const omen_file *cf = file_of(c, sm->file_path[f]);
		fs->path = omen_arena_strndup(&x->arena, sm->file_path[f], strlen(sm->file_path[f]));
		fs->weight = f < ex->nfiles ? ex->file_attn[f] : 0;
		fs->contrib = 0;
		for (h = sm->file_off[f]; h < sm->file_off[f + 1]; h++)
			fs->contrib += h < ex->nhunks ? ex->hunk_contrib[h] : 0;
		fs->added = cf ? (int32_t)cf->added : 0;
		fs->deleted = cf ? (int32_t)cf->deleted : 0;
	}
	/* lines: token contributions summed per (hunk, line) */
	if (sm->ntok > 0 && !(acc = malloc((size_t)sm->ntok * sizeof(*acc))))
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	for (h = 0; h < sm->nhunks; h++) {
		size_t start = nacc;
		for (t = sm->hunk_off[h]; t < sm->hunk_off[h + 1] && t < ex->ntok; t++) {
			int32_t tl = sm->tok_line[t];
			char origin = tl > 0 ? '+' : '-';
			int32_t line = tl > 0 ? tl : -tl;
			size_t k;
			for (k = start; k < nacc; k++)
				if (acc[k].line == line && acc[k].origin == origin)
					break;
			if (k == nacc) {
				acc[nacc].hunk = h;
				acc[nacc].line = line;
				acc[nacc].origin = origin;
				acc[nacc].contrib = 0;
				nacc++;
			}
			acc[k].contrib += ex->tok_contrib[t];
		}
	}
	qsort(acc, nacc, sizeof(*acc), cmp_line_acc);
	x->nlines = nacc < (size_t)cx->top_n * 2 ? nacc : (size_t)cx->top_n * 2;
	x->lines = omen_arena_alloc(&x->arena, (x->nlines ? x->nlines : 1) * sizeof(*x->lines));
	if (!x->lines) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	for (i = 0; i < x->nlines; i++) {
		omen_line_score *ls = &x->lines[i];
		int fi = 0;
		while (fi + 1 < sm->nfiles && sm->file_off[fi + 1] <= acc[i].hunk)
			fi++;
		ls->path = x->files[fi].path;
		ls->line = acc[i].line;
		ls->origin = acc[i].origin;
		ls->contrib = acc[i].contrib;
		ls->text = line_text(&x->arena, c, file_of(c, sm->file_path[fi]), ls->origin, ls->line);
	}
	/* metrics */
	for (i = 0; i < OMEN_NMETRICS; i++) {
		x->metrics[i].metric = (int)i;
		x->metrics[i].value = sm->metrics[i];
		x->metrics[i].typical = NAN;
		x->metrics[i].contrib = ex->metric_contrib[i];
	}
	x->message_contrib = ex->message_contrib;
out:
	free(acc);
	return e;
}

/* ---- neighbours ---------------------------------------------------------- */
typedef struct {
	size_t idx;
	float d;
} cand;

static int cmp_cand(const void *a, const void *b)
{
	float x = ((const cand *)a)->d, y = ((const cand *)b)->d;
	return x < y ? -1 : x > y ? 1 : 0;
}

/* Jaccard index of the (sample-capped) file sets of the explained commit
 * and sm; both are small (at most the file cap). */
static double file_jaccard(const omen_explanation *x, const omen_sample *sm)
{
	size_t i, both = 0, uni;
	int j;
	for (i = 0; i < x->nfiles; i++)
		for (j = 0; j < sm->nfiles; j++)
			if (!strcmp(x->files[i].path, sm->file_path[j])) {
				both++;
				break;
			}
	uni = x->nfiles + (size_t)sm->nfiles - both;
	return uni ? (double)both / (double)uni : 0.0;
}

static int neighbours(omen_explanation *x, omen_scorer *s, omen_repo *r, int top_n)
{
	omen_dataset_opts dopt;
	omen_dataset *ds = NULL;
	omen_labels *lab = NULL;
	omen_caps caps = OMEN_CAPS_DEFAULT;
	cand *cs = NULL;
	size_t n, i, nc = 0, k;
	double zt[OMEN_NMETRICS];
	int e = 0;

	memset(&dopt, 0, sizeof(dopt));
	dopt.caps = caps;
	dopt.use_cache = 1;
	if ((e = omen_config_int(&dopt.max_bytes, r, "omen.memoryLimit")) ||
	    (e = omen_dataset_build(&ds, r, &dopt)))
		goto out;
	score_standardize(zt, s, x->result.metrics);
	n = omen_dataset_size(ds);
	if (!(cs = malloc((n ? n : 1) * sizeof(*cs)))) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	for (i = 0; i < n; i++) {
		const omen_sample *sm = omen_dataset_get(ds, i);
		double z[OMEN_NMETRICS], d = 0;
		int j;
		if (sm->label != 1 || !strcmp(sm->id, x->result.id) || sm->time > x->result.time)
			continue;
		score_standardize(z, s, sm->metrics);
		for (j = 0; j < OMEN_NMETRICS; j++)
			d += (z[j] - zt[j]) * (z[j] - zt[j]);
		/* root mean square distance of the metrics, plus one minus the
		 * Jaccard overlap of the files touched: commits alike in shape
		 * and in place come first */
		cs[nc].idx = i;
		cs[nc].d = (float)(sqrt(d / OMEN_NMETRICS) + 1.0 - file_jaccard(x, sm));
		nc++;
	}
	qsort(cs, nc, sizeof(*cs), cmp_cand);
	k = nc < (size_t)top_n ? nc : (size_t)top_n;
	x->neighbours = omen_arena_alloc(&x->arena, (k ? k : 1) * sizeof(*x->neighbours));
	if (!x->neighbours) {
		e = omen_error_set(OMEN_ENOMEM, "out of memory");
		goto out;
	}
	score_load_labels(&lab, r);
	for (i = 0; i < k; i++) {
		const omen_sample *sm = omen_dataset_get(ds, cs[i].idx);
		omen_neighbour *nb = &x->neighbours[i];
		const omen_label_rec *lr = lab ? omen_labels_get(lab, sm->id) : NULL;
		git_oid oid;
		char *sum = NULL;
		memcpy(nb->id, sm->id, sizeof(nb->id));
		nb->distance = cs[i].d;
		nb->nfixes = lr ? (int)lr->nfixes : 0;
		nb->summary = "";
		if (omen_oid_parse(&oid, sm->id) == 0 && omen_history_subject(&sum, r, &oid) == 0) {
			char *p = omen_arena_strndup(&x->arena, sum, omen_utf8_prefix(sum, strlen(sum), 200));
			if (p)
				nb->summary = p;
			free(sum);
		} else {
			omen_error_clear();
		}
	}
	x->nneighbours = k;
out:
	free(cs);
	omen_labels_free(lab);
	omen_dataset_free(ds);
	return e;
}

int omen_score_explain(omen_explanation *out, omen_scorer *s, omen_repo *r,
	const git_oid *id, int top_n)
{
	ex_ctx cx;
	int e, i;

	memset(out, 0, sizeof(*out));
	omen_arena_init(&out->arena, 32 * 1024);
	omen_score_set_init(&out->set);
	if (top_n < 1)
		top_n = 5;
	memset(&cx, 0, sizeof(cx));
	cx.x = out;
	cx.top_n = top_n;
	score_set_detail(s, 1);
	e = score_walk(&out->set, s, id, 1, visit, &cx);
	score_set_detail(s, 0);
	if (e)
		return e;
	if (!cx.seen) {
		char hex[GIT_OID_HEXSZ + 1];
		omen_oid_hex(hex, sizeof(hex), id);
		return omen_error_set(OMEN_EUSAGE, "cannot explain '%.12s': merge commits are not scored", hex);
	}
	/* the result's hunks live in the set: all of them (detail) by weight */
	out->hunks = out->set.hunks + out->result.hunk_off;
	out->nhunks = out->result.nhunk_scores;
	qsort(out->files, out->nfiles, sizeof(*out->files), cmp_file);
	for (i = 0; i < OMEN_NMETRICS; i++)
		out->metrics[i].typical = score_typical(s, i);
	out->have_typical = out->metrics[0].typical == out->metrics[0].typical;
	qsort(out->metrics, OMEN_NMETRICS, sizeof(out->metrics[0]), cmp_metric);
	if (neighbours(out, s, r, top_n)) {
		/* without labels or a dataset there are no neighbours; the rest
		 * of the explanation stands */
		omen_error_clear();
		out->nneighbours = 0;
	}
	return 0;
}

void omen_explanation_free(omen_explanation *e)
{
	if (!e)
		return;
	omen_score_set_free(&e->set);
	omen_arena_free(&e->arena);
	memset(e, 0, sizeof(*e));
}
