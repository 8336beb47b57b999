/* The 14 change metrics of Kamei, Shihab, Adams, Hassan, Mockus, Sinha and
 * Ubayashi, "A Large-Scale Empirical Study of Just-in-Time Quality
 * Assurance", IEEE TSE 39(6), 2013, Table 1, and per-file facts for the
 * model. Exact definitions and units: DEVELOPERS.md, "Change metrics".
 * State is fed oldest first; a commit's metrics use only commits fed before
 * it. Paths in a change are the new path (the old one for deletions); a
 * renamed file keeps its history. Developers are keyed by the normalised
 * author e-mail (the name when the e-mail is empty). */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/features.h"

const char *const omen_metric_names[OMEN_NMETRICS] = {
	"ns", "nd", "nf", "entropy", "la", "ld", "lt", "fix",
	"ndev", "age", "nuc", "exp", "rexp", "sexp"
};

#define DAY 86400.0
#define YEAR (365.25 * 86400.0)
#define MAGIC "OMET"
#define VERSION 1u

typedef struct {
	uint32_t *v;
	size_t n, cap;
} u32vec;

typedef struct {
	int64_t last_time;
	uint32_t nchanges, nfixes;
	u32vec devs;   /* sorted distinct developer ids */
	u32vec seqs;   /* commit sequence numbers, increasing */
} mfile;

typedef struct {
	int64_t *times; size_t ntimes, tcap;   /* author times of prior commits */
	u32vec *sub;   /* per subsystem id: commit seqs (index = subsystem id) */
	size_t nsub;
} mdev;

struct omen_metrics {
	omen_strmap files;   /* path -> mfile* (NULL after a rename moved it) */
	omen_strmap devs;    /* key -> (id + 1) */
	mdev *dv; size_t ndev, devcap;
	omen_strmap subs;    /* subsystem -> (id + 1) */
	char **subname; size_t nsubs, subcap;
	uint32_t seq;
};

static int oom(void)
{
	return omen_error_set(OMEN_ENOMEM, "out of memory");
}

static int u32_push(u32vec *a, uint32_t x)
{
	if (OMEN_ARRAY_RESERVE(a->v, a->cap, a->n + 1) < 0)
		return OMEN_ENOMEM;
	a->v[a->n++] = x;
	return 0;
}

static int u32_insert_sorted(u32vec *a, uint32_t x)
{
	size_t lo = 0, hi = a->n;
	while (lo < hi) {
		size_t mid = (lo + hi) / 2;
		if (a->v[mid] < x) lo = mid + 1; else hi = mid;
	}
	if (lo < a->n && a->v[lo] == x)
		return 0;
	if (OMEN_ARRAY_RESERVE(a->v, a->cap, a->n + 1) < 0)
		return OMEN_ENOMEM;
	memmove(a->v + lo + 1, a->v + lo, (a->n - lo) * sizeof(*a->v));
	a->v[lo] = x;
	a->n++;
	return 0;
}

static void mfile_free(void *p)
{
	mfile *f = p;
	if (!f)
		return;
	free(f->devs.v);
	free(f->seqs.v);
	free(f);
}

int omen_metrics_new(omen_metrics **out)
{
	*out = calloc(1, sizeof(**out));
	return *out ? 0 : oom();
}

void omen_metrics_free(omen_metrics *m)
{
	if (!m)
		return;
	omen_strmap_free(&m->files, mfile_free);
	omen_strmap_free(&m->devs, NULL);
	omen_strmap_free(&m->subs, NULL);
	for (size_t i = 0; i < m->ndev; i++) {
		free(m->dv[i].times);
		for (size_t j = 0; j < m->dv[i].nsub; j++)
			free(m->dv[i].sub[j].v);
		free(m->dv[i].sub);
	}
	free(m->dv);
	for (size_t i = 0; i < m->nsubs; i++)
		free(m->subname[i]);
	free(m->subname);
	free(m);
}

/* ---- path helpers ------------------------------------------------------- */
/* Subsystem: the top-level directory ("" for files at the root). */
static size_t subsystem_len(const char *p)
{
	const char *s = strchr(p, '/');
	return s ? (size_t)(s - p) : 0;
}

