/* git omen score: commits, ranges or staged changes, scored with the saved
 * model (advisory). */
#include <stdlib.h>
#include <string.h>
#include "cli/cli.h"
#include "cli/options.h"

static void text_line(omen_buf *b, const omen_score_set *s, const omen_score_result *r, int color)
{
	static const char *const col[3] = {"", "\033[33m", "\033[31m"};
	int i;
	int staged = strspn(r->id, "0") == strlen(r->id);
	omen_buf_printf(b, "%-10.10s  %s%.2f %-6s%s  +%-5d -%-5d %3df  ", staged ? "(staged)" : r->id,
		color ? col[r->band] : "", (double)r->prob, omen_band_names[r->band],
		color && r->band ? "\033[0m" : "", (int)r->la, (int)r->ld, (int)r->nfiles);
	/* history text (paths in reasons, the summary) through the sanitiser */
	for (i = 0; i < r->nreasons; i++) {
		omen_buf_puts(b, i ? "; " : "");
		omen_buf_puts_shown(b, r->reasons[i].text, 0);
	}
	if (r->summary && *r->summary) {
		omen_buf_puts(b, r->nreasons ? "  | " : "");
		omen_buf_puts_shown(b, r->summary, 72);
	}
	omen_buf_puts(b, "\n");
}

static const cli_option opt_staged = {
	"--staged", CLI_FLAG, NULL, 0, 0, NULL, "score the staged changes (index against HEAD)"};
static const cli_option opt_message = {
	"--message", CLI_STRING, "<msg>", 0, 0, NULL, "commit message to score the staged changes with"};
static const cli_option opt_fail_above = {
	"--fail-above", CLI_PROB, "<p>", 0, 0, "a probability from 0 to 1",
	"exit 1 when a scored commit's probability is above p"};
static const cli_option opt_sort = {
	"--sort", CLI_CHOICE, "<key>", 0, 0, NULL,
	"history (default, oldest first), risk (highest first) or per-line (risk per changed "
	"line: the order to review on a budget of lines)"};
static const char *const sort_words[] = {"history", "risk", "per-line", NULL};

typedef struct {
	const char *model, *format, *outpath, *msg, *sort;
	double fail_above;
	int staged, fail_set;
	const char **revs;
	size_t nrevs;
} score_args;

/* Parses argv into a; -1 to go on, else the exit code. */
static int parse_args(score_args *a, int argc, char **argv)
{
	const cli_use uses[] = {
		{&opt_staged, &a->staged, NULL, NULL, NULL},
		{&opt_message, &a->msg, NULL, NULL, NULL},
		{&cli_opt_model, &a->model, NULL, NULL, NULL},
		{&cli_opt_format, &a->format, cli_formats_score,
			"output as text (default), json (JSON Lines) or sarif (SARIF 2.1.0)", NULL},
		{&opt_fail_above, &a->fail_above, NULL, NULL, &a->fail_set},
		{&opt_sort, &a->sort, sort_words, NULL, NULL},
		{&cli_opt_output, &a->outpath, NULL, NULL, NULL},
	};
	const cli_command cmd = {"score",
		"usage: git omen score [<rev>|<range>...] [<options>]\n"
		"\n"
		"Scores commits with the calibrated probability that they will need a\n"
		"follow-up fix, learned from this repository's history. Scores are advisory.\n"
		"Default range: @{upstream}..HEAD, else HEAD.\n", NULL,
		uses, sizeof(uses) / sizeof(uses[0])};
	int rc;
	memset(a, 0, sizeof(*a));
	a->format = "text";
	a->sort = "history";
	a->fail_above = -1;
	if ((rc = cli_parse(&cmd, argc, argv, &a->revs, &a->nrevs)) >= 0)
		return rc;
	if (a->staged && a->nrevs)
		rc = cli_usage("score", "--staged takes no revisions");
	else if (a->msg && !a->staged)
		rc = cli_usage("score", "--message goes with --staged");
	else
		return -1;
	free(a->revs);
	a->revs = NULL;
	return rc;
}

/* The scores of the staged changes or of the commits a->revs names. */
static int collect(omen_score_set *set, omen_scorer *sc, omen_repo *repo, const score_args *a)
{
	git_oid *ids = NULL;
	size_t nids = 0;
	char *desc = NULL;
	int e = 0;
	if (a->staged)
		return omen_scorer_staged(set, sc, a->msg);
	if ((e = omen_score_resolve(&ids, &nids, &desc, repo, a->revs, a->nrevs)))
		goto out;
	if (nids == 0)
		cli_notice("nothing to score: '%s' names no commits", desc);
	else if ((e = omen_scorer_commits(set, sc, ids, nids)))
		goto out;
	if (nids > set->n)
		cli_notice("skipped %zu merge commit%s (merges are not scored)", nids - set->n,
			nids - set->n == 1 ? "" : "s");
out:
	free(ids);
	free(desc);
	return e;
}

