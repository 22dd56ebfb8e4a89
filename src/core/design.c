/* design.c - first-level design matrices: two-gamma HRF, fine-grid stimulus, cosine drift, confounds. */
#include "design.h"

#include <limits.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "mem.h"

/*
 * Longest fine grid we accept (bins). A run of 10^6 s at dt = 0.05 already
 * needs 2 * 10^7 bins; anything longer is a unit mistake (TR in ms).
 */
#define DESIGN_MAX_BINS 100000000L

/* A bin position within this many bins of an edge counts as on the edge. */
#define DESIGN_EDGE_TOL 1e-9

/* Gamma density with shape a, scale 1, evaluated in logs so large shapes do not overflow. */
static double gamma_pdf(double t, double a)
{
	int sign;

	if (!(t > 0.0))
		return 0.0;
	/* lgamma_r: lgamma stores the sign in the global signgam, a data race when runs are fitted in parallel */
	return exp((a - 1.0) * log(t) - t - lgamma_r(a, &sign));
}

/*
 * The canonical two-gamma response (Friston et al. 1998, NeuroImage 7:30-40):
 * a positive lobe of shape 6 minus a sixth of an undershoot of shape 16.
 * Both densities vanish at t = 0, so h(0) = 0 exactly.
 */
double design_hrf_raw(double t)
{
	if (!(t > 0.0))
		return 0.0;
	return gamma_pdf(t, 6.0) - gamma_pdf(t, 16.0) / 6.0;
}

size_t design_hrf(double dt, double *h)
{
	double m_real, sum = 0.0;
	size_t M, m;

	if (!(dt > 0.0) || !isfinite(dt))
		return 0;
	m_real = round(DESIGN_KERNEL_S / dt);
	if (!(m_real >= 1.0) || m_real > (double)DESIGN_MAX_BINS)
		return 0;
	M = (size_t)m_real;
	if (!h)
		return M;
	for (m = 0; m < M; m++) {
		h[m] = design_hrf_raw((double)m * dt);
		sum += h[m];
	}
	/* Unit area on the grid: a sustained stimulus of height 1 then plateaus at 1. */
	for (m = 0; m < M; m++)
		h[m] /= sum * dt;
	return M;
}

int design_drift_count(int T, double tr, double cutoff)
{
	double q;

	if (T < 2 || !(tr > 0.0) || !isfinite(tr) || !(cutoff > 0.0) || !isfinite(cutoff))
		return 0;
	/*
	 * The guard keeps exact boundary cases (T = 256, TR = 2, cutoff 128:
	 * a period of exactly the cutoff) from losing a column to rounding.
	 */
	q = floor(2.0 * (double)T * tr / cutoff + 1e-9);
	/* The DCT has only T - 1 non-constant columns; more would alias. */
	if (q > (double)(T - 1))
		return T - 1;
	return (int)q;
}

void design_drift(int T, int Q, double *C)
{
	const double pi = 3.14159265358979323846;
	long long four_t = 4LL * T;
	int q, k;

	if (T < 1 || Q < 1 || !C)
		return;
	/*
	 * cos(pi n / (2T)) has period 4T in n = q (2k + 1); reducing n exactly in
	 * integers keeps the argument small, so C'C = I holds to rounding.
	 */
	for (q = 1; q <= Q; q++) {
		double *col = C + (size_t)(q - 1) * (size_t)T;
		double norm = sqrt(2.0 / (double)T);

		for (k = 0; k < T; k++) {
			long long n = ((long long)q * (2LL * k + 1)) % four_t;

			col[k] = norm * cos(pi * (double)n / (2.0 * (double)T));
		}
	}
}

/* Checks the arguments every regressor computation shares. */
static sr_status check_run(int T, double tr, double volume_time, int ncond, sr_err *e)
{
	if (T < 1)
		return sr_fail(e, SR_EDIM, "a run needs at least 1 volume (got %d)", T);
	if (!(tr > 0.0) || !isfinite(tr))
		return sr_fail(e, SR_EINVAL, "repetition time must be positive (got %g)", tr);
	if (!(volume_time >= 0.0 && volume_time <= 1.0))
		return sr_fail(e, SR_EINVAL, "slice reference must lie in [0, 1] (got %g)",
			       volume_time);
	if (ncond < 0)
		return sr_fail(e, SR_EDIM, "negative number of conditions (%d)", ncond);
	return SR_OK;
}

