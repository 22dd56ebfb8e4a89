/* afile.h - atomic output files: write to a temporary name, check, rename into place. */
#ifndef SR_AFILE_H
#define SR_AFILE_H

#include <stdio.h>

#include "../core/err.h"

typedef struct afile {
	FILE *f;            /* write here */
	char *path;         /* final name */
	char *tmp;          /* temporary name in the same folder */
} afile;

/* Creates the temporary file (and missing parent folders). */
sr_status afile_open(afile *a, const char *path, sr_err *e);
/* Flushes, checks ferror, fsyncs, closes and renames onto path. The afile is released either way. */
sr_status afile_commit(afile *a, sr_err *e);
/* Closes and removes the temporary file; safe after a failed open or commit. */
void afile_abort(afile *a);

/*
 * For writers that cannot use a FILE (gzip through znz): creates missing
 * parent folders and an empty temporary file beside path, returns its open
 * descriptor (-1 on error, e filled) and its name in *tmp (xmalloc'ed, caller
 * frees and unlinks it on failure).
 */
int afile_reserve(const char *path, char **tmp, sr_err *e);
/* Fsyncs the closed temporary file tmp and renames it onto path; removes tmp on failure. */
sr_status afile_publish(const char *tmp, const char *path, sr_err *e);

/* mkdir -p; an existing folder is fine. */
sr_status afile_mkdirs(const char *dir, sr_err *e);

#endif
