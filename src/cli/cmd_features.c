/* git omen features: the 14 change metrics of Kamei et al. (TSE 2013), one
 * row per non-merge commit, oldest first, as CSV or JSON Lines. Metrics of a
 * commit use only the commits before it; for a range such as A..B the whole
 * history behind B is read for that state, and only the commits of the range
 * are printed. */
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include "cli/cli.h"
#include "cli/options.h"

typedef struct {
	git_oid *ids;     /* commits to print (sorted), NULL = all */
	size_t nids;
	omen_metrics *m;
	omen_fixrules *fr;
	const omen_labels *labels;
	FILE *fp;
	int jsonl;
	size_t rows, large;
	int header_done;
	omen_progress prog;
	size_t done;
	omen_buf line;
} fstate;

static int oid_cmp(const void *a, const void *b)
{
	return git_oid_cmp(a, b);
}

/* Printed before the first row (so a failed walk prints nothing on stdout). */
static void put_header(fstate *s)
{
	s->header_done = 1;
	if (s->jsonl)
		return;
	fputs("commit,author_time", s->fp);
	for (int k = 0; k < OMEN_NMETRICS; k++)
		fprintf(s->fp, ",%s", omen_metric_names[k]);
	fputs(",label\n", s->fp);
}

static int on_change(const omen_change *c, void *payload)
{
	fstate *s = payload;
	const omen_label_rec *lr = s->labels ? omen_labels_get(s->labels, c->commit.hex) : NULL;
	double v[OMEN_NMETRICS];
	int is_fix, e, want = 1;
	char named[4][OMEN_OID_HEX + 1];
	int nnamed = 0;
	omen_buf *b = &s->line;

	s->done++;
	omen_progress_update(&s->prog, s->done, NULL);
	if (lr)
		is_fix = lr->is_fix != 0;
	else
		is_fix = omen_fix_classify(s->fr, &c->commit, named, 4, &nnamed) != 0;
	if (s->ids)
		want = bsearch(&c->commit.id, s->ids, s->nids, sizeof(git_oid), oid_cmp) != NULL;
	if (want) {
		for (size_t i = 0; i < c->nfiles; i++)
			if (c->files[i].flags & OMEN_FILE_TOO_LARGE) {
				cli_notice("%s: '%s' is over omen.maxBlobBytes, its lines are not counted",
					c->commit.hex,   /* the path is escaped by cli_notice */
					c->files[i].new_path ? c->files[i].new_path : c->files[i].old_path);
				s->large++;
			}
		if ((e = omen_metrics_compute(v, s->m, c, is_fix)))
			return e;
		omen_buf_clear(b);
		if (!s->header_done)
			put_header(s);
		if (s->jsonl) {
			omen_buf_printf(b, "{\"commit\":\"%s\",\"author_time\":%lld", c->commit.hex,
				(long long)c->commit.author_time);
			for (int k = 0; k < OMEN_NMETRICS; k++)
				omen_buf_printf(b, ",\"%s\":%.6g", omen_metric_names[k], v[k]);
			if (lr)
				omen_buf_printf(b, ",\"label\":\"%s\"", omen_label_name(lr->label));
			else
				omen_buf_puts(b, ",\"label\":null");
			omen_buf_puts(b, "}\n");
		} else {
			omen_buf_printf(b, "%s,%lld", c->commit.hex, (long long)c->commit.author_time);
			for (int k = 0; k < OMEN_NMETRICS; k++)
				omen_buf_printf(b, ",%.6g", v[k]);
			omen_buf_printf(b, ",%s\n", lr ? omen_label_name(lr->label) : "");
		}
		if (!b->ptr || fwrite(b->ptr, 1, b->len, s->fp) != b->len)
			return omen_error_set(OMEN_EIO, "cannot write features: %s", "write failed");
		s->rows++;
	}
	return omen_metrics_update(s->m, c, is_fix);
}

/* The tips behind the revisions (exclusions dropped): the history read for
 * the metrics state. */
static int tips_of(const char **out, char **keep, size_t *n, const char *const *revs, size_t nrev,
	int *has_excl)
{
	size_t k = 0;
	*has_excl = 0;
	for (size_t i = 0; i < nrev; i++) {
		const char *r = revs[i], *dots = strstr(r, "..");
		if (r[0] == '^') {
			*has_excl = 1;
			continue;
		}
		if (dots) {
			int three = dots[2] == '.';
			const char *right = dots + (three ? 3 : 2);
			*has_excl = 1;
			if (three && dots != r) {
				keep[k] = strndup(r, (size_t)(dots - r));
				if (!keep[k])
					return -1;
				out[k] = keep[k];
				k++;
			}
			out[k++] = *right ? right : "HEAD";
			continue;
		}
		out[k++] = r;
	}
	out[k] = NULL;
	*n = k;
	return 0;
}

typedef struct {
	const char *format, *labels, *out;
	const char **revs;    /* NULL-ended */
	size_t nrev;
} features_args;

