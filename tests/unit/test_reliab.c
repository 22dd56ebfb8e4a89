/* test_reliab.c - the reliability numerics: Pearson r and counts by hand, pairs of folds. */
#include <math.h>

#include "core/reliab.h"
#include "testlib.h"

static void test_pearson(void)
{
	/* label 1 at voxels 0..3 and 5; voxel 5 has a NaN in b, voxel 4 is another label */
	const int32_t lab[7] = { 1, 1, 1, 1, 2, 1, 0 };
	const double a[7] = { 1, 2, 3, 4, 100, 7, 50 };
	const double b[7] = { 2, 4, 5, 9, -100, NAN, 60 };
	const double flat[7] = { 3, 3, 3, 3, 3, 3, 3 };
	size_t used = 0;
	double r = reliab_pearson(a, b, lab, 7, 1, &used);

	/* by hand: centred a = -1.5 -0.5 0.5 1.5, centred b = -3 -1 0 4;
	   sum ab = 11, sum aa = 5, sum bb = 26, r = 11 / sqrt(130) */
	CHECK_NEAR(r, 11.0 / sqrt(130.0), 1e-15, "r over the finite voxels of the label = 11/sqrt(130)");
	CHECK(used == 4, "4 voxels used (NaN and other labels left out), got %zu", used);
	CHECK_NEAR(reliab_pearson(a, a, lab, 7, 1, NULL), 1.0, 1e-15, "a map with itself: r = 1");
	CHECK(isnan(reliab_pearson(a, flat, lab, 7, 1, NULL)), "no spread: r undefined (NaN), not 0");
	CHECK(isnan(reliab_pearson(a, b, lab, 7, 2, &used)) && used == 1,
	      "one voxel: r undefined (NaN)");
	CHECK(isnan(reliab_pearson(a, b, lab, 7, 9, &used)) && used == 0, "absent label: NaN");
}

static void test_count(void)
{
	const int32_t lab[6] = { 1, 1, 1, 1, 1, 2 };
	const double t[6] = { 3.1, 3.2, NAN, -5, 10, 99 };
	size_t nf = 0;

	CHECK(reliab_count_above(t, lab, 6, 1, 3.1, &nf) == 2,
	      "t > 3.1 strictly: 3.2 and 10 count, 3.1 does not");
	CHECK(nf == 4, "4 finite t in the label, got %zu", nf);
	CHECK(reliab_count_above(t, lab, 6, 2, 3.1, NULL) == 1, "the other label counts its own");
}

static void test_pairs(void)
{
	/* three folds over 4 voxels of label 1: t1 = 2 t0 + 1 (r = 1), t2 = -t0 (r = -1 with both) */
	const int32_t lab[4] = { 1, 1, 1, 1 };
	const double t0[4] = { 1, 2, 4, 8 }, t1[4] = { 3, 5, 9, 17 }, t2[4] = { -1, -2, -4, -8 };
	/* fROIs: {0,1}, {1,2}, {} -> Dice(0,1) = 2*1/4 = 0.5, Dice(0,2) = 0, Dice(1,2) = 0 */
	const int32_t f0[4] = { 1, 1, 0, 0 }, f1[4] = { 0, 1, 1, 0 }, f2[4] = { 0, 0, 0, 0 };
	const double *t[3] = { t0, t1, t2 };
	const int32_t *f[3] = { f0, f1, f2 };
	reliab_pairs p;

	reliab_pairs_of(t, f, 3, lab, 4, 1, &p);
	CHECK(p.npairs == 3 && p.nr == 3 && p.ndice == 3, "3 folds give 3 pairs (got %zu %zu %zu)",
	      p.npairs, p.nr, p.ndice);
	CHECK_NEAR(p.r, (1.0 - 1.0 - 1.0) / 3.0, 1e-15, "mean r over the pairs = -1/3");
	CHECK_NEAR(p.dice, 0.5 / 3.0, 1e-15, "mean Dice over the pairs = (0.5 + 0 + 0) / 3");
	reliab_pairs_of(t, f, 2, lab, 4, 1, &p);
	CHECK(p.npairs == 1, "odd-even: one pair");
	CHECK_NEAR(p.r, 1.0, 1e-15, "odd-even pair r = 1");
	/* both fROIs empty: Dice undefined for that pair, so it is left out of the mean */
	{
		const int32_t *g[2] = { f2, f2 };

		reliab_pairs_of(t, g, 2, lab, 4, 1, &p);
		CHECK(isnan(p.dice) && p.ndice == 0, "two empty fROIs: Dice empty, not 0 or 1");
	}
	reliab_pairs_of(t, f, 1, lab, 4, 1, &p);
	CHECK(p.npairs == 0 && isnan(p.r) && isnan(p.dice), "one split: no pairs, empty values");
}

int main(void)
{
	test_pearson();
	test_count();
	test_pairs();
	return TEST_DONE();
}
