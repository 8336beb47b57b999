/* git omen label: find fix commits, trace the lines they repair to the
 * commits that introduced them (SZZ), write the label file, print a summary. */
#include <stdlib.h>
#include <string.h>
#include "cli/cli.h"
#include "cli/options.h"
#include "omen/label.h"
#include "omen/mpi.h"

static const char *mode_name(int m)
{
	switch (m) {
	case OMEN_LABEL_MODE_GREW: return "grew";
	case OMEN_LABEL_MODE_REWRITTEN: return "rewritten";
	case OMEN_LABEL_MODE_UPTODATE: return "up-to-date";
	default: return "full";
	}
}

static double share(size_t a, size_t b) { return b ? (double)a / (double)b : 0.0; }

static void print_text(const omen_label_summary *s, const char *path)
{
	switch (s->mode) {
	case OMEN_LABEL_MODE_UPTODATE:
		printf("labels are up to date with %.12s (use --full to relabel)\n", s->head);
		break;
	case OMEN_LABEL_MODE_GREW:
		if (s->reused_commits)
			printf("history grew by %zu commit%s since the previous labels; reused the saved pass "
				"state of %zu commits and traced only the new ones\n", s->new_commits,
				s->new_commits == 1 ? "" : "s", s->reused_commits);
		else
			printf("history grew by %zu commit%s since the previous labels; relabelled\n",
				s->new_commits, s->new_commits == 1 ? "" : "s");
		break;
	case OMEN_LABEL_MODE_REWRITTEN:
		printf("history was rewritten since the previous labels (old head is not an ancestor); relabelled\n");
		break;
	default:
		break;
	}
	printf("commits     %zu (%zu merges, never candidates)\n", s->commits, s->merges);
	printf("inducing    %zu\n", s->inducing);
	printf("clean       %zu\n", s->clean);
	if (s->horizon_days > 0)
		printf("unknown     %zu (newer than the %lld-day horizon, merges, shallow boundary)\n", s->unknown,
			(long long)s->horizon_days);
	else
		printf("unknown     %zu (newer than the window, merges, shallow boundary)\n", s->unknown);
	if (!s->fixes) {
		printf("no fix commits found: nothing is inducing; every commit is clean or unknown\n");
	} else {
		printf("fixes       %zu (pattern %zu, list %zu, issue %zu, named %zu)\n", s->fixes,
			s->fixes_by_pattern, s->fixes_by_list, s->fixes_by_issue, s->fixes_by_named);
		printf("traced      %zu fixes, %zu lines\n", s->fixes_traced, s->traced_lines);
		printf("not traced  %zu cosmetic, %zu non-code only; %zu non-code lines left out\n",
			s->fixes_cosmetic, s->fixes_noncode, s->noncode_lines);
		if (s->minor_dropped)
			printf("minor       %zu candidates dropped (under the minimum share of their fix's lines)\n",
				s->minor_dropped);
		if (s->named_dropped)
			printf("named       %zu other candidates dropped (the named commit decides)\n", s->named_dropped);
		printf("add-only    %zu fixes (%.1f%%), %zu of them traced through the lines around their "
			"insertions\n", s->fixes_add_only, 100.0 * share(s->fixes_add_only, s->fixes),
			s->fixes_insertion);
		if (s->fixes_skipped_large)
			printf("skipped     %zu fixes touching too many files\n", s->fixes_skipped_large);
		printf("latency     %.1f / %.1f / %.1f days (quartiles, inducing to fix)\n",
			s->latency_days_q[0], s->latency_days_q[1], s->latency_days_q[2]);
	}
	if (s->closing_only || s->outside_only || s->feature_only)
		printf("not fixes   %zu with only a closing word and number, %zu with fix words only in "
			"trailers or quotes, %zu announcing new work\n", s->closing_only, s->outside_only,
			s->feature_only);
	if (s->horizon_days > 0)
		printf("horizon     %lld days: inducing = needs a fix within %lld days; %zu commits fixed only "
			"later\n", (long long)s->horizon_days, (long long)s->horizon_days, s->beyond_horizon);
	if (s->shallow)
		printf("shallow history: %zu boundary commits are unknown\n", s->boundary);
	if (s->blobs.wanted)
		printf("blobs       %zu absent in %zu commits (found in %.1f s); %zu fetched from '%s' "
			"in %zu batches (%.1f s)\n", s->blobs.wanted, s->blobs.scanned, s->blobs.scan_seconds,
			s->blobs.fetched, s->blobs.remote[0] ? s->blobs.remote : "-", s->blobs.batches,
			s->blobs.fetch_seconds);
	if (s->blobs.trees_wanted)
		printf("trees       %zu absent root trees (a tree-less clone), %zu fetched first\n",
			s->blobs.trees_wanted, s->blobs.trees_fetched);
	if (s->files_absent)
		printf("absent      %zu of %zu file changes (%.1f%%) had a blob missing: no lines, their "
			"commits never clean, origins in those files unknown from there on; %zu fixes "
			"unreadable\n", s->files_absent, s->file_changes,
			100.0 * share(s->files_absent, s->file_changes), s->fixes_absent);
	if (path)
		printf("wrote %s\n", path);
}

