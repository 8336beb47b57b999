/* Driver for tests/ref/history_vs_git.sh and the benchmark: walks a
 * repository with omen_history_walk and prints what it read, in a plain
 * format the ref script compares with `git log --numstat` and `git log -p -U0`.
 *
 *   dump_history [--renames] [--merges] [--threads N] [--lines] [--quiet]
 *                [--newest-first] [--first-parent] [--max-blob N] [--all]
 *                [--] [<rev>...]
 *
 * Output per commit:
 *   commit <hex> <nparents> <boundary>
 *   F <status> <flags> <added> <deleted> <path>        one per file (new path, or old when deleted)
 *   H -<old_start>,<old_lines> +<new_start>,<new_lines>  one per hunk, after its file
 *   -<text> / +<text>                                   lines, with --lines
 * --quiet prints only a final "commits N files N hunks N lines N" line. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "omen/omen.h"

typedef struct {
	int quiet, lines;
	size_t commits, files, hunks, nlines;
	uint64_t added, deleted;
} dump;

static int on_change(const omen_change *c, void *payload)
{
	dump *d = payload;
	d->commits++;
	d->files += c->nfiles;
	d->hunks += c->nhunks;
	d->nlines += c->nlines;
	for (size_t i = 0; i < c->nfiles; i++) {
		d->added += c->files[i].added;
		d->deleted += c->files[i].deleted;
	}
	if (d->quiet)
		return 0;
	printf("commit %s %u %d\n", c->commit.hex, c->commit.nparents, c->commit.boundary);
	for (size_t i = 0; i < c->nfiles; i++) {
		const omen_file *f = &c->files[i];
		printf("F %c %u %u %u %s\n", f->status, f->flags, f->added, f->deleted,
			f->new_path ? f->new_path : f->old_path);
		for (uint32_t h = f->hunk_off; h < f->hunk_off + f->nhunks; h++) {
			const omen_hunk *k = &c->hunks[h];
			printf("H -%d,%d +%d,%d\n", k->old_start, k->old_lines, k->new_start, k->new_lines);
			if (!d->lines)
				continue;
			for (uint32_t l = k->line_off; l < k->line_off + k->nlines; l++) {
				const omen_line *ln = &c->lines[l];
				putchar(ln->origin);
				fwrite(omen_line_text(c, ln), 1, ln->text_len, stdout);
				putchar('\n');
			}
		}
	}
	return 0;
}

int main(int argc, char **argv)
{
	omen_walk_opts o = OMEN_WALK_OPTS_INIT;
	omen_repo *r = NULL;
	dump d;
	const char **revs = calloc((size_t)argc + 1, sizeof(*revs));
	size_t nrev = 0;
	int rc, i;
	memset(&d, 0, sizeof(d));
	o.detect_renames = -1;
	o.with_lines = 0;
	for (i = 1; i < argc; i++) {
		const char *a = argv[i];
		if (!strcmp(a, "--renames")) o.detect_renames = 1;
		else if (!strcmp(a, "--merges")) o.include_merges = 1;
		else if (!strcmp(a, "--threads") && i + 1 < argc) o.threads = atoi(argv[++i]);
		else if (!strcmp(a, "--max-blob") && i + 1 < argc) o.max_blob_bytes = atoll(argv[++i]);
		else if (!strcmp(a, "--lines")) d.lines = 1, o.with_lines = 1;
		else if (!strcmp(a, "--quiet")) d.quiet = 1;
		else if (!strcmp(a, "--with-lines")) o.with_lines = 1;
		else if (!strcmp(a, "--newest-first")) o.newest_first = 1;
		else if (!strcmp(a, "--first-parent")) o.first_parent = 1;
		else if (!strcmp(a, "--all")) o.all = 1;
		else if (!strcmp(a, "--")) { i++; break; }
		else revs[nrev++] = a;
	}
	for (; i < argc; i++)
		revs[nrev++] = argv[i];
	if (nrev)
		o.revs = revs;
	git_libgit2_init();
	if ((rc = omen_repo_open(&r, NULL)) < 0)
		goto out;
	rc = omen_history_walk(r, &o, on_change, &d);
	if (!rc)
		printf("commits %zu files %zu hunks %zu lines %zu added %llu deleted %llu\n", d.commits,
			d.files, d.hunks, d.nlines, (unsigned long long)d.added, (unsigned long long)d.deleted);
out:
	if (rc)
		fprintf(stderr, "dump_history: %s\n", omen_error_last());
	omen_repo_free(r);
	free(revs);
	return rc ? 1 : 0;
}
