/* fir.h - finite-impulse-response time courses: bins of one TR after each event's onset. */
#ifndef SR_FIR_H
#define SR_FIR_H

#include <stddef.h>

#include "design.h"
#include "err.h"

/* Bins from 0 s: floor(window / tr + 1e-9), at least 1 (window 20 s, TR 2 s: 10 bins, 0..18 s). */
int fir_nbins(double window, double tr);

/*
 * The FIR columns of condition `cond` into F (T x nbins, column-major): F[k +
 * T b] is the number of events of cond with b <= (t_k - onset) / tr < b + 1,
 * t_k = (k + volume_time) tr the volume's time (METHODS.md section 2), the
 * quotient floored with the 1e-9 guard. Onset-locked: an event's duration is
 * not used (a block's whole shape shows in the bins). Overlapping events add.
 */
void fir_columns(int T, double tr, double volume_time, const design_event *ev, size_t nev,
		 int cond, int nbins, double *F);

/*
 * The FIR fit of one series y (T values): X = [FIR columns of conditions
 * 0..ncond-1 (condition by condition, bins ascending) | nuis (T x nnuis,
 * column-major: the main model's confounds, drift cosines and constant)],
 * solved by ordinary least squares (pinv, glm_ols_solve); beta gets the
 * ncond * nbins FIR coefficients, NaN where not estimable (section 11).
 * Fails when the design has no more rows than columns.
 */
sr_status fir_fit(int T, double tr, double volume_time, const design_event *ev, size_t nev,
		  int ncond, int nbins, const double *nuis, int nnuis, const double *y, double *beta,
		  sr_err *e);
/*
 * The same for ny series at once (y: ny x T, series by series; beta: ny x
 * ncond * nbins): one design and one factorisation for all of them. A series
 * whose first value is NaN is skipped (its beta stays NaN).
 */
sr_status fir_fit_many(int T, double tr, double volume_time, const design_event *ev, size_t nev,
		       int ncond, int nbins, const double *nuis, int nnuis, const double *y, int ny,
		       double *beta, sr_err *e);

#endif
