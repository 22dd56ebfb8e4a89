/* studycheck.h - what check and analyze both validate before any fit, so that the two cannot drift. */
#ifndef SR_STUDYCHECK_H
#define SR_STUDYCHECK_H

#include <stddef.h>

#include "../core/strv.h"
#include "../io/bids.h"
#include "../io/nii.h"
#include "../io/parcels.h"
#include "../io/study.h"

/*
 * The study's subjects: its `subjects` list or every sub-* folder under bids,
 * sorted. Each listed subject missing from bids is a problem naming the study
 * file's line; every one is added to probs (none is printed). An unreadable
 * bids folder and a study without subjects are problems too.
 * Returns 0 when probs gained nothing. Caller frees *out with strv_free_array.
 */
int studycheck_subjects(const study *st, char ***out, size_t *n, study_problems *probs);

/*
 * The subjects of a --subjects value among the n in subs: labels separated by
 * commas or spaces, "sub-" optional, a repeated label counted once, in the
 * order given. Each label not among subs is a problem added to probs.
 * Returns 0 when all are known (then *out holds them; strv_free_array), else 2.
 */
int studycheck_only(char *const *subs, size_t n, const char *only, char ***out, size_t *nout,
		    study_problems *probs);

/*
 * Every condition an effect names (the localizer's contrast and effects, each
 * measured task's effects) occurs in some subject's events of that task
 * (METHODS.md section 11; studycheck_names, the check check makes, its
 * warnings dropped), and every task has runs. Each miss is a problem.
 * Returns the number of problems added (1 when runs could not be listed).
 */
int studycheck_effects(const study *st, char **subs, size_t nsub, study_problems *probs);

/* ---- one subject's runs: what check lists and analyze validates before fitting ---- */

/* Where the validation of runs reports: problems decide the verdict, warnings only inform. */
typedef struct studycheck_ctx {
	const study *st;
	study_problems *probs;
	study_problems *warns;     /* NULL: warnings are dropped */
	int headers_only;          /* read image headers only (else every volume, so damaged data shows) */
	int cosine_warned;         /* a cosine confound column was warned about (once per check) */
} studycheck_ctx;

/* A subject's data grid: that of the first run read (have = 0 until then). */
typedef struct studycheck_grid {
	nii_grid g;
	int have;
	char path[1024];
} studycheck_grid;

/* What one run holds, as check lists it. */
typedef struct studycheck_run {
	int readable;              /* the image was read; else only the events below are set */
	int64_t nt;
	nii_grid grid;
	int tr_ok;
	double tr;
	int conf_listed;           /* confound columns resolved: conf_cols, and conf_na when na_listed */
	int nconf, na_listed;
	char **conf_cols;
	size_t *conf_na;           /* n/a cells of each column */
	int censor_listed;         /* framewise_displacement read: ncensored */
	size_t ncensored;
	int events_ok;             /* the events were read: conds, cond_count (sorted) */
	strv conds;
	size_t *cond_count;
} studycheck_run;

/* One task of one subject: its runs and the conditions over them. */
typedef struct studycheck_task {
	const char *task;
	int listed;                /* the runs could be listed */
	bids_run *runs;
	size_t nruns;
	studycheck_run *info;      /* nruns, once validated */
	strv conds;                /* conditions over its readable events, first seen first */
} studycheck_task;

/*
 * One run: the image (read through unless headers_only; 4-D; skip_volumes
 * leaves 2 volumes), its TR, its grid against ref (ref takes the first grid
 * read), the confounds (columns, values read by analyze's rules, one row per
 * volume, framewise_displacement for censor_fd), the events (and a warning
 * for the first onset after the run's end). Problems and warnings go to c.
 */
void studycheck_run_validate(studycheck_ctx *c, const bids_run *run, studycheck_grid *ref, studycheck_run *f,
			     strv *task_conds);

