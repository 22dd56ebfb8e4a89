/* test_smooth.c - Gaussian smoothing: an impulse against the sampled normal density, the FWHM
 * relation, mass kept away from the border and lost at it, separability, scipy reference values,
 * and normalised convolution inside a support (fresh and incremental denominators). */
#include <math.h>
#include <stdint.h>
#include <string.h>

#include "core/mem.h"
#include "core/smooth.h"
#include "testlib.h"

static const double PI = 3.14159265358979323846;

static void test_fwhm(void)
{
	double s = smooth_fwhm_sigma(6.0, 2.0), smm = s * 2.0;

	CHECK(smooth_fwhm_sigma(0.0, 2.0) == 0.0, "FWHM 0 gives sigma 0");
	/* FWHM = 2 sqrt(2 ln 2) sigma (standard identity of the normal density): the density at
	 * +-FWHM/2 is half its peak */
	CHECK_CLOSE(exp(-(3.0 * 3.0) / (2.0 * smm * smm)), 0.5, 1e-12,
		    "6 mm FWHM: the Gaussian is at half height 3 mm from its centre");
	CHECK_CLOSE(smooth_fwhm_sigma(8.0, 1.0) * 2.3548200450309493, 8.0, 1e-14,
		    "sigma = FWHM / 2.35482 (2 sqrt(2 ln 2), from memory)");
	CHECK_CLOSE(smooth_fwhm_sigma(8.0, 4.0), smooth_fwhm_sigma(8.0, 1.0) / 4.0, 1e-14,
		    "sigma in voxels scales with 1 / voxel size");
}

/* Smooths a line of n samples with a unit impulse at c; returns the xmalloc'ed result. */
static double *line_impulse(int64_t n, int64_t c, double sigma)
{
	double *x = xcalloc((size_t)n, sizeof *x), sg[3] = { sigma, 0, 0 };
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	x[c] = 1.0;
	if (smooth_gauss3(x, n, 1, 1, sg, &e) != SR_OK)
		CHECK(0, "line smoothing failed: %s", e.msg);
	return x;
}

static void test_impulse(void)
{
	/* sigma 3: radius r = floor(4 * 3 + 0.5) = 12. The normalised sampled kernel is within
	 * the truncated mass (2 P(Z > 12.5 / 3) = 3e-5) of the normal density
	 * exp(-d^2 / (2 sigma^2)) / (sigma sqrt(2 pi)): the sum of the sampled density over all
	 * integers equals 1 up to exp(-2 pi^2 sigma^2) (Poisson summation) */
	const double s = 3.0;
	double *y = line_impulse(61, 30, s), sum = 0, worst = 0;
	int d, sym = 1;

	for (d = -12; d <= 12; d++) {
		double phi = exp(-(double)(d * d) / (2 * s * s)) / (s * sqrt(2 * PI));
		double rel = fabs(y[30 + d] - phi) / phi;

		worst = rel > worst ? rel : worst;
		sym &= fabs(y[30 + d] - y[30 - d]) <= 1e-17;
	}
	CHECK(worst < 1e-4, "impulse response = sampled normal density within 1e-4 (worst %.3g)", worst);
	CHECK_CLOSE(y[30], 1.0 / (s * sqrt(2 * PI)), 1e-4, "peak 1 / (sigma sqrt(2 pi))");
	CHECK(y[30 + 13] == 0.0 && y[30 - 13] == 0.0 && y[0] == 0.0,
	      "nothing beyond the radius 4 sigma (13 samples away: %g)", y[43]);
	CHECK(sym, "the response is symmetric");
	for (d = 0; d < 61; d++)
		sum += y[d];
	CHECK_NEAR(sum, 1.0, 1e-14, "the sum is kept away from the border");
	free(y);

	/* at the border the half of the kernel beyond the grid is lost: the sum left is
	 * k(0) + sum_{d >= 1} k(d) = k(0) + (1 - k(0)) / 2 = (1 + k(0)) / 2 */
	y = line_impulse(30, 0, 2.0);
	sum = 0;
	for (d = 0; d < 30; d++)
		sum += y[d];
	CHECK_CLOSE(sum, (1.0 + y[0]) / 2.0, 1e-14, "an impulse at the edge keeps (1 + k(0)) / 2");
	CHECK_CLOSE(y[0], 1.0 / (2.0 * sqrt(2 * PI)), 1e-4, "and is not renormalised at the edge");
	free(y);
}