/* Directory: everything before the last '/' ("" at the root). */
static size_t dir_len(const char *p)
{
	const char *s = strrchr(p, '/');
	return s ? (size_t)(s - p) : 0;
}

static const char *dev_key(const omen_commit *k)
{
	if (k->author_email && *k->author_email)
		return k->author_email;
	return k->author_name ? k->author_name : "";
}

static const mdev *dev_find(const omen_metrics *m, const omen_commit *k)
{
	uintptr_t v = (uintptr_t)omen_strmap_get(&m->devs, dev_key(k));
	return v ? &m->dv[v - 1] : NULL;
}

/* Prior state of file f (by its old path when it had one). */
static const mfile *file_find(const omen_metrics *m, const omen_file *f)
{
	const char *p = f->old_path ? f->old_path : f->new_path;
	return p ? omen_strmap_get(&m->files, p) : NULL;
}

static int cmp_u32(const void *a, const void *b)
{
	uint32_t x = *(const uint32_t *)a, y = *(const uint32_t *)b;
	return x < y ? -1 : x > y;
}

static size_t count_unique(uint32_t *v, size_t n)
{
	size_t k = 0;
	qsort(v, n, sizeof(*v), cmp_u32);
	for (size_t i = 0; i < n; i++)
		if (!i || v[i] != v[i - 1])
			k++;
	return k;
}

typedef struct {
	const char *s;
	size_t len;
} span;

static int cmp_span(const void *a, const void *b)
{
	const span *x = a, *y = b;
	size_t n = x->len < y->len ? x->len : y->len;
	int r = memcmp(x->s, y->s, n);
	return r ? r : (x->len > y->len) - (x->len < y->len);
}

/* Distinct strings among n spans (sorts v). */
static size_t count_distinct(span *v, size_t n)
{
	size_t k = 0;
	qsort(v, n, sizeof(*v), cmp_span);
	for (size_t i = 0; i < n; i++)
		if (!i || cmp_span(&v[i], &v[i - 1]))
			k++;
	return k;
}

/* Normalised Shannon entropy of the change over its files (Hassan, ICSE
 * 2009; Kamei et al. 2013): 0 for one file or no changed lines. */
static double change_entropy(const omen_change *c, double total)
{
	size_t nf = c->nfiles;
	double h = 0;
	if (nf > 1 && total > 0) {
		for (size_t i = 0; i < nf; i++) {
			double x = (double)c->files[i].added + (double)c->files[i].deleted;
			if (x > 0)
				h -= (x / total) * log2(x / total);
		}
		h /= log2((double)nf);
	}
	return h;
}

/* The developer's experience metrics EXP, REXP and SEXP; sids are the
 * developer's subsystem ids of the change's files (sorted here). */
static int experience(double out[OMEN_NMETRICS], const mdev *dv, int64_t now, uint32_t *sids,
	size_t nsids)
{
	uint32_t *sexp = NULL;
	size_t sexp_n = 0;
	double rexp = 0;
	size_t tot = 0;
	out[OMEN_M_EXP] = (double)dv->ntimes;
	for (size_t i = 0; i < dv->ntimes; i++) {
		double y = (double)(now - dv->times[i]) / YEAR;
		rexp += 1.0 / ((y > 0 ? y : 0) + 1.0);
	}
	out[OMEN_M_REXP] = rexp;
	/* SEXP: distinct prior commits of the developer that touched
	 * any subsystem this change touches */
	qsort(sids, nsids, sizeof(*sids), cmp_u32);
	for (size_t i = 0; i < nsids; i++)
		if (!i || sids[i] != sids[i - 1])
			tot += dv->sub[sids[i]].n;
	if (tot) {
		if (!(sexp = malloc(tot * sizeof(*sexp))))
			return oom();
		for (size_t i = 0; i < nsids; i++) {
			const u32vec *v = &dv->sub[sids[i]];
			if (i && sids[i] == sids[i - 1])
				continue;
			if (v->n)  /* v->v is NULL when empty: memcpy(NULL) is UB */
				memcpy(sexp + sexp_n, v->v, v->n * sizeof(*sexp));
			sexp_n += v->n;
		}
		out[OMEN_M_SEXP] = (double)count_unique(sexp, sexp_n);
	}
	free(sexp);
	return 0;
}

