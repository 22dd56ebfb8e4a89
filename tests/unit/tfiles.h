/* tfiles.h - test helpers: a temporary folder, writing small files into it, capturing warnings. */
#ifndef SR_TFILES_H
#define SR_TFILES_H

#include <dirent.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

/* A fresh folder under $TMPDIR (or /tmp); the caller removes it with tf_rmtree. */
static inline char *tf_tmpdir(void)
{
	const char *base = getenv("TMPDIR");
	static char tmpl[4096];

	snprintf(tmpl, sizeof tmpl, "%s/splitroi-test-XXXXXX", base && *base ? base : "/tmp");
	if (!mkdtemp(tmpl)) {
		perror("mkdtemp");
		exit(2);
	}
	return strdup(tmpl);
}

/*
 * Entries of folder dir other than . and .. (-1 when it cannot be read);
 * with tmp, *tmp counts those that look like our temporaries (".tmp." in the name).
 */
static inline int tf_entries(const char *dir, int *tmp)
{
	DIR *d = opendir(dir);
	struct dirent *de;
	int n = 0;

	if (tmp)
		*tmp = 0;
	if (!d)
		return -1;
	while ((de = readdir(d)))
		if (strcmp(de->d_name, ".") && strcmp(de->d_name, "..")) {
			n++;
			if (tmp)
				*tmp += strstr(de->d_name, ".tmp.") != NULL;
		}
	closedir(d);
	return n;
}

/* Writes text (len bytes, or strlen when len is 0) to dir/rel, creating missing folders. */
static inline char *tf_write(const char *dir, const char *rel, const char *text, size_t len)
{
	char *path = malloc(strlen(dir) + strlen(rel) + 2);
	FILE *f;

	sprintf(path, "%s/%s", dir, rel);
	for (char *p = path + 1; *p; p++)
		if (*p == '/') {
			*p = '\0';
			mkdir(path, 0755);
			*p = '/';
		}
	f = fopen(path, "wb");
	if (!f) {
		perror(path);
		exit(2);
	}
	fwrite(text, 1, len ? len : strlen(text), f);
	fclose(f);
	return path;
}

static inline void tf_rmtree(const char *dir)
{
	char cmd[4200];

	snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
	if (system(cmd) != 0)
		fprintf(stderr, "could not remove %s\n", dir);
}

/* Collected warnings, one per line. */
typedef struct tf_warnings {
	char text[8192];
	int n;
} tf_warnings;

static inline void tf_warn(void *ctx, const char *msg)
{
	tf_warnings *w = ctx;
	size_t used = strlen(w->text);

	snprintf(w->text + used, sizeof w->text - used, "%s\n", msg);
	w->n++;
}

#endif