static void print_json(const omen_label_summary *s)
{
	printf("{\"mode\":\"%s\",\"head\":\"%s\",\"commits\":%zu,\"merges\":%zu,\"inducing\":%zu,"
		"\"clean\":%zu,\"unknown\":%zu,\"fixes\":%zu,\"fixes_by\":{\"pattern\":%zu,\"list\":%zu,"
		"\"issue\":%zu,\"named\":%zu},\"fixes_traced\":%zu,\"traced_lines\":%zu,"
		"\"fixes_add_only\":%zu,\"add_only_share\":%.4f,\"fixes_skipped_large\":%zu,"
		"\"named_links\":%zu,\"latency_days\":[%.3f,%.3f,%.3f],\"shallow\":%s,\"boundary\":%zu,"
		"\"list_entries\":%zu,\"list_unmatched\":%zu,\"new_commits\":%zu,\"reused_commits\":%zu,"
		"\"state_peak_bytes\":%zu,\"blobs\":{\"partial\":%s,\"scanned_commits\":%zu,"
		"\"absent\":%zu,\"fetched\":%zu,\"trees_absent\":%zu,\"trees_fetched\":%zu,"
		"\"batches\":%zu,\"scan_seconds\":%.3f,\"fetch_seconds\":%.3f,\"fetch_cpu_seconds\":%.3f,"
		"\"skipped_files\":%zu,\"file_changes\":%zu,\"fixes_unreadable\":%zu},"
		"\"horizon_days\":%lld,\"beyond_horizon\":%zu,"
		"\"rules\":{\"closing_only\":%zu,\"outside_only\":%zu,\"feature_only\":%zu,\"fixes_cosmetic\":%zu,"
		"\"fixes_non_code\":%zu,\"non_code_lines\":%zu,\"non_code_patterns\":%zu,"
		"\"named_dropped\":%zu,\"fixes_insertion\":%zu,\"minor_dropped\":%zu},\"seconds\":%.3f}\n",
		mode_name(s->mode), s->head, s->commits, s->merges, s->inducing, s->clean, s->unknown,
		s->fixes, s->fixes_by_pattern, s->fixes_by_list, s->fixes_by_issue, s->fixes_by_named,
		s->fixes_traced, s->traced_lines, s->fixes_add_only, share(s->fixes_add_only, s->fixes),
		s->fixes_skipped_large, s->named_links, s->latency_days_q[0], s->latency_days_q[1],
		s->latency_days_q[2], s->shallow ? "true" : "false", s->boundary, s->list_entries,
		s->list_unmatched, s->new_commits, s->reused_commits, s->state_peak_bytes,
		s->blobs.partial ? "true" : "false", s->blobs.scanned, s->blobs.wanted, s->blobs.fetched,
		s->blobs.trees_wanted, s->blobs.trees_fetched, s->blobs.batches, s->blobs.scan_seconds,
		s->blobs.fetch_seconds, s->blobs.fetch_cpu_seconds, s->files_absent,
		s->file_changes, s->fixes_absent, (long long)s->horizon_days, s->beyond_horizon,
		s->closing_only, s->outside_only, s->feature_only, s->fixes_cosmetic, s->fixes_noncode,
		s->noncode_lines, s->noncode_patterns, s->named_dropped, s->fixes_insertion, s->minor_dropped,
		s->seconds);
}

static const cli_option opt_fix_pattern = {
	"--fix-pattern", CLI_STRING, "<re>", 0, 0, NULL,
	"fix message pattern, POSIX extended regex, case-insensitive"};
static const cli_option opt_fix_list = {
	"--fix-list", CLI_STRING, "<file>", 0, 0, NULL,
	"extra fixes: commit ids or issue ids, optional YYYY-MM-DD date"};
static const cli_option opt_max_fix_files = {
	"--max-fix-files", CLI_INT, "<n>", 0, 1000000000, "a count from 0 to 1000000000",
	"skip fixes touching more files than this (default omen.maxFixFiles, else 50; 0: no limit)"};
static const cli_option opt_no_skip_blank = {
	"--no-skip-blank", CLI_FLAG, NULL, 0, 0, NULL, "also trace blank and whitespace-only lines"};
static const cli_option opt_no_skip_comments = {
	"--no-skip-comments", CLI_FLAG, NULL, 0, 0, NULL, "also trace comment-only lines"};
