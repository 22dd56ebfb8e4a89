/* test_roi.c - exact top-percent counts and fROI ranking rules (METHODS.md sections 7 and 11). */
#include <math.h>
#include <string.h>

#include "core/roi.h"
#include "testlib.h"

/* k for text p and n, or (size_t)-1 when the text is rejected. */
static size_t kof(const char *p, size_t n)
{
	size_t k = 12345;

	return roi_top_percent_count(p, n, &k) ? (size_t)-1 : k;
}

static void test_count(void)
{
	volatile double seven = 7, hundred = 100, fourteen = 14, fifty = 50;

	/*
	 * The binary trap this guards against: 7 / 100 * 100 = 7.000000000000001
	 * in IEEE double (checked with Python's fractions module: the exact
	 * ceiling is 7), whose ceiling is 8.
	 */
	CHECK(ceil(seven / 100 * hundred) == 8, "binary ceil(7 / 100 * 100) is 8 (the trap is real)");
	CHECK(kof("7", 100) == 7, "p = 7, n = 100 -> 7 exactly (got %zu)", kof("7", 100));
	CHECK(ceil(fourteen / 100 * fifty) == 8 && kof("14", 50) == 7,
	      "p = 14, n = 50 -> 7 exactly (binary would give 8)");
	CHECK(kof("10", 30) == 3, "p = 10, n = 30 -> 3 exactly (got %zu)", kof("10", 30));
	CHECK(kof("10", 31) == 4, "p = 10, n = 31 -> ceil(3.1) = 4");
	CHECK(kof("10", 0) == 0, "n = 0 -> k = 0");
	CHECK(kof("12.5", 8) == 1, "p = 12.5, n = 8 -> 1");
	CHECK(kof("12.5", 9) == 2, "p = 12.5, n = 9 -> ceil(1.125) = 2");
	CHECK(kof("0.1", 1000) == 1, "p = 0.1, n = 1000 -> 1");
	CHECK(kof("0.1", 1001) == 2, "p = 0.1, n = 1001 -> ceil(1.001) = 2");
	CHECK(kof("0.1", 10) == 1, "p = 0.1, n = 10 -> ceil(0.01) = 1");
	CHECK(kof("33.333", 3000) == 1000, "p = 33.333, n = 3000 -> 999.99 -> 1000");
	CHECK(kof("33.333", 100000) == 33333, "p = 33.333, n = 100000 -> 33333 exactly");
	CHECK(kof("70", 10) == 7, "p = 70, n = 10 -> 7 (70 * 0.01 * 10 in binary is 7.000000000000001)");
	CHECK(kof("55", 100) == 55 && kof("57", 100) == 57, "p = 55, 57 of 100 exact");
	CHECK(kof("100", 17) == 17 && kof("100.000", 17) == 17, "p = 100 keeps all");
	CHECK(kof("0", 17) == 0 && kof("0.0", 17) == 0, "p = 0 keeps none");
	CHECK(kof("5", 1) == 1, "p = 5, n = 1 -> 1 (any positive share rounds up)");
	CHECK(kof(".5", 200) == 1 && kof("10.", 30) == 3 && kof("010", 30) == 3,
	      "'.5', '10.' and '010' are plain decimals");
	/* Expected values from Python's fractions.Fraction (exact rationals). */
	CHECK(kof("0.00000000000000001", (size_t)-1) == 2,
	      "17 decimals with n = 2^64 - 1: ceil(1.8447) = 2 (no overflow)");
	CHECK(kof("99.99999999999999999", (size_t)-1) == (size_t)-1 - 1,
	      "near 100 with n = 2^64 - 1: n - 1, exact in 128 bits");
	CHECK(kof("0.00000000001", (size_t)-1) == 1844675, "1e-11 %% of 2^64 - 1 -> 1844675");
	CHECK(kof("10.000000000000000000000000", 30) == 3, "trailing zeros do not count as digits");

	static const char *bad[] = { "",    "-1",  "+10", "100.5", "101",  "1e1", " 10", "10 ",
				     "10%", "nan", "inf", ".",     "1.2.3", "0x10", "1,5", "1000" };
	for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++)
		CHECK(kof(bad[i], 10) == (size_t)-1, "'%s' rejected", bad[i]);
	CHECK(kof("0.000000000000000001", 10) == (size_t)-1, "18 significant decimals rejected");
	size_t k;
	CHECK(roi_top_percent_count(NULL, 10, &k) == -1, "NULL text rejected");
}

