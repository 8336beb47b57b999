/* git omen label: find fix commits, trace the lines they repair to the
 * commits that introduced them (SZZ), write the label file, print a summary. */
#include <limits.h>
#include <stdlib.h>
#include <string.h>
#include "cli/cli.h"
#include "omen/label.h"

static const char usage_text[] =
	"usage: git omen label [<rev>...] [<options>]\n"
	"\n"
	"  -o <file>              write labels here (default $GIT_DIR/omen/labels.jsonl)\n"
	"  --fix-pattern <re>     fix message pattern, POSIX extended regex, case-insensitive\n"
	"  --fix-list <file>      extra fixes: commit ids or issue ids, optional YYYY-MM-DD date\n"
	"  --window <days>        commits newer than this before the newest stay unknown (90)\n"
	"  --max-fix-files <n>    skip fixes touching more files than this (50)\n"
	"  --no-skip-blank        also trace blank and whitespace-only lines\n"
	"  --no-skip-comments     also trace comment-only lines\n"
	"  --no-ws-origin         a whitespace-only rewrite takes a new origin\n"
	"  --no-renames           a renamed file starts with new origins\n"
	"  --no-issue-dates       keep candidates newer than the fix's issue date\n"
	"  --horizon <days>       inducing = fixed within this many days; 0 = none\n"
	"                         (default 365 on a history of 5 years or more, else none)\n"
	"  --cosmetic-pattern <re> fixes that are cosmetic: recorded, not traced ('' = off)\n"
	"  --non-code-paths <globs> paths never traced (docs, tests, build, CI, vendored; '' = off)\n"
	"  --closing-refs         'closes #12' alone makes a fix\n"
	"  --whole-message        trailers, quoted text and revert subjects count as fix words\n"
	"  --feature-subjects     'Add crash recovery' may be a fix without the word fix or bug\n"
	"  --keep-other-candidates a fix that names its commit keeps its other traced commits\n"
	"  --no-insertion-context an add-only fix is not traced through the lines around it\n"
	"  --min-line-share <pct> drop candidates behind less than this share of a fix's lines (25)\n"
	"  --full                 relabel even when the previous labels are up to date\n"
	"  --format <fmt>         summary as text (default) or json\n"
	"  --dump-origins <file>  testing: write the origin of every line a fix deletes\n"
	"  -h, --help             show this help\n";

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
		"\"state_peak_bytes\":%zu,\"horizon_days\":%lld,\"beyond_horizon\":%zu,"
		"\"rules\":{\"closing_only\":%zu,\"outside_only\":%zu,\"feature_only\":%zu,\"fixes_cosmetic\":%zu,"
		"\"fixes_non_code\":%zu,\"non_code_lines\":%zu,\"non_code_patterns\":%zu,"
		"\"named_dropped\":%zu,\"fixes_insertion\":%zu,\"minor_dropped\":%zu},\"seconds\":%.3f}\n",
		mode_name(s->mode), s->head, s->commits, s->merges, s->inducing, s->clean, s->unknown,
		s->fixes, s->fixes_by_pattern, s->fixes_by_list, s->fixes_by_issue, s->fixes_by_named,
		s->fixes_traced, s->traced_lines, s->fixes_add_only, share(s->fixes_add_only, s->fixes),
		s->fixes_skipped_large, s->named_links, s->latency_days_q[0], s->latency_days_q[1],
		s->latency_days_q[2], s->shallow ? "true" : "false", s->boundary, s->list_entries,
		s->list_unmatched, s->new_commits, s->reused_commits, s->state_peak_bytes,
		(long long)s->horizon_days, s->beyond_horizon, s->closing_only, s->outside_only, s->feature_only,
		s->fixes_cosmetic, s->fixes_noncode, s->noncode_lines, s->noncode_patterns, s->named_dropped, s->fixes_insertion, s->minor_dropped,
		s->seconds);
}