static const cli_option opt_no_ws_origin = {
	"--no-ws-origin", CLI_FLAG, NULL, 0, 0, NULL, "a whitespace-only rewrite takes a new origin"};
static const cli_option opt_no_renames = {
	"--no-renames", CLI_FLAG, NULL, 0, 0, NULL, "a renamed file starts with new origins"};
static const cli_option opt_no_issue_dates = {
	"--no-issue-dates", CLI_FLAG, NULL, 0, 0, NULL,
	"keep candidates newer than the fix's issue date"};
/* issue 10 rules */
static const cli_option opt_horizon = {
	"--horizon", CLI_STRING, "<days>", 0, 0, NULL,
	"inducing = fixed within this many days; 0 = none (default 365 on a history of 5 years or "
	"more, else none)"};
static const cli_option opt_cosmetic = {
	"--cosmetic-pattern", CLI_STRING, "<re>", 0, 0, NULL,
	"fixes that are cosmetic: recorded, not traced ('' = off)"};
static const cli_option opt_noncode = {
	"--non-code-paths", CLI_STRING, "<globs>", 0, 0, NULL,
	"paths never traced (docs, tests, build, CI, vendored; '' = off)"};
static const cli_option opt_closing = {
	"--closing-refs", CLI_FLAG, NULL, 0, 0, NULL, "'closes #12' alone makes a fix"};
static const cli_option opt_whole = {
	"--whole-message", CLI_FLAG, NULL, 0, 0, NULL,
	"trailers, quoted text and revert subjects count as fix words"};
static const cli_option opt_feature = {
	"--feature-subjects", CLI_FLAG, NULL, 0, 0, NULL,
	"'Add crash recovery' may be a fix without the word fix or bug"};
static const cli_option opt_keep_other = {
	"--keep-other-candidates", CLI_FLAG, NULL, 0, 0, NULL,
	"a fix that names its commit keeps its other traced commits"};
static const cli_option opt_no_insertion = {
	"--no-insertion-context", CLI_FLAG, NULL, 0, 0, NULL,
	"an add-only fix is not traced through the lines around it"};
static const cli_option opt_min_share = {
	"--min-line-share", CLI_INT, "<pct>", 0, 100, "a percentage from 0 to 100",
	"drop candidates behind less than this share of a fix's lines (default 25; 0 = off)"};
static const cli_option opt_full = {
	"--full", CLI_FLAG, NULL, 0, 0, NULL, "relabel even when the previous labels are up to date"};
static const cli_option opt_dump_origins = {
	"--dump-origins", CLI_STRING, "<file>", 0, 0, NULL,
	"testing: write the origin of every line a fix deletes"};

typedef struct {
	const char *labels, *format, *fix_pattern, *fix_list, *dump;
	long long window, max_fix_files;
	int window_set, max_set, no_blank, no_comments, no_ws, no_renames, no_issue, full;
	const char *horizon, *cosmetic, *noncode;
	long long min_share;
	int min_share_set, closing, whole, feature, keep_other, no_insertion;
} label_args;

