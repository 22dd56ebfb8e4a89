/* mapout.h - a subject's maps as BIDS Derivatives files: t maps, fROI label images, the mean image, sidecars. */
#ifndef SR_MAPOUT_H
#define SR_MAPOUT_H

#include <stddef.h>
#include <stdint.h>

#include "../core/err.h"
#include "../io/nii.h"

/* What one split's maps are: the entities and the sidecar's facts. */
typedef struct mapout_info {
	const char *subject;       /* label without sub- */
	const char *task;          /* the localizer task (task- entity) */
	const char *space, *res;   /* space-/res- entities of the runs, or NULL (raw data: left out) */
	const char *split;         /* the responses-table split: odd-even:A, leave-one-out:3, all */
	const char *measure_task;  /* for split all: the task measured in these fROIs (desc-all<task>) */
	const char *define_runs, *measure_runs;   /* run lists as in the tables */
	const char *contrast;      /* the selection contrast */
	double df;                 /* the t map's fixed-effects degrees of freedom (sum over define runs) */
	const char *rule;          /* the selection rule, e.g. "top 10 percent" */
	const char *localizer;     /* with several localizers, its name, put before the split in desc-; else NULL */
} mapout_info;

/*
 * Writes under dir/func/ the split's t map (NIFTI_INTENT_TTEST, df as
 * intent_p1) as ..._desc-<split>_tstat.nii.gz, the fROI label image
 * (NIFTI_INTENT_LABEL) as ..._desc-<split>_dseg.nii.gz with its look-up table
 * ..._dseg.tsv (index, name: every parcel), and a JSON sidecar beside each
 * image. t has nvox values (NaN where undefined), froi nvox labels (0 outside).
 */
sr_status mapout_split(const char *dir, const mapout_info *m, const nii_grid *g, size_t nvox,
		       const double *t, const int32_t *froi, int nparcels, const int32_t *index,
		       char *const *names, sr_err *e);

/*
 * Writes dir/func/sub-<s>[_ses-<ss>]_task-<t>[_run-<r>][_space-..]_boldref.nii.gz
 * (the temporal mean of that run; ses and run NULL to leave out) and its sidecar.
 */
sr_status mapout_boldref(const char *dir, const mapout_info *m, const char *ses, const char *run,
			 const char *bold, const nii_grid *g, const float *mean, sr_err *e);

/*
 * Writes out/dataset_description.json: a BIDS Derivatives dataset generated
 * by splitroi (version, the command line) from the raw dataset bids and, when
 * not NULL, the derivatives dataset deriv.
 */
sr_status mapout_dataset_description(const char *out, const char *bids, const char *deriv,
				     int argc, char **argv, sr_err *e);

#endif
