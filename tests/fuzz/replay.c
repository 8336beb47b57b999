/* Standalone replay driver for the fuzz targets: built with any C compiler
 * (no libFuzzer needed), it walks the corpus directory argv[1] (and any
 * further directories or files) and feeds every regular file to
 * LLVMFuzzerTestOneInput, as libFuzzer does when given files to run.
 * Prints "fuzz replay <name>: N inputs ok"; a crash or abort in the target
 * fails the run, which is how `make fuzz-replay` and `make asan` use it. */
#include <dirent.h>
#include <signal.h>
#include <unistd.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

/* The input being run, named on a crash (async-signal-safe write only). */
static const char *current;

static void on_crash(int sig)
{
	static const char msg[] = "fuzz replay: crashed on input ";
	if (current) {
		ssize_t k = write(2, msg, sizeof(msg) - 1);
		k = write(2, current, strlen(current));
		k = write(2, "\n", 1);
		(void)k;
	}
	signal(sig, SIG_DFL);
	raise(sig);
}

static int cmp_str(const void *a, const void *b)
{
	return strcmp(*(char *const *)a, *(char *const *)b);
}

static int run_file(const char *path, size_t *count)
{
	FILE *fp = fopen(path, "rb");
	unsigned char *data = NULL;
	size_t n = 0, cap = 0, k;
	if (!fp) {
		fprintf(stderr, "fuzz replay: cannot read '%s'\n", path);
		return -1;
	}
	for (;;) {
		if (n == cap) {
			unsigned char *p = realloc(data, cap ? cap * 2 : 4096);
			if (!p) {
				fclose(fp);
				free(data);
				fprintf(stderr, "fuzz replay: out of memory reading '%s'\n", path);
				return -1;
			}
			data = p;
			cap = cap ? cap * 2 : 4096;
		}
		k = fread(data + n, 1, cap - n, fp);
		if (!k)
			break;
		n += k;
	}
	fclose(fp);
	/* Copy into an exact-size block so sanitizers and valgrind catch reads
	 * past the end, as libFuzzer's own buffer does. */
	{
		unsigned char *exact = malloc(n ? n : 1);
		if (!exact) {
			free(data);
			return -1;
		}
		if (n)
			memcpy(exact, data, n);
		free(data);
		if (getenv("FUZZ_REPLAY_VERBOSE"))
			fprintf(stderr, "fuzz replay: %s (%zu bytes)\n", path, n);
		current = path;
		LLVMFuzzerTestOneInput(exact, n);
		current = NULL;
		free(exact);
	}
	(*count)++;
	return 0;
}

static int run_path(const char *path, size_t *count)
{
	struct stat st;
	DIR *d;
	struct dirent *de;
	char **names = NULL;
	size_t nn = 0, cap = 0, i;
	int e = 0;
	if (stat(path, &st)) {
		fprintf(stderr, "fuzz replay: cannot read '%s'\n", path);
		return -1;
	}
	if (!S_ISDIR(st.st_mode))
		return run_file(path, count);
	if (!(d = opendir(path))) {
		fprintf(stderr, "fuzz replay: cannot read directory '%s'\n", path);
		return -1;
	}
	while ((de = readdir(d))) {
		char *full;
		size_t len;
		if (de->d_name[0] == '.')
			continue;  /* ., .. and hidden files (e.g. .gitkeep) */
		len = strlen(path) + strlen(de->d_name) + 2;
		if (!(full = malloc(len)))
			break;
		snprintf(full, len, "%s/%s", path, de->d_name);
		if (nn == cap) {
			char **p = realloc(names, (cap ? cap * 2 : 64) * sizeof(*names));
			if (!p) {
				free(full);
				break;
			}
			names = p;
			cap = cap ? cap * 2 : 64;
		}
		names[nn++] = full;
	}
	closedir(d);
	qsort(names, nn, sizeof(*names), cmp_str);  /* stable order across runs */
	for (i = 0; i < nn; i++) {
		if (!e && run_path(names[i], count))
			e = -1;
		free(names[i]);
	}
	free(names);
	return e;
}

int main(int argc, char **argv)
{
	size_t count = 0;
	const char *name;
	int i;
	if (argc < 2) {
		fprintf(stderr, "usage: %s <corpus-dir|file>...\n", argv[0]);
		return 129;
	}
	signal(SIGABRT, on_crash);  /* oracle failures, sanitizer reports */
	signal(SIGTRAP, on_crash);
	signal(SIGILL, on_crash);
#if !defined(__SANITIZE_ADDRESS__)  /* AddressSanitizer reports these itself */
	signal(SIGSEGV, on_crash);
	signal(SIGBUS, on_crash);
	signal(SIGFPE, on_crash);
#endif
	for (i = 1; i < argc; i++)
		if (run_path(argv[i], &count))
			return 1;
	name = strrchr(argv[0], '/');
	name = name ? name + 1 : argv[0];
	if (!strncmp(name, "fuzz_", 5))
		name += 5;
	printf("fuzz replay %.*s: %zu inputs ok\n",
		strstr(name, "-replay") ? (int)(strstr(name, "-replay") - name) : (int)strlen(name),
		name, count);
	return 0;
}
