/* git omen score: commits, ranges or staged changes, scored with the saved
 * model (advisory). */
#include <stdlib.h>
#include <string.h>
#include "cli/cli.h"

static const char score_usage[] =
	"usage: git omen score [<rev>|<range>...] [<options>]\n"
	"\n"
	"Scores commits with the calibrated probability that they will need a\n"
	"follow-up fix, learned from this repository's history. Scores are advisory.\n"
	"Default range: @{upstream}..HEAD, else HEAD.\n"
	"\n"
	"  --staged            score the staged changes (index against HEAD)\n"
	"  --message <msg>     commit message to score the staged changes with\n"
	"  --model <file>      model file (default: omen.model, else $GIT_DIR/omen/model.omen)\n"
	"  --format <fmt>      text (default), json (JSON Lines) or sarif (SARIF 2.1.0)\n"
	"  --fail-above <p>    exit 1 when a scored commit's probability is above p\n"
	"  --sort <key>        history (default, oldest first), risk (highest first) or\n"
	"                      per-line (risk per changed line: the order to review on a\n"
	"                      budget of lines)\n"
	"  -o <file>           write to <file> instead of standard output\n"
	"  -h, --help          show this help\n";

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

static int parse_prob(double *out, const char *s)
{
	char *end;
	double v = strtod(s, &end);
	if (end == s || *end || !(v >= 0 && v <= 1))
		return -1;
	*out = v;
	return 0;
}

