/* glm.h - per-voxel first-level fits in one streaming pass: OLS and AR(1) (METHODS.md 3-5). */
#ifndef SR_GLM_H
#define SR_GLM_H

#include <stddef.h>

#include "err.h"

/*
 * The per-run part of the fit that does not depend on the data: X, its SVD,
 * pinv(X), rank, df, estimability, the lagged Gram matrices. Immutable once
 * made; may be shared between threads.
 */
typedef struct glm_model glm_model;

/* Makes the model for X (T x p, column-major). Errors: T <= p, non-finite X. */
sr_status glm_model_make(const double *X, int T, int p, glm_model **out, sr_err *e);
void glm_model_free(glm_model *m);
int glm_model_rank(const glm_model *m);
/* Residual degrees of freedom T - rank. */
int glm_model_df(const glm_model *m);
/* 1 when weight vector c (p values) lies in the row space of X (METHODS.md section 11). */
int glm_estimable(const glm_model *m, const double *c);
/*
 * beta = pinv(X) y for one series y of T values (no scaling): the plain OLS
 * solver. Coefficients that are not estimable (METHODS.md section 4) are NaN;
 * the others equal pinv(X) y.
 */
void glm_ols_solve(const glm_model *m, const double *y, double *beta);

/*
 * Prais-Winsten fit of one series with a given rho (|rho| < 1), computed the
 * way the stream does (lagged sums, no whitened copy of X): beta (p values,
 * NaN where not estimable) and, when rss_w is not NULL, the whitened RSS.
 */
sr_status glm_ar1_solve(const glm_model *m, const double *y, double rho, double *beta, double *rss_w,
			sr_err *e);

/*
 * Streaming accumulators for nvox voxels of one run: volumes are added in
 * order, and the accumulators hold what the OLS and AR(1) fits need (pinv(X) y,
 * the lag-one cross-products, sums), so the run is never held in memory.
 * One per run; not thread safe.
 */
typedef struct glm_acc glm_acc;
glm_acc *glm_acc_alloc(const glm_model *m, size_t nvox);
/* Adds the next volume (nvox values; NaN or inf makes that voxel unanalyzable). */
sr_status glm_acc_add(glm_acc *a, const double *vol, sr_err *e);
/*
 * Before the first volume: only the n voxels vox[] get the sums of the
 * fit. Every other voxel gets only what its
 * temporal mean and the rules of METHODS.md section 3 need, so the finish
 * still gives every voxel its mean, rule and the run's reference intensity,
 * but effects, variances and rho (NaN elsewhere) and ok (0 elsewhere) only
 * at vox[].
 * For a run of which later steps read only those voxels: the sums and the
 * per-voxel fit are the bulk of the work. The outputs at the fitted voxels
 * are the same bits as without it; the means elsewhere are summed in another
 * order (y0 + sum of the shifted values / T instead of through the basis),
 * so the reference intensity may differ from the full fit's in its last bits.
 */
void glm_acc_fit_only(glm_acc *a, const size_t *vox, size_t n);
/*
 * Before the first volume: every value glm_acc_add will be given is a
 * float32 exactly, so the pending volumes are held as float32, in half the
 * memory. The same bits as without it; a value that is not a float32 would
 * be rounded to one.
 */
void glm_acc_float32(glm_acc *a);
/* glm_acc_add for float32 values (nvox of them), after glm_acc_float32; else SR_EINVAL. */
sr_status glm_acc_add_f32(glm_acc *a, const float *vol, sr_err *e);
/*
 * Before the first volume: voxels dim in the first volume (finite, below
 * 5% of its 98th percentile of positive values: half the intensity floor
 * of METHODS.md section 3) get their mean and running sums but not the sums
 * against the basis, the bulk of the memory (2 rank doubles a voxel) and of
 * the work. Nearly always they stay far below the floor; glm_acc_finish checks
 * that each is left out by the same rule, on the same side of 0 and below the
 * order statistics of the reference intensity, by more than any roundoff of
 * its mean, and then gives the same bits as without deferral but for those
 * voxels' means (summed in another order, see glm_acc_fit_only). Otherwise it
 * fails with SR_EREDO, and the run must be fitted again without it.
 */
void glm_acc_defer_dim(glm_acc *a);
/*
 * glm_acc_defer_dim for the voxels whose first value is +0 only, and the
 * finish fails with SR_EREDO unless each stayed +0 in every volume: then its
 * mean is +0 either way and every output, means included, is the same bits
 * as without it (for a run whose whole-grid means are kept).
 */
