/* groupstat.h - the group stage: group statistics over the subjects' responses.csv tables. */
#ifndef SR_GROUPSTAT_H
#define SR_GROUPSTAT_H

#include <stddef.h>

/* What the group stage reads and how it reports; zero it, then set out and alpha. */
typedef struct groupstat_opts {
	const char *out;          /* the study's out folder: reads OUT/sub-<label>/responses.csv, writes the tables */
	const char *shown;        /* the folder the "wrote" line names (analyze stages the tables), NULL = out */
	char *const *subjects;    /* the study's subject labels as they are (analyze), or NULL */
	size_t nsubjects;         /* 0: the --subjects list or the sub-<label> folders of OUT */
	const char *subject_list; /* --subjects text (comma or space separated, sub- optional), or NULL */
	const char *exclude;      /* TSV/CSV with subject and reason, or NULL */
	const char *paired;       /* "A:B[,C:D]" effect pairs, or NULL */
	double alpha;             /* FDR level marking summary rows, in (0, 1) */
	const char *participants; /* participants.tsv (it may be absent), NULL = from OUT/dataset_description.json */
	const char *by;           /* participants.tsv column for group_by_COLUMN.csv, or NULL */
	int quiet;                /* no summary on stdout */
	int in_analyze;           /* analyze writes the report itself: do not rewrite OUT/report.html */
} groupstat_opts;

/*
 * Runs the group stage. Errors and warnings go to stderr as "splitroi group: ...".
 * Returns 0 on success, 1 on an input or write error, 2 on a usage error
 * (--paired or --subjects text that names nothing usable).
 */
int groupstat_run(const groupstat_opts *o);

#endif