int cmd_score(int argc, char **argv)
{
	const char *model = NULL, *format = "text", *outpath = NULL, *fail_s = NULL, *msg = NULL;
	const char *sort_s = "history";
	omen_sort_key sort = OMEN_SORT_HISTORY;
	const char **revs = NULL;
	size_t nrevs = 0, i, nids = 0;
	int staged = 0, rc = EXIT_OK, e, k, color;
	double fail_above = -1;
	omen_repo *repo = NULL;
	omen_scorer *sc = NULL;
	omen_score_opts so = OMEN_SCORE_OPTS_INIT;
	omen_score_set set;
	omen_buf out = OMEN_BUF_INIT;
	git_oid *ids = NULL;
	char *desc = NULL;

	omen_score_set_init(&set);
	if (!(revs = calloc((size_t)argc + 1, sizeof(*revs))))
		return cli_fatal("out of memory");
	for (k = 1; k < argc; k++) {
		const char *a = argv[k];
		int m;
		if (!strcmp(a, "-h") || !strcmp(a, "--help")) {
			fputs(score_usage, stdout);
			goto done;
		}
		if (!strcmp(a, "--staged")) { staged = 1; continue; }
		if ((m = cli_opt_value(argc, argv, &k, "--model", &model)) ||
		    (m = cli_opt_value(argc, argv, &k, "--format", &format)) ||
		    (m = cli_opt_value(argc, argv, &k, "--fail-above", &fail_s)) ||
		    (m = cli_opt_value(argc, argv, &k, "--message", &msg)) ||
		    (m = cli_opt_value(argc, argv, &k, "--sort", &sort_s)) ||
		    (m = cli_opt_value(argc, argv, &k, "-o", &outpath))) {
			if (m < 0) {
				rc = cli_usage("score", "option '%s' needs a value", a);
				goto done;
			}
			continue;
		}
		if (!strcmp(a, "--")) {
			for (k++; k < argc; k++)
				revs[nrevs++] = argv[k];
			break;
		}
		if (a[0] == '-' && a[1] && !(a[1] == '.' || a[1] == '^')) {
			rc = cli_usage("score", "unknown option '%s'; see 'git omen score --help'", a);
			goto done;
		}
		revs[nrevs++] = a;
	}
	if (strcmp(format, "text") && strcmp(format, "json") && strcmp(format, "sarif")) {
		rc = cli_usage("score", "bad --format '%s': use text, json or sarif", format);
		goto done;
	}
	if (!strcmp(sort_s, "risk")) {
		sort = OMEN_SORT_RISK;
	} else if (!strcmp(sort_s, "per-line")) {
		sort = OMEN_SORT_PER_LINE;
	} else if (strcmp(sort_s, "history")) {
		rc = cli_usage("score", "bad --sort '%s': use history, risk or per-line", sort_s);
		goto done;
	}
	if (fail_s && parse_prob(&fail_above, fail_s)) {
		rc = cli_usage("score", "bad --fail-above '%s': give a probability between 0 and 1", fail_s);
		goto done;
	}
	if (staged && nrevs) {
		rc = cli_usage("score", "--staged takes no revisions");
		goto done;
	}
	if (msg && !staged) {
		rc = cli_usage("score", "--message goes with --staged");
		goto done;
	}
	if ((e = omen_repo_open(&repo, NULL))) {
		rc = cli_fatal(NULL);
		goto done;
	}
	so.model_path = model;
	if ((e = omen_scorer_open(&sc, repo, &so))) {
		rc = cli_fatal(NULL);
		goto done;
	}
	if (staged) {
		if ((e = omen_scorer_staged(&set, sc, msg))) {
			rc = cli_fatal(NULL);
			goto done;
		}
	} else {
		if ((e = omen_score_resolve(&ids, &nids, &desc, repo, revs, nrevs))) {
			rc = cli_fatal(NULL);
			goto done;
		}
		if (nids == 0)
			fprintf(stderr, "git omen: nothing to score: '%s' names no commits\n", desc);
		else if ((e = omen_scorer_commits(&set, sc, ids, nids))) {
			rc = cli_fatal(NULL);
			goto done;
		}
		if (nids > set.n)
			fprintf(stderr, "git omen: skipped %zu merge commit%s (merges are not scored)\n",
				nids - set.n, nids - set.n == 1 ? "" : "s");
	}
	set.threshold = omen_scorer_threshold(sc);
	if ((e = omen_score_set_sort(&set, sort))) {
		rc = cli_fatal(NULL);
		goto done;
	}
	for (i = 0; i < set.n; i++) {
		const omen_score_result *r = &set.v[i];
		int st = strspn(r->id, "0") == strlen(r->id);
		if (r->nskipped) {
			omen_buf p = OMEN_BUF_INIT;
			omen_buf_puts_shown(&p, r->skipped_path, 0);
			fprintf(stderr, "git omen: notice: %.10s: '%s'%s is over omen.maxBlobBytes; its lines "
				"were not read\n", st ? "staged" : r->id, p.ptr ? p.ptr : "",
				r->nskipped > 1 ? " (and others)" : "");
			omen_buf_free(&p);
		}
		if (r->capped)
			fprintf(stderr, "git omen: notice: %.10s: a large commit, capped: the model saw only "
				"its largest files and hunks\n", st ? "staged" : r->id);
	}
	if (!strcmp(format, "json")) {
		e = omen_score_write_json(&out, &set, omen_scorer_model_path(sc));
	} else if (!strcmp(format, "sarif")) {
		e = omen_score_write_sarif(&out, &set, OMEN_VERSION);
	} else {
		color = !outpath && cli_use_color(stdout);
		if (set.n) {
			omen_buf_printf(&out, "%-10s  %-11s  %-13s %4s  %s\n", "commit", "risk", "lines", "files",
				"reasons | summary");
			for (i = 0; i < set.n; i++)
				text_line(&out, &set, &set.v[i], color);
			omen_buf_printf(&out, "%zu scored; risky at %.2f or more; scores are advisory\n",
				set.n, (double)set.threshold);
		}
		e = 0;
	}
	if (e) {
		rc = cli_fatal(NULL);
		goto done;
	}
	if (outpath) {
		if ((e = omen_output_write(outpath, out.ptr ? out.ptr : "", out.len))) {
			rc = cli_fatal(NULL);
			goto done;
		}
	} else if (out.len && fwrite(out.ptr, 1, out.len, stdout) != out.len) {
		rc = cli_fatal("cannot write standard output");
		goto done;
	}
	if (fail_above >= 0)
		for (i = 0; i < set.n; i++)
			if (set.v[i].prob > (float)fail_above)   /* as printed: %.9g round-trips */
				rc = EXIT_RISK;
done:
	omen_buf_free(&out);
	omen_score_set_free(&set);
	omen_scorer_free(sc);
	omen_repo_free(repo);
	free(ids);
	free(desc);
	free(revs);
	return rc;
}
