/* subject.h - one subject's analysis: fits, splits, fROIs, responses and maps (METHODS.md 6-8, 10). */
#ifndef SR_SUBJECT_H
#define SR_SUBJECT_H

#include <stddef.h>
#include <stdint.h>

#include "../core/err.h"
#include "../io/nii.h"
#include "../io/parcels.h"
#include "../io/study.h"
#include "reliability.h"
#include "timecourse.h"

/* One row of responses.csv (METHODS.md section 10). */
typedef struct response_row {
	char *localizer;      /* the localizer whose fROIs these are (the task label of an unnamed [localizer]) */
	char *parcel, *split, *define_runs, *measure_task, *measure_runs, *effect;
	double value;         /* NaN = empty */
	double n_voxels;      /* whole for single splits, a mean for ":mean" rows */
	double n_candidates;
} response_row;

/* What a subject produced (rows in table order) and a few facts for the summary. */
typedef struct subject_result {
	response_row *rows;
	size_t nrows, cap;
	int nloc_runs;
	double seconds;
	struct leftout_run *leftout;   /* per run fitted: voxels each rule left out (leftout.h) */
	size_t nleftout;
	reliability_table rel;              /* reliability.csv rows */
	timecourse_table tc;                   /* timecourses.csv rows */
} subject_result;

/* Progress callback: stage text such as "fitting 3 runs". */
typedef void (*subject_progress_fn)(void *ctx, const char *subject, const char *stage);

typedef struct subject_ctx {
	const study *st;
	const parcels_set *parcels;     /* NULL: each subject loads its own (image has {subject}) */
	const unsigned char *mask;     /* on the data grid, or NULL */
	const nii_grid *mask_grid;
	int nthreads;                  /* threads for fitting this subject's runs */
	subject_progress_fn progress;
	void *progress_ctx;
	const char *dir;               /* write here instead of OUT/sub-<label> (a staging folder), or NULL */
	const struct jdoc *fingerprints; /* inputs' fingerprints taken before the analysis (fresh.h), copied into run.json, or NULL */
} subject_ctx;

/*
 * Runs the whole analysis of one subject and writes OUT/sub-<label>/:
 * responses.csv, maps/ (localizer t and fROI labels per split) and run.json
 * (written last: its presence marks the subject complete). Warnings go
 * through e->warn. On failure nothing that looks complete is left.
 */
sr_status subject_analyze(const subject_ctx *ctx, const char *label, subject_result *res,
			  sr_err *e);
void subject_result_release(subject_result *r);

/* The columns of responses.csv, in order. */
extern const char *const subject_columns[];
extern const size_t subject_ncolumns;

/*
 * The subject's localizer contrast over all its localizer runs: fits every
 * run of the study's localizer task once (contrast only, same model as
 * subject_analyze), then fixed effects over the runs (METHODS.md 5). On
 * SR_OK *t and *df (nvox each, xmalloc'ed, caller frees) hold the t map and
 * its per-voxel degrees of freedom (NaN and 0 where no run is analyzable, or
 * everywhere when the subject lacks a condition of the contrast), *grid the
 * runs' grid (all runs must share it) and *nruns the runs fitted. Used by the
 * parcels command; mask, mask_grid and nthreads as in subject_ctx (the mask
 * grid is checked against the runs' before fitting).
 */
sr_status subject_localizer_t(const study *st, const char *label, const unsigned char *mask,
			      const nii_grid *mask_grid, int nthreads, nii_grid *grid, double **t,
			      int **df, int *nruns, sr_err *e);

/*
 * 1 when parcels on grid g (file path) are in a template space (the sform or
 * qform code says Talairach, MNI-152 or another template, or the file name
 * has a space-/tpl- entity) while the study's runs are raw data with no
 * space- entity (no derivatives). Resampling does not fix that: the data
 * must be preprocessed into the template space.
 */
/*
 * The voxels non-zero (and finite) in every image of paths (n >= 1), all on
 * one grid: *mask (xmalloc'ed, nvox), *grid, *count voxels in it. Errors name
 * the image: unreadable, not on the first image's grid, an empty intersection.
 */
sr_status subject_mask_intersection(char *const *paths, size_t n, unsigned char **mask, nii_grid *grid,
			    size_t *count, sr_err *e);

int subject_parcels_template_on_raw(const study *st, const nii_grid *g, const char *path);
#define PARCELS_RAW_NOTE "the parcels are in a template space but the runs are raw data (no space- entity); " \
	"analyze preprocessed runs in that space (derivatives = and space = in [study]): resampling the parcels does not normalise the data"

#endif
