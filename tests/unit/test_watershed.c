/* test_watershed.c - basins of hand-made 3-D fields: saddle split, plateau ties, 6 vs 26 connectivity. */
#include <math.h>
#include <stdint.h>
#include <string.h>

#include "core/err.h"
#include "core/watershed.h"
#include "testlib.h"

#define NX 21
#define NY 9
#define NZ 9

/*
 * Two equal Gaussian bumps centred at x = 5 and x = 14 (y = z = 4): the sum
 * is mirror-symmetric about x = 9.5, where its saddle lies, so every voxel
 * with x <= 9 must fall in the basin of the bump at x = 5 and every voxel
 * with x >= 10 in the other (fact of the mirror symmetry, not our output).
 */
static void test_two_bumps(void)
{
	static double f[NX * NY * NZ];
	static int32_t lab[NX * NY * NZ];
	int32_t n = -1;
	int i, j, k, left_ok = 1, right_ok = 1, fg = 0;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	for (k = 0; k < NZ; k++)
		for (j = 0; j < NY; j++)
			for (i = 0; i < NX; i++) {
				double r = (j - 4) * (j - 4) + (k - 4) * (k - 4);

				f[i + NX * (j + NY * k)] = exp(-((i - 5) * (i - 5) + r) / 8.0) +
							   exp(-((i - 14) * (i - 14) + r) / 8.0);
			}
	CHECK(watershed_label(f, NX, NY, NZ, 0.05, 26, lab, &n, &e) == SR_OK, "two bumps: runs");
	CHECK(n == 2, "two bumps: two regions (got %d)", (int)n);
	CHECK(lab[5 + NX * (4 + NY * 4)] == 1, "two bumps: equal peaks, the lower-index one is region 1");
	for (k = 0; k < NZ; k++)
		for (j = 0; j < NY; j++)
			for (i = 0; i < NX; i++) {
				int32_t l = lab[i + NX * (j + NY * k)];

				if (f[i + NX * (j + NY * k)] < 0.05) {
					left_ok &= l == 0;
					continue;
				}
				fg++;
				if (i <= 9)
					left_ok &= l == 1;
				else
					right_ok &= l == 2;
			}
	CHECK(fg > 100 && left_ok, "two bumps: x <= 9 in region 1, background below the floor");
	CHECK(right_ok, "two bumps: x >= 10 in region 2 (split at the saddle plane x = 9.5)");
	memset(lab, 0, sizeof lab);
	CHECK(watershed_label(f, NX, NY, NZ, 0.05, 6, lab, &n, &e) == SR_OK && n == 2 &&
		      lab[9 + NX * (4 + NY * 4)] == 1 && lab[10 + NX * (4 + NY * 4)] == 2,
	      "two bumps, 6-connectivity: same split on the axis");
}

/*
 * A line 0.5 1 0.5 0.5 0.5 1 0.5: two equal peaks joined by a plateau. By
 * the documented rule (queue pops highest first, then lowest index; a voxel
 * joins the first basin that reaches it) the labels are 1 1 1 1 2 2 2:
 * x = 2 pops before x = 4 and claims x = 3.
 */
static void test_plateau(void)
{
	const double f[7] = { 0.5, 1, 0.5, 0.5, 0.5, 1, 0.5 };
	const int32_t want[7] = { 1, 1, 1, 1, 2, 2, 2 };
	int32_t a[7], b[7], n = 0;
	double flat[27];
	int32_t fl[27];
	int i, same = 1, as_rule = 1, all1 = 1;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	watershed_label(f, 7, 1, 1, 0.1, 26, a, &n, &e);
	CHECK(n == 2, "plateau line: two regions");
	for (i = 0; i < 7; i++)
		as_rule &= a[i] == want[i];
	CHECK(as_rule, "plateau line: labels 1 1 1 1 2 2 2 by the tie rule (got %d %d %d %d %d %d %d)",
	      a[0], a[1], a[2], a[3], a[4], a[5], a[6]);
	watershed_label(f, 7, 1, 1, 0.1, 26, b, &n, &e);
	for (i = 0; i < 7; i++)
		same &= a[i] == b[i];
	CHECK(same, "plateau line: the same labels on a second run");
	for (i = 0; i < 27; i++)
		flat[i] = 0.25;
	watershed_label(flat, 3, 3, 3, 0.1, 6, fl, &n, &e);
	for (i = 0; i < 27; i++)
		all1 &= fl[i] == 1;
	CHECK(n == 1 && all1, "a flat field is one plateau, one region");
	watershed_label(flat, 3, 3, 3, 0.3, 6, fl, &n, &e);
	CHECK(n == 0 && fl[13] == 0, "a field wholly below the floor has no region");
}

/*
 * 5x5 slice: peak A at (1,1) with (0,1) and (1,0), a diagonal bridge voxel
 * (2,2) = 0.7, and a plateau B = 0.5 over (3..4, 3..4). With 26-connectivity
 * (2,2) touches A and B through corners: B has a higher neighbour, so it is
 * no maximum and everything is one region. With 6-connectivity the three
 * pieces do not touch: three regions, ordered A (1), bridge (0.7), B (0.5).
 */
static void test_connectivity(void)
{
	double f[25] = { 0 };
	int32_t lab[25], n = 0;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	f[1 + 5 * 1] = 1.0;
	f[0 + 5 * 1] = f[1 + 5 * 0] = 0.8;   /* not (2,1) or (1,2): they face the bridge */
	f[2 + 5 * 2] = 0.7;
	f[3 + 5 * 3] = f[4 + 5 * 3] = f[3 + 5 * 4] = f[4 + 5 * 4] = 0.5;
	CHECK(watershed_label(f, 5, 5, 1, 0.1, 26, lab, &n, &e) == SR_OK && n == 1 &&
		      lab[4 + 5 * 4] == 1 && lab[2 + 5 * 2] == 1 && lab[0] == 0,
	      "diagonal bridge, 26-connectivity: one region (got %d)", (int)n);
	CHECK(watershed_label(f, 5, 5, 1, 0.1, 6, lab, &n, &e) == SR_OK && n == 3 &&
		      lab[1 + 5 * 1] == 1 && lab[2 + 5 * 2] == 2 && lab[3 + 5 * 3] == 3 &&
		      lab[4 + 5 * 4] == 3,
	      "diagonal bridge, 6-connectivity: three regions (got %d)", (int)n);
	CHECK(watershed_label(f, 5, 5, 1, 0.1, 18, lab, &n, &e) == SR_EINVAL,
	      "connectivity 18 is refused");
	CHECK(watershed_label(f, 0, 5, 1, 0.1, 6, lab, &n, &e) == SR_EDIM, "an empty grid is refused");
}

/* NaN voxels are background and split what they separate. */
static void test_nan(void)
{
	double f[5] = { 1, 0.5, NAN, 0.5, 1 };
	int32_t lab[5], n = 0;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	watershed_label(f, 5, 1, 1, 0.1, 26, lab, &n, &e);
	CHECK(n == 2 && lab[2] == 0 && lab[1] == 1 && lab[3] == 2, "a NaN voxel is background");
}

int main(void)
{
	test_two_bumps();
	test_plateau();
	test_connectivity();
	test_nan();
	return TEST_DONE();
}
