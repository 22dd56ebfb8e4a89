/* design.h - first-level design matrices (METHODS.md section 2): events, HRF, drift, confounds. */
#ifndef SR_DESIGN_H
#define SR_DESIGN_H

#include <stddef.h>

#include "err.h"

/* The fine time grid step of METHODS.md, seconds. */
#define DESIGN_DT 0.05
/* Kernel length, seconds. */
#define DESIGN_KERNEL_S 32.0

/* An event of condition `cond` (0-based index into the sorted condition list). */
typedef struct design_event {
	double onset, duration;
	int cond;
} design_event;

/* The unscaled two-gamma response g(t;6,1) - g(t;16,1)/6 (0 for t < 0). */
double design_hrf_raw(double t);

/*
 * Kernel samples h_m at m*dt, m = 0..M-1, M = round(32/dt), scaled so that
 * sum h_m dt = 1. Returns M; h must have room for it (NULL: only returns M).
 */
size_t design_hrf(double dt, double *h);

/* Number of cosine drift columns Q = floor(2 T tr / cutoff); 0 when cutoff <= 0. */
int design_drift_count(int T, double tr, double cutoff);
/* Cosine basis c_q(k) = sqrt(2/T) cos(pi q (2k+1) / (2T)), q = 1..Q, into C (T x Q, column-major). */
void design_drift(int T, int Q, double *C);

/*
 * Condition regressors: stimulus on the fine grid (exact partial-bin cover for
 * d > 0, unit-area impulse for d = 0; parts before 0 s dropped), convolved with
 * the kernel, read at frame times (k + slice_ref) tr by linear interpolation.
 * out is T x ncond, column-major. Errors: bad sizes, cond out of range.
 */
sr_status design_regressors(int T, double tr, double slice_ref, const design_event *ev,
			    size_t nev, int ncond, double *out, sr_err *e);

/*
 * Confound columns in place (T x ncol, column-major, NaN = n/a): n/a cells
 * become the column's mean over numeric cells, then each column is demeaned.
 * A column with no numeric cell is an error (col index in the message).
 */
sr_status design_confounds(int T, int ncol, double *conf, sr_err *e);

/* A whole design: columns conditions, confounds, cosines, constant. */
typedef struct design {
	int T, p;
	int ncond, nconf, ndrift;  /* column blocks, in that order, then 1 constant */
	double *X;                 /* T x p, column-major; owned */
} design;

/* Builds the design; conf (T x nconf, column-major, already fixed by design_confounds) may be NULL when nconf = 0. */
sr_status design_build(int T, double tr, double slice_ref, const design_event *ev, size_t nev,
		       int ncond, const double *conf, int nconf, double drift_cutoff, design *d,
		       sr_err *e);
void design_release(design *d);

#endif
