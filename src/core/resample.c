/* resample.c - nearest-neighbour label resampling between two voxel grids. */
#include "resample.h"

#include <math.h>

int resample_affine_inverse(const double a[3][4], double inv[3][4])
{
	double det, m[3][3];
	int i, j;

	det = a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1]) -
	      a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0]) +
	      a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0]);
	if (!isfinite(det) || fabs(det) < 1e-12)
		return -1;
	m[0][0] = (a[1][1] * a[2][2] - a[1][2] * a[2][1]) / det;
	m[0][1] = (a[0][2] * a[2][1] - a[0][1] * a[2][2]) / det;
	m[0][2] = (a[0][1] * a[1][2] - a[0][2] * a[1][1]) / det;
	m[1][0] = (a[1][2] * a[2][0] - a[1][0] * a[2][2]) / det;
	m[1][1] = (a[0][0] * a[2][2] - a[0][2] * a[2][0]) / det;
	m[1][2] = (a[0][2] * a[1][0] - a[0][0] * a[1][2]) / det;
	m[2][0] = (a[1][0] * a[2][1] - a[1][1] * a[2][0]) / det;
	m[2][1] = (a[0][1] * a[2][0] - a[0][0] * a[2][1]) / det;
	m[2][2] = (a[0][0] * a[1][1] - a[0][1] * a[1][0]) / det;
	for (i = 0; i < 3; i++) {
		for (j = 0; j < 3; j++)
			inv[i][j] = m[i][j];
		inv[i][3] = -(m[i][0] * a[0][3] + m[i][1] * a[1][3] + m[i][2] * a[2][3]);
	}
	return 0;
}

int resample_nearest(const int32_t *src, const int64_t sn[3], const double sa[3][4],
		     int32_t *dst, const int64_t tn[3], const double ta[3][4])
{
	double inv[3][4], comb[3][4];
	int64_t i, j, k;
	int r, c;

	if (resample_affine_inverse(sa, inv))
		return -1;
	/* target voxel -> world -> source voxel, as one affine */
	for (r = 0; r < 3; r++) {
		for (c = 0; c < 4; c++) {
			comb[r][c] = inv[r][0] * ta[0][c] + inv[r][1] * ta[1][c] + inv[r][2] * ta[2][c];
			if (c == 3)
				comb[r][c] += inv[r][3];
		}
	}
	for (k = 0; k < tn[2]; k++) {
		for (j = 0; j < tn[1]; j++) {
			for (i = 0; i < tn[0]; i++) {
				double p[3];
				int64_t q[3];
				int inside = 1;

				for (r = 0; r < 3; r++) {
					p[r] = comb[r][0] * i + comb[r][1] * j + comb[r][2] * k + comb[r][3];
					/* round half away from zero, with a small guard so that exact
					 * grid points are not split by rounding noise */
					q[r] = (int64_t)floor(p[r] + 0.5 + 1e-9);
					if (q[r] < 0 || q[r] >= sn[r])
						inside = 0;
				}
				dst[i + tn[0] * (j + tn[1] * k)] =
					inside ? src[q[0] + sn[0] * (q[1] + sn[1] * q[2])] : 0;
			}
		}
	}
	return 0;
}
