/*
 * replay.c - run fuzz inputs through a target without libFuzzer, so the
 * committed corpus and every regression file are replayed by `make check`
 * with any compiler (and under SANITIZE=address,undefined).
 *
 * Usage: fuzz_X-replay PATH...
 * Each PATH is a file, or a directory whose regular files (not those
 * starting with '.') are run in name order; subdirectories are not
 * entered.  Prints "NAME: N inputs ran" and exits 0; a crash in the
 * target ends the process (that is the failure), an unreadable path
 * exits 2.  Inputs longer than 1 MiB are refused (exit 2): libFuzzer's
 * -max_len keeps the corpus far below that.
 */
#include <dirent.h>
#include <errno.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

#define REPLAY_MAX_BYTES (1024 * 1024)
#define REPLAY_MAX_FILES 100000

static int run_file(const char *path)
{
	FILE *fp = fopen(path, "rb");
	uint8_t *buf;
	size_t n;

	if (fp == NULL) {
		fprintf(stderr, "replay: open: %s: %s\n", path,
		        strerror(errno));
		return -1;
	}
	buf = malloc(REPLAY_MAX_BYTES + 1);
	if (buf == NULL) {
		fclose(fp);
		fprintf(stderr, "replay: out of memory\n");
		return -1;
	}
	n = fread(buf, 1, REPLAY_MAX_BYTES + 1, fp);
	if (ferror(fp) || n > REPLAY_MAX_BYTES) {
		fprintf(stderr, "replay: read: %s: %s\n", path,
		        ferror(fp) ? "read error" : "longer than 1 MiB");
		free(buf);
		fclose(fp);
		return -1;
	}
	fclose(fp);
	/* a copy of exactly n bytes, so ASan sees reads past the input */
	{
		uint8_t *in = malloc(n ? n : 1);

		if (in == NULL) {
			free(buf);
			return -1;
		}
		memcpy(in, buf, n);
		free(buf);
		LLVMFuzzerTestOneInput(in, n);
		free(in);
	}
	return 0;
}

static int by_name(const void *a, const void *b)
{
	return strcmp(*(char *const *)a, *(char *const *)b);
}

static int list_dir(const char *dir, char **names, size_t *n)
{
	DIR *d = opendir(dir);
	struct dirent *e;

	if (d == NULL) {
		fprintf(stderr, "replay: opendir: %s: %s\n", dir,
		        strerror(errno));
		return -1;
	}
	*n = 0;
	while ((e = readdir(d)) != NULL && *n < REPLAY_MAX_FILES) {
		if (e->d_name[0] == '.')
			continue;
		names[*n] = strdup(e->d_name);
		if (names[*n] == NULL)
			break;
		(*n)++;
	}
	closedir(d);
	qsort(names, *n, sizeof *names, by_name);
	return 0;
}

/* Run every regular file in dir; returns the count or -1. */
static long run_dir(const char *dir)
{
	char **names = calloc(REPLAY_MAX_FILES, sizeof *names);
	char path[4096];
	struct stat st;
	size_t n = 0, i;
	long ran = 0;

	if (names == NULL || list_dir(dir, names, &n) != 0) {
		free(names);
		return -1;
	}
	for (i = 0; i < n; i++) {
		int w = snprintf(path, sizeof path, "%s/%s", dir, names[i]);

		if (w > 0 && (size_t)w < sizeof path && stat(path, &st) == 0 &&
		    S_ISREG(st.st_mode)) {
			if (run_file(path) != 0)
				ran = -1;
			else if (ran >= 0)
				ran++;
		}
		free(names[i]);
	}
	free(names);
	return ran;
}

int main(int argc, char **argv)
{
	const char *me = strrchr(argv[0], '/') ? strrchr(argv[0], '/') + 1
	                                       : argv[0];
	struct stat st;
	long total = 0, r;
	int i, bad = 0;

	for (i = 1; i < argc; i++) {
		if (stat(argv[i], &st) != 0) {
			fprintf(stderr, "replay: %s: %s\n", argv[i],
			        strerror(errno));
			bad = 1;
			continue;
		}
		r = S_ISDIR(st.st_mode) ? run_dir(argv[i])
		                        : (run_file(argv[i]) == 0 ? 1 : -1);
		if (r < 0)
			bad = 1;
		else
			total += r;
	}
	printf("%s: %ld inputs ran\n", me, total);
	return bad ? 2 : 0;
}