static void test_separable(void)
{
	/* a 3-D impulse smoothed with (1.0, 1.5, 0.7) is the product of the three 1-D responses */
	enum { NX = 15, NY = 13, NZ = 11 };
	const double sg[3] = { 1.0, 1.5, 0.7 };
	double *x = xcalloc(NX * NY * NZ, sizeof *x), *kx, *ky, *kz, worst = 0, sum = 0;
	sr_err e;
	int i, j, k;

	sr_err_init(&e, NULL, NULL);
	x[7 + NX * (6 + NY * 5)] = 1.0;
	CHECK(smooth_gauss3(x, NX, NY, NZ, sg, &e) == SR_OK, "3-D smoothing (%s)", e.msg);
	kx = line_impulse(NX, 7, sg[0]);
	ky = line_impulse(NY, 6, sg[1]);
	kz = line_impulse(NZ, 5, sg[2]);
	for (k = 0; k < NZ; k++)
		for (j = 0; j < NY; j++)
			for (i = 0; i < NX; i++) {
				double d = fabs(x[i + NX * (j + NY * k)] - kx[i] * ky[j] * kz[k]);

				worst = d > worst ? d : worst;
				sum += x[i + NX * (j + NY * k)];
			}
	CHECK(worst < 1e-16, "separable: 3-D response = product of 1-D responses (worst %.3g)", worst);
	CHECK_NEAR(sum, 1.0, 1e-13, "and keeps its mass inside the grid");
	free(x), free(kx), free(ky), free(kz);
}

static void test_scipy(void)
{
	/*
	 * numpy array z[5][6][7] (x fastest: i = last index), zeros with z[0][2][5] = 1 and
	 * z[3][3][3] = 2, smoothed by scipy 1.10.1
	 *   ndimage.gaussian_filter(z, sigma=(0.8, 1.3, 0.5), mode='constant', cval=0, truncate=4)
	 * (sigma per numpy axis k, j, i, so ours is (0.5, 1.3, 0.8) for x, y, z).
	 */
	static const struct { int i, j, k; double v; } ref[] = {
		{ 5, 2, 0, 0.12037325195687967 }, { 5, 2, 1, 0.05511350593750741 },
		{ 6, 0, 0, 0.004988648116840854 }, { 3, 3, 3, 0.24074642426617035 },
		{ 0, 5, 4, 0.0 }, { 4, 3, 2, 0.01544934217001237 },
	};
	const double sg[3] = { 0.5, 1.3, 0.8 };
	double x[7 * 6 * 5] = { 0 }, sum = 0;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	x[5 + 7 * (2 + 6 * 0)] = 1.0;
	x[3 + 7 * (3 + 6 * 3)] = 2.0;
	CHECK(smooth_gauss3(x, 7, 6, 5, sg, &e) == SR_OK, "anisotropic smoothing (%s)", e.msg);
	for (size_t q = 0; q < sizeof ref / sizeof ref[0]; q++)
		CHECK_NEAR(x[ref[q].i + 7 * (ref[q].j + 6 * ref[q].k)], ref[q].v, 1e-15,
			   "scipy gaussian_filter value at a voxel");
	for (int v = 0; v < 7 * 6 * 5; v++)
		sum += x[v];
	CHECK_CLOSE(sum, 2.6309281727608527, 1e-13, "total left after border losses, as scipy");
}

static void test_args(void)
{
	double x[8] = { 1, 2, 3, 4, 5, 6, 7, 8 }, orig[8], sg[3] = { 0, 0, 0 };
	sr_err e;

	memcpy(orig, x, sizeof x);
	sr_err_init(&e, NULL, NULL);
	CHECK(smooth_gauss3(x, 2, 2, 2, sg, &e) == SR_OK && memcmp(x, orig, sizeof x) == 0,
	      "sigma 0 on every axis leaves the field as it was");
	sg[0] = 1e-16;
	CHECK(smooth_gauss3(x, 2, 2, 2, sg, &e) == SR_OK && memcmp(x, orig, sizeof x) == 0,
	      "sigma 1e-16 counts as 0");
	sg[0] = -1;
	CHECK(smooth_gauss3(x, 2, 2, 2, sg, &e) == SR_EINVAL && strstr(e.msg, "sigma"),
	      "a negative sigma is SR_EINVAL: %s", e.msg);
	sg[0] = NAN;
	CHECK(smooth_gauss3(x, 2, 2, 2, sg, &e) == SR_EINVAL, "a NaN sigma is SR_EINVAL");
	sg[0] = 1;
	CHECK(smooth_gauss3(x, 0, 2, 2, sg, &e) == SR_EDIM, "a zero size is SR_EDIM");
	x[3] = NAN;
	CHECK(smooth_gauss3(x, 2, 2, 2, sg, &e) == SR_EINVAL && strstr(e.msg, "voxel 3"),
	      "a NaN value is SR_EINVAL naming the voxel: %s", e.msg);
	CHECK(x[0] == 1 && x[7] == 8, "and the field is left alone");
	smooth_plan *p = (smooth_plan *)&e;
	sg[1] = -2;
	CHECK(smooth_plan_alloc(4, 4, 4, sg, &p, &e) == SR_EINVAL && p == NULL,
	      "a failed plan is NULL");
	smooth_plan_free(NULL);
}

/* Deterministic uniform (0, 1) (xorshift64*). */
static double urand(uint64_t *s)
{
	*s ^= *s >> 12;
	*s ^= *s << 25;
	*s ^= *s >> 27;
	return ((*s * 2685821657736338717ULL) >> 11) * (1.0 / 9007199254740992.0) + 1e-17;
}

enum { SX = 12, SY = 10, SZ = 8, SN = SX * SY * SZ };

