/* test_region.c - spheres, sizes, centres of mass and renumbering on small hand-made label images;
 * every expected value below was worked out by hand from the grids drawn in the comments. */
#include <math.h>
#include <string.h>

#include "core/region.h"
#include "testlib.h"

#define NX 5
#define NY 5
#define NZ 3
#define AT(i, j, k) ((i) + NX * ((j) + NY * (k)))

static size_t count(const int32_t *lab, size_t n, int32_t v)
{
	size_t c = 0;

	for (size_t i = 0; i < n; i++)
		c += lab[i] == v;
	return c;
}

static void test_spheres(void)
{
	/* 2 mm voxels, origin at (-4, -4, -2): voxel (i, j, k) sits at (2i - 4, 2j - 4, 2k - 2) mm,
	 * so voxel (2, 2, 1) is the world origin */
	const double A[3][4] = { { 2, 0, 0, -4 }, { 0, 2, 0, -4 }, { 0, 0, 2, -2 } };
	const double aniso[3][4] = { { 1, 0, 0, 0 }, { 0, 1, 0, 0 }, { 0, 0, 3, 0 } };
	int32_t lab[NX * NY * NZ];
	const size_t n = NX * NY * NZ;
	double c[6];
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	/* radius 2 mm around the origin: the centre and its 6 face neighbours (2 mm away, on the
	 * boundary, which counts); edge neighbours are 2 sqrt 2 = 2.83 mm away */
	c[0] = c[1] = c[2] = 0;
	CHECK(region_spheres(A, NX, NY, NZ, c, 1, 2.0, lab, &e) == SR_OK, "one sphere (%s)", e.msg);
	CHECK(count(lab, n, 1) == 7 && count(lab, n, 0) == n - 7, "radius 2 mm: 7 voxels (got %zu)",
	      count(lab, n, 1));
	CHECK(lab[AT(2, 2, 1)] == 1 && lab[AT(1, 2, 1)] == 1 && lab[AT(2, 2, 0)] == 1 &&
		      lab[AT(2, 2, 2)] == 1 && lab[AT(1, 1, 1)] == 0,
	      "the centre and face neighbours in, the edge neighbour (1, 1, 1) out");

	/* radius 0: only the voxel exactly at the centre */
	CHECK(region_spheres(A, NX, NY, NZ, c, 1, 0.0, lab, &e) == SR_OK && count(lab, n, 1) == 1 &&
		      lab[AT(2, 2, 1)] == 1,
	      "radius 0 keeps the one voxel at the centre");

	/* a sphere at the corner voxel (0, 0, 0) = (-4, -4, -2) mm, radius 2: itself and its three
	 * neighbours on the positive side; the rest of the ball lies outside the grid */
	c[0] = -4, c[1] = -4, c[2] = -2;
	region_spheres(A, NX, NY, NZ, c, 1, 2.0, lab, &e);
	CHECK(count(lab, n, 1) == 4 && lab[AT(0, 0, 0)] == 1 && lab[AT(1, 0, 0)] == 1 &&
		      lab[AT(0, 1, 0)] == 1 && lab[AT(0, 0, 1)] == 1,
	      "a corner sphere is clipped to the grid: 4 voxels (got %zu)", count(lab, n, 1));

	/* two spheres of 2.5 mm at (-2, 0, 0) and (2, 0, 0) = voxels (1, 2, 1) and (3, 2, 1):
	 * each holds its centre and 6 face neighbours (2 mm; 2.83 mm is too far); they share
	 * voxel (2, 2, 1), 2 mm from both, which goes to the lower index: 7 and 6 voxels */
	c[0] = -2, c[1] = 0, c[2] = 0, c[3] = 2, c[4] = 0, c[5] = 0;
	region_spheres(A, NX, NY, NZ, c, 2, 2.5, lab, &e);
	CHECK(count(lab, n, 1) == 7 && count(lab, n, 2) == 6,
	      "two touching spheres: 7 and 6 voxels (got %zu, %zu)", count(lab, n, 1), count(lab, n, 2));
	CHECK(lab[AT(2, 2, 1)] == 1, "a tie goes to the first centre");
	CHECK(lab[AT(4, 2, 1)] == 2 && lab[AT(3, 1, 1)] == 2 && lab[AT(0, 2, 1)] == 1 &&
		      lab[AT(2, 3, 1)] == 0,
	      "(4,2,1) and (3,1,1) in sphere 2, (0,2,1) in 1, (2,3,1) at 2.83 mm in neither");

	/* overlapping spheres of 3 mm at (-1, 0, 0) and (2, 0, 0): the origin voxel (2, 2, 1) is
	 * 1 mm from the first and 2 mm from the second -> 1; voxel (3, 2, 1) at (2, 0, 0) is 3 mm
	 * from the first (inside) and 0 from the second -> 2 */
	c[0] = -1, c[3] = 2;
	region_spheres(A, NX, NY, NZ, c, 2, 3.0, lab, &e);
	CHECK(lab[AT(2, 2, 1)] == 1 && lab[AT(3, 2, 1)] == 2,
	      "a voxel inside both spheres goes to the nearer centre");

	/* 1 x 1 x 3 mm voxels, centre at voxel (2, 2, 1) = (2, 2, 3) mm, radius 2: within its slice
	 * the 13 voxels with di^2 + dj^2 <= 4; the next slices are 3 mm away */
	c[0] = 2, c[1] = 2, c[2] = 3;
	region_spheres(aniso, NX, NY, NZ, c, 1, 2.0, lab, &e);
	CHECK(count(lab, n, 1) == 13 && lab[AT(4, 2, 1)] == 1 && lab[AT(3, 3, 1)] == 1 &&
		      lab[AT(4, 3, 1)] == 0 && lab[AT(2, 2, 0)] == 0,
	      "anisotropic voxels: 13 voxels, all in the centre slice (got %zu)", count(lab, n, 1));

	/* no centres: all zero */
	lab[0] = 9;
	CHECK(region_spheres(A, NX, NY, NZ, c, 0, 2.0, lab, &e) == SR_OK && count(lab, n, 0) == n,
	      "no centres: every voxel 0");

	CHECK(region_spheres(A, 0, NY, NZ, c, 1, 2.0, lab, &e) == SR_EDIM && strstr(e.msg, "grid"),
	      "a zero size is SR_EDIM: %s", e.msg);
	CHECK(region_spheres(A, NX, NY, NZ, c, 1, -1.0, lab, &e) == SR_EINVAL && strstr(e.msg, "radius"),
	      "a negative radius is SR_EINVAL: %s", e.msg);
	CHECK(region_spheres(A, NX, NY, NZ, c, 1, NAN, lab, &e) == SR_EINVAL, "a NaN radius is SR_EINVAL");
	c[3] = 0, c[4] = INFINITY, c[5] = 0;
	CHECK(region_spheres(A, NX, NY, NZ, c, 2, 2.0, lab, &e) == SR_EINVAL && strstr(e.msg, "centre 2"),
	      "a non-finite centre is SR_EINVAL naming it: %s", e.msg);
}