/* The report of set in a's format, into out. */
static int render(omen_buf *out, const omen_score_set *set, omen_scorer *sc, const score_args *a,
	int64_t horizon)
{
	size_t i;
	int color;
	for (i = 0; i < set->n; i++) {
		const omen_score_result *r = &set->v[i];
		int st = strspn(r->id, "0") == strlen(r->id);
		if (r->nskipped)   /* the path is escaped by cli_notice */
			cli_notice("%.10s: '%s'%s is over omen.maxBlobBytes; its lines were not read",
				st ? "staged" : r->id, r->skipped_path ? r->skipped_path : "",
				r->nskipped > 1 ? " (and others)" : "");
		if (r->capped)
			cli_notice("%.10s: a large commit, capped: the model saw only its largest files "
				"and hunks", st ? "staged" : r->id);
	}
	if (!strcmp(a->format, "json"))
		return omen_score_write_json(out, set, omen_scorer_model_path(sc));
	if (!strcmp(a->format, "sarif"))
		return omen_score_write_sarif(out, set, OMEN_VERSION);
	color = !a->outpath && cli_use_color(stdout);
	if (set->n) {
		omen_buf_printf(out, "%-10s  %-11s  %-13s %4s  %s\n", "commit", "risk", "lines", "files",
			"reasons | summary");
		for (i = 0; i < set->n; i++)
			text_line(out, set, &set->v[i], color);
		char rate[64];
		/* issue 10: with a label horizon, say what the probability is of */
		if (horizon > 0)
			omen_buf_printf(out, "%zu scored; risky at %.2f or more (%s); risk = probability "
				"that the commit needs a fix within %lld days; scores are advisory\n", set->n,
				(double)set->threshold,
				omen_warn_rate_text(rate, sizeof(rate), omen_scorer_fires(sc)), (long long)horizon);
		else
			omen_buf_printf(out, "%zu scored; risky at %.2f or more (%s); scores are advisory\n",
				set->n, (double)set->threshold,
				omen_warn_rate_text(rate, sizeof(rate), omen_scorer_fires(sc)));
	}
	return 0;
}

int cmd_score(int argc, char **argv)
{
	score_args a;
	size_t i;
	int rc, e;
	omen_sort_key sort = OMEN_SORT_HISTORY;
	omen_repo *repo = NULL;
	omen_scorer *sc = NULL;
	omen_score_opts so = OMEN_SCORE_OPTS_INIT;
	omen_score_set set;
	omen_buf out = OMEN_BUF_INIT;
	char *lp = NULL;
	int64_t horizon = 0;

	omen_score_set_init(&set);
	if ((rc = parse_args(&a, argc, argv)) >= 0)
		return rc;
	rc = EXIT_OK;
	if (!strcmp(a.sort, "risk"))
		sort = OMEN_SORT_RISK;
	else if (!strcmp(a.sort, "per-line"))
		sort = OMEN_SORT_PER_LINE;
	so.model_path = a.model;
	if ((e = omen_repo_open(&repo, NULL)) || (e = omen_scorer_open(&sc, repo, &so)))
		goto fatal;
	cli_note_base_model(sc);
	if ((e = collect(&set, sc, repo, &a)))
		goto fatal;
	set.threshold = omen_scorer_threshold(sc);
	if ((e = omen_scorer_check_fresh(sc)))
		goto fatal;
	cli_notices(omen_scorer_notices(sc));
	if (!omen_labels_path(&lp, repo, NULL))
		horizon = omen_labels_file_horizon(lp);
	omen_error_clear();
	if ((e = omen_score_set_sort(&set, sort)) || (e = render(&out, &set, sc, &a, horizon)))
		goto fatal;
	if (a.outpath) {
		if ((e = omen_output_write(a.outpath, out.ptr ? out.ptr : "", out.len)))
			goto fatal;
	} else if (out.len && fwrite(out.ptr, 1, out.len, stdout) != out.len) {
		omen_error_set(OMEN_EIO, "cannot write standard output");
		goto fatal;
	}
	if (a.fail_set)
		for (i = 0; i < set.n; i++)
			if (set.v[i].prob > (float)a.fail_above)   /* as printed: %.9g round-trips */
				rc = EXIT_RISK;
	goto done;
fatal:
	rc = cli_fatal(NULL);
done:
	omen_buf_free(&out);
	omen_score_set_free(&set);
	omen_scorer_free(sc);
	cli_blob_notice(repo);
	free(lp);
	omen_repo_free(repo);
	free(a.revs);
	return rc;
}