/* ---- compute ------------------------------------------------------------ */
int omen_metrics_compute(double out[OMEN_NMETRICS], const omen_metrics *m,
	const omen_change *c, int is_fix)
{
	size_t nf = c->nfiles, nuc_n = 0, dev_n = 0;
	span *ss = NULL, *ds = NULL;
	uint32_t *sids = NULL;
	size_t nsids = 0;
	uint32_t *nuc = NULL, *devs = NULL;
	double la = 0, ld = 0, lt = 0, total = 0, h, age_sum = 0;
	size_t age_n = 0;
	const mdev *dv = dev_find(m, &c->commit);
	int64_t now = c->commit.author_time;
	int rc = 0;

	memset(out, 0, sizeof(double) * OMEN_NMETRICS);
	ss = malloc((nf + 1) * sizeof(*ss));
	ds = malloc((nf + 1) * sizeof(*ds));
	sids = malloc((nf + 1) * sizeof(*sids));
	if (!ss || !ds || !sids) {
		rc = oom();
		goto out;
	}
	{
		size_t nn = 0, nd = 0;
		for (size_t i = 0; i < nf; i++) {
			const mfile *pf = file_find(m, &c->files[i]);
			if (pf) {
				nn += pf->seqs.n;
				nd += pf->devs.n;
			}
		}
		nuc = malloc((nn + 1) * sizeof(*nuc));
		devs = malloc((nd + 1) * sizeof(*devs));
		if (!nuc || !devs) {
			rc = oom();
			goto out;
		}
	}
	for (size_t i = 0; i < nf; i++) {
		const omen_file *f = &c->files[i];
		const char *p = omen_file_path(f);
		const mfile *pf = file_find(m, f);
		ss[i].s = p;
		ss[i].len = subsystem_len(p);
		ds[i].s = p;
		ds[i].len = dir_len(p);
		if (dv) {
			char key[4096];
			size_t l = ss[i].len < sizeof(key) - 1 ? ss[i].len : sizeof(key) - 1;
			uintptr_t sid;
			memcpy(key, p, l);
			key[l] = '\0';
			sid = (uintptr_t)omen_strmap_get(&m->subs, key);
			if (sid && sid - 1 < dv->nsub)
				sids[nsids++] = (uint32_t)(sid - 1);
		}
		la += f->added;
		ld += f->deleted;
		lt += (double)f->old_nlines;
		if (pf) {
			memcpy(nuc + nuc_n, pf->seqs.v, pf->seqs.n * sizeof(*nuc));
			nuc_n += pf->seqs.n;
			memcpy(devs + dev_n, pf->devs.v, pf->devs.n * sizeof(*devs));
			dev_n += pf->devs.n;
			if (pf->nchanges) {
				double d = (double)(now - pf->last_time) / DAY;
				age_sum += d > 0 ? d : 0;
				age_n++;
			}
		}
	}
	total = la + ld;
	h = change_entropy(c, total);
	out[OMEN_M_NS] = (double)count_distinct(ss, nf);
	out[OMEN_M_ND] = (double)count_distinct(ds, nf);
	out[OMEN_M_NF] = (double)nf;
	out[OMEN_M_ENTROPY] = h;
	out[OMEN_M_LA] = la;
	out[OMEN_M_LD] = ld;
	out[OMEN_M_LT] = lt;
	out[OMEN_M_FIX] = is_fix ? 1 : 0;
	out[OMEN_M_NDEV] = (double)count_unique(devs, dev_n);
	out[OMEN_M_AGE] = age_n ? age_sum / (double)age_n : 0;
	out[OMEN_M_NUC] = (double)count_unique(nuc, nuc_n);
	if (dv)
		rc = experience(out, dv, now, sids, nsids);
out:
	free(ss);
	free(ds);
	free(sids);
	free(nuc);
	free(devs);
	return rc;
}

