/* study.h - the study file (INI, INTERFACE.md): every key read, typed and checked. */
#ifndef SR_STUDY_H
#define SR_STUDY_H

#include <stddef.h>

#include "../core/expr.h"
#include "../core/err.h"

enum study_split { SPLIT_ODD_EVEN, SPLIT_LEAVE_ONE_OUT };
enum study_select { SELECT_TOP_PERCENT, SELECT_TOP_VOXELS, SELECT_MIN_T };

/* A task measured in the fROIs ([measure NAME] section). */
typedef struct study_measure {
	char *name;        /* section name */
	char *task;
	expr *effects;
	size_t neffects;
} study_measure;

/* Everything the study file says, paths made absolute (relative to the file's folder). */
typedef struct study {
	char *path;        /* the study file */
	char *text;        /* its full content (for the run record) */
	char *bids, *out, *mask;          /* mask NULL when empty */
	char **subjects;   /* NULL = all */
	size_t nsubjects;
	/* [localizer] */
	char *loc_task;
	expr contrast;
	enum study_split split;
	expr *loc_effects;
	size_t nloc_effects;
	char *condition_column;           /* default trial_type */
	/* [parcels] */
	char *parcels, *parcel_names;     /* names NULL when empty */
	enum study_select select;
	char *top_percent_text;           /* exact decimal text, e.g. "10" or "12.5" */
	double select_value;              /* top_percent p, top_voxels N, or min_t t0 */
	int resample_parcels;             /* nearest-neighbour resampling onto the data grid */
	/* [model] */
	int ar1;
	double drift_cutoff;              /* seconds; 0 = none */
	double slice_reference;
	char **confounds;
	size_t nconfounds;
	char *confounds_suffix;
	/* [measure ...] */
	study_measure *measures;
	size_t nmeasures;
} study;

/* A list of problems, each a full message naming file and line. */
typedef struct study_problems {
	char **msg;
	size_t n;
} study_problems;

/*
 * Loads and checks the study file: unknown sections and keys (with the nearest
 * valid one), types and ranges, files that must exist. Every problem found is
 * appended to probs (all of them, not only the first); returns SR_OK only when
 * there are none. On SR_OK the caller owns s (study_release).
 */
sr_status study_load(const char *path, study *s, study_problems *probs);
void study_release(study *s);
void study_problems_release(study_problems *p);

#endif