static void test_select(void)
{
	/* Candidates in ascending voxel order, with ties and a negative t. */
	size_t cand[8] = { 3, 5, 8, 9, 12, 20, 21, 40 };
	double t[8] = { 2.0, 5.0, 2.0, 7.5, 5.0, -1.0, 2.0, 0.5 };
	size_t ch[8], n;

	/* By hand: rank 9 (7.5), 5 and 12 (5.0, lower index first), 3, 8, 21 (2.0), 40, 20. */
	static const size_t order[8] = { 9, 5, 12, 3, 8, 21, 40, 20 };
	n = roi_select(cand, t, 8, ROI_TOP_VOXELS, 8, NULL, ch);
	CHECK(n == 8 && memcmp(ch, order, sizeof order) == 0, "full ranking: t descending, ties to lower index");
	n = roi_select(cand, t, 8, ROI_TOP_VOXELS, 100, NULL, ch);
	CHECK(n == 8, "top_voxels N > n keeps n (%zu)", n);
	n = roi_select(cand, t, 8, ROI_TOP_VOXELS, 2, NULL, ch);
	CHECK(n == 2 && ch[0] == 9 && ch[1] == 5, "top_voxels 2 -> 9, 5 (tie broken to lower index)");
	n = roi_select(cand, t, 8, ROI_TOP_VOXELS, 4, NULL, ch);
	CHECK(n == 4 && ch[3] == 3, "top_voxels 4 -> 3 wins the 2.0 tie against 8 and 21");
	CHECK(roi_select(cand, t, 8, ROI_TOP_VOXELS, 0, NULL, ch) == 0, "top_voxels 0 keeps none");

	/* top_percent: ceil(12.5 * 8 / 100) = 1; ceil(25 * 8 / 100) = 2; 30 -> ceil(2.4) = 3. */
	CHECK(roi_select(cand, t, 8, ROI_TOP_PERCENT, 0, "12.5", ch) == 1 && ch[0] == 9, "top_percent 12.5 of 8 -> 1");
	CHECK(roi_select(cand, t, 8, ROI_TOP_PERCENT, 0, "25", ch) == 2, "top_percent 25 of 8 -> 2");
	CHECK(roi_select(cand, t, 8, ROI_TOP_PERCENT, 0, "30", ch) == 3 && ch[2] == 12, "top_percent 30 of 8 -> 3");
	CHECK(roi_select(cand, t, 8, ROI_TOP_PERCENT, 30, NULL, ch) == 3, "top_percent from value when no text");
	CHECK(roi_select(cand, t, 8, ROI_TOP_PERCENT, 0, "abc", ch) == 0, "invalid text keeps none");

	/* min_t strict: t > 2.0 keeps 9, 5, 12 but not the three at exactly 2.0. */
	n = roi_select(cand, t, 8, ROI_MIN_T, 2.0, NULL, ch);
	CHECK(n == 3 && ch[0] == 9 && ch[1] == 5 && ch[2] == 12, "min_t 2.0 is strict (%zu kept)", n);
	n = roi_select(cand, t, 8, ROI_MIN_T, 1.9999999, NULL, ch);
	CHECK(n == 6 && ch[5] == 21, "min_t just below 2.0 keeps the ties, in index order");
	CHECK(roi_select(cand, t, 8, ROI_MIN_T, 10, NULL, ch) == 0, "min_t above all keeps none");
	CHECK(roi_select(cand, t, 8, ROI_MIN_T, -INFINITY, NULL, ch) == 8, "min_t -inf keeps all");
	CHECK(roi_select(cand, t, 8, ROI_MIN_T, NAN, NULL, ch) == 0, "min_t NaN keeps none");
	CHECK(roi_select(cand, t, 0, ROI_TOP_PERCENT, 0, "10", ch) == 0, "no candidates -> 0");

	/* Ties are decided by voxel index even with -0.0 vs 0.0 and a reversed input. */
	size_t c2[3] = { 1, 2, 3 };
	double t2[3] = { 0.0, -0.0, 0.0 };
	n = roi_select(c2, t2, 3, ROI_TOP_VOXELS, 3, NULL, ch);
	CHECK(n == 3 && ch[0] == 1 && ch[1] == 2 && ch[2] == 3, "-0 and 0 tie, index order kept");

	/* A large tie block: qsort is not stable, the comparator must be. */
	enum { N = 1000 };
	static size_t cb[N], chb[N];
	static double tb[N];
	for (size_t i = 0; i < N; i++) {
		cb[i] = 7 * i + 1;
		tb[i] = (double)(i % 3);
	}
	n = roi_select(cb, tb, N, ROI_TOP_PERCENT, 0, "10", chb);
	int sorted = n == 100;
	for (size_t i = 0; i < n; i++)
		sorted &= chb[i] == cb[3 * i + 2];
	CHECK(sorted, "top 10%% of 1000 with t in {0,1,2}: the 100 lowest-index voxels with t = 2");
}

int main(void)
{
	test_count();
	test_select();
	return TEST_DONE();
}
