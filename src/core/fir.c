/* fir.c - FIR columns and their least-squares fit (no I/O). */
#include "fir.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "glm.h"
#include "mem.h"

int fir_nbins(double window, double tr)
{
	double q = window / tr;
	int n;

	if (!(q > 0) || !isfinite(q))
		return 1;
	n = q > 1e6 ? 1000000 : (int)floor(q + 1e-9);
	return n < 1 ? 1 : n;
}

void fir_columns(int T, double tr, double volume_time, const design_event *ev, size_t nev,
		 int cond, int nbins, double *F)
{
	size_t i;
	int k;

	memset(F, 0, (size_t)T * (size_t)nbins * sizeof *F);
	for (i = 0; i < nev; i++) {
		if (ev[i].cond != cond || !isfinite(ev[i].onset))
			continue;
		for (k = 0; k < T; k++) {
			double lag = ((k + volume_time) * tr - ev[i].onset) / tr;
			double b;

			if (lag < -1e-9)
				continue;
			b = floor(lag + 1e-9);
			if (b >= nbins)
				break;   /* later volumes lie further from this onset */
			F[(size_t)k + (size_t)T * (size_t)b] += 1.0;
		}
	}
}

sr_status fir_fit(int T, double tr, double volume_time, const design_event *ev, size_t nev,
		  int ncond, int nbins, const double *nuis, int nnuis, const double *y, double *beta,
		  sr_err *e)
{
	return fir_fit_many(T, tr, volume_time, ev, nev, ncond, nbins, nuis, nnuis, y, 1, beta, e);
}

sr_status fir_fit_many(int T, double tr, double volume_time, const design_event *ev, size_t nev,
		       int ncond, int nbins, const double *nuis, int nnuis, const double *y, int ny,
		       double *beta, sr_err *e)
{
	int nf = ncond * nbins, p = nf + nnuis, c;
	double *X = xmalloc_array((size_t)T * (size_t)(p ? p : 1), sizeof *X);
	double *b = xmalloc_array((size_t)(p ? p : 1), sizeof *b);
	glm_model *m = NULL;
	sr_status st;

	for (c = 0; c < ncond; c++)
		fir_columns(T, tr, volume_time, ev, nev, c, nbins, X + (size_t)T * (size_t)c * (size_t)nbins);
	if (nnuis)
		memcpy(X + (size_t)T * (size_t)nf, nuis, (size_t)T * (size_t)nnuis * sizeof *X);
	st = glm_model_make(X, T, p, &m, e);
	for (int i = 0; st == SR_OK && i < ny; i++) {
		double *bi = beta + (size_t)i * (size_t)nf;
		int j;

		if (isnan(y[(size_t)i * (size_t)T])) {
			for (j = 0; j < nf; j++)
				bi[j] = NAN;
			continue;
		}
		glm_ols_solve(m, y + (size_t)i * (size_t)T, b);
		memcpy(bi, b, (size_t)nf * sizeof *bi);
	}
	glm_model_free(m);
	free(X);
	free(b);
	return st;
}