/* Parses argv into o and a; -1 to go on, else the exit code. */
static int parse_args(omen_label_opts *o, label_args *a, const char ***revs, int argc, char **argv)
{
	const cli_use uses[] = {
		{&cli_opt_labels, &a->labels, NULL,
			"write labels here (default omen.labels, else $GIT_DIR/omen/labels.jsonl)", NULL},
		{&opt_fix_pattern, &a->fix_pattern, NULL, NULL, NULL},
		{&opt_fix_list, &a->fix_list, NULL, NULL, NULL},
		{&cli_opt_window, &a->window, NULL, NULL, &a->window_set},
		{&opt_max_fix_files, &a->max_fix_files, NULL, NULL, &a->max_set},
		{&opt_no_skip_blank, &a->no_blank, NULL, NULL, NULL},
		{&opt_no_skip_comments, &a->no_comments, NULL, NULL, NULL},
		{&opt_no_ws_origin, &a->no_ws, NULL, NULL, NULL},
		{&opt_no_renames, &a->no_renames, NULL, NULL, NULL},
		{&opt_no_issue_dates, &a->no_issue, NULL, NULL, NULL},
		{&opt_horizon, &a->horizon, NULL, NULL, NULL},
		{&opt_cosmetic, &a->cosmetic, NULL, NULL, NULL},
		{&opt_noncode, &a->noncode, NULL, NULL, NULL},
		{&opt_closing, &a->closing, NULL, NULL, NULL},
		{&opt_whole, &a->whole, NULL, NULL, NULL},
		{&opt_feature, &a->feature, NULL, NULL, NULL},
		{&opt_keep_other, &a->keep_other, NULL, NULL, NULL},
		{&opt_no_insertion, &a->no_insertion, NULL, NULL, NULL},
		{&opt_min_share, &a->min_share, NULL, NULL, &a->min_share_set},
		{&opt_full, &a->full, NULL, NULL, NULL},
		{&cli_opt_format, &a->format, cli_formats_text_json, NULL, NULL},
		{&opt_dump_origins, &a->dump, NULL, NULL, NULL},
	};
	const cli_command cmd = {"label", "usage: git omen label [<rev>...] [<options>]\n", NULL,
		uses, sizeof(uses) / sizeof(uses[0])};
	size_t n;
	int rc;
	memset(a, 0, sizeof(*a));
	a->format = "text";
	if ((rc = cli_parse(&cmd, argc, argv, revs, &n)) >= 0)
		return rc;
	o->fix_pattern = a->fix_pattern;
	o->fix_list = a->fix_list;
	o->dump_origins = a->dump;
	if (a->window_set)
		o->window_days = a->window;
	if (a->max_set)
		o->max_fix_files = (int)a->max_fix_files;
	if (a->no_blank)
		o->skip_blank = 0;
	if (a->no_comments)
		o->skip_comments = 0;
	if (a->no_ws)
		o->ws_keeps_origin = 0;
	if (a->no_renames)
		o->follow_renames = 0;
	if (a->no_issue)
		o->use_issue_dates = 0;
	if (a->full || o->dump_origins)
		o->incremental = 0;
	o->cosmetic_pattern = a->cosmetic;
	o->noncode_paths = a->noncode;
	if (a->closing)
		o->closing_refs = 1;
	if (a->whole)
		o->whole_message = 1;
	if (a->feature)
		o->feature_subjects = 1;
	if (a->keep_other)
		o->named_decides = 0;
	if (a->no_insertion)
		o->insertion_context = 0;
	if (a->min_share_set)
		o->min_line_share = (int)a->min_share;
	if (a->horizon) {
		/* a bad horizon is a fatal error (issue 10: 128, old labels kept) */
		char *end;
		long long h = strtoll(a->horizon, &end, 10);
		if (end == a->horizon || *end || h < 0 || h > 1000000) {
			omen_error_set(OMEN_EINVAL, "bad horizon '%s': not a number of days (0 = no horizon)",
				a->horizon);
			free(*revs);   /* cli_parse's list of positional arguments */
			*revs = NULL;
			return cli_fatal(NULL);
		}
		o->horizon_days = h;
	}
	o->revs = n ? *revs : NULL;
	return -1;
}

int cmd_label(int argc, char **argv)
{
	omen_label_opts o;
	omen_label_summary s;
	label_args a;
	omen_repo *repo = NULL;
	const char **revs = NULL;
	int rc = EXIT_OK;

	omen_label_opts_init(&o);
	if ((rc = parse_args(&o, &a, &revs, argc, argv)) >= 0)
		return rc;
	rc = EXIT_OK;
	/* under mpirun each rank labels its shard of the paths, rank 0 writes
	 * (issue 13, DEVELOPERS.md "MPI") */
	omen_mpi_label_setup(&o);
	if (o.parts > 1 && o.dump_origins) {
		rc = omen_mpi_rank() ? EXIT_USAGE :
			cli_usage("label", "--dump-origins runs as one process, not under mpirun");
		goto done;
	}
	if (omen_repo_open(&repo, NULL) || omen_label_run(&s, repo, &o, a.labels)) {
		rc = cli_fatal(NULL);
		goto done;
	}
	if (omen_mpi_rank())
		goto done; /* rank 0 speaks for the run */
	if (s.list_unmatched)
		cli_warning("%zu of %zu fix list entries matched no commit", s.list_unmatched,
			s.list_entries);
	if (s.blobs.notice[0])
		cli_notice("%s", s.blobs.notice);
	if (s.untraced_missing && s.files_absent)
		cli_notice("%zu deleted lines of fixes have unknown origins (files with absent blobs)",
			s.untraced_missing);
	else if (s.untraced_missing)
		cli_warning("%zu deleted lines had no origin state", s.untraced_missing);
	/* the non-code list took every line (not absent blobs, issue 12) */
	if (s.fixes && !s.traced_lines && !s.files_absent && (s.fixes_noncode || s.noncode_lines))
		cli_notice("nothing was traced: every line the fixes changed is in a non-code path "
			"(omen.nonCodePaths / --non-code-paths)");
	if (!strcmp(a.format, "json"))
		print_json(&s);
	else
		print_text(&s, s.mode == OMEN_LABEL_MODE_UPTODATE ? NULL : a.labels);
done:
	omen_repo_free(repo);
	free(revs);
	return rc;
}