void glm_acc_defer_zero(glm_acc *a);
/* Voxels glm_acc_defer_dim deferred (0 before the first volume or without it). */
size_t glm_acc_deferred(const glm_acc *a);
/* Threads glm_acc_add may use (default 1); the sums do not depend on them. */
void glm_acc_threads(glm_acc *a, int nthreads);
void glm_acc_free(glm_acc *a);

/*
 * The rules of METHODS.md section 3, in the order a voxel is counted under
 * the first one it fails (so the counts add up to the voxels left out).
 */
enum {
	GLM_OUT_MASK = 0,     /* outside the brain mask */
	GLM_OUT_NONFINITE,    /* a sample is NaN or infinite */
	GLM_OUT_NONPOSITIVE,  /* temporal mean <= 0 */
	GLM_OUT_CONSTANT,     /* temporal standard deviation 0 */
	GLM_OUT_FLOOR,        /* mean below GLM_FLOOR_FRACTION of the run's reference intensity */
	GLM_OUT_NRULES
};
/* The intensity floor: this fraction of the run's reference intensity (METHODS.md section 3). */
#define GLM_FLOOR_FRACTION 0.10
/* The reference intensity is this quantile of the positive finite means. */
#define GLM_FLOOR_QUANTILE 0.98
/* Short names of the rules, for records and messages ("mask", "nonfinite", ...). */
extern const char *const glm_out_rule_names[GLM_OUT_NRULES];

/* What a finished fit gives per voxel. Arrays owned (glm_out_release). */
typedef struct glm_out {
	size_t nvox;
	int ncon;
	int df;                  /* residual df of the run (unwhitened X) */
	unsigned char *ok;       /* nvox: analyzable (METHODS.md section 3) */
	unsigned char *estimable;/* ncon */
	double *effect;          /* ncon * nvox, contrast-major; NaN where not ok or not estimable */
	double *var;             /* ncon * nvox, likewise */
	double *rho;             /* nvox: AR(1) coefficient used (0 for OLS), NaN where not ok */
	double *mean;            /* nvox: temporal mean of the raw series, NaN where not finite */
	double ref_intensity;    /* the run's reference intensity R (NaN when no voxel has a positive mean) */
	double floor;            /* GLM_FLOOR_FRACTION * R (0 when R is NaN) */
	unsigned char *rule;     /* nvox: the first rule the voxel fails, GLM_OUT_NRULES when analyzable */
	size_t left_out[GLM_OUT_NRULES]; /* voxels left out by each rule (first failed rule) */
} glm_out;

/* Values of glm_acc_finish's ar1 argument. */
enum {
	GLM_OLS = 0,
	GLM_AR1 = 1,          /* rho from the OLS residuals (METHODS.md section 4) */
	GLM_AR1_ADJUSTED = 2  /* rho corrected for the bias the fit puts in the residuals (the default of the commands) */
};

/*
 * Finishes the fit after all T volumes: the analyzable voxels (METHODS.md
 * section 3: finite, varying, in the mask, mean > 0 and at least
 * GLM_FLOOR_FRACTION of the 98th percentile of the finite positive means
 * inside the mask), scaling to percent of the voxel mean,
 * OLS, then (ar1 = GLM_AR1) Prais-Winsten whitening with the per-voxel rho
 * and the refit. GLM_AR1_ADJUSTED maps the residual ratio rho through the
 * design's table of expected ratios under AR(1) noise before whitening. C is ncon x p, row-major (contrast weights over all columns).
 * mask (nvox, may be NULL) restricts the voxels fitted. nthreads >= 1 splits
 * the voxels; results are identical for any nthreads. Once per accumulator:
 * the sums are released as the voxels are finished.
 */
sr_status glm_acc_finish(glm_acc *a, int ar1, const double *C, int ncon,
			 const unsigned char *mask, int nthreads, glm_out *out, sr_err *e);
void glm_out_release(glm_out *o);

/*
 * Fixed effects over runs (METHODS.md section 5), per voxel: over the runs
 * whose effect and var are finite, E = mean effect, V = sum var / n^2,
 * t = E / sqrt(V), df = sum df. Voxels with no such run get NaN and df 0.
 * effect[r], var[r] point to nvox values of run r. Outputs may be NULL.
 */
void glm_ffx(size_t nvox, int nruns, const double *const *effect, const double *const *var,
	     const int *df, double *E, double *V, double *t, int *dfsum);

#endif