/* Checks the events: finite onsets, finite non-negative durations, known conditions. */
static sr_status check_events(const design_event *ev, size_t nev, int ncond, sr_err *e)
{
	size_t i;

	if (nev > 0 && !ev)
		return sr_fail(e, SR_EINVAL, "%zu events but no event array", nev);
	for (i = 0; i < nev; i++) {
		if (!isfinite(ev[i].onset))
			return sr_fail(e, SR_EINVAL, "event %zu: onset is not a finite number",
				       i + 1);
		if (!isfinite(ev[i].duration) || ev[i].duration < 0.0)
			return sr_fail(e, SR_EINVAL,
				       "event %zu: duration must be a finite number >= 0 (got %g)",
				       i + 1, ev[i].duration);
		if (ev[i].cond < 0 || ev[i].cond >= ncond)
			return sr_fail(e, SR_EINVAL,
				       "event %zu: condition index %d outside 0..%d", i + 1,
				       ev[i].cond, ncond - 1);
	}
	return SR_OK;
}

/*
 * Adds one event to the stimulus on bins 0..J-1 (bin j = [j dt, (j+1) dt)).
 * Only the bins the event touches are visited. Parts before 0 s and beyond
 * the grid are dropped; the grid already extends past the last frame read.
 */
static void add_event(double *stim, long J, double dt, double onset, double dur)
{
	double grid_end = (double)J * dt;
	double a, b, u;
	long j, j0, j1;

	if (dur == 0.0) {
		/* Unit-area impulse: bin floor(onset / dt) gets 1 / dt. */
		if (onset < 0.0 || onset >= grid_end)
			return;
		u = onset / dt;
		/* A decimal onset on a bin edge (0.15 s) must not fall one bin early. */
		j = (long)floor(u + DESIGN_EDGE_TOL);
		if (j >= 0 && j < J)
			stim[j] += 1.0 / dt;
		return;
	}
	a = onset > 0.0 ? onset : 0.0;
	b = onset + dur;
	if (b > grid_end)
		b = grid_end;
	if (!(b > a))
		return;
	/* One bin of slack either side: floor(a / dt) can disagree with j * dt by a rounding. */
	j0 = (long)floor(a / dt) - 1;
	j1 = (long)floor(b / dt) + 1;
	if (j0 < 0)
		j0 = 0;
	if (j1 > J - 1)
		j1 = J - 1;
	for (j = j0; j <= j1; j++) {
		double lo = (double)j * dt, hi = (double)(j + 1) * dt;
		double from = a > lo ? a : lo, to = b < hi ? b : hi;

		if (to > from)
			stim[j] += (to - from) / dt;
	}
}

sr_status design_regressors(int T, double tr, double volume_time, const design_event *ev,
			    size_t nev, int ncond, double *out, sr_err *e)
{
	const double dt = DESIGN_DT;
	double *h = NULL, *stim = NULL, *x = NULL;
	double grid_s, bins;
	size_t M, tn;
	long J, jread;
	int c, k;
	sr_status st;

	st = check_run(T, tr, volume_time, ncond, e);
	if (st)
		return st;
	st = check_events(ev, nev, ncond, e);
	if (st)
		return st;
	if (ncond == 0)
		return SR_OK;
	if (!out)
		return sr_fail(e, SR_EINVAL, "no output array for the regressors");
	if (sr_mul_size((size_t)T, (size_t)ncond, &tn))
		return sr_fail(e, SR_EDIM, "design too large (%d volumes x %d conditions)", T,
			       ncond);

	/*
	 * Fine grid from 0 to the end of the run (T TR) plus the kernel length,
	 * plus 2 bins so that interpolation at the last frame time,
	 * (T - 1 + s) TR <= T TR, always has its right-hand neighbour.
	 */
	grid_s = (double)T * tr + DESIGN_KERNEL_S;
	bins = ceil(grid_s / dt) + 2.0;
	if (!(bins <= (double)DESIGN_MAX_BINS))
		return sr_fail(e, SR_EDIM,
			       "run of %g s is too long for the %g s time grid (repetition time "
			       "in milliseconds?)",
			       (double)T * tr, dt);
	J = (long)bins;
	/* Only bins up to the last one read matter: x_j depends on stim_l for l <= j. */
	jread = (long)floor(((double)(T - 1) + volume_time) * tr / dt) + 2;
	if (jread > J)
		jread = J;

	M = design_hrf(dt, NULL);
	h = xmalloc_array(M, sizeof *h);
	design_hrf(dt, h);
	stim = xmalloc_array((size_t)J, sizeof *stim);
	x = xmalloc_array((size_t)J, sizeof *x);

	for (c = 0; c < ncond; c++) {
		double *col = out + (size_t)c * (size_t)T;
		size_t i;
		long l;

		memset(stim, 0, (size_t)J * sizeof *stim);
		memset(x, 0, (size_t)J * sizeof *x);
		for (i = 0; i < nev; i++)
			if (ev[i].cond == c)
				add_event(stim, J, dt, ev[i].onset, ev[i].duration);
		/* x_j = sum_l stim_l h_(j-l) dt, visiting only non-zero stimulus bins. */
		for (l = 0; l < jread; l++) {
			double w;
			long m, mend;

			if (stim[l] == 0.0)
				continue;
			w = stim[l] * dt;
			mend = (long)M;
			if (l + mend > jread)
				mend = jread - l;
			for (m = 0; m < mend; m++)
				x[l + m] += w * h[m];
		}
		/* Frame times t_k = (k + s) TR, read by linear interpolation. */
		for (k = 0; k < T; k++) {
			double u = ((double)k + volume_time) * tr / dt;
			long j = (long)floor(u);
			double f = u - (double)j;

			if (j + 1 < jread)
				col[k] = x[j] * (1.0 - f) + x[j + 1] * f;
			else
				col[k] = x[j];
		}
	}
	free(h);
	free(stim);
	free(x);
	return SR_OK;
}

