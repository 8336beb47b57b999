/* git omen explain: which files, hunks, lines and metrics drove a commit's
 * score, and the closest past commits that later needed fixes (advisory). */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "cli/cli.h"
#include "cli/options.h"


static void write_json(omen_buf *b, const omen_explanation *x, float thr, size_t top)
{
	const omen_score_result *r = &x->result;
	size_t i;
	omen_buf_puts(b, "{\"id\":");
	omen_buf_put_json_cstr(b, r->id);
	omen_buf_puts(b, ",\"summary\":");
	omen_buf_put_json_cstr(b, r->summary);
	omen_buf_puts(b, ",\"probability\":");
	omen_buf_put_json_number(b, r->prob, 6);
	omen_buf_puts(b, ",\"logit\":");
	omen_buf_put_json_number(b, r->logit, 6);
	omen_buf_puts(b, ",\"threshold\":");
	omen_buf_put_json_number(b, thr, 6);
	omen_buf_printf(b, ",\"band\":\"%s\",\"reasons\":[", omen_band_names[r->band]);
	for (i = 0; i < (size_t)r->nreasons; i++) {
		omen_buf_printf(b, "%s{\"kind\":\"%s\",\"text\":", i ? "," : "", omen_reason_names[r->reasons[i].kind]);
		omen_buf_put_json_cstr(b, r->reasons[i].text);
		omen_buf_puts(b, "}");
	}
	omen_buf_puts(b, "],\"files\":[");
	for (i = 0; i < x->nfiles && i < top; i++) {
		omen_buf_puts(b, i ? ",{\"path\":" : "{\"path\":");
		omen_buf_put_json_cstr(b, x->files[i].path);
		omen_buf_puts(b, ",\"attention\":");
		omen_buf_put_json_number(b, x->files[i].weight, 6);
		omen_buf_puts(b, ",\"contribution\":");
		omen_buf_put_json_number(b, x->files[i].contrib, 6);
		omen_buf_printf(b, ",\"added\":%d,\"deleted\":%d}", (int)x->files[i].added, (int)x->files[i].deleted);
	}
	omen_buf_puts(b, "],\"hunks\":[");
	for (i = 0; i < x->nhunks && i < top; i++) {
		const omen_hunk_score *h = &x->hunks[i];
		omen_buf_puts(b, i ? ",{\"path\":" : "{\"path\":");
		omen_buf_put_json_cstr(b, h->path);
		omen_buf_printf(b, ",\"new_start\":%d,\"new_lines\":%d,\"old_start\":%d,\"old_lines\":%d,\"weight\":",
			(int)h->new_start, (int)h->new_lines, (int)h->old_start, (int)h->old_lines);
		omen_buf_put_json_number(b, h->weight, 6);
		omen_buf_puts(b, ",\"contribution\":");
		omen_buf_put_json_number(b, h->contrib, 6);
		omen_buf_puts(b, "}");
	}
	omen_buf_puts(b, "],\"lines\":[");
	for (i = 0; i < x->nlines; i++) {
		const omen_line_score *l = &x->lines[i];
		omen_buf_puts(b, i ? ",{\"path\":" : "{\"path\":");
		omen_buf_put_json_cstr(b, l->path);
		omen_buf_printf(b, ",\"line\":%d,\"origin\":\"%c\",\"contribution\":", (int)l->line, l->origin);
		omen_buf_put_json_number(b, l->contrib, 6);
		omen_buf_puts(b, ",\"text\":");
		omen_buf_put_json_cstr(b, l->text);
		omen_buf_puts(b, "}");
	}
	omen_buf_puts(b, "],\"metrics\":[");
	for (i = 0; i < OMEN_NMETRICS; i++) {
		const omen_metric_score *m = &x->metrics[i];
		omen_buf_printf(b, "%s{\"name\":\"%s\",\"value\":", i ? "," : "", omen_metric_names[m->metric]);
		omen_buf_put_json_number(b, m->value, 6);
		omen_buf_puts(b, ",\"typical\":");
		omen_buf_put_json_number(b, m->typical, 6);
		omen_buf_puts(b, ",\"contribution\":");
		omen_buf_put_json_number(b, m->contrib, 6);
		omen_buf_puts(b, "}");
	}
	omen_buf_puts(b, "],\"message_contribution\":");
	omen_buf_put_json_number(b, x->message_contrib, 6);
	omen_buf_puts(b, ",\"neighbours\":[");
	for (i = 0; i < x->nneighbours; i++) {
		const omen_neighbour *n = &x->neighbours[i];
		omen_buf_puts(b, i ? ",{\"id\":" : "{\"id\":");
		omen_buf_put_json_cstr(b, n->id);
		omen_buf_puts(b, ",\"summary\":");
		omen_buf_put_json_cstr(b, n->summary);
		omen_buf_puts(b, ",\"distance\":");
		omen_buf_put_json_number(b, n->distance, 6);
		omen_buf_printf(b, ",\"fixes\":%d}", n->nfixes);
	}
	omen_buf_puts(b, "]}\n");
}