/* ---- update ------------------------------------------------------------- */
static int dev_get(omen_metrics *m, const char *key, uint32_t *out)
{
	int created;
	void **slot = omen_strmap_slot(&m->devs, key, &created);
	if (!slot)
		return OMEN_ENOMEM;
	if (created) {
		if (OMEN_ARRAY_RESERVE(m->dv, m->devcap, m->ndev + 1) < 0)
			return OMEN_ENOMEM;
		memset(&m->dv[m->ndev], 0, sizeof(mdev));
		*slot = (void *)(uintptr_t)(++m->ndev);
	}
	*out = (uint32_t)((uintptr_t)*slot - 1);
	return 0;
}

static int sub_get(omen_metrics *m, const char *key, uint32_t *out)
{
	int created;
	void **slot = omen_strmap_slot(&m->subs, key, &created);
	if (!slot)
		return OMEN_ENOMEM;
	if (created) {
		if (OMEN_ARRAY_RESERVE(m->subname, m->subcap, m->nsubs + 1) < 0 ||
		    !(m->subname[m->nsubs] = strdup(key)))
			return oom();
		*slot = (void *)(uintptr_t)(++m->nsubs);
	}
	*out = (uint32_t)((uintptr_t)*slot - 1);
	return 0;
}

static int dev_sub_push(mdev *d, uint32_t sid, uint32_t seq)
{
	if (sid >= d->nsub) {
		u32vec *n = realloc(d->sub, (sid + 1) * sizeof(*n));
		if (!n)
			return oom();
		memset(n + d->nsub, 0, (sid + 1 - d->nsub) * sizeof(*n));
		d->sub = n;
		d->nsub = sid + 1;
	}
	if (d->sub[sid].n && d->sub[sid].v[d->sub[sid].n - 1] == seq)
		return 0;
	return u32_push(&d->sub[sid], seq);
}

int omen_metrics_update(omen_metrics *m, const omen_change *c, int is_fix)
{
	uint32_t did, seq = m->seq;
	mdev *d;
	int rc;
	if ((rc = dev_get(m, dev_key(&c->commit), &did)) < 0)
		return rc;
	d = &m->dv[did];
	if (OMEN_ARRAY_RESERVE(d->times, d->tcap, d->ntimes + 1) < 0)
		return OMEN_ENOMEM;
	d->times[d->ntimes++] = c->commit.author_time;
	for (size_t i = 0; i < c->nfiles; i++) {
		const omen_file *f = &c->files[i];
		const char *p = omen_file_path(f);
		char key[4096];
		size_t l = subsystem_len(p);
		uint32_t sid;
		mfile *mf;
		void **slot;
		if (l >= sizeof(key))
			l = sizeof(key) - 1;
		memcpy(key, p, l);
		key[l] = '\0';
		if ((rc = sub_get(m, key, &sid)) < 0 || (rc = dev_sub_push(&m->dv[did], sid, seq)) < 0)
			return rc;
		/* a rename moves the old path's state to the new path */
		mf = NULL;
		if (f->old_path && f->new_path && strcmp(f->old_path, f->new_path)) {
			void **os = omen_strmap_slot(&m->files, f->old_path, NULL);
			if (!os)
				return OMEN_ENOMEM;
			mf = *os;
			*os = NULL;
		}
		if (!(slot = omen_strmap_slot(&m->files, p, NULL)))
			return OMEN_ENOMEM;
		if (mf) {
			mfile_free(*slot);
			*slot = mf;
		} else if (!(mf = *slot)) {
			if (!(mf = calloc(1, sizeof(*mf))))
				return oom();
			*slot = mf;
		}
		mf->last_time = c->commit.author_time;
		mf->nchanges++;
		mf->nfixes += is_fix ? 1 : 0;
		if ((rc = u32_insert_sorted(&mf->devs, did)) < 0 || (rc = u32_push(&mf->seqs, seq)) < 0)
			return rc;
	}
	m->seq++;
	return 0;
}

