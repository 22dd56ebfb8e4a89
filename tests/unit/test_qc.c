/* test_qc.c - report numerics: FD (Power et al. 2012 worked example), Dice by hand, viridis, ticks, slices. */
#include <math.h>
#include <string.h>

#include "core/qc.h"
#include "testlib.h"

static void test_fd(void)
{
	/* REFERENCES.md worked example (mm, mm, mm, rad, rad, rad); source: Power et al. 2012,
	 * NeuroImage 59:2142-2154, FD = sum |d translation| + 50 mm * sum |d rotation| */
	const double mp[18] = { 0, 0, 0, 0, 0, 0,
				0.1, -0.2, 0.05, 0.001, -0.002, 0.0005,
				0.1, -0.1, 0.05, 0.003, -0.002, 0.0005 };
	double fd[3] = { -1, -1, -1 }, deg[18], fdd[3], mean, max;
	size_t i;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	CHECK(qc_fd(mp, 3, 0, 50.0, fd, &e) == SR_OK, "fd of the worked example runs");
	CHECK_NEAR(fd[0], 0.0, 1e-15, "FD_0 = 0 by definition");
	/* by hand: 0.1 + 0.2 + 0.05 + 50 * (0.001 + 0.002 + 0.0005) = 0.35 + 0.175 = 0.525 */
	CHECK_NEAR(fd[1], 0.525, 1e-12, "FD_1 = 0.525 mm");
	/* by hand: 0.1 + 50 * 0.002 = 0.2 */
	CHECK_NEAR(fd[2], 0.2, 1e-12, "FD_2 = 0.2 mm");
	/* the same motion given in degrees must give the same FD */
	for (i = 0; i < 18; i++)
		deg[i] = i % 6 >= 3 ? mp[i] * 180.0 / 3.14159265358979323846 : mp[i];
	qc_fd(deg, 3, 1, 50.0, fdd, &e);
	CHECK_NEAR(fdd[1], 0.525, 1e-12, "FD_1 from degrees = 0.525 mm");
	CHECK_NEAR(fdd[2], 0.2, 1e-12, "FD_2 from degrees = 0.2 mm");
	qc_mean_max(fd, 3, &mean, &max);
	CHECK_NEAR(mean, 0.725 / 3, 1e-12, "mean FD = (0 + 0.525 + 0.2) / 3");
	CHECK_NEAR(max, 0.525, 1e-12, "max FD = 0.525");
	CHECK(qc_fd(mp, 3, 0, 0.0, fd, &e) == SR_EINVAL && strstr(e.msg, "radius"),
	      "a zero radius is refused: %s", e.msg);
	{
		double bad[12] = { 0, 0, 0, 0, 0, 0, NAN, 0, 0, 0, 0, 0 }, f2[2];

		qc_fd(bad, 2, 0, 50.0, f2, &e);
		CHECK(isnan(f2[1]), "a missing parameter makes that FD missing, not zero");
	}
}

static void test_dice(void)
{
	/* by hand: A = {0,1,2,3} (label 5), B = {2,3,4} -> |A and B| = 2, Dice = 4 / 7 */
	const int32_t a[6] = { 5, 5, 5, 5, 0, 2 }, b[6] = { 0, 0, 5, 5, 5, 2 };
	const int32_t z[6] = { 0 };
	size_t na, nb, nab;
	double d = qc_dice(a, b, 6, 5, &na, &nb, &nab);

	CHECK_NEAR(d, 4.0 / 7.0, 1e-15, "Dice {0,1,2,3} vs {2,3,4} = 2*2/(4+3)");
	CHECK(na == 4 && nb == 3 && nab == 2, "counts 4, 3, overlap 2 (got %zu %zu %zu)", na, nb, nab);
	CHECK_NEAR(qc_dice(a, a, 6, 5, NULL, NULL, NULL), 1.0, 0, "identical fROIs: Dice 1");
	CHECK_NEAR(qc_dice(a, z, 6, 5, NULL, NULL, NULL), 0.0, 0, "one empty fROI: Dice 0");
	CHECK(isnan(qc_dice(z, z, 6, 5, NULL, NULL, NULL)), "both empty: undefined (NaN), not 1 or 0");
	/* label 2 sits at the same voxel in both: only that label counts */
	CHECK_NEAR(qc_dice(a, b, 6, 2, NULL, NULL, NULL), 1.0, 0, "other labels are ignored");
}

static void test_viridis(void)
{
	unsigned char c[3];

	/*
	 * Published table values (matplotlib's _cm_listed.py, van der Walt & Smith 2015):
	 * entry 0 = (0.267004, 0.004874, 0.329415), entry 128 = (0.127568, 0.566949, 0.550556),
	 * entry 255 = (0.993248, 0.906157, 0.143936). Compared after 8-bit rounding (+-1).
	 */
	qc_viridis(0.0, c);
	CHECK(abs(c[0] - 68) <= 1 && abs(c[1] - 1) <= 1 && abs(c[2] - 84) <= 1,
	      "viridis(0) = 255 * (0.267004, 0.004874, 0.329415) (got %d %d %d)", c[0], c[1], c[2]);
	qc_viridis(1.0, c);
	CHECK(abs(c[0] - 253) <= 1 && abs(c[1] - 231) <= 1 && abs(c[2] - 37) <= 1,
	      "viridis(1) = 255 * (0.993248, 0.906157, 0.143936) (got %d %d %d)", c[0], c[1], c[2]);
	qc_viridis(128.0 / 255.0, c);
	CHECK(abs(c[0] - 33) <= 2 && abs(c[1] - 145) <= 2 && abs(c[2] - 140) <= 2,
	      "viridis(128/255) = 255 * (0.127568, 0.566949, 0.550556) (got %d %d %d)", c[0], c[1], c[2]);
	qc_viridis(-3, c);
	CHECK(c[0] == 68 && c[2] == 84, "below 0 clamps to the first colour");
	qc_viridis(NAN, c);
	CHECK(c[0] == 68 && c[2] == 84, "NaN gives the first colour");
	{
		/* perceived lightness rises monotonically along viridis (its design goal);
		 * Rec. 709 luma as a proxy (common practice) */
		int i, mono = 1;
		double prev = -1;

		for (i = 0; i <= 64; i++) {
			double y;

			qc_viridis(i / 64.0, c);
			y = 0.2126 * c[0] + 0.7152 * c[1] + 0.0722 * c[2];
			if (y < prev - 0.5)
				mono = 0;
			prev = y;
		}
		CHECK(mono, "luma increases along the map");
	}
}

