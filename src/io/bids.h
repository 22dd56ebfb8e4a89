/* bids.h - finding subjects, runs, events, sidecars and confounds in a BIDS dataset. */
#ifndef SR_BIDS_H
#define SR_BIDS_H

#include <stddef.h>

#include "../core/err.h"

/*
 * Where the runs come from: the raw dataset (events, sidecars; the BOLD when
 * deriv is NULL) and optionally a BIDS Derivatives dataset holding the
 * preprocessed BOLD, filtered by space-, desc- (NULL = preproc) and res-.
 */
typedef struct bids_src {
	const char *raw;
	const char *deriv;   /* NULL: raw layout */
	const char *space;   /* NULL: any (an error when the runs come in several) */
	const char *desc;    /* NULL: preproc */
	const char *res;     /* NULL: any */
} bids_src;

/* One BOLD run found on disk. Strings owned by the run (bids_runs_release). */
typedef struct bids_run {
	char *bold;        /* path of the _bold.nii[.gz] that is read */
	char *events;      /* the events file by the inheritance rule, or the name beside the run (see events_exist) */
	int events_exist;
	char *sidecar;     /* the raw _bold.json of the run's own name, or NULL */
	char *subject;     /* label without "sub-" */
	char *session;     /* label without "ses-", or NULL */
	char *task;
	int run_index;     /* the run-<index> entity, or -1 when absent */
	char *label;       /* the run's label in tables: "<run>" or "<session>.<run>" (METHODS.md 11) */
	/* with derivatives (all NULL in a raw layout) */
	char *raw_bold;    /* the raw run's name (sidecar inheritance; never read) */
	char *deriv_sidecar; /* _bold.json beside the derivative, or NULL */
	char *confounds;   /* ..._desc-confounds_timeseries.tsv of the run (may not exist) */
	char *brain_mask;  /* ..._desc-brain_mask.nii[.gz] of the run's space, or NULL when absent */
	char *space;       /* the run's space- entity, or NULL */
} bids_run;

/*
 * Subject labels (without "sub-") under root, sorted; caller frees with
 * strv_free_array (core/strv.h). A sub- folder whose label is not letters and digits, or
 * a sub- entry that cannot be accessed (a link loop), is an error naming it.
 */
sr_status bids_subjects(const char *root, char ***labels, size_t *n, sr_err *e);

/*
 * The runs of one subject and task across sessions, identified by their
 * entities (subject, session, task, run), ordered by session (numbers by
 * value, else by text; no session first), then run index (runs without one
 * last in their session). Zero runs is not an error (n = 0). The task entity
 * matches exactly; entities may come in any order. Errors: no sub-<label>
 * folder; a BOLD entry that cannot be accessed (a dangling link, a link loop)
 * or is not a regular file; the same run as both .nii and .nii.gz; a run
 * entity that is not a number; two files left for one run (named, with the
 * entity telling them apart); two runs whose table labels would be equal.
 * With src->deriv: the BOLD comes from the derivatives (space/desc/res
 * filters); runs in several spaces without src->space, or none in src->space
 * while others exist, are errors listing the spaces found. Warnings: a file
 * whose sub-/ses- entities disagree with its folder (ignored).
 */
sr_status bids_find_runs(const bids_src *src, const char *subject, const char *task,
			 bids_run **runs, size_t *n, sr_err *e);
/* bids_find_runs on a raw layout rooted at root. */
sr_status bids_runs(const char *root, const char *subject, const char *task, bids_run **runs,
		    size_t *n, sr_err *e);
void bids_runs_release(bids_run *runs, size_t n);

/*
 * The distinct space- entities of the subject's BOLD files of task under the
 * derivatives dataset (any desc/res), sorted; caller frees.
 */
char **bids_spaces(const char *deriv, const char *subject, const char *task, size_t *n);

/*
 * The repetition time of a run (METHODS.md sections 1 and 11): RepetitionTime
 * from the JSON sidecars by the BIDS inheritance rule (dataset-level
 * task-<label>_bold.json, then subject, session, func/ folder
 * (sub-X[_ses-Y]_task-<label>_bold.json) and run level, the closer one that
 * has the key overriding), else header_tr (pixdim[4] in s; <= 0 or NaN =
 * absent). Both present and differing by more than 1e-3 s is an error naming
 * both values and files; when they agree the sidecar value is used. Neither
 * present is an error. Every existing sidecar on the way is parsed: malformed
 * JSON (file, line, column), a non-object, or a RepetitionTime that is not a
 * positive number is an error. A TR over 100 s (sidecar or header) is an error
 * too: it is milliseconds or junk. *tr is NaN on error.
 */
sr_status bids_run_tr(const char *root, const bids_run *run, double header_tr, double *tr,
		      sr_err *e);
/*
 * With derivatives the raw sidecars are found from run->raw_bold, and a
 * RepetitionTime in run->deriv_sidecar wins when it agrees with the raw one
 * (an error naming both when they differ by more than 1e-3 s).
 */

/*
 * Path of the confounds file: with derivatives run->confounds, else the bold
 * name with _bold.nii[.gz] replaced by suffix. Caller frees.
 */
char *bids_confounds_path(const bids_run *run, const char *suffix);

/* 1 when root/dataset_description.json says "DatasetType": "derivative". */
int bids_is_derivative(const char *root);

#endif