/* ---- file facts ---------------------------------------------------------- */
int omen_metrics_file_facts(float out[OMEN_NFACTS], const omen_metrics *m,
	const omen_change *c, size_t file_index)
{
	const omen_file *f;
	const mfile *pf;
	const char *p, *base, *dot;
	char ext[32];
	size_t el = 0;
	if (file_index >= c->nfiles)
		return omen_error_set(OMEN_EINVAL, "file index %zu out of range", file_index);
	f = &c->files[file_index];
	pf = f->status == OMEN_FILE_ADDED ? NULL : file_find(m, f);
	p = omen_file_path(f);
	memset(out, 0, sizeof(float) * OMEN_NFACTS);
	if (pf) {
		double age = (double)(c->commit.author_time - pf->last_time) / DAY;
		out[OMEN_FF_LOG_CHANGES] = (float)log1p((double)pf->nchanges);
		out[OMEN_FF_LOG_FIXES] = (float)log1p((double)pf->nfixes);
		out[OMEN_FF_FIX_RATIO] = (float)((double)pf->nfixes / (pf->nchanges > 1 ? pf->nchanges : 1));
		out[OMEN_FF_LOG_AGE_DAYS] = (float)log1p(age > 0 ? age : 0);
		out[OMEN_FF_LOG_NDEV] = (float)log1p((double)pf->devs.n);
	}
	out[OMEN_FF_NEW_FILE] = f->status == OMEN_FILE_ADDED ? 1.0f : 0.0f;
	out[OMEN_FF_LOG_SIZE] = (float)log1p((double)f->old_nlines);
	base = strrchr(p, '/');
	base = base ? base + 1 : p;
	dot = strrchr(base, '.');
	if (dot && dot != base) {
		for (const char *q = dot + 1; *q && el < sizeof(ext); q++)
			ext[el++] = (char)((*q >= 'A' && *q <= 'Z') ? *q + 32 : *q);
	}
	out[OMEN_FF_EXT_HASH] = (float)(omen_hash64(ext, el, OMEN_HASH_SEED) % OMEN_EXT_BUCKETS);
	return 0;
}

/* ---- save / load --------------------------------------------------------- *
 * Little-endian: "OMET", u32 version, u32 seq,
 *   u32 nsubs, nsubs x str;  u32 ndev, ndev x (str key, u32 ntimes, ntimes x u64,
 *   u32 nsub, nsub x (u32 n, n x u32));  u32 nfiles, nfiles x (str path,
 *   u64 last_time, u32 nchanges, u32 nfixes, u32 ndevs, ndevs x u32,
 *   u32 nseqs, nseqs x u32);  u32 crc32 of everything before it.
 * str = u32 length, bytes. */
static int put_str(omen_buf *b, const char *s)
{
	size_t n = strlen(s);
	return omen_buf_put_u32le(b, (uint32_t)n) || omen_buf_put(b, s, n) ? OMEN_ENOMEM : 0;
}

static int put_vec(omen_buf *b, const u32vec *v)
{
	if (omen_buf_put_u32le(b, (uint32_t)v->n))
		return OMEN_ENOMEM;
	for (size_t i = 0; i < v->n; i++)
		if (omen_buf_put_u32le(b, v->v[i]))
			return OMEN_ENOMEM;
	return 0;
}

typedef struct {
	const char *path;
	const mfile *f;
} file_entry;

static int by_file_path(const void *a, const void *b)
{
	return strcmp(((const file_entry *)a)->path, ((const file_entry *)b)->path);
}