/* The support rule by hand: G*(v 1_S) / G*(1_S) from two smooth_gauss3 calls, NaN off S. */
static void by_ratio(const double *vol, const unsigned char *mask, const double sg[3], double *out)
{
	double *num = xmalloc_array(SN, sizeof *num), *den = xmalloc_array(SN, sizeof *den);
	sr_err e;
	int v;

	sr_err_init(&e, NULL, NULL);
	for (v = 0; v < SN; v++) {
		int in = (!mask || mask[v]) && isfinite(vol[v]) && vol[v] > 0;

		num[v] = in ? vol[v] : 0;
		den[v] = in;
	}
	smooth_gauss3(num, SX, SY, SZ, sg, &e);
	smooth_gauss3(den, SX, SY, SZ, sg, &e);
	for (v = 0; v < SN; v++) {
		int in = (!mask || mask[v]) && isfinite(vol[v]) && vol[v] > 0;

		out[v] = in ? num[v] / den[v] : NAN;
	}
	free(num), free(den);
}

/* Largest relative difference, NaN matching NaN only; INFINITY when NaNs disagree. */
static double worst_diff(const double *a, const double *b, int n)
{
	double w = 0;

	for (int v = 0; v < n; v++) {
		if (isnan(a[v]) || isnan(b[v])) {
			if (isnan(a[v]) != isnan(b[v]))
				return INFINITY;
			continue;
		}
		double d = fabs(a[v] - b[v]) / fmax(fabs(b[v]), 1e-300);
		w = d > w ? d : w;
	}
	return w;
}

static void test_support(void)
{
	const double sg[3] = { 1.2, 1.0, 0.8 };
	double *vol = xmalloc_array(SN, sizeof *vol), *keep = xmalloc_array(SN, sizeof *keep);
	double *ref = xmalloc_array(SN, sizeof *ref), worst = 0, wfresh = 0;
	unsigned char *mask = xmalloc(SN);
	smooth_plan *p, *q;
	uint64_t seed = 0x5eed1234ULL;
	sr_err e;
	int v, t, ok = 1, nan_ok = 1;

	sr_err_init(&e, NULL, NULL);
	/* the mask: the lower 5 of 8 slices, minus a column */
	for (v = 0; v < SN; v++)
		mask[v] = v / (SX * SY) < 5 && v % SX != 3;
	CHECK(smooth_plan_alloc(SX, SY, SZ, sg, &p, &e) == SR_OK, "a plan (%s)", e.msg);

	/* a constant inside the support stays that constant; outside it is NaN; a value <= 0
	 * or NaN leaves the support */
	for (v = 0; v < SN; v++)
		vol[v] = 250.0;
	vol[5] = 0.0, vol[6] = -3.0, vol[7] = NAN;
	smooth_support(p, vol, mask);
	for (v = 0; v < SN; v++) {
		int in = mask[v] && v != 5 && v != 6 && v != 7;

		if (in)
			ok &= fabs(vol[v] - 250.0) <= 250.0 * 1e-13;
		else
			nan_ok &= isnan(vol[v]);
	}
	CHECK(ok, "a constant stays constant on the support, border and mask edges included");
	CHECK(nan_ok, "NaN off the support: outside the mask, zero, negative and NaN voxels");
	smooth_plan_free(p);

	/* a sequence of random volumes whose support changes by a few voxels each time
	 * (incremental denominator), twice by many (fresh), then 79 small changes in a row (more
	 * than the 64 updates after which the denominator is computed afresh),
	 * against the ratio of two plain smoothings and against a fresh plan per volume */
	smooth_plan_alloc(SX, SY, SZ, sg, &p, &e);
	for (t = 0; t < 120; t++) {
		for (v = 0; v < SN; v++)
			vol[v] = 100.0 + 50.0 * urand(&seed);
		for (v = 0; v < (t == 9 ? 200 : 1 + t % 6); v++)
			vol[(int)(urand(&seed) * SN) % SN] = t % 2 ? 0.0 : NAN;
		memcpy(keep, vol, SN * sizeof *vol);
		smooth_support(p, vol, t < 40 ? mask : NULL);
		by_ratio(keep, t < 40 ? mask : NULL, sg, ref);
		double w = worst_diff(vol, ref, SN);
		worst = w > worst ? w : worst;
		smooth_plan_alloc(SX, SY, SZ, sg, &q, &e);
		memcpy(ref, keep, SN * sizeof *vol);
		smooth_support(q, ref, t < 40 ? mask : NULL);
		smooth_plan_free(q);
		w = worst_diff(vol, ref, SN);
		wfresh = w > wfresh ? w : wfresh;
	}
	CHECK(worst < 1e-12, "120 volumes: G*(v 1_S) / G*(1_S) as two plain smoothings (worst %.3g)", worst);
	CHECK(wfresh < 1e-12, "and as a fresh plan per volume (worst %.3g)", wfresh);
	smooth_plan_free(p);
	free(vol), free(keep), free(ref), free(mask);
}

int main(void)
{
	test_fwhm();
	test_impulse();
	test_separable();
	test_scipy();
	test_args();
	test_support();
	return TEST_DONE();
}
