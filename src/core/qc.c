/* qc.c - quality-control numerics for the report (no I/O): FD, Dice, slices, windows. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "mem.h"
#include "strv.h"
#include "qc.h"
#include "stats.h"

sr_status qc_fd(const double *mp, size_t nt, int degrees, double radius_mm, double *fd, sr_err *e)
{
	const double deg = 3.14159265358979323846 / 180.0;
	size_t i, j;

	if (!(radius_mm > 0))
		return sr_fail(e, SR_EINVAL, "framewise displacement needs a positive radius, got %g",
			       radius_mm);
	if (nt == 0)
		return SR_OK;
	fd[0] = 0;
	/* Power et al. 2012: FD_i = |dx| + |dy| + |dz| + r(|da| + |db| + |dc|), angles in radians */
	for (i = 1; i < nt; i++) {
		double s = 0;

		for (j = 0; j < 6; j++) {
			double d = fabs(mp[6 * i + j] - mp[6 * (i - 1) + j]);

			if (j >= 3)
				d *= radius_mm * (degrees ? deg : 1.0);
			s += d;
		}
		fd[i] = s;
	}
	return SR_OK;
}

void qc_mean_max(const double *x, size_t n, double *mean, double *max)
{
	double s = 0, m = -INFINITY;
	size_t i, k = 0;

	for (i = 0; i < n; i++)
		if (isfinite(x[i])) {
			s += x[i];
			if (x[i] > m)
				m = x[i];
			k++;
		}
	*mean = k ? s / (double)k : NAN;
	*max = k ? m : NAN;
}

double qc_dice(const int32_t *a, const int32_t *b, size_t n, int32_t label, size_t *na,
	       size_t *nb, size_t *nab)
{
	size_t i, ca = 0, cb = 0, cab = 0;

	for (i = 0; i < n; i++) {
		int ia = a[i] == label, ib = b[i] == label;

		ca += (size_t)ia;
		cb += (size_t)ib;
		cab += (size_t)(ia && ib);
	}
	if (na)
		*na = ca;
	if (nb)
		*nb = cb;
	if (nab)
		*nab = cab;
	if (ca + cb == 0)
		return NAN;
	return 2.0 * (double)cab / (double)(ca + cb);
}

size_t qc_pick_slices(const int32_t *lab, size_t nx, size_t ny, size_t nz, int32_t label,
		      size_t want, size_t *out)
{
	size_t *has = xmalloc_array(nz ? nz : 1, sizeof *has), nhas = 0, k, v, n = 0;

	for (k = 0; k < nz; k++) {
		const int32_t *s = lab + k * nx * ny;

		for (v = 0; v < nx * ny; v++)
			if (s[v] == label) {
				has[nhas++] = k;
				break;
			}
	}
	if (want > nhas)
		want = nhas;
	for (k = 0; k < want; k++) {
		/* evenly spaced positions in the list of occupied slices, ends included */
		size_t idx = want == 1 ? nhas / 2 : (size_t)lround((double)k * (double)(nhas - 1) / (double)(want - 1));

		if (n && out[n - 1] == has[idx])
			continue;
		out[n++] = has[idx];
	}
	free(has);
	return n;
}

void qc_window(const double *x, size_t n, double plo, double phi, double *lo, double *hi)
{
	double *s = xmalloc_array(n ? n : 1, sizeof *s);
	size_t i, k = 0;

	for (i = 0; i < n; i++)
		if (isfinite(x[i]) && x[i] != 0)
			s[k++] = x[i];
	if (k == 0) {
		*lo = 0;
		*hi = 0;
	} else if (k < 2) {
		*lo = *hi = s[0];
	} else {
		qsort(s, k, sizeof *s, strv_cmp_double);
		*lo = stats_quantile_sorted(s, k, plo);
		*hi = stats_quantile_sorted(s, k, phi);
	}
	free(s);
}

qc_col_kind qc_column_kind(const char *name, char *const *confounds, size_t nconf)
{
	size_t i;
	const char *d = NULL;

	if (!strcmp(name, "baseline"))
		return QC_COL_BASELINE;
	if (!strncmp(name, "cos_", 4))
		d = name + 4;
	if (d && *d) {
		const char *q = d;

		while (*q >= '0' && *q <= '9')
			q++;
		if (!*q)
			return QC_COL_DRIFT;
	}
	for (i = 0; i < nconf; i++)
		if (!strcmp(name, confounds[i]))
			return QC_COL_CONFOUND;
	return QC_COL_CONDITION;
}

size_t qc_rises(const double *x, size_t n, size_t stride, double frac, size_t *out, size_t max)
{
	double lo = INFINITY, hi = -INFINITY, thr;
	size_t i, k = 0;
	int below = 0;

	for (i = 0; i < n; i++)
		if (isfinite(x[i * stride])) {
			lo = fmin(lo, x[i * stride]);
			hi = fmax(hi, x[i * stride]);
		}
	if (!(hi > lo))
		return 0;
	thr = lo + frac * (hi - lo);
	for (i = 0; i < n; i++) {
		double v = x[i * stride];

		if (!isfinite(v))
			continue;
		if (v > thr) {
			if ((below || i == 0) && k < max)
				out[k++] = i;
			below = 0;
		} else {
			below = 1;
		}
	}
	return k;
}

char qc_axis_letter(const double aff[3][4], int axis, int sign, double *cosine)
{
	static const char pos[3] = { 'R', 'A', 'S' }, neg[3] = { 'L', 'P', 'I' };
	double best = 0, len = 0;
	int k, bk = -1;

	if (cosine)
		*cosine = NAN;
	if (axis < 0 || axis > 2)
		return '?';
	for (k = 0; k < 3; k++) {
		double c = aff[k][axis];

		len += c * c;
		if (fabs(c) > fabs(best)) {
			best = c;
			bk = k;
		}
	}
	if (bk < 0 || !isfinite(len))
		return '?';
	if (cosine)
		*cosine = fabs(best) / sqrt(len);
	return (best > 0) == (sign > 0) ? pos[bk] : neg[bk];
}

int qc_overlap_flag(double size_a, double size_b, double dice)
{
	if (!(size_a > 0) || !(size_b > 0))
		return 1;
	return !(dice > 0);
}
