/* leftout.h - the voxels the rules of METHODS.md section 3 leave out: records, warnings, summary. */
#ifndef SR_LEFTOUT_H
#define SR_LEFTOUT_H

#include <stddef.h>
#include <stdint.h>

#include "../core/err.h"
#include "../core/glm.h"
#include "../io/jdoc.h"

/* One run's counts, kept for the summary of analyze. */
typedef struct leftout_run {
	char task[64], run[64];
	size_t nvox;
	size_t left_out[GLM_OUT_NRULES];
	double floor;           /* intensity floor used (0 when none) */
} leftout_run;

/* Fills r from a finished fit of a run of nvox voxels (o may hold fewer: a slimmed fit). */
void leftout_from_fit(leftout_run *r, const char *task, const char *run, const glm_out *o, size_t nvox);

/*
 * The run record's part: an object {"reference_intensity", "intensity_floor",
 * "left_out": {rule: count, ...}} (owned by the caller until handed to a parent).
 */
jdoc *leftout_record(const glm_out *o);

/*
 * Warns (through e) for each parcel (labels index[0..n-1], names name[]) that
 * loses more than a tenth of its voxels on the data grid to the rules: voxels
 * not analyzable in at least one of the nout fits, counted under the first
 * rule they fail in the first run where they fail. Parcels with no voxel are
 * left to the caller's own warning. With pos, the fits hold grid voxel v at
 * pos[v] (fits slimmed to the parcel voxels); NULL: at v.
 */
void leftout_warn_parcels(const char *subject, const int32_t *labels, size_t nvox, int n,
			  const int32_t *index, char *const *name, const glm_out *const *outs,
			  size_t nout, const int32_t *pos, sr_err *e);

/* Prints the per-run table of left-out voxels for the analyze summary (stdout). */
void leftout_print(const char *const *subjects, const leftout_run *const *runs,
		   const size_t *nruns, size_t nsub);

#endif
