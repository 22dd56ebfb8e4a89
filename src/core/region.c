/* region.c - spheres, sizes, centres of mass and renumbering of label images (see region.h). */
#include "region.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "mem.h"

static void world(const double A[3][4], double i, double j, double k, double out[3])
{
	int r;

	for (r = 0; r < 3; r++)
		out[r] = A[r][0] * i + A[r][1] * j + A[r][2] * k + A[r][3];
}

sr_status region_spheres(const double A[3][4], int64_t nx, int64_t ny, int64_t nz,
			 const double *xyz, int n, double radius, int32_t *labels, sr_err *e)
{
	int64_t i, j, k;
	size_t nvox;
	int c;

	if (nx <= 0 || ny <= 0 || nz <= 0 || n < 0 ||
	    sr_mul_size((size_t)nx, (size_t)ny, &nvox) || sr_mul_size(nvox, (size_t)nz, &nvox))
		return sr_fail(e, SR_EDIM, "spheres: bad grid size %lld x %lld x %lld", (long long)nx,
			       (long long)ny, (long long)nz);
	if (!isfinite(radius) || radius < 0)
		return sr_fail(e, SR_EINVAL, "spheres: bad radius %g", radius);
	for (c = 0; c < 3 * n; c++)
		if (!isfinite(xyz[c]))
			return sr_fail(e, SR_EINVAL, "spheres: centre %d is not finite", c / 3 + 1);
	for (k = 0; k < nz; k++)
		for (j = 0; j < ny; j++)
			for (i = 0; i < nx; i++) {
				double p[3], best = INFINITY;
				int32_t lab = 0;

				world(A, (double)i, (double)j, (double)k, p);
				for (c = 0; c < n; c++) {
					double dx = p[0] - xyz[3 * c], dy = p[1] - xyz[3 * c + 1];
					double dz = p[2] - xyz[3 * c + 2];
					double d = sqrt(dx * dx + dy * dy + dz * dz);

					if (d <= radius && d < best) {
						best = d;
						lab = (int32_t)(c + 1);
					}
				}
				labels[i + nx * (j + ny * k)] = lab;
			}
	return SR_OK;
}

void region_stats(const int32_t *labels, int64_t nx, int64_t ny, int64_t nz, const double A[3][4],
		  int32_t nlab, size_t *size, double *com)
{
	double *sum = xcalloc((size_t)(nlab > 0 ? nlab : 1) * 3, sizeof *sum);
	int64_t i, j, k;
	int32_t l;

	for (l = 0; l < nlab; l++)
		size[l] = 0;
	for (k = 0; k < nz; k++)
		for (j = 0; j < ny; j++)
			for (i = 0; i < nx; i++) {
				int32_t x = labels[i + nx * (j + ny * k)];

				if (x < 1 || x > nlab)
					continue;
				size[x - 1]++;
				sum[3 * (x - 1)] += (double)i;
				sum[3 * (x - 1) + 1] += (double)j;
				sum[3 * (x - 1) + 2] += (double)k;
			}
	/* the affine is linear, so the world centre is the image of the voxel centre */
	for (l = 0; l < nlab; l++) {
		if (size[l] == 0) {
			com[3 * l] = com[3 * l + 1] = com[3 * l + 2] = NAN;
			continue;
		}
		world(A, sum[3 * l] / (double)size[l], sum[3 * l + 1] / (double)size[l],
		      sum[3 * l + 2] / (double)size[l], com + 3 * l);
	}
	free(sum);
}

void region_relabel(int32_t *labels, size_t nvox, int32_t nlab, const int32_t *map)
{
	size_t v;

	for (v = 0; v < nvox; v++) {
		int32_t x = labels[v];

		labels[v] = x >= 1 && x <= nlab ? map[x - 1] : 0;
	}
}
