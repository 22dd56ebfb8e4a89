/* bids.h - finding subjects, runs, events, sidecars and confounds in a BIDS dataset. */
#ifndef SR_BIDS_H
#define SR_BIDS_H

#include <stddef.h>

#include "../core/err.h"

/* One BOLD run found on disk. Strings owned by the run (bids_runs_release). */
typedef struct bids_run {
	char *bold;        /* path of the _bold.nii[.gz] */
	char *events;      /* path of the _events.tsv beside it (may not exist: see events_exist) */
	int events_exist;
	char *sidecar;     /* nearest _bold.json beside it, or NULL */
	char *subject;     /* label without "sub-" */
	char *session;     /* label without "ses-", or NULL */
	char *task;
	int run_index;     /* the run-<index> entity, or -1 when absent */
	char *label;       /* the run's label in tables: index as integer, or position */
} bids_run;

/* Subject labels (without "sub-") under root, sorted; caller frees with bids_strings_free. */
sr_status bids_subjects(const char *root, char ***labels, size_t *n, sr_err *e);
void bids_strings_free(char **s, size_t n);

/*
 * The runs of one subject and task across sessions, ordered by run index, then
 * file name (METHODS.md section 6); runs without an index come after, labelled
 * by position. Zero runs is not an error (n = 0). The task entity matches
 * exactly; entities may come in any order. Errors: no sub-<label> folder, a
 * BOLD file that cannot be accessed (a dangling link), the same run as both
 * .nii and .nii.gz, a run entity that is not a number. Warnings: a file whose
 * sub-/ses- entities disagree with its folder (ignored); two runs that would
 * share a label (for example run-1 in two sessions), in which case every run
 * is labelled by its position instead.
 */
sr_status bids_runs(const char *root, const char *subject, const char *task, bids_run **runs,
		    size_t *n, sr_err *e);
void bids_runs_release(bids_run *runs, size_t n);

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

/* Path of the confounds file: the bold name with _bold.nii[.gz] replaced by suffix. Caller frees. */
char *bids_confounds_path(const bids_run *run, const char *suffix);

#endif
