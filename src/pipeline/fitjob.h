/* fitjob.h - `splitroi fit`'s job once its options are parsed: fit the runs, write maps, design tables, fit.json.
 *
 * It prints nothing: warnings go through warn, each error message through
 * error (both with ctx); the command prints them and picks the exit code.
 */
#ifndef SR_FITJOB_H
#define SR_FITJOB_H

#include <stddef.h>

#include "../core/err.h"
#include "../core/expr.h"
#include "runfit.h"

typedef struct fitjob {
	/* inputs, borrowed from the caller */
	const char *out;                 /* output folder */
	const char *const *bold;         /* nrun _bold.nii[.gz] runs */
	int nrun;
	char *const *events;             /* nrun events files */
	char *const *confs;              /* nrun confounds files, or NULL */
	char *const *ccols;              /* nccol confound columns */
	int nccol;
	const double *tr;                /* nrun resolved TRs */
	const char *condcol;             /* NULL = trial_type */
	const char *maskpath;            /* NULL = no mask */
	const expr *fx;                  /* nfx extra effects (after fitjob_conditions) */
	size_t nfx;
	int model;                       /* GLM_OLS, GLM_AR1, GLM_AR1_ADJUSTED */
	double drift, sref, fwhm;        /* drift cutoff (0 = none), volume time, smoothing FWHM (0 = none) */
	int skip;                        /* skip_volumes */
	double censor;                   /* censor_fd, 0 = off */
	int threads;
	const char *study, *subject;     /* recorded in fit.json (NULL without --study) */
	sr_warn_fn warn, error;
	void *ctx;
	/* filled by fitjob_conditions / fitjob_run; owned, freed by fitjob_release */
	char **conds;                    /* the conditions over all runs, sorted by bytes */
	int ncond;
	int neff;                        /* effects fitted: every condition, then fx */
	char **labels;                   /* neff effect names */
	double *C;                       /* neff x ncond contrast weights */
	unsigned char *mask;
	size_t nvox;
	runfit_spec *specs;
	runfit_result *res;
	sr_err *errs;
	struct fitjob_map *jobs;         /* the maps to write */
	int njobs;
} fitjob;

/* Reads every run's events and gathers the conditions (none: an error). */
sr_status fitjob_conditions(fitjob *j);

/*
 * Builds the contrasts, reads the mask, fits the runs and writes under out
 * each run's and the combination's maps with sidecars, each run's
 * <run>_design.csv and fit.json.
 */
sr_status fitjob_run(fitjob *j);

void fitjob_release(fitjob *j);

#endif
