/* Effort-aware metrics and the effort measure itself.
 *
 * Definitions (Kamei, Shihab, Adams, Hassan, Mockus, Sinha & Ubayashi,
 * "A large-scale empirical study of just-in-time quality assurance", IEEE
 * TSE 39(6), 2013, section 5): commits are inspected in ranking order and
 * effort is the code churn, lines added + deleted.
 * - Recall@20%Effort: share of the inducing commits among those inspected
 *   before the cumulative effort passes 20% of the total. A commit is
 *   inspected only when it fits whole inside the budget (cumulative effort
 *   including it <= 20%); inspection stops at the first one that does not
 *   (common practice: the budget is spent in ranking order).
 * - Effort@20%Recall: effort share of the shortest ranking prefix that holds
 *   at least 20% of the inducing commits.
 * - Popt (Mende & Koschke, "Effort-aware defect prediction models", CSMR
 *   2010, and PROMISE 2009; as used by Kamei et al. 2013): on the
 *   cumulative lift chart (x = effort share, y = recall) with points joined
 *   by straight lines, Popt = 1 - (A(opt) - A(m)) / (A(opt) - A(worst)),
 *   where opt inspects inducing commits first, smallest first, and worst
 *   inspects clean commits first and then inducing ones, largest first.
 * Ties in the model's score: smaller effort first, then dataset order
 * (stated in include/omen/eval.h; common practice, no single source).
 */
#include <fnmatch.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "omen/eval.h"
#include "omen/error.h"

const char *const omen_effort_exclude_default[] = {
	"vendor/", "third_party/", "third-party/", "thirdparty/", "external/",
	"node_modules/", "bower_components/", "Pods/",
	"*.min.js", "*.min.css", "*.map",
	"*.lock", "package-lock.json", "npm-shrinkwrap.json", "pnpm-lock.yaml", "go.sum",
	"*.pb.go", "*.pb.cc", "*.pb.h", "*_pb2.py", "*_pb2_grpc.py",
	"*.generated.*", "*_generated.*", "*.gen.go", "*.designer.cs",
	NULL
};

int omen_path_excluded(const char *path, const char *const *patterns, size_t npat)
{
	size_t i;
	const char *base;
	if (!path)
		return 0;
	base = strrchr(path, '/');
	base = base ? base + 1 : path;
	for (i = 0; i < npat; i++) {
		const char *p = patterns[i];
		size_t pl = strlen(p);
		if (pl == 0)
			continue;
		if (p[pl - 1] == '/') {
			/* a directory at any depth: "vendor/" matches "vendor/x" and "a/vendor/x" */
			const char *s = path;
			while (s) {
				if (!strncmp(s, p, pl))
					return 1;
				s = strchr(s, '/');
				if (s)
					s++;
			}
		} else if (!strchr(p, '/')) {
			if (!fnmatch(p, base, 0))
				return 1;
		} else if (!fnmatch(p, path, 0)) {
			return 1;
		}
	}
	return 0;
}

double omen_sample_effort(const omen_sample *s, const char *const *patterns, size_t npat,
	int *out_partial, int *out_excluded)
{
	double e = (double)s->la + (double)s->ld, cut = 0;
	int32_t f, h;
	if (out_partial)
		*out_partial = 0;
	if (out_excluded)
		*out_excluded = 0;
	if (!s->file_path || !npat)
		return e;
	for (f = 0; f < s->nfiles; f++) {
		if (!s->file_path[f] || !omen_path_excluded(s->file_path[f], patterns, npat))
			continue;
		if (out_excluded)
			*out_excluded = 1;
		if (s->capped && out_partial)
			*out_partial = 1;   /* dropped hunks of this file are not counted */
		if (!s->file_off || !s->hunk_new_lines || !s->hunk_old_lines)
			continue;
		/* -U0 hunks: old_lines are the deleted lines, new_lines the added ones */
		for (h = s->file_off[f]; h < s->file_off[f + 1]; h++)
			cut += (double)s->hunk_new_lines[h] + (double)s->hunk_old_lines[h];
	}
	e -= cut;
	return e > 0 ? e : 0;
}