int omen_metrics_save(const omen_metrics *m, omen_buf *out)
{
	size_t start = out->len, nfiles = 0;
	file_entry *fe;
	omen_buf_put(out, MAGIC, 4);
	omen_buf_put_u32le(out, VERSION);
	omen_buf_put_u32le(out, m->seq);
	omen_buf_put_u32le(out, (uint32_t)m->nsubs);
	for (size_t i = 0; i < m->nsubs; i++)
		put_str(out, m->subname[i]);
	omen_buf_put_u32le(out, (uint32_t)m->ndev);
	/* developer keys in id order */
	{
		const char **keys = calloc(m->ndev + 1, sizeof(*keys));
		if (!keys)
			return oom();
		for (size_t i = 0; i < m->devs.cap; i++)
			if (m->devs.keys[i])
				keys[(uintptr_t)m->devs.vals[i] - 1] = m->devs.keys[i];
		for (size_t i = 0; i < m->ndev; i++) {
			const mdev *d = &m->dv[i];
			put_str(out, keys[i] ? keys[i] : "");
			omen_buf_put_u32le(out, (uint32_t)d->ntimes);
			for (size_t j = 0; j < d->ntimes; j++)
				omen_buf_put_u64le(out, (uint64_t)d->times[j]);
			omen_buf_put_u32le(out, (uint32_t)d->nsub);
			for (size_t j = 0; j < d->nsub; j++)
				put_vec(out, &d->sub[j]);
		}
		free(keys);
	}
	/* files in path order, not the hash table's: the same state saves to the
	 * same bytes however it was reached (built, or loaded and extended) */
	for (size_t i = 0; i < m->files.cap; i++)
		nfiles += m->files.keys[i] && m->files.vals[i];
	omen_buf_put_u32le(out, (uint32_t)nfiles);
	if (!(fe = malloc((nfiles ? nfiles : 1) * sizeof(*fe))))
		return oom();
	nfiles = 0;
	for (size_t i = 0; i < m->files.cap; i++)
		if (m->files.keys[i] && m->files.vals[i]) {
			fe[nfiles].path = m->files.keys[i];
			fe[nfiles++].f = m->files.vals[i];
		}
	qsort(fe, nfiles, sizeof(*fe), by_file_path);
	for (size_t k = 0; k < nfiles; k++) {
		const mfile *f = fe[k].f;
		put_str(out, fe[k].path);
		omen_buf_put_u64le(out, (uint64_t)f->last_time);
		omen_buf_put_u32le(out, f->nchanges);
		omen_buf_put_u32le(out, f->nfixes);
		put_vec(out, &f->devs);
		put_vec(out, &f->seqs);
	}
	free(fe);
	/* the buffer remembers its first failed append: one check for all */
	if (omen_buf_error(out))
		return oom();
	return omen_buf_put_u32le(out, omen_crc32(0, out->ptr + start, out->len - start)) ? oom() : 0;
}

static int corrupt(const char *what)
{
	return omen_error_set(OMEN_ECORRUPT, "cannot read metrics state: %s", what);
}

static int get_str(omen_cursor *c, char **out)
{
	uint32_t n;
	const void *p;
	if (omen_cursor_u32le(c, &n) || n > c->n || omen_cursor_bytes(c, &p, n))
		return corrupt("truncated string");
	if (memchr(p, 0, n))
		return corrupt("NUL in string");
	if (!(*out = malloc((size_t)n + 1)))
		return oom();
	memcpy(*out, p, n);
	(*out)[n] = '\0';
	return 0;
}

static int get_vec(omen_cursor *c, u32vec *v, uint32_t limit)
{
	uint32_t n;
	if (omen_cursor_u32le(c, &n) || (uint64_t)n * 4 > c->n)
		return corrupt("truncated list");
	if (n && !(v->v = malloc((size_t)n * sizeof(*v->v))))
		return oom();
	v->cap = n;
	for (uint32_t i = 0; i < n; i++) {
		if (omen_cursor_u32le(c, &v->v[i]))
			return corrupt("truncated list");
		if (v->v[i] >= limit)
			return corrupt("index out of range");
		v->n++;
	}
	return 0;
}

/* Reads developer i of the state: key, commit times, subsystem vectors. */
static int load_dev(omen_metrics *m, omen_cursor *c, uint32_t i, uint32_t nsubs)
{
	uint32_t id, nt, ns;
	mdev *d;
	char *s = NULL;
	int rc;
	if ((rc = get_str(c, &s)) < 0 || (rc = dev_get(m, s, &id)) < 0) {
		free(s);
		return rc;
	}
	free(s);
	if (id != i)
		return corrupt("duplicate developer");
	d = &m->dv[id];
	if (omen_cursor_u32le(c, &nt) || (uint64_t)nt * 8 > c->n)
		return corrupt("truncated developer");
	if (nt && !(d->times = malloc((size_t)nt * sizeof(*d->times))))
		return oom();
	d->tcap = nt;
	for (uint32_t j = 0; j < nt; j++) {
		uint64_t t;
		omen_cursor_u64le(c, &t);
		d->times[d->ntimes++] = (int64_t)t;
	}
	if (omen_cursor_u32le(c, &ns) || ns > nsubs || (uint64_t)ns * 4 > c->n)
		return corrupt("bad developer subsystems");
	if (ns && !(d->sub = calloc(ns, sizeof(*d->sub))))
		return oom();
	d->nsub = ns;
	for (uint32_t j = 0; j < ns; j++)
		if ((rc = get_vec(c, &d->sub[j], m->seq)) < 0)
			return rc;
	return 0;
}