/* Parses argv into a; -1 to go on, else the exit code. */
static int parse_args(features_args *a, int argc, char **argv)
{
	const cli_use uses[] = {
		{&cli_opt_format, &a->format, cli_formats_features,
			"output as csv (default) or json (JSON Lines)", NULL},
		{&cli_opt_labels, &a->labels, NULL,
			"join these labels (default omen.labels, else $GIT_DIR/omen/labels.jsonl if present)",
			NULL},
		{&cli_opt_output, &a->out, NULL, NULL, NULL},
	};
	const cli_command cmd = {"features", "usage: git omen features [<range>...] [<options>]\n",
		NULL, uses, sizeof(uses) / sizeof(uses[0])};
	memset(a, 0, sizeof(*a));
	a->format = "csv";
	return cli_parse(&cmd, argc, argv, &a->revs, &a->nrev);
}

/* The labels to join: --labels, else omen.labels, else the default file if
 * present (NULL: none). */
static int load_labels(omen_labels **out, omen_repo *repo, const char *path)
{
	char *def = NULL;
	int e = 0, configured;
	*out = NULL;
	if (!path) {
		if ((e = omen_labels_path(&def, repo, &configured)))
			return e;
		if (configured || access(def, R_OK) == 0)
			path = def;
	}
	if (path)
		e = omen_labels_load(out, path);
	free(def);
	return e;
}

/* Which history to walk (wo->revs) and which commits to print (s->ids,
 * NULL = all); *walk is 0 when a range names nothing to walk. tips and keep
 * hold 2 * nrev + 2 entries. */
static int select_commits(omen_walk_opts *wo, fstate *s, int *walk, omen_repo *repo,
	const features_args *a, const char **tips, char **keep)
{
	size_t ntips = 0;
	int has_excl = 0;
	*walk = 1;
	if (!a->nrev)
		return 0;
	if (tips_of(tips, keep, &ntips, a->revs, a->nrev, &has_excl) < 0)
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	wo->revs = a->revs;
	if (!has_excl)
		return 0;
	if (omen_history_list(&s->ids, &s->nids, repo, wo))
		return -1;
	qsort(s->ids, s->nids, sizeof(git_oid), oid_cmp);
	wo->revs = ntips ? tips : NULL;
	if (!ntips) {
		s->nids = 0;
		*walk = 0;
	}
	return 0;
}

/* The rows, to s->fp, header first even when there are none. */
static int walk_rows(fstate *s, omen_repo *repo, const omen_walk_opts *wo, int walk)
{
	int e;
	omen_progress_start(&s->prog, "features", 0);
	e = walk ? omen_history_walk(repo, wo, on_change, s) : 0;
	omen_progress_end(&s->prog);
	if (e)
		return e;
	if (!s->header_done)
		put_header(s);
	return 0;
}

int cmd_features(int argc, char **argv)
{
	omen_walk_opts wo = OMEN_WALK_OPTS_INIT;
	omen_repo *repo = NULL;
	omen_atomic_file af = {NULL, NULL, NULL, 0};
	fstate s;
	features_args a;
	omen_labels *labels = NULL;
	const char **tips = NULL;
	char **keep = NULL;
	char *cfg_pattern = NULL;
	size_t i, nkeep = 0;
	int rc, walk = 1;

	memset(&s, 0, sizeof(s));
	if ((rc = parse_args(&a, argc, argv)) >= 0)
		return rc;
	rc = EXIT_OK;
	s.jsonl = !strcmp(a.format, "json");
	nkeep = a.nrev * 2 + 2;
	if (!(tips = calloc(nkeep, sizeof(*tips))) || !(keep = calloc(nkeep, sizeof(*keep)))) {
		omen_error_set(OMEN_ENOMEM, "out of memory");
		goto fatal;
	}
	if (omen_repo_open(&repo, NULL))
		goto fatal;
	if (omen_repo_is_shallow(repo))
		cli_notice("shallow clone: history read up to its boundary, metrics there see no "
			"earlier commits");
	if (omen_config_string(&cfg_pattern, repo, "omen.fixPattern") ||
	    omen_fixrules_new(&s.fr, cfg_pattern) || omen_metrics_new(&s.m) ||
	    load_labels(&labels, repo, a.labels))
		goto fatal;
	s.labels = labels;
	if (select_commits(&wo, &s, &walk, repo, &a, tips, keep))
		goto fatal;
	wo.with_lines = 0;
	if (a.out) {
		if (omen_output_open(&af, a.out))
			goto fatal;
		s.fp = af.fp;
	} else {
		s.fp = stdout;
	}
	if (walk_rows(&s, repo, &wo, walk))
		goto fatal;
	if (a.out) {
		if (omen_atomic_commit(&af))
			goto fatal;
		af.fp = NULL;
	} else if (fflush(stdout)) {
		omen_error_set(OMEN_EIO, "cannot write features to standard output");
		goto fatal;
	}
	if (s.large)
		cli_notice("%zu files over omen.maxBlobBytes were not counted", s.large);
	goto out;
fatal:
	rc = cli_fatal(NULL);
out:
	if (af.fp)
		omen_atomic_abort(&af);
	omen_buf_free(&s.line);
	omen_labels_free(labels);
	omen_fixrules_free(s.fr);
	omen_metrics_free(s.m);
	cli_blob_notice(repo);
	omen_repo_free(repo);
	free(s.ids);
	free(cfg_pattern);
	if (keep)
		for (i = 0; i < nkeep; i++)
			free(keep[i]);
	free(keep);
	free(tips);
	free(a.revs);
	return rc;
}
