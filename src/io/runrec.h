/* runrec.h - reads a subject's run record (OUT/sub-<label>/run.json) and keys of its study text. */
#ifndef SR_RUNREC_H
#define SR_RUNREC_H

#include <stddef.h>

#include "../core/err.h"

/* One input run as the record lists it. */
typedef struct runrec_run {
	char *task, *run;        /* task and run label */
	char *bold, *confounds;  /* paths; confounds NULL when none */
	char *events;            /* the events file the run used; NULL when none */
	double tr;
	long long nt;            /* volumes (4th dim), -1 when absent */
} runrec_run;

/* What the report needs from run.json. Owned by the caller (runrec_release). */
typedef struct runrec {
	char *subject, *study_file, *study_text, *parcels;   /* NULL when absent */
	runrec_run *runs;
	size_t nruns;
	double seconds;          /* NaN when absent */
} runrec;

/* Reads path; errors name the file (and jansson's line/column for bad JSON). */
sr_status runrec_read(const char *path, runrec *r, sr_err *e);
void runrec_release(runrec *r);

/*
 * The value of key in [section] of a recorded study text, read by the study
 * loader's own reader (study_text_get: comments, quotes, continuation lines);
 * malloc'ed; NULL when absent or empty.
 */
char *runrec_ini_get(const char *text, const char *section, const char *key);

#endif
