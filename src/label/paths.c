/* Non-code paths (issue 10): documentation, tests, build and CI
 * configuration, generated and vendored files. Their lines are never
 * tracing candidates, and a fix that changes only such paths is recorded
 * and traced nowhere. Pattern forms are those of omen.effortExclude
 * (DEVELOPERS.md): "dir/" matches a directory of that name at any depth; a
 * pattern without '/' matches the base name (fnmatch); any other pattern
 * matches the whole path. The list is one setting of its own
 * (omen.nonCodePaths), since effort exclusion keeps tests and docs in the
 * effort a reviewer spends. */
#include <fnmatch.h>
#include <stdlib.h>
#include <string.h>
#include "omen/error.h"
#include "omen/label.h"

const char omen_noncode_default[] =
	/* documentation */
	"doc/ docs/ Documentation/ man/ *.md *.markdown *.rst *.adoc *.txt *.texi *.pod "
	"*.[1-9] README* CHANGELOG* ChangeLog* CHANGES* Changes* NEWS* HISTORY* AUTHORS* THANKS* LICENSE* COPYING* "
	/* tests */
	"test/ tests/ testing/ testsuite/ t/ spec/ __tests__/ testdata/ fixtures/ "
	"test_*.py *_test.py *_test.go *_test.c *_test.cc *_test.cpp *.test.js *.spec.js *.test.ts *.spec.ts "
	/* build and CI configuration */
	".github/ .gitlab/ .circleci/ .gitlab-ci.yml .travis.yml appveyor.yml .appveyor.yml "
	".cirrus.yml azure-pipelines.yml Jenkinsfile Dockerfile* .dockerignore "
	".gitignore .gitattributes .mailmap .editorconfig .clang-format "
	"*.yml *.yaml *.toml *.cfg *.ini setup.py requirements*.txt package.json "
	"Makefile* GNUmakefile *.mk *.am *.cmake CMakeLists.txt configure.ac configure.in meson.build "
	/* generated and vendored */
	"vendor/ third_party/ third-party/ thirdparty/ node_modules/ bower_components/ "
	"*.min.js *.min.css *.map *.lock package-lock.json npm-shrinkwrap.json pnpm-lock.yaml go.sum "
	"*.pb.go *.pb.cc *.pb.h *_pb2.py *_pb2_grpc.py *.generated.* *_generated.* *.gen.go";

struct omen_pathset {
	char **pat;
	size_t n;
	char *text;
};

int omen_pathset_new(omen_pathset **out, const char *globs)
{
	omen_pathset *ps;
	char *s, *tok, *save = NULL;
	*out = NULL;
	if (!(ps = calloc(1, sizeof(*ps))) || !(ps->text = strdup(globs ? globs : ""))) {
		free(ps);
		return omen_error_set(OMEN_ENOMEM, "out of memory");
	}
	for (s = ps->text; (tok = strtok_r(s, ", \t\n", &save)); s = NULL) {
		char **np = realloc(ps->pat, (ps->n + 1) * sizeof(*np));
		if (!np) {
			omen_pathset_free(ps);
			return omen_error_set(OMEN_ENOMEM, "out of memory");
		}
		ps->pat = np;
		ps->pat[ps->n++] = tok;
	}
	*out = ps;
	return 0;
}

void omen_pathset_free(omen_pathset *ps)
{
	if (!ps)
		return;
	free(ps->pat);
	free(ps->text);
	free(ps);
}

size_t omen_pathset_count(const omen_pathset *ps) { return ps ? ps->n : 0; }

int omen_pathset_match(const omen_pathset *ps, const char *path)
{
	size_t i;
	const char *base;
	if (!ps || !path)
		return 0;
	base = strrchr(path, '/');
	base = base ? base + 1 : path;
	for (i = 0; i < ps->n; i++) {
		const char *p = ps->pat[i];
		size_t pl = strlen(p);
		if (p[pl - 1] == '/') {
			const char *s = path;
			while (s) {
				if (!strncmp(s, p, pl))
					return 1;
				if ((s = strchr(s, '/')))
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
