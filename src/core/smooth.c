/* smooth.c - separable Gaussian smoothing, zero outside the grid (see smooth.h). */
#include "smooth.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "mem.h"

double smooth_fwhm_sigma(double fwhm_mm, double voxel_mm)
{
	if (fwhm_mm == 0)
		return 0;
	return fwhm_mm / (2.0 * sqrt(2.0 * log(2.0))) / voxel_mm;
}

/* Filters every line of x along one axis (stride between neighbours, n samples per line). */
static void filter_axis(double *x, size_t nvox, size_t n, size_t stride, double sigma, double *line,
			double *out)
{
	long r = (long)floor(4.0 * sigma + 0.5), d;
	double *k = xmalloc_array((size_t)(2 * r + 1), sizeof *k);
	double sum = 0;
	size_t start;

	for (d = -r; d <= r; d++) {
		k[d + r] = exp(-0.5 * (double)d * (double)d / (sigma * sigma));
		sum += k[d + r];
	}
	for (d = 0; d <= 2 * r; d++)
		k[d] /= sum;
	/* a line starts at every voxel whose coordinate along this axis is 0 */
	for (start = 0; start < nvox; start++) {
		size_t i;

		if ((start / stride) % n != 0)
			continue;
		for (i = 0; i < n; i++)
			line[i] = x[start + i * stride];
		for (i = 0; i < n; i++) {
			long lo = (long)i - r < 0 ? -(long)i : -r;
			long hi = (long)i + r >= (long)n ? (long)n - 1 - (long)i : r;
			double s = 0;

			for (d = lo; d <= hi; d++)
				s += k[d + r] * line[(long)i + d];
			out[i] = s;
		}
		for (i = 0; i < n; i++)
			x[start + i * stride] = out[i];
	}
	free(k);
}

sr_status smooth_gauss3(double *x, int64_t nx, int64_t ny, int64_t nz, const double sigma[3],
			sr_err *e)
{
	size_t nvox, nmax, v;
	int64_t dims[3] = { nx, ny, nz };
	size_t stride[3];
	double *line, *out;
	int a;

	if (nx <= 0 || ny <= 0 || nz <= 0 ||
	    sr_mul_size((size_t)nx, (size_t)ny, &nvox) || sr_mul_size(nvox, (size_t)nz, &nvox))
		return sr_fail(e, SR_EDIM, "smoothing: bad grid size %lld x %lld x %lld", (long long)nx,
			       (long long)ny, (long long)nz);
	for (a = 0; a < 3; a++)
		if (!isfinite(sigma[a]) || sigma[a] < 0 || sigma[a] > 1e6)
			return sr_fail(e, SR_EINVAL, "smoothing: bad sigma %g along axis %d", sigma[a], a);
	for (v = 0; v < nvox; v++)
		if (!isfinite(x[v]))
			return sr_fail(e, SR_EINVAL, "smoothing: voxel %zu is not finite", v);
	stride[0] = 1;
	stride[1] = (size_t)nx;
	stride[2] = (size_t)nx * (size_t)ny;
	nmax = (size_t)(nx > ny ? (nx > nz ? nx : nz) : (ny > nz ? ny : nz));
	line = xmalloc_array(nmax, sizeof *line);
	out = xmalloc_array(nmax, sizeof *out);
	for (a = 0; a < 3; a++)
		if (sigma[a] > 1e-15)
			filter_axis(x, nvox, (size_t)dims[a], stride[a], sigma[a], line, out);
	free(line);
	free(out);
	return SR_OK;
}
