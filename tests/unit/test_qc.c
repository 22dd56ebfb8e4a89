/* test_qc.c - report numerics: FD (Power et al. 2012 worked example), Dice by hand, slices, windows. */
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

static void test_slices(void)
{
	int32_t lab[4 * 3 * 10] = { 0 };
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
}

static void test_window(void)
{
	double x[6] = { 0, 1, 2, 3, 4, NAN }, lo, hi;

	/* non-zero finite values 1..4; quantiles by linear interpolation (numpy's default, from memory) */
	qc_window(x, 6, 0.0, 0.5, &lo, &hi);
	CHECK(lo == 1 && hi == 2.5, "window over 1..4: 0 -> 1, 0.5 -> 2.5 (got %g %g)", lo, hi);
}

static void test_column_kind(void)
{
	char *conf[] = { "motion_tx", "trans_x" };

	CHECK(qc_column_kind("const", conf, 2) == QC_COL_CONDITION, "an unknown name is a condition");
	CHECK(qc_column_kind("baseline", conf, 2) == QC_COL_BASELINE, "baseline is the baseline");
	CHECK(qc_column_kind("cos_12", conf, 2) == QC_COL_DRIFT, "cos_12 is a drift");
	CHECK(qc_column_kind("drift_3", conf, 2) == QC_COL_CONDITION, "an old drift name is no drift column");
	CHECK(qc_column_kind("cos_", conf, 2) == QC_COL_CONDITION, "cos_ without a number is a condition");
	CHECK(qc_column_kind("cos_1b", conf, 2) == QC_COL_CONDITION, "cos_1b is a condition");
	CHECK(qc_column_kind("trans_x", conf, 2) == QC_COL_CONFOUND, "a listed confound");
	CHECK(qc_column_kind("melody", conf, 2) == QC_COL_CONDITION, "anything else is a condition");
	CHECK(qc_column_kind("motion_tx", NULL, 0) == QC_COL_CONDITION, "no confound list: a condition");
}

static void test_rises(void)
{
	/* a block regressor: 0 0 .5 1 1 .4 0 0 1 1 -> rises above 0.1 at rows 2 and 8 */
	double x[] = { 0, 0, .5, 1, 1, .4, 0, 0, 1, 1 }, flat[] = { 1, 1, 1 };
	double two[] = { 9, 1, 9, 1 };   /* stride 2: 9 9 then 1 1; only x[0] x[2] read */
	size_t o[8], n;

	n = qc_rises(x, 10, 1, 0.1, o, 8);
	CHECK(n == 2 && o[0] == 2 && o[1] == 8, "rises at rows 2 and 8 (got %zu: %zu %zu)", n, o[0], n > 1 ? o[1] : 0);
	CHECK(qc_rises(x, 10, 1, 0.1, o, 1) == 1, "at most max rises");
	CHECK(qc_rises(flat, 3, 1, 0.1, o, 8) == 0, "a flat column has no rises");
	CHECK(qc_rises(two, 2, 2, 0.1, o, 8) == 0, "stride skips the other column (flat)");
	x[0] = 1;
	n = qc_rises(x, 10, 1, 0.1, o, 8);
	CHECK(n == 3 && o[0] == 0, "a column starting high rises at row 0");
}

static void test_axis_letters(void)
{
	/* facts of the trade (NIfTI-1 header documentation): world space is RAS+, so a
	   diagonal affine with positive steps has i to the Right, j Anterior, k Superior */
	double ras[3][4] = { { 3, 0, 0, -30 }, { 0, 3, 0, -40 }, { 0, 0, 3, -20 } };
	/* the LPS storage common in DICOM-derived files: i to the Left, j Posterior */
	double lps[3][4] = { { -2, 0, 0, 90 }, { 0, -2, 0, 120 }, { 0, 0, 2, -70 } };
	/* oblique: the RAS grid turned 30 degrees about z; and a coronal stack (k along -y) */
	double c = cos(30 * M_PI / 180), s = sin(30 * M_PI / 180);
	double obl[3][4] = { { 3 * c, -3 * s, 0, 0 }, { 3 * s, 3 * c, 0, 0 }, { 0, 0, 3, 0 } };
	double cor[3][4] = { { 1, 0, 0, 0 }, { 0, 0, -1, 0 }, { 0, 1, 0, 0 } };
	double zero[3][4] = { { 0 } };
	double cs;

	CHECK(qc_axis_letter(ras, 0, 1, &cs) == 'R' && qc_axis_letter(ras, 0, -1, NULL) == 'L' && cs == 1,
	      "RAS: +i is R, -i is L, cosine 1");
	CHECK(qc_axis_letter(ras, 1, 1, NULL) == 'A' && qc_axis_letter(ras, 1, -1, NULL) == 'P', "RAS: +j A, -j P");
	CHECK(qc_axis_letter(ras, 2, 1, NULL) == 'S' && qc_axis_letter(ras, 2, -1, NULL) == 'I', "RAS: +k S, -k I");
	CHECK(qc_axis_letter(lps, 0, 1, NULL) == 'L' && qc_axis_letter(lps, 0, -1, NULL) == 'R', "LPS: +i is L");
	CHECK(qc_axis_letter(lps, 1, 1, NULL) == 'P' && qc_axis_letter(lps, 1, -1, NULL) == 'A', "LPS: +j is P");
	CHECK(qc_axis_letter(obl, 0, 1, &cs) == 'R' && fabs(cs - c) < 1e-12, "oblique 30 deg: +i still R, cosine cos 30 (%g)", cs);
	CHECK(qc_axis_letter(obl, 1, 1, NULL) == 'A' && qc_axis_letter(obl, 1, -1, NULL) == 'P', "oblique: +j A");
	CHECK(qc_axis_letter(cor, 1, 1, NULL) == 'S' && qc_axis_letter(cor, 2, 1, NULL) == 'P', "coronal stack: +j S, +k P");
	CHECK(qc_axis_letter(zero, 0, 1, NULL) == '?' && qc_axis_letter(ras, 3, 1, NULL) == '?', "zero column or bad axis: ?");
}

static void test_overlap_flag(void)
{
	CHECK(qc_overlap_flag(10, 10, 0.05) == 0 && qc_overlap_flag(30, 24, 0.05) == 0,
	      "Dice 0.05 gets one verdict whatever the sizes");
	CHECK(qc_overlap_flag(10, 10, 0) == 1, "no shared voxel is flagged");
	CHECK(qc_overlap_flag(0, 10, NAN) == 1 && qc_overlap_flag(10, 0, 0) == 1, "an empty half is flagged");
	CHECK(qc_overlap_flag(NAN, 10, 0.5) == 1, "an unknown size is flagged");
}

int main(void)
{
	test_column_kind();
	test_rises();
	test_axis_letters();
	test_overlap_flag();
	test_fd();
	test_dice();
	test_slices();
	test_window();
	return TEST_DONE();
}
