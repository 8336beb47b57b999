/* git omen features: the 14 change metrics of Kamei et al. (TSE 2013), one
 * row per non-merge commit, oldest first, as CSV or JSON Lines. Metrics of a
 * commit use only the commits before it; for a range such as A..B the whole
 * history behind B is read for that state, and only the commits of the range
 * are printed. */
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include "cli/cli.h"

static const char usage_text[] =
	"usage: git omen features [<range>...] [<options>]\n"
	"\n"
	"  --format <fmt>         csv (default) or jsonl\n"
	"  --labels <file>        join these labels (default omen.labels, else $GIT_DIR/omen/labels.jsonl if present)\n"
	"  -o <file>              write here instead of standard output (atomically)\n"
	"  -h, --help             show this help\n";

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

static const char *label_name(int v)
{
	return v == OMEN_LABEL_INDUCING ? "inducing" : v == OMEN_LABEL_CLEAN ? "clean" : "unknown";
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
				omen_buf p = OMEN_BUF_INIT;
				omen_buf_puts_shown(&p, c->files[i].new_path ? c->files[i].new_path
					: c->files[i].old_path, 0);
				fprintf(stderr, "git omen: notice: %s: '%s' is over omen.maxBlobBytes, "
					"its lines are not counted\n", c->commit.hex, p.ptr ? p.ptr : "");
				omen_buf_free(&p);
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
				omen_buf_printf(b, ",\"label\":\"%s\"", label_name(lr->label));
			else
				omen_buf_puts(b, ",\"label\":null");
			omen_buf_puts(b, "}\n");
		} else {
			omen_buf_printf(b, "%s,%lld", c->commit.hex, (long long)c->commit.author_time);
			for (int k = 0; k < OMEN_NMETRICS; k++)
				omen_buf_printf(b, ",%.6g", v[k]);
			omen_buf_printf(b, ",%s\n", lr ? label_name(lr->label) : "");
		}
		if (!b->ptr || fwrite(b->ptr, 1, b->len, s->fp) != b->len)
			return omen_error_set(OMEN_EIO, "cannot write features: %s", "write failed");
		s->rows++;
	}
	return omen_metrics_update(s->m, c, is_fix);
}

/* The tips behind the revisions (exclusions dropped): the history read for
 * the metrics state. */