static void hunk_range(omen_buf *b, const omen_hunk_score *h)
{
	omen_buf_puts_shown(b, h->path, 0);
	if (h->new_lines > 1)
		omen_buf_printf(b, ":%d-%d", (int)h->new_start, (int)(h->new_start + h->new_lines - 1));
	else if (h->new_lines == 1)
		omen_buf_printf(b, ":%d", (int)h->new_start);
	else
		omen_buf_printf(b, ":-%d,%d (deleted)", (int)h->old_start, (int)h->old_lines);
}

static void write_text(omen_buf *b, const omen_explanation *x, float thr, size_t top)
{
	const omen_score_result *r = &x->result;
	size_t i;
	/* every path, line and message from history goes through the sanitiser */
	omen_buf_printf(b, "commit %s\n  ", r->id);
	omen_buf_puts_shown(b, r->summary, 0);
	omen_buf_printf(b, "\nrisk %.2f (%s; risky at %.2f or more); scores are advisory\n",
		(double)r->prob, omen_band_names[r->band], (double)thr);
	for (i = 0; i < (size_t)r->nreasons; i++) {
		omen_buf_puts(b, "  reason: ");
		omen_buf_puts_shown(b, r->reasons[i].text, 0);
		omen_buf_puts(b, "\n");
	}
	if (r->capped)
		omen_buf_puts(b, "  (large commit: the model saw its largest files and hunks only)\n");
	omen_buf_puts(b, "\nfiles (attention, gradient x input):\n");
	for (i = 0; i < x->nfiles && i < top; i++) {
		omen_buf_printf(b, "  %4.0f%%  %+8.4f  ", 100.0 * x->files[i].weight, (double)x->files[i].contrib);
		omen_buf_puts_shown(b, x->files[i].path, 0);
		omen_buf_printf(b, " (+%d -%d)\n", (int)x->files[i].added, (int)x->files[i].deleted);
	}
	omen_buf_puts(b, "\nhunks:\n");
	for (i = 0; i < x->nhunks && i < top; i++) {
		omen_buf_printf(b, "  %4.0f%%  %+8.4f  ", 100.0 * x->hunks[i].weight, (double)x->hunks[i].contrib);
		hunk_range(b, &x->hunks[i]);
		omen_buf_puts(b, "\n");
	}
	omen_buf_puts(b, "\nlines (gradient x input):\n");
	for (i = 0; i < x->nlines; i++) {
		omen_buf_printf(b, "  %+8.4f  ", (double)x->lines[i].contrib);
		omen_buf_puts_shown(b, x->lines[i].path, 0);
		omen_buf_printf(b, ":%c%d  ", x->lines[i].origin, (int)x->lines[i].line);
		omen_buf_puts_shown(b, x->lines[i].text, 80);
		omen_buf_puts(b, "\n");
	}
	omen_buf_puts(b, "\nmetrics (gradient x standardized input; typical of the training history):\n");
	for (i = 0; i < OMEN_NMETRICS; i++) {
		const omen_metric_score *m = &x->metrics[i];
		omen_buf_printf(b, "  %-8s %10.4g  typical %10.4g  %+8.4f %s\n", omen_metric_names[m->metric],
			(double)m->value, (double)m->typical, (double)m->contrib,
			m->contrib > 0 ? "pushed up" : m->contrib < 0 ? "pushed down" : "");
	}
	omen_buf_printf(b, "  message           %+8.4f\n", (double)x->message_contrib);
	omen_buf_puts(b, "\nclosest past commits that later needed fixes:\n");
	if (!x->nneighbours)
		omen_buf_puts(b, "  (none: no labelled inducing commits; run 'git omen label')\n");
	for (i = 0; i < x->nneighbours; i++) {
		omen_buf_printf(b, "  %.10s  distance %5.2f  %d fix%s  ", x->neighbours[i].id,
			(double)x->neighbours[i].distance, x->neighbours[i].nfixes,
			x->neighbours[i].nfixes == 1 ? "" : "es");
		omen_buf_puts_shown(b, x->neighbours[i].summary, 60);
		omen_buf_puts(b, "\n");
	}
}