static void test_ticks(void)
{
	double t[32], step;
	size_t n;

	/* Heckbert 1990 "nice numbers": [0, 1] with ~5 intervals -> step 0.2, 0 .. 1 */
	n = qc_ticks(0, 1, 6, t, 32, &step);
	CHECK(n == 6 && fabs(step - 0.2) < 1e-12 && t[0] == 0 && fabs(t[5] - 1) < 1e-12,
	      "ticks for [0, 1]: 0, 0.2, ..., 1 (n %zu, step %g)", n, step);
	/* by hand, Heckbert's steps: range nice(2.77) = 5, step nice(5 / 4, rounded) = 1,
	 * graph from floor(-0.37) = -1 to ceil(2.4) = 3 */
	n = qc_ticks(-0.37, 2.4, 5, t, 32, &step);
	CHECK(n == 5 && step == 1 && t[0] == -1 && t[4] == 3, "ticks for [-0.37, 2.4]: -1, 0, 1, 2, 3 (n %zu, step %g, %g..%g)",
	      n, step, t[0], t[n - 1]);
	n = qc_ticks(3, 3, 5, t, 32, &step);
	CHECK(n >= 2 && t[0] <= 3 && t[n - 1] >= 3, "a single value still gets an axis");
	n = qc_ticks(-0.3, 0.3, 5, t, 32, &step);
	{
		size_t i, zero = 0;

		for (i = 0; i < n; i++)
			zero += t[i] == 0 && !signbit(t[i]);
		CHECK(zero == 1, "0 is a tick and printed as 0, not -0 or 1e-17");
	}
	CHECK(qc_ticks(NAN, 1, 5, t, 32, &step) == 0, "no ticks for a NaN range");
}

static void test_slices(void)
{
	int32_t lab[4 * 3 * 10] = { 0 };
	double vol[2 * 2 * 3], s[4];
	size_t out[3], n, i;

	/* label 4 in slices 2..8 -> three evenly spaced: 2, 5, 8 */
	for (i = 2; i <= 8; i++)
		lab[i * 12 + 5] = 4;
	n = qc_pick_slices(lab, 4, 3, 10, 4, 3, out);
	CHECK(n == 3 && out[0] == 2 && out[1] == 5 && out[2] == 8, "slices 2, 5, 8 (got %zu: %zu %zu %zu)", n,
	      out[0], out[1], out[2]);
	CHECK(qc_pick_slices(lab, 4, 3, 10, 9, 3, out) == 0, "absent label: no slices");
	lab[7 * 12] = 6;
	n = qc_pick_slices(lab, 4, 3, 10, 6, 3, out);
	CHECK(n == 1 && out[0] == 7, "a one-slice fROI gives that slice once");
	for (i = 0; i < 12; i++)
		vol[i] = (double)i;
	qc_slice_z(vol, 2, 2, 3, 2, s);
	CHECK(s[0] == 8 && s[3] == 11, "axial slice 2 of a 2x2x3 volume holds voxels 8..11");
}

static void test_window_edge(void)
{
	double x[6] = { 0, 1, 2, 3, 4, NAN }, lo, hi;
	unsigned char m[9] = { 1, 1, 1, 1, 1, 1, 1, 1, 1 }, e[9];

	/* non-zero finite values 1..4; quantiles by linear interpolation (numpy's default, from memory) */
	qc_window(x, 6, 0.0, 0.5, &lo, &hi);
	CHECK(lo == 1 && hi == 2.5, "window over 1..4: 0 -> 1, 0.5 -> 2.5 (got %g %g)", lo, hi);
	qc_edge(m, 3, 3, e);
	CHECK(e[4] == 0 && e[0] == 1 && e[1] == 1, "a full 3x3 mask: border is edge, centre is not");
}

/* The robust fence worked by hand: x = 1 2 3 4 100 has median 3, absolute
 * deviations 2 1 0 1 97, MAD 1, so median - 3 * 1.4826 * MAD = -1.4478. */
static void test_fence(void)
{
	double x[] = { 4, 100, 1, NAN, 3, 2 };
	double even[] = { 1, 2, 3, 4 };   /* median 2.5, deviations 1.5 .5 .5 1.5, MAD 1 */

	CHECK_CLOSE(qc_low_fence(x, 6, 3.0), 3 - 3 * 1.4826, 1e-12, "fence of 1 2 3 4 100 (NaN skipped)");
	CHECK_CLOSE(qc_low_fence(even, 4, 2.0), 2.5 - 2 * 1.4826, 1e-12, "fence with an even count");
	CHECK(isnan(qc_low_fence(even, 2, 3.0)), "fewer than 3 values give no fence");
	CHECK(x[1] == 100 && x[0] == 4, "the input is left in its order");
}

int main(void)
{
	test_fence();
	test_fd();
	test_dice();
	test_viridis();
	test_ticks();
	test_slices();
	test_window_edge();
	return TEST_DONE();
}