/* The runs of task for subject label in t (a problem when they cannot be listed; then t->listed = 0). */
int studycheck_task_find(studycheck_ctx *c, const char *label, const char *task, studycheck_task *t);
/* studycheck_run_validate on each of t's runs. */
void studycheck_task_runs(studycheck_ctx *c, studycheck_task *t, studycheck_grid *ref);
/* Only the conditions of t's readable events (no problems: another check of these runs says them). */
void studycheck_task_conds(const study *st, studycheck_task *t);
void studycheck_task_release(studycheck_task *t);

/*
 * Every task of the study (the localizer's, then each measure's: 1 +
 * st->nmeasures entries in tasks) for subject label: runs found (none is a
 * problem), each validated, all on one grid (*ref ends as the subject's).
 */
void studycheck_subject(studycheck_ctx *c, const char *label, studycheck_task *tasks, studycheck_grid *ref);

/*
 * The subject's own mask when the study's depends on the subject (mask =
 * auto: every run's brain mask, or a path with {subject}), read and checked
 * against the subject's grid (ref, when have). *paths / *npaths (freed with
 * strv_free_array) and *count tell what was read; *read = 1 when it was.
 */
void studycheck_subject_mask(studycheck_ctx *c, const char *label, const studycheck_task *tasks, size_t ntasks,
			     const studycheck_grid *ref, char ***paths, size_t *npaths, size_t *count, int *read);

/*
 * Each condition named by the nfx effects fx of task (set by key in
 * [section]) is known to some subject (known: the sorted union of seen[s *
 * stride].conds); an unknown one is a problem naming the study file and line,
 * and a subject with runs but without the condition gets a warning. Each
 * condition is said once per task (reported collects them). Nothing when no
 * subject has runs of the task.
 */
void studycheck_names(studycheck_ctx *c, const char *section, const char *key, const char *task, const expr *fx,
		      size_t nfx, char *const *known, size_t nknown, char **subs, size_t nsub,
		      const studycheck_task *seen, size_t stride, study_problems *reported);

/* The parcels as check lists them. */
typedef struct studycheck_parcels {
	int loaded;                /* ps holds the image (and names table) */
	parcels_set ps;
	const char *resampled_onto; /* the run whose grid the counts below are on (the first grid needing resampling), or NULL */
	size_t *on_data;           /* ps.n voxel counts once resampled there */
} studycheck_parcels;

/*
 * The study's parcels (st->parcels, st->parcel_names: a subject's own when
 * the caller puts them there) read listing every bad row (parcels.h), and
 * set against each of the ngrids data grids: on it, or resampled when
 * [parcels] resample = nearest says so (never for template parcels on raw
 * runs). Returns 1 when the image could not be read. Release f.
 */
int studycheck_parcels_validate(studycheck_ctx *c, const studycheck_grid *grids, size_t ngrids, studycheck_parcels *f);
void studycheck_parcels_release(studycheck_parcels *f);

/*
 * The study's mask when it is one for all subjects (st->mask set and not
 * per subject): read, not empty, on each of the ngrids data grids. Returns
 * 1 when it was read (*count: its voxels), 0 when there is none or it
 * cannot be read (a problem then).
 */
int studycheck_mask_validate(studycheck_ctx *c, const studycheck_grid *grids, size_t ngrids, size_t *count);

/* 1 when localizer l (>= 1) has a task of its own: not the study's localizer or measured tasks, nor an earlier localizer's. */
int studycheck_localizer_task_new(const study *st, size_t l);

/*
 * What analyze validates of subject label before fitting it, in check's
 * order: its runs (studycheck_subject, image headers only: damaged data
 * shows when the fit reads it), the parcels against its grid, each further
 * localizer's own runs and parcels, the mask (its own, or the study's
 * against its grid). SR_OK, or
 * SR_ESTUDY with the first problem check would list as e's message
 * (warnings are dropped: the fit gives its own).
 */
sr_status studycheck_analyzable(const study *st, const char *label, sr_err *e);

#endif
