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

/*
 * Number of cosine drift columns Q = floor(2 T tr / cutoff + 1e-9) (the guard
 * keeps a period of exactly the cutoff, e.g. T = 256, TR = 2, cutoff 128 -> 8).
 * 0 when cutoff <= 0 or not finite, or T < 2; at most T - 1 (the DCT has no
 * more non-constant columns; higher ones would alias).
 */
int design_drift_count(int T, double tr, double cutoff);
/* Cosine basis c_q(k) = sqrt(2/T) cos(pi q (2k+1) / (2T)), q = 1..Q, into C (T x Q, column-major). */
void design_drift(int T, int Q, double *C);

/*
 * Condition regressors: stimulus on the fine grid (exact partial-bin cover for
 * d > 0, unit-area impulse for d = 0; parts before 0 s dropped), convolved with
 * the kernel, read at frame times (k + volume_time) tr by linear interpolation.
 * out is T x ncond, column-major. The grid runs from 0 to T tr + 32 s (+2
 * bins); events beyond it contribute nothing. An impulse onset within 1e-9
 * bins below a bin edge counts as on the edge (0.15 s lands in bin 3, not 2,
 * despite 0.15 / 0.05 = 2.9999999999999996 in binary).
 * Errors: T < 1, tr <= 0, volume_time outside [0, 1], ncond < 0, non-finite
 * onset, negative or non-finite duration, cond out of range (event numbers
 * in messages are 1-based). Allocates scratch; thread safe.
 */
sr_status design_regressors(int T, double tr, double volume_time, const design_event *ev,
			    size_t nev, int ncond, double *out, sr_err *e);

/*
 * Confound columns in place (T x ncol, column-major, NaN = n/a): n/a cells
 * become the column's mean over numeric cells, then each column is demeaned.
 * A column with no numeric cell, or an infinite cell, is an error; the
 * message names the 1-based column (and row) and the caller adds the file name.
 */
sr_status design_confounds(int T, int ncol, double *conf, sr_err *e);

/* A whole design: columns conditions, confounds, cosines, constant. */
typedef struct design {
	int T, p;
	int ncond, nconf, ndrift;  /* column blocks, in that order, then 1 constant */
	double *X;                 /* T x p, column-major; owned */
} design;

/*
 * Builds the design; conf (T x nconf, column-major, already fixed by
 * design_confounds) may be NULL when nconf = 0; it is copied. drift_cutoff
 * <= 0 means no drift columns. On success d->X is owned by d: free it with
 * design_release. On error d is left empty (X = NULL).
 */
sr_status design_build(int T, double tr, double volume_time, const design_event *ev, size_t nev,
		       int ncond, const double *conf, int nconf, double drift_cutoff, design *d,
		       sr_err *e);
/* Frees d->X and empties d; NULL or an empty design is fine. */
void design_release(design *d);

#endif