/* Reads one file of the state: path, last change, counts, developer and
 * commit vectors. */
static int load_file(omen_metrics *m, omen_cursor *c, uint32_t ndev)
{
	mfile *f;
	uint64_t t;
	void **slot;
	char *s = NULL;
	int created, rc;
	if ((rc = get_str(c, &s)) < 0)
		return rc;
	slot = omen_strmap_slot(&m->files, s, &created);
	free(s);
	if (!slot)
		return OMEN_ENOMEM;
	if (!created)
		return corrupt("duplicate file");
	if (!(f = calloc(1, sizeof(*f))))
		return oom();
	*slot = f;
	if (omen_cursor_u64le(c, &t) || omen_cursor_u32le(c, &f->nchanges) ||
	    omen_cursor_u32le(c, &f->nfixes))
		return corrupt("truncated file");
	f->last_time = (int64_t)t;
	if ((rc = get_vec(c, &f->devs, ndev)) < 0 || (rc = get_vec(c, &f->seqs, m->seq)) < 0)
		return rc;
	return 0;
}

int omen_metrics_load(omen_metrics **out, const void *data, size_t n)
{
	omen_metrics *m = NULL;
	omen_cursor c;
	const void *magic;
	uint32_t ver, nsubs, ndev, nfiles, crc;
	char *s = NULL;
	int rc;
	*out = NULL;
	if (n < 8 || memcmp(data, MAGIC, 4))
		return corrupt("bad magic");
	if (n < 12)
		return corrupt("truncated");
	omen_cursor_init(&c, data, n);
	omen_cursor_tail_u32le(&c, &crc);  /* n >= 12: cannot fail */
	if (omen_crc32(0, data, c.n) != crc)
		return corrupt("bad checksum");
	omen_cursor_bytes(&c, &magic, 4);
	if (omen_cursor_u32le(&c, &ver) || ver != VERSION)
		return corrupt("unsupported version");
	if ((rc = omen_metrics_new(&m)) < 0)
		return rc;
	if (omen_cursor_u32le(&c, &m->seq) || omen_cursor_u32le(&c, &nsubs) || nsubs > c.n / 4) {
		rc = corrupt("truncated header");
		goto out;
	}
	for (uint32_t i = 0; i < nsubs; i++) {
		uint32_t id;
		if ((rc = get_str(&c, &s)) < 0 || (rc = sub_get(m, s, &id)) < 0)
			goto out;
		if (id != i) {
			rc = corrupt("duplicate subsystem");
			goto out;
		}
		free(s);
		s = NULL;
	}
	if (omen_cursor_u32le(&c, &ndev) || ndev > c.n / 12) {
		rc = corrupt("truncated developers");
		goto out;
	}
	for (uint32_t i = 0; i < ndev; i++)
		if ((rc = load_dev(m, &c, i, nsubs)) < 0)
			goto out;
	if (omen_cursor_u32le(&c, &nfiles) || nfiles > c.n / 16) {
		rc = corrupt("truncated files");
		goto out;
	}
	for (uint32_t i = 0; i < nfiles; i++)
		if ((rc = load_file(m, &c, ndev)) < 0)
			goto out;
	if (c.err || c.n) {
		rc = corrupt(c.err ? "truncated" : "trailing bytes");
		goto out;
	}
	*out = m;
	m = NULL;
out:
	free(s);
	omen_metrics_free(m);
	return rc;
}