sr_status design_confounds(int T, int ncol, double *conf, sr_err *e)
{
	int c, k;

	if (T < 1)
		return sr_fail(e, SR_EDIM, "a run needs at least 1 volume (got %d)", T);
	if (ncol < 0)
		return sr_fail(e, SR_EDIM, "negative number of confound columns (%d)", ncol);
	if (ncol > 0 && !conf)
		return sr_fail(e, SR_EINVAL, "no confound array");
	for (c = 0; c < ncol; c++) {
		double *col = conf + (size_t)c * (size_t)T;
		double sum = 0.0, mean, corr = 0.0;
		int n = 0;

		for (k = 0; k < T; k++) {
			if (isnan(col[k]))
				continue;
			if (!isfinite(col[k]))
				return sr_fail(e, SR_EFORMAT,
					       "confound column %d, row %d: value is infinite",
					       c + 1, k + 1);
			sum += col[k];
			n++;
		}
		if (n == 0)
			return sr_fail(e, SR_EFORMAT, "confound column %d has no numeric value",
				       c + 1);
		mean = sum / n;
		/* Second pass corrects the rounding of the first mean. */
		for (k = 0; k < T; k++)
			if (!isnan(col[k]))
				corr += col[k] - mean;
		mean += corr / n;
		/* An n/a cell takes the mean, so after demeaning it is exactly 0. */
		for (k = 0; k < T; k++)
			col[k] = isnan(col[k]) ? 0.0 : col[k] - mean;
	}
	return SR_OK;
}

sr_status design_build(int T, double tr, double volume_time, const design_event *ev, size_t nev,
		       int ncond, const double *conf, int nconf, double drift_cutoff, design *d,
		       sr_err *e)
{
	size_t total, i;
	int Q, p, c;
	sr_status st;

	if (!d)
		return sr_fail(e, SR_EINVAL, "no design to fill");
	memset(d, 0, sizeof *d);
	st = check_run(T, tr, volume_time, ncond, e);
	if (st)
		return st;
	if (nconf < 0)
		return sr_fail(e, SR_EDIM, "negative number of confound columns (%d)", nconf);
	if (nconf > 0 && !conf)
		return sr_fail(e, SR_EINVAL, "%d confound columns but no confound array", nconf);
	st = check_events(ev, nev, ncond, e);
	if (st)
		return st;
	if (sr_mul_size((size_t)T, (size_t)nconf, &total))
		return sr_fail(e, SR_EDIM, "confounds too large");
	for (i = 0; i < total; i++)
		if (!isfinite(conf[i]))
			return sr_fail(e, SR_EFORMAT,
				       "confound column %zu, row %zu is not a number (fill n/a first)",
				       i / (size_t)T + 1, i % (size_t)T + 1);
	Q = design_drift_count(T, tr, drift_cutoff);
	if ((long long)ncond + nconf + Q + 1 > INT_MAX)
		return sr_fail(e, SR_EDIM, "too many design columns");
	p = ncond + nconf + Q + 1;
	if (sr_mul_size((size_t)T, (size_t)p, &total))
		return sr_fail(e, SR_EDIM, "design too large (%d volumes x %d columns)", T, p);

	d->X = xcalloc(total, sizeof *d->X);
	st = design_regressors(T, tr, volume_time, ev, nev, ncond, d->X, e);
	if (st) {
		design_release(d);
		return st;
	}
	if (nconf > 0)
		memcpy(d->X + (size_t)ncond * (size_t)T, conf,
		       (size_t)nconf * (size_t)T * sizeof *conf);
	design_drift(T, Q, d->X + (size_t)(ncond + nconf) * (size_t)T);
	for (c = 0; c < T; c++)
		d->X[(size_t)(p - 1) * (size_t)T + (size_t)c] = 1.0;
	d->T = T;
	d->p = p;
	d->ncond = ncond;
	d->nconf = nconf;
	d->ndrift = Q;
	return SR_OK;
}

void design_release(design *d)
{
	if (!d)
		return;
	free(d->X);
	memset(d, 0, sizeof *d);
}