static void test_stats(void)
{
	/*
	 * A 4 x 3 x 2 image (i across, j down; slice k = 0 then k = 1):
	 *   k = 0:  1 1 3 9      k = 1:  0 0 3 0
	 *           1 1 0 0              0 0 0 3
	 *           0 0 0 0             -1 0 0 2
	 * label 1: (0,0,0) (1,0,0) (0,1,0) (1,1,0), mean voxel (0.5, 0.5, 0), size 4
	 * label 2: (3,2,1), size 1
	 * label 3: (2,0,0) (2,0,1) (3,1,1), mean voxel (7/3, 1/3, 2/3), size 3
	 * label 4: none (NaN centre); 9 and -1 lie outside 1..4 and are ignored.
	 * The affine swaps axes: x = 2 j + 10, y = -1.5 i + 20, z = 4 k - 3 (mm). By hand:
	 *   label 1: x = 11, y = 19.25, z = -3; label 2: x = 14, y = 15.5, z = 1;
	 *   label 3 as the mean of its world points (10,17,-3) (10,17,1) (12,15.5,1):
	 *   x = 32/3, y = 16.5, z = -1/3.
	 */
	const int32_t lab[24] = { 1, 1, 3, 9, 1, 1, 0, 0, 0, 0, 0, 0,
				  0, 0, 3, 0, 0, 0, 0, 3, -1, 0, 0, 2 };
	const double A[3][4] = { { 0, 2, 0, 10 }, { -1.5, 0, 0, 20 }, { 0, 0, 4, -3 } };
	const double want[9] = { 11, 19.25, -3, 14, 15.5, 1, 32.0 / 3, 16.5, -1.0 / 3 };
	size_t size[4] = { 7, 7, 7, 7 };
	double com[12];

	region_stats(lab, 4, 3, 2, A, 4, size, com);
	CHECK(size[0] == 4 && size[1] == 1 && size[2] == 3 && size[3] == 0,
	      "sizes 4 1 3 0 (got %zu %zu %zu %zu)", size[0], size[1], size[2], size[3]);
	for (int q = 0; q < 9; q++)
		CHECK_NEAR(com[q], want[q], 1e-12, "centre of mass, label and axis by hand");
	CHECK(isnan(com[9]) && isnan(com[10]) && isnan(com[11]), "an empty label has a NaN centre");

	/* with nlab = 2, label 3 is out of range and ignored */
	region_stats(lab, 4, 3, 2, A, 2, size, com);
	CHECK(size[0] == 4 && size[1] == 1, "nlab = 2: labels 1 and 2 only");
}

static void test_relabel(void)
{
	int32_t lab[8] = { 0, 1, 2, 3, 4, 9, -1, 2 };
	const int32_t map[4] = { 3, 0, 1, 2 };
	const int32_t want[8] = { 0, 3, 0, 1, 2, 0, 0, 0 };

	region_relabel(lab, 8, 4, map);
	CHECK(memcmp(lab, want, sizeof want) == 0,
	      "1->3, 2 dropped, 3->1, 4->2, out-of-range 9 and -1 -> 0: %d %d %d %d %d %d %d %d", lab[0],
	      lab[1], lab[2], lab[3], lab[4], lab[5], lab[6], lab[7]);
}

int main(void)
{
	test_spheres();
	test_stats();
	test_relabel();
	return TEST_DONE();
}