int cmd_label(int argc, char **argv)
{
	omen_label_opts o;
	omen_label_summary s;
	omen_repo *repo = NULL;
	const char *out = NULL, *format = "text", *val;
	const char **revs = NULL;
	int nrevs = 0, i, r, rc = EXIT_OK, e;
	long long n;

	omen_label_opts_init(&o);
	if (!(revs = calloc((size_t)argc + 1, sizeof(*revs))))
		return cli_fatal("out of memory");
	for (i = 1; i < argc; i++) {
		const char *a = argv[i];
		if (!strcmp(a, "-h") || !strcmp(a, "--help")) {
			fputs(usage_text, stdout);
			goto done;
		} else if ((r = cli_opt_value(argc, argv, &i, "-o", &val))) {
			if (r < 0)
				goto missing;
			out = val;
		} else if ((r = cli_opt_value(argc, argv, &i, "--fix-pattern", &val))) {
			if (r < 0)
				goto missing;
			o.fix_pattern = val;
		} else if ((r = cli_opt_value(argc, argv, &i, "--fix-list", &val))) {
			if (r < 0)
				goto missing;
			o.fix_list = val;
		} else if ((r = cli_opt_value(argc, argv, &i, "--window", &val))) {
			if (r < 0)
				goto missing;
			if (cli_parse_int(&n, val, 0, LLONG_MAX)) {
				rc = cli_usage("label", "--window: '%s' is not a number of days", val);
				goto done;
			}
			o.window_days = n;
		} else if ((r = cli_opt_value(argc, argv, &i, "--max-fix-files", &val))) {
			if (r < 0)
				goto missing;
			if (cli_parse_int(&n, val, 0, 1000000000)) {
				rc = cli_usage("label", "--max-fix-files: '%s' is not a count", val);
				goto done;
			}
			o.max_fix_files = (int)n;
		} else if ((r = cli_opt_value(argc, argv, &i, "--horizon", &val))) {
			if (r < 0)
				goto missing;
			if (cli_parse_int(&n, val, 0, 1000000)) {
				fprintf(stderr, "git omen: bad horizon '%s': not a number of days (0 = no horizon)\n", val);
				rc = EXIT_FATAL;
				goto done;
			}
			o.horizon_days = n;
		} else if ((r = cli_opt_value(argc, argv, &i, "--cosmetic-pattern", &val))) {
			if (r < 0)
				goto missing;
			o.cosmetic_pattern = val;
		} else if ((r = cli_opt_value(argc, argv, &i, "--non-code-paths", &val))) {
			if (r < 0)
				goto missing;
			o.noncode_paths = val;
		} else if (!strcmp(a, "--closing-refs")) {
			o.closing_refs = 1;
		} else if (!strcmp(a, "--feature-subjects")) {
			o.feature_subjects = 1;
		} else if (!strcmp(a, "--whole-message")) {
			o.whole_message = 1;
		} else if ((r = cli_opt_value(argc, argv, &i, "--min-line-share", &val))) {
			if (r < 0)
				goto missing;
			if (cli_parse_int(&n, val, 0, 100)) {
				rc = cli_usage("label", "--min-line-share: '%s' is not a percentage (0 to 100)", val);
				goto done;
			}
			o.min_line_share = (int)n;
		} else if (!strcmp(a, "--no-insertion-context")) {
			o.insertion_context = 0;
		} else if (!strcmp(a, "--keep-other-candidates")) {
			o.named_decides = 0;
		} else if ((r = cli_opt_value(argc, argv, &i, "--format", &val))) {
			if (r < 0)
				goto missing;
			if (strcmp(val, "text") && strcmp(val, "json")) {
				rc = cli_usage("label", "--format: '%s' is not text or json", val);
				goto done;
			}
			format = val;
		} else if ((r = cli_opt_value(argc, argv, &i, "--dump-origins", &val))) {
			if (r < 0)
				goto missing;
			o.dump_origins = val;
		} else if (!strcmp(a, "--no-skip-blank")) {
			o.skip_blank = 0;
		} else if (!strcmp(a, "--no-skip-comments")) {
			o.skip_comments = 0;
		} else if (!strcmp(a, "--no-ws-origin")) {
			o.ws_keeps_origin = 0;
		} else if (!strcmp(a, "--no-renames")) {
			o.follow_renames = 0;
		} else if (!strcmp(a, "--no-issue-dates")) {
			o.use_issue_dates = 0;
		} else if (!strcmp(a, "--full")) {
			o.incremental = 0;
		} else if (a[0] == '-' && a[1]) {
			rc = cli_usage("label", "unknown option '%s'; see 'git omen label --help'", a);
			goto done;
		} else {
			revs[nrevs++] = a;
		}
	}
	if (o.dump_origins)
		o.incremental = 0;
	o.revs = nrevs ? revs : NULL;
	if ((e = omen_repo_open(&repo, NULL))) {
		rc = cli_fatal(NULL);
		goto done;
	}
	if ((e = omen_label_run(&s, repo, &o, out))) {
		rc = cli_fatal(NULL);
		goto done;
	}
	if (s.list_unmatched)
		fprintf(stderr, "git omen: warning: %zu of %zu fix list entries matched no commit\n",
			s.list_unmatched, s.list_entries);
	if (s.fixes && !s.traced_lines && (s.fixes_noncode || s.noncode_lines))
		fprintf(stderr, "git omen: notice: nothing was traced: every line the fixes changed is in a "
			"non-code path (omen.nonCodePaths / --non-code-paths)\n");
	if (s.untraced_missing)
		fprintf(stderr, "git omen: warning: %zu deleted lines had no origin state\n", s.untraced_missing);
	if (!strcmp(format, "json"))
		print_json(&s);
	else
		print_text(&s, s.mode == OMEN_LABEL_MODE_UPTODATE ? NULL : out);
	goto done;
missing:
	rc = cli_usage("label", "option '%s' needs a value", argv[i]);
done:
	omen_repo_free(repo);
	free(revs);
	return rc;
}
