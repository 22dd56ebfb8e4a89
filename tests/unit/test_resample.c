/* test_resample.c - nearest-neighbour label resampling against hand-worked grids. */
#include "testlib.h"

#include <string.h>

#include "core/resample.h"

int main(void)
{
	/* a 2 x 2 x 1 source at 2 mm with origin 0, target 4 x 4 x 1 at 1 mm:
	 * target voxel i maps to world i mm, i.e. source voxel i / 2 rounded */
	int32_t src[4] = { 1, 2, 3, 4 }, dst[16];
	int64_t sn[3] = { 2, 2, 1 }, tn[3] = { 4, 4, 1 };
	double sa[3][4] = { { 2, 0, 0, 0 }, { 0, 2, 0, 0 }, { 0, 0, 2, 0 } };
	double ta[3][4] = { { 1, 0, 0, 0 }, { 0, 1, 0, 0 }, { 0, 0, 1, 0 } };
	double inv[3][4];
	double rot[3][4] = { { 0, -3, 0, 10 }, { 2, 0, 0, -4 }, { 0, 0, 1.5, 7 } };
	int i;

	CHECK(resample_nearest(src, sn, sa, dst, tn, ta) == 0, "resampling succeeds");
	/* x = 0 -> 0, 1 -> 0.5 -> 1 (half rounds up), 2 -> 1, 3 -> 1.5 -> outside (2 >= 2) */
	CHECK(dst[0] == 1 && dst[1] == 2 && dst[2] == 2 && dst[3] == 0, "row 0 by hand: %d %d %d %d",
	      dst[0], dst[1], dst[2], dst[3]);
	CHECK(dst[4] == 3 && dst[5] == 4 && dst[15] == 0, "rows 1 and 3 by hand");

	/* identity grids copy exactly */
	memset(dst, -1, sizeof dst);
	CHECK(resample_nearest(src, sn, sa, dst, sn, sa) == 0, "same grid succeeds");
	for (i = 0; i < 4; i++)
		if (dst[i] != src[i])
			break;
	CHECK(i == 4, "same grid copies the labels");

	/* inverse of a rotated, scaled, shifted affine: A * inv = I */
	CHECK(resample_affine_inverse(rot, inv) == 0, "inverse exists");
	{
		double worst = 0;
		int r, c;

		for (r = 0; r < 3; r++)
			for (c = 0; c < 4; c++) {
				double v = rot[r][0] * inv[0][c] + rot[r][1] * inv[1][c] +
					   rot[r][2] * inv[2][c] + (c == 3 ? rot[r][3] : 0);
				double want = (c == r) ? 1 : 0;

				if (fabs(v - want) > worst)
					worst = fabs(v - want);
			}
		CHECK(worst < 1e-12, "affine times inverse is the identity (worst %g)", worst);
	}
	{
		double sing[3][4] = { { 1, 2, 0, 0 }, { 2, 4, 0, 0 }, { 0, 0, 1, 0 } };

		CHECK(resample_affine_inverse(sing, inv) == -1, "singular affine is refused");
	}
	return TEST_DONE();
}