static const cli_option opt_top = {
	"--top", CLI_INT, "<n>", 1, 1000, "a count from 1 to 1000",
	"how many files, hunks and neighbours to show (default 5)"};

int cmd_explain(int argc, char **argv)
{
	const char *model = NULL, *format = "text", *rev;
	const char **pos = NULL;
	omen_repo *repo = NULL;
	omen_scorer *sc = NULL;
	omen_score_opts so = OMEN_SCORE_OPTS_INIT;
	omen_explanation x;
	omen_buf out = OMEN_BUF_INIT;
	git_oid id;
	long long top = 5;
	size_t npos;
	int rc = EXIT_OK, have_x = 0;
	const cli_use uses[] = {
		{&cli_opt_model, &model, NULL, NULL, NULL},
		{&cli_opt_format, &format, cli_formats_text_json, NULL, NULL},
		{&opt_top, &top, NULL, NULL, NULL},
	};
	const cli_command cmd = {"explain",
		"usage: git omen explain <commit> [<options>]\n"
		"\n"
		"Shows the files, hunks and lines that drove a commit's score (attention\n"
		"and gradient x input), the change metrics that pushed it up or down against\n"
		"the typical values, and the closest past commits that later needed fixes.\n"
		"Scores are advisory.\n", NULL,
		uses, sizeof(uses) / sizeof(uses[0])};

	if ((rc = cli_parse(&cmd, argc, argv, &pos, &npos)) >= 0)
		return rc;
	rc = EXIT_OK;
	rev = npos ? pos[0] : NULL;
	free(pos);
	if (npos > 1)
		return cli_usage("explain", "explain takes one commit");
	if (!rev)
		return cli_usage("explain", "which commit? usage: git omen explain <commit>");
	if (omen_repo_open(&repo, NULL) || omen_history_resolve(&id, repo, rev)) {
		rc = cli_fatal(NULL);
		goto done;
	}
	so.model_path = model;
	so.detail = 1;
	if (omen_scorer_open(&sc, repo, &so)) {
		rc = cli_fatal(NULL);
		goto done;
	}
	if (omen_score_explain(&x, sc, repo, &id, (int)top)) {
		rc = cli_fatal(NULL);
		omen_explanation_free(&x);
		goto done;
	}
	have_x = 1;
	if (!strcmp(format, "json"))
		write_json(&out, &x, omen_scorer_threshold(sc), (size_t)top);
	else
		write_text(&out, &x, omen_scorer_threshold(sc), (size_t)top);
	if (out.len && fwrite(out.ptr, 1, out.len, stdout) != out.len) {
		omen_error_set(OMEN_EIO, "cannot write standard output");
		rc = cli_fatal(NULL);
	}
done:
	if (have_x)
		omen_explanation_free(&x);
	omen_buf_free(&out);
	omen_scorer_free(sc);
	cli_blob_notice(repo);
	omen_repo_free(repo);
	return rc;
}