static int tips_of(const char **out, char **keep, size_t *n, char **revs, size_t nrev,
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

int cmd_features(int argc, char **argv)
{
	omen_walk_opts wo = OMEN_WALK_OPTS_INIT;
	omen_repo *repo = NULL;
	omen_atomic_file af = {NULL, NULL, NULL, 0};
	fstate s;
	omen_labels *labels = NULL;
	const char *format = "csv", *labels_path = NULL, *out_path = NULL, *val;
	char **revs = calloc((size_t)argc + 1, sizeof(*revs));
	const char **tips = calloc((size_t)argc * 2 + 2, sizeof(*tips));
	char **keep = calloc((size_t)argc * 2 + 2, sizeof(*keep));
	char *cfg_pattern = NULL, *def_labels = NULL;
	size_t nrev = 0, ntips = 0;
	int i, r, rc = EXIT_OK, e, has_excl = 0;

	memset(&s, 0, sizeof(s));
	if (!revs || !tips || !keep) {
		fprintf(stderr, "git omen: out of memory\n");
		rc = EXIT_FATAL;
		goto out;
	}
	for (i = 1; i < argc; i++) {
		const char *a = argv[i];
		if (!strcmp(a, "-h") || !strcmp(a, "--help")) {
			fputs(usage_text, stdout);
			goto out;
		} else if ((r = cli_opt_value(argc, argv, &i, "--format", &val))) {
			if (r < 0) goto missing;
			format = val;
		} else if ((r = cli_opt_value(argc, argv, &i, "--labels", &val))) {
			if (r < 0) goto missing;
			labels_path = val;
		} else if ((r = cli_opt_value(argc, argv, &i, "-o", &val))) {
			if (r < 0) goto missing;
			out_path = val;
		} else if (!strcmp(a, "--")) {
			for (i++; i < argc; i++)
				revs[nrev++] = argv[i];
		} else if (a[0] == '-' && a[1] && a[0] != '^') {
			rc = cli_usage("features", "unknown option '%s'\n%s", a, usage_text);
			goto out;
		} else {
			revs[nrev++] = argv[i];
		}
	}
	if (strcmp(format, "csv") && strcmp(format, "jsonl")) {
		rc = cli_usage("features", "bad --format '%s': expected csv or jsonl", format);
		goto out;
	}
	s.jsonl = !strcmp(format, "jsonl");

	if ((e = omen_repo_open(&repo, NULL))) {
		rc = cli_fatal(NULL);
		goto out;
	}
	if (omen_repo_is_shallow(repo))
		fprintf(stderr, "git omen: notice: shallow clone: history read up to its boundary, "
			"metrics there see no earlier commits\n");
	if ((e = omen_config_string(&cfg_pattern, repo, "omen.fixPattern")) ||
	    (e = omen_fixrules_new(&s.fr, cfg_pattern)) || (e = omen_metrics_new(&s.m))) {
		rc = cli_fatal(NULL);
		goto out;
	}
	/* labels: --labels, else omen.labels, else the default file if present */
	if (!labels_path) {
		int configured;
		if ((e = omen_labels_path(&def_labels, repo, &configured))) {
			rc = cli_fatal(NULL);
			goto out;
		}
		if (configured || access(def_labels, R_OK) == 0)
			labels_path = def_labels;
	}
	if (labels_path && omen_labels_load(&labels, labels_path)) {
		rc = cli_fatal(NULL);
		goto out;
	}
	s.labels = labels;
	if (nrev) {
		revs[nrev] = NULL;
		if (tips_of(tips, keep, &ntips, revs, nrev, &has_excl) < 0) {
			rc = cli_fatal("out of memory");
			goto out;
		}
		if (has_excl) {
			wo.revs = (const char *const *)revs;
			if (omen_history_list(&s.ids, &s.nids, repo, &wo)) {
				rc = cli_fatal(NULL);
				goto out;
			}
			qsort(s.ids, s.nids, sizeof(git_oid), oid_cmp);
			wo.revs = ntips ? tips : NULL;
			if (!ntips)
				s.nids = 0;
		} else {
			wo.revs = (const char *const *)revs;
		}
	}
	wo.with_lines = 0;
	if (out_path) {
		if (omen_output_open(&af, out_path)) {
			rc = cli_fatal(NULL);
			goto out;
		}
		s.fp = af.fp;
	} else {
		s.fp = stdout;
	}
	omen_progress_start(&s.prog, "features", 0);
	e = (has_excl && !ntips) ? 0 : omen_history_walk(repo, &wo, on_change, &s);
	omen_progress_end(&s.prog);
	if (e) {
		rc = cli_fatal(NULL);
		goto out;
	}
	if (!s.header_done)
		put_header(&s);
	if (out_path) {
		if (omen_atomic_commit(&af)) {
			rc = cli_fatal(NULL);
			goto out;
		}
		af.fp = NULL;
	} else if (fflush(stdout)) {
		omen_error_set(OMEN_EIO, "cannot write features to standard output");
		rc = cli_fatal(NULL);
		goto out;
	}
	if (s.large)
		fprintf(stderr, "git omen: notice: %zu files over omen.maxBlobBytes were not counted\n",
			s.large);
	goto out;
missing:
	rc = cli_usage("features", "option '%s' needs a value", argv[i]);
out:
	if (af.fp)
		omen_atomic_abort(&af);
	omen_buf_free(&s.line);
	omen_labels_free(labels);
	omen_fixrules_free(s.fr);
	omen_metrics_free(s.m);
	omen_repo_free(repo);
	free(s.ids);
	free(cfg_pattern);
	free(def_labels);
	if (keep)
		for (i = 0; i < argc * 2 + 2; i++)
			free(keep[i]);
	free(keep);
	free(tips);
	free(revs);
	return rc;
}
