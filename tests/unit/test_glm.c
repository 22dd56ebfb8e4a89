/* test_glm.c - the one-pass GLM against certified regressions, worked examples and explicit whitening. */
#include <lapacke.h>
#include <math.h>
#include <stdint.h>
#include <string.h>

#include "core/glm.h"
#include "core/mem.h"
#include "testlib.h"

/* NIST StRD "Longley": TOTEMP then GNPDEFL, GNP, UNEMP, ARMED, POP, YEAR (data as shipped by statsmodels). */
static const double longley[16][7] = {
	{60323.0, 83.0, 234289.0, 2356.0, 1590.0, 107608.0, 1947.0},
	{61122.0, 88.5, 259426.0, 2325.0, 1456.0, 108632.0, 1948.0},
	{60171.0, 88.2, 258054.0, 3682.0, 1616.0, 109773.0, 1949.0},
	{61187.0, 89.5, 284599.0, 3351.0, 1650.0, 110929.0, 1950.0},
	{63221.0, 96.2, 328975.0, 2099.0, 3099.0, 112075.0, 1951.0},
	{63639.0, 98.1, 346999.0, 1932.0, 3594.0, 113270.0, 1952.0},
	{64989.0, 99.0, 365385.0, 1870.0, 3547.0, 115094.0, 1953.0},
	{63761.0, 100.0, 363112.0, 3578.0, 3350.0, 116219.0, 1954.0},
	{66019.0, 101.2, 397469.0, 2904.0, 3048.0, 117388.0, 1955.0},
	{67857.0, 104.6, 419180.0, 2822.0, 2857.0, 118734.0, 1956.0},
	{68169.0, 108.4, 442769.0, 2936.0, 2798.0, 120445.0, 1957.0},
	{66513.0, 110.8, 444546.0, 4681.0, 2637.0, 121950.0, 1958.0},
	{68655.0, 112.6, 482704.0, 3813.0, 2552.0, 123366.0, 1959.0},
	{69564.0, 114.2, 502601.0, 3931.0, 2514.0, 125368.0, 1960.0},
	{69331.0, 115.7, 518173.0, 4806.0, 2572.0, 127852.0, 1961.0},
	{70551.0, 116.9, 554894.0, 4007.0, 2827.0, 130081.0, 1962.0},
};

/* NIST StRD certified values for Longley (constant, then the six predictors), from
 * itl.nist.gov/div898/strd (quoted from memory; they agree with statsmodels to its
 * printed 9 digits). */
static const double longley_beta[7] = {
	-3482258.63459582, 15.0618722713733, -0.358191792925910e-01, -2.02022980381683,
	-1.03322686717359, -0.511041056535807e-01, 1829.15146461355,
};
static const double longley_se[7] = {
	890420.383607373, 84.9149257747669, 0.334910077722432e-01, 0.488399681651699,
	0.214274163161675, 0.226073200069370, 455.478499142212,
};

/* Deterministic uniform (0,1) from an explicit state (xorshift64*). */
static double urand(uint64_t *s)
{
	*s ^= *s >> 12;
	*s ^= *s << 25;
	*s ^= *s >> 27;
	return ((*s * 2685821657736338717ULL) >> 11) * (1.0 / 9007199254740992.0) + 1e-17;
}

static double nrand(uint64_t *s)
{
	return sqrt(-2.0 * log(urand(s))) * cos(6.283185307179586 * urand(s));
}

static void test_longley(void)
{
	double X[16 * 7], y[16], beta[7], C[49], mean = 0.0, sc;
	glm_model *m;
	glm_acc *a;
	glm_out o;
	sr_err e;
	int i, j;

	sr_err_init(&e, NULL, NULL);
	for (i = 0; i < 16; i++) {
		y[i] = longley[i][0];
		mean += y[i] / 16;
		X[i] = 1.0;
		for (j = 1; j < 7; j++)
			X[j * 16 + i] = longley[i][j];
	}
	CHECK(glm_model_make(X, 16, 7, &m, &e) == SR_OK, "longley model (%s)", e.msg);
	CHECK(glm_model_rank(m) == 7 && glm_model_df(m) == 9, "longley rank 7, df 9");
	glm_ols_solve(m, y, beta);
	for (j = 0; j < 7; j++)
		CHECK_CLOSE(beta[j], longley_beta[j], 1e-8, "longley certified beta (NIST StRD)");

	/* the streamed path: percent scaling multiplies betas and standard errors by 100/mean */
	memset(C, 0, sizeof C);
	for (j = 0; j < 7; j++)
		C[j * 7 + j] = 1.0;
	a = glm_acc_alloc(m, 1);
	for (i = 0; i < 16; i++)
		glm_acc_add(a, &y[i], &e);
	CHECK(glm_acc_finish(a, 0, C, 7, NULL, 1, &o, &e) == SR_OK, "longley streamed finish");
	sc = 100.0 / mean;
	CHECK(o.ok[0] && o.df == 9, "longley series analyzable");
	for (j = 0; j < 7; j++) {
		CHECK_CLOSE(o.effect[j] / sc, longley_beta[j], 1e-8, "longley streamed beta (NIST StRD)");
		CHECK_CLOSE(sqrt(o.var[j]) / sc, longley_se[j], 1e-8, "longley streamed standard error (NIST StRD)");
	}
	CHECK_CLOSE(o.mean[0], mean, 1e-14, "longley temporal mean");
	glm_out_release(&o);
	glm_acc_free(a);
	glm_model_free(m);
}

/* REFERENCES.md worked example: X = [1, x], x = 1..7, y = 1 3 4 5 8 10 9, rho = 0.5. */
static void test_prais_winsten_example(void)
{
	double X[14], y[7] = { 1, 3, 4, 5, 8, 10, 9 }, b[2];
	glm_model *m;
	sr_err e;
	int k;

	sr_err_init(&e, NULL, NULL);
	for (k = 0; k < 7; k++) {
		X[k] = 1.0;
		X[7 + k] = k + 1;
	}
	CHECK(glm_model_make(X, 7, 2, &m, &e) == SR_OK, "worked example model");
	glm_ols_solve(m, y, b);
	CHECK_CLOSE(b[0], -0.285714, 2e-6, "OLS intercept (REFERENCES.md worked example)");
	CHECK_CLOSE(b[1], 1.5, 1e-12, "OLS slope (REFERENCES.md worked example)");
	CHECK(glm_ar1_solve(m, y, 0.5, b, NULL, &e) == SR_OK, "prais-winsten solve");
	CHECK_CLOSE(b[0], -0.0996169, 5e-6, "Prais-Winsten intercept (REFERENCES.md worked example)");
	CHECK_CLOSE(b[1], 1.41379, 5e-6, "Prais-Winsten slope (REFERENCES.md worked example)");
	glm_model_free(m);
}

/* Explicit Prais-Winsten (METHODS.md section 4) with LAPACK least squares, for comparison. */
static void explicit_pw(const double *X, const double *y, int T, int p, double rho, double *beta,
			double *rss)
{
	double *Xw = xmalloc_array((size_t)T * p, sizeof(double)), *yw = xmalloc_array((size_t)T, sizeof(double));
	double f = sqrt(1 - rho * rho);
	int k, j;

	for (j = 0; j < p; j++) {
		Xw[(size_t)j * T] = f * X[(size_t)j * T];
		for (k = 1; k < T; k++)
			Xw[(size_t)j * T + k] = X[(size_t)j * T + k] - rho * X[(size_t)j * T + k - 1];
	}
	yw[0] = f * y[0];
	for (k = 1; k < T; k++)
		yw[k] = y[k] - rho * y[k - 1];
	LAPACKE_dgels(LAPACK_COL_MAJOR, 'N', T, p, 1, Xw, T, yw, T);
	memcpy(beta, yw, (size_t)p * sizeof(double));
	*rss = 0.0;
	for (k = p; k < T; k++)
		*rss += yw[k] * yw[k];
	free(Xw);
	free(yw);
}

/* A random design with a constant last column. */
static void random_design(double *X, int T, int p, uint64_t *s)
{
	int j, k;

	for (j = 0; j < p - 1; j++)
		for (k = 0; k < T; k++)
			X[(size_t)j * T + k] = nrand(s) + (j == 0 ? sin(k * 0.2) : 0.0);
	for (k = 0; k < T; k++)
		X[(size_t)(p - 1) * T + k] = 1.0;
}

/* The lag identities against explicit whitening, with and without a constant column. */
static void test_identities(void)
{
	enum { T = 60, P = 5 };
	double X[T * P], y[T], b1[P], b2[P], rss1, rss2, rho;
	uint64_t s = 12345;
	glm_model *m;
	sr_err e;
	int k, j, pp, worst = 1;

	sr_err_init(&e, NULL, NULL);
	for (pp = P; pp >= P - 1; pp--) {
		random_design(X, T, P, &s);
		if (pp < P) /* no constant column */
			for (k = 0; k < T; k++)
				X[(size_t)(P - 2) * T + k] = nrand(&s);
		for (k = 0; k < T; k++)
			y[k] = 50 + 3 * X[k] + nrand(&s);
		glm_model_make(X, T, pp, &m, &e);
		for (rho = -0.9; rho < 0.95; rho += 0.3) {
			glm_ar1_solve(m, y, rho, b1, &rss1, &e);
			explicit_pw(X, y, T, pp, rho, b2, &rss2);
			for (j = 0; j < pp; j++)
				worst &= tl_close(b1[j], b2[j], 1e-10, 1e-10);
			worst &= tl_close(rss1, rss2, 1e-10, 1e-10);
		}
		CHECK(worst, "lagged-sum Prais-Winsten equals explicit whitening + dgels (%d columns)", pp);
		glm_model_free(m);
	}
}

/*
 * The stream (shift by y_0, scaling, rho from OLS residuals) against an
 * explicit computation of METHODS.md 3-4 for a few voxels.
 */
static void test_stream_vs_explicit(void)
{
	enum { T = 50, P = 4, NV = 7 };
	double X[T * P], Y[NV][T], vol[NV], C[2 * P], rss, b[P], bw[P], rssw;
	uint64_t s = 777;
	glm_model *m;
	glm_acc *a;
	glm_out o;
	sr_err e;
	int k, v, j, good = 1, good_t = 1;

	sr_err_init(&e, NULL, NULL);
	random_design(X, T, P, &s);
	for (v = 0; v < NV; v++)
		for (k = 0; k < T; k++)
			Y[v][k] = 1000 + 100 * v + 5 * X[k] + 3 * nrand(&s) + (k ? 0.6 * (Y[v][k - 1] - 1000 - 100 * v) : 0);
	memset(C, 0, sizeof C);
	C[0] = 1;
	C[P + 0] = 1;
	C[P + 1] = -1;
	glm_model_make(X, T, P, &m, &e);
	a = glm_acc_alloc(m, NV);
	for (k = 0; k < T; k++) {
		for (v = 0; v < NV; v++)
			vol[v] = Y[v][k];
		glm_acc_add(a, vol, &e);
	}
	CHECK(glm_acc_add(a, vol, &e) == SR_EDIM, "one volume too many is an error");
	glm_acc_finish(a, 1, C, 2, NULL, 1, &o, &e);
	for (v = 0; v < NV; v++) {
		double ys[T], mean = 0, num = 0, den = 0, rho, res[T];
		double XtXi[P * P], Xw[T * P], f;
		int i;

		for (k = 0; k < T; k++)
			mean += Y[v][k] / T;
		for (k = 0; k < T; k++)
			ys[k] = 100 * Y[v][k] / mean;
		explicit_pw(X, ys, T, P, 0.0, b, &rss);
		for (k = 0; k < T; k++) {
			res[k] = ys[k];
			for (j = 0; j < P; j++)
				res[k] -= X[(size_t)j * T + k] * b[j];
		}
		for (k = 0; k < T; k++) {
			den += res[k] * res[k];
			if (k)
				num += res[k] * res[k - 1];
		}
		rho = num / den;
		explicit_pw(X, ys, T, P, rho, bw, &rssw);
		good &= tl_close(o.rho[v], rho, 1e-9, 1e-9);
		good &= tl_close(o.effect[v], bw[0], 1e-9, 1e-9);
		good &= tl_close(o.effect[NV + v], bw[0] - bw[1], 1e-9, 1e-9);
		/* Cov = sigma^2 (Xw'Xw)^-1 */
		f = sqrt(1 - rho * rho);
		for (j = 0; j < P; j++) {
			Xw[(size_t)j * T] = f * X[(size_t)j * T];
			for (k = 1; k < T; k++)
				Xw[(size_t)j * T + k] = X[(size_t)j * T + k] - rho * X[(size_t)j * T + k - 1];
		}
		for (i = 0; i < P; i++)
			for (j = 0; j < P; j++) {
				XtXi[j * P + i] = 0;
				for (k = 0; k < T; k++)
					XtXi[j * P + i] += Xw[(size_t)i * T + k] * Xw[(size_t)j * T + k];
			}
		LAPACKE_dpotrf(LAPACK_COL_MAJOR, 'U', P, XtXi, P);
		LAPACKE_dpotri(LAPACK_COL_MAJOR, 'U', P, XtXi, P);
		good_t &= tl_close(o.var[v], rssw / (T - P) * XtXi[0], 1e-9, 1e-12);
		good_t &= tl_close(o.var[NV + v], rssw / (T - P) * (XtXi[0] + XtXi[P + 1] - 2 * XtXi[P]), 1e-9, 1e-12);
		good &= tl_close(o.mean[v], mean, 1e-13, 0);
	}
	CHECK(good, "streamed AR(1) rho, effects and means equal the explicit METHODS.md 3-4 computation");
	CHECK(good_t, "streamed AR(1) variances equal sigma^2 (Xw'Xw)^-1 computed explicitly");
	glm_out_release(&o);
	glm_acc_free(a);
	glm_model_free(m);
}

/* Duplicate and all-zero columns (METHODS.md 4 and 11): NaN and estimable 0; the sum of duplicates is estimable. */
static void test_rank_deficient(void)
{
	enum { T = 40, NV = 3 };
	double X[T * 5], Xr[T * 3], y[NV][T], vol[NV], b[5], br[3];
	double C[4 * 5] = {
		1, 0, 0, 0, 0,   /* a duplicated column: not estimable */
		1, 1, 0, 0, 0,   /* sum of duplicates: estimable */
		0, 0, 1, 0, 0,   /* the all-zero column */
		0, 0, 0, 1, 0,   /* an ordinary column */
	};
	double Cr[4 * 3] = { 0, 0, 0, 1, 0, 0, 0, 0, 0, 0, 1, 0 };
	uint64_t s = 99;
	glm_model *m, *mr;
	glm_acc *a, *ar;
	glm_out o, orr;
	sr_err e;
	int k, v, c, ok = 1;

	sr_err_init(&e, NULL, NULL);
	for (k = 0; k < T; k++) {
		double x1 = nrand(&s), x2 = nrand(&s);

		X[k] = X[T + k] = x1;
		X[2 * T + k] = 0.0;
		X[3 * T + k] = x2;
		X[4 * T + k] = 1.0;
		Xr[k] = x1;
		Xr[T + k] = x2;
		Xr[2 * T + k] = 1.0;
		for (v = 0; v < NV; v++)
			y[v][k] = 200 + 4 * x1 - 2 * x2 + nrand(&s);
	}
	glm_model_make(X, T, 5, &m, &e);
	glm_model_make(Xr, T, 3, &mr, &e);
	CHECK(glm_model_rank(m) == 3 && glm_model_df(m) == T - 3, "rank 3 and df T-3 with a duplicate and a zero column");
	CHECK(!glm_estimable(m, C) && glm_estimable(m, C + 5) && !glm_estimable(m, C + 10) && glm_estimable(m, C + 15),
	      "estimability: duplicate no, sum of duplicates yes, zero column no, ordinary yes");
	glm_ols_solve(m, y[0], b);
	glm_ols_solve(mr, y[0], br);
	CHECK(isnan(b[0]) && isnan(b[1]) && isnan(b[2]), "non-estimable betas are NaN");
	CHECK_CLOSE(b[3], br[1], 1e-11, "estimable beta equals the reduced design's");
	a = glm_acc_alloc(m, NV);
	ar = glm_acc_alloc(mr, NV);
	for (k = 0; k < T; k++) {
		for (v = 0; v < NV; v++)
			vol[v] = y[v][k];
		glm_acc_add(a, vol, &e);
		glm_acc_add(ar, vol, &e);
	}
	glm_acc_finish(a, 1, C, 4, NULL, 2, &o, &e);
	glm_acc_finish(ar, 1, Cr, 4, NULL, 2, &orr, &e);
	CHECK(!o.estimable[0] && o.estimable[1] && !o.estimable[2] && o.estimable[3], "estimable flags of the fit");
	for (v = 0; v < NV; v++) {
		ok &= isnan(o.effect[v]) && isnan(o.var[v]) && isnan(o.effect[2 * NV + v]);
		ok &= o.ok[v];
		for (c = 1; c < 4; c += 2) {
			ok &= tl_close(o.effect[c * NV + v], orr.effect[c * NV + v], 1e-10, 1e-10);
			ok &= tl_close(o.var[c * NV + v], orr.var[c * NV + v], 1e-10, 1e-12);
		}
		ok &= tl_close(o.rho[v], orr.rho[v], 1e-10, 1e-12);
	}
	CHECK(ok, "rank-deficient AR(1) fit: NaN where not estimable, reduced-design values elsewhere");
	glm_out_release(&o);
	glm_out_release(&orr);
	glm_acc_free(a);
	glm_acc_free(ar);
	glm_model_free(m);
	glm_model_free(mr);
}

/* Voxels that are not analyzable (METHODS.md section 3). */
static void test_analyzable(void)
{
	enum { T = 30, NV = 6 };
	double X[T * 2], vol[NV], C[2] = { 1, 0 };
	unsigned char mask[NV] = { 1, 1, 1, 1, 1, 0 };
	glm_model *m;
	glm_acc *a;
	glm_out o;
	sr_err e;
	uint64_t s = 5;
	int k;

	sr_err_init(&e, NULL, NULL);
	for (k = 0; k < T; k++) {
		X[k] = sin(k * 0.3);
		X[T + k] = 1.0;
	}
	glm_model_make(X, T, 2, &m, &e);
	a = glm_acc_alloc(m, NV);
	for (k = 0; k < T; k++) {
		vol[0] = 100 + nrand(&s);           /* fine */
		vol[1] = 100;                       /* constant: sd 0 */
		vol[2] = k == 7 ? NAN : 100 + nrand(&s);
		vol[3] = -100 + nrand(&s);          /* mean < 0 */
		vol[4] = k == 29 ? INFINITY : 100 + nrand(&s);
		vol[5] = 100 + nrand(&s);           /* outside the mask */
		glm_acc_add(a, vol, &e);
	}
	glm_acc_finish(a, 1, C, 1, mask, 1, &o, &e);
	CHECK(o.ok[0] && !o.ok[1] && !o.ok[2] && !o.ok[3] && !o.ok[4] && !o.ok[5],
	      "analyzable: finite, mean > 0, sd > 0, in mask");
	CHECK(isfinite(o.effect[0]) && isnan(o.effect[1]) && isnan(o.effect[2]) && isnan(o.var[3]) &&
	      isnan(o.rho[4]) && isnan(o.effect[5]), "not analyzable gives NaN");
	CHECK(isnan(o.mean[2]) && isnan(o.mean[4]) && o.mean[1] == 100 && o.mean[3] < 0,
	      "mean NaN exactly where a sample is not finite");
	CHECK(o.left_out[GLM_OUT_MASK] == 1 && o.left_out[GLM_OUT_NONFINITE] == 2 &&
	      o.left_out[GLM_OUT_NONPOSITIVE] == 1 && o.left_out[GLM_OUT_CONSTANT] == 1 &&
	      o.left_out[GLM_OUT_FLOOR] == 0, "each rule's count, first rule failed");
	glm_out_release(&o);
	glm_acc_free(a);

	/* the intensity floor: 10% of the 98th percentile of the positive finite means in
	   the mask. Means 100 (voxel 0), 100 (1), 9.99 (2), 10.5 (3), 1000 (4); voxel 5 is
	   outside the mask and its mean 1e6 must not count. numpy.percentile([9.99, 10.5,
	   100, 100, 1000], 98) = 100 + 0.92 * 900 = 928 (h = 0.98 * 4 = 3.92) */
	a = glm_acc_alloc(m, NV);
	for (k = 0; k < T; k++) {
		double d = (k % 2 ? 0.5 : -0.5);

		vol[0] = 100 + d;
		vol[1] = 100 - d;
		vol[2] = 9.99 + d * 0.01;
		vol[3] = 10.5 + d * 0.01;
		vol[4] = 1000 + d;
		vol[5] = 1e6 + d;
		glm_acc_add(a, vol, &e);
	}
	glm_acc_finish(a, 0, C, 1, mask, 1, &o, &e);
	CHECK_CLOSE(o.ref_intensity, 928.0, 1e-9, "reference intensity: numpy.percentile(means, 98)");
	CHECK_CLOSE(o.floor, 92.8, 1e-9, "intensity floor: a tenth of the reference");
	CHECK(o.ok[0] && o.ok[1] && !o.ok[2] && !o.ok[3] && o.ok[4] && !o.ok[5] &&
	      o.left_out[GLM_OUT_FLOOR] == 2 && o.rule[2] == GLM_OUT_FLOOR && o.rule[5] == GLM_OUT_MASK,
	      "voxels below 10%% of the reference intensity are left out, counted under the floor");
	glm_out_release(&o);
	glm_acc_free(a);
	glm_model_free(m);
	CHECK(glm_model_make(X, 2, 2, &m, &e) == SR_EDIM, "T <= p is an error");
	X[3] = NAN;
	CHECK(glm_model_make(X, T, 2, &m, &e) == SR_EINVAL, "non-finite design is an error (%s)", e.msg);
}

/* Fixed effects by hand (METHODS.md section 5). */
static void test_ffx(void)
{
	double e0[3] = { 1.0, 2.0, NAN }, e1[3] = { 3.0, NAN, NAN }, e2[3] = { 2.0, 4.0, NAN };
	double v0[3] = { 0.5, 1.0, 1.0 }, v1[3] = { 0.25, 1.0, 1.0 }, v2[3] = { 1.0, 3.0, 1.0 };
	const double *E[3] = { e0, e1, e2 }, *V[3] = { v0, v1, v2 };
	int df[3] = { 100, 110, 120 }, dfs[3];
	double Eo[3], Vo[3], to[3];

	glm_ffx(3, 3, E, V, df, Eo, Vo, to, dfs);
	/* voxel 0: E = (1+3+2)/3 = 2, V = 1.75/9, t = 2/sqrt(1.75/9) */
	CHECK_CLOSE(Eo[0], 2.0, 1e-15, "ffx mean over three runs");
	CHECK_CLOSE(Vo[0], 1.75 / 9, 1e-15, "ffx variance sum / n^2");
	CHECK_CLOSE(to[0], 2.0 / sqrt(1.75 / 9), 1e-15, "ffx t");
	CHECK(dfs[0] == 330, "ffx df sum");
	/* voxel 1: run 1 left out: E = 3, V = 4/4 = 1, df 220 */
	CHECK(Eo[1] == 3.0 && Vo[1] == 1.0 && to[1] == 3.0 && dfs[1] == 220, "ffx leaves out the run with NaN");
	CHECK(isnan(Eo[2]) && isnan(Vo[2]) && isnan(to[2]) && dfs[2] == 0, "ffx with no run gives NaN and df 0");
}

/* Identical bytes for any thread count. */
static void test_threads(void)
{
	enum { T = 40, P = 4, NV = 1001 };
	double X[T * P], *vol = xmalloc_array(NV, sizeof(double)), C[P] = { 1, -1, 0, 0 };
	glm_out o[3];
	glm_model *m;
	sr_err e;
	uint64_t s = 31;
	int n, k, v, same = 1;

	sr_err_init(&e, NULL, NULL);
	random_design(X, T, P, &s);
	glm_model_make(X, T, P, &m, &e);
	for (n = 0; n < 3; n++) {
		glm_acc *a = glm_acc_alloc(m, NV);
		uint64_t s2 = 4242;

		for (k = 0; k < T; k++) {
			for (v = 0; v < NV; v++)
				vol[v] = 500 + v % 7 + nrand(&s2);
			glm_acc_add(a, vol, &e);
		}
		glm_acc_finish(a, 1, C, 1, NULL, n + 1, &o[n], &e);
		glm_acc_free(a);
	}
	for (n = 1; n < 3; n++) {
		same &= memcmp(o[0].effect, o[n].effect, NV * sizeof(double)) == 0;
		same &= memcmp(o[0].var, o[n].var, NV * sizeof(double)) == 0;
		same &= memcmp(o[0].rho, o[n].rho, NV * sizeof(double)) == 0;
		same &= memcmp(o[0].ok, o[n].ok, NV) == 0;
	}
	CHECK(same, "outputs identical for 1, 2 and 3 threads");
	for (n = 0; n < 3; n++)
		glm_out_release(&o[n]);
	glm_model_free(m);
	free(vol);
}

/*
 * Volume k of the zero-background layout: zeros, a block of real series,
 * -0, a block that is zero for 10 volumes (into the middle of a batch) and
 * then varies, zeros again; with force, every 64th voxel also varies, so
 * that no chunk of the accumulator holds only zeros.
 */
static void zero_layout(double *vol, int nv, int k, int force)
{
	int v;

	for (v = 0; v < nv; v++) {
		uint64_t st = (uint64_t)v * 1000003u + (uint64_t)k + 1, *s = &st; /* noise fixed by (v, k) */
		double y = 0.0;

		if (v >= 6000 && v < 9000)
			y = 500 + v % 5 + nrand(s);
		else if (v >= 9000 && v < 16000)
			y = -0.0;
		else if (v >= 17000 && v < 17100)
			y = k < 10 ? 0.0 : 300 + nrand(s);
		if (force && v % 64 == 0)
			y = 700 + nrand(s);
		vol[v] = y;
	}
}

/* Skipping the all-zero parts of the volumes (glm.c's chunks) changes no voxel's numbers. */
static void zero_background(int with_const)
{
	enum { T = 37, P = 4, NV = 24000 };
	double X[T * P], *vol = xmalloc_array(NV, sizeof(double)), C[P] = { 1, -1, 0, 0 };
	glm_out o[3];
	glm_model *m;
	sr_err e;
	uint64_t s = 77;
	int n, k, v, same = 1, same_threads = 1;

	sr_err_init(&e, NULL, NULL);
	random_design(X, T, P, &s);
	for (k = 0; !with_const && k < T; k++)
		X[(size_t)3 * T + k] = cos(k * 0.3); /* random_design ends with a constant: replace it */
	glm_model_make(X, T, P, &m, &e);
	for (n = 0; n < 3; n++) {
		glm_acc *a = glm_acc_alloc(m, NV);

		/* fit 2: fit 0's volumes added by three threads, chunk groups in any order */
		glm_acc_threads(a, n == 2 ? 3 : 1);
		for (k = 0; k < T; k++) {
			zero_layout(vol, NV, k, n == 1);
			glm_acc_add(a, vol, &e);
		}
		glm_acc_finish(a, GLM_AR1_ADJUSTED, C, 1, NULL, 2, &o[n], &e);
		glm_acc_free(a);
	}
	for (v = 0; v < NV; v++) {
		if (v % 64 == 0)
			continue;
		same &= memcmp(&o[0].effect[v], &o[1].effect[v], sizeof(double)) == 0;
		same &= memcmp(&o[0].var[v], &o[1].var[v], sizeof(double)) == 0;
		same &= memcmp(&o[0].rho[v], &o[1].rho[v], sizeof(double)) == 0;
		same &= memcmp(&o[0].mean[v], &o[1].mean[v], sizeof(double)) == 0;
		same &= o[0].ok[v] == o[1].ok[v] && o[0].rule[v] == o[1].rule[v];
	}
	for (v = 0; v < NV; v++) {
		same_threads &= memcmp(&o[0].effect[v], &o[2].effect[v], sizeof(double)) == 0;
		same_threads &= memcmp(&o[0].var[v], &o[2].var[v], sizeof(double)) == 0;
		same_threads &= memcmp(&o[0].mean[v], &o[2].mean[v], sizeof(double)) == 0;
		same_threads &= o[0].ok[v] == o[2].ok[v] && o[0].rule[v] == o[2].rule[v];
	}
	CHECK(o[0].ok[7001] && o[0].ok[17050] && !o[0].ok[100] && !o[0].ok[12500],
	      "zero background (constant column %d): series analyzable, zeros and -0 not", with_const);
	CHECK(same, "zero background (constant column %d): every voxel's effect, var, rho, mean and rule bit-identical when no chunk is all zeros", with_const);
	CHECK(same_threads, "zero background (constant column %d): volumes added by 3 threads give the same bits as by 1", with_const);
	for (n = 0; n < 3; n++)
		glm_out_release(&o[n]);
	glm_model_free(m);
	free(vol);
}

static void test_zero_background(void)
{
	zero_background(1);
	zero_background(0); /* no constant: the means are sums, where a -0 would show */
}

/* zero_layout plus voxels each rule leaves out, among and beside the fitted voxels of fit_only. */
static void rules_layout(double *vol, int nv, int k)
{
	int v;

	zero_layout(vol, nv, k, 0);
	for (v = 3000; v < 3040; v++) {
		uint64_t st = (uint64_t)v * 7919u + (uint64_t)k + 1;

		if (v < 3010)
			vol[v] = k == 5 ? NAN : 450 + nrand(&st);   /* not finite */
		else if (v < 3020)
			vol[v] = 400;                               /* constant */
		else
			vol[v] = 5 + nrand(&st);                    /* under the intensity floor */
	}
	vol[6150] = 410;                                        /* constant, in a fitted chunk */
	vol[6151] = k == 3 ? INFINITY : vol[6151];              /* not finite, in a fitted chunk */
}

/*
 * glm_acc_fit_only: the fitted voxels get the full fit's bits, every voxel
 * its rule, and the others a mean that agrees to rounding and no fit.
 */
static void fit_only(int with_const)
{
	enum { T = 37, P = 4, NV = 24000 };
	static const size_t keep[] = { 6100, 6101, 6143, 6144, 6200, 7000, 17020, 17039, 6150, 6151 };
	double X[T * P], *vol = xmalloc_array(NV, sizeof(double)), C[P] = { 1, -1, 0, 0 }, worst = 0.0;
	unsigned char fitv[NV] = { 0 };
	glm_out o[2];
	glm_model *m;
	sr_err e;
	uint64_t s = 78;
	int n, k, v, same = 1, rules = 1, none = 1;
	size_t i;

	sr_err_init(&e, NULL, NULL);
	random_design(X, T, P, &s);
	for (k = 0; !with_const && k < T; k++)
		X[(size_t)3 * T + k] = cos(k * 0.3);
	glm_model_make(X, T, P, &m, &e);
	for (n = 0; n < 2; n++) {
		glm_acc *a = glm_acc_alloc(m, NV);

		glm_acc_threads(a, 2);
		if (n == 1)
			glm_acc_fit_only(a, keep, sizeof keep / sizeof *keep);
		for (k = 0; k < T; k++) {
			rules_layout(vol, NV, k);
			glm_acc_add(a, vol, &e);
		}
		glm_acc_finish(a, GLM_AR1_ADJUSTED, C, 1, NULL, 2, &o[n], &e);
		glm_acc_free(a);
	}
	for (i = 0; i < sizeof keep / sizeof *keep; i++)
		fitv[keep[i]] = 1;
	for (v = 0; v < NV; v++) {
		rules &= o[0].rule[v] == o[1].rule[v];
		if (fitv[v]) {
			same &= memcmp(&o[0].effect[v], &o[1].effect[v], sizeof(double)) == 0;
			same &= memcmp(&o[0].var[v], &o[1].var[v], sizeof(double)) == 0;
			same &= memcmp(&o[0].rho[v], &o[1].rho[v], sizeof(double)) == 0;
			same &= memcmp(&o[0].mean[v], &o[1].mean[v], sizeof(double)) == 0;
			same &= o[0].ok[v] == o[1].ok[v];
			continue;
		}
		none &= isnan(o[1].effect[v]) && isnan(o[1].var[v]) && isnan(o[1].rho[v]) && !o[1].ok[v];
		if (isnan(o[0].mean[v]) != isnan(o[1].mean[v]))
			worst = INFINITY;
		else if (!isnan(o[0].mean[v]))
			worst = fmax(worst, fabs(o[0].mean[v] - o[1].mean[v]) / fmax(1.0, fabs(o[0].mean[v])));
	}
	CHECK(o[0].ok[6100] && o[0].ok[7000] && !o[0].ok[6150] && !o[0].ok[6151] && o[0].ok[6500],
	      "fit_only layout (constant column %d): the kept series are analyzable, the constant and infinite ones not", with_const);
	CHECK(same, "fit_only (constant column %d): every fitted voxel has the full fit's effect, var, rho, mean and ok bits", with_const);
	CHECK(rules && memcmp(o[0].left_out, o[1].left_out, sizeof o[0].left_out) == 0 &&
	      o[1].left_out[GLM_OUT_NONFINITE] == 11 && o[1].left_out[GLM_OUT_CONSTANT] == 11 &&
	      o[1].left_out[GLM_OUT_FLOOR] == 20,
	      "fit_only (constant column %d): every voxel's rule and each rule's count as in the full fit", with_const);
	CHECK(none, "fit_only (constant column %d): no effect, var or rho at the other voxels, none analyzable", with_const);
	CHECK(worst < 1e-12, "fit_only (constant column %d): the other voxels' means agree to rounding (worst %.2g)", with_const, worst);
	CHECK(fabs(o[0].ref_intensity - o[1].ref_intensity) <= 1e-12 * o[0].ref_intensity &&
	      o[0].ref_intensity > 100, "fit_only (constant column %d): reference intensity %.17g vs %.17g",
	      with_const, o[0].ref_intensity, o[1].ref_intensity);
	for (n = 0; n < 2; n++)
		glm_out_release(&o[n]);
	glm_model_free(m);
	free(vol);
}

static void test_fit_only(void)
{
	fit_only(1);
	fit_only(0);
}

/*
 * glm_acc_float32 (float32 pending volumes) gives the bits of the double
 * batches on float32-exact values: zero background, NaN, constant and dim
 * voxels, a last batch shorter than the others (37 volumes), 3 threads, with
 * and without fit_only.
 */
static void float32_batches(int with_const)
{
	enum { T = 37, P = 4, NV = 24000 };
	static const size_t keep[] = { 6100, 6101, 6143, 6144, 7000, 17039 };
	double X[T * P], *vol = xmalloc_array(NV, sizeof(double)), C[P] = { 1, -1, 0, 0 };
	glm_out o[5];
	glm_model *m;
	sr_err e;
	uint64_t s = 79;
	int n, k, v, same = 1, refused;
	float *volf = xmalloc_array(NV, sizeof(float));

	sr_err_init(&e, NULL, NULL);
	random_design(X, T, P, &s);
	for (k = 0; !with_const && k < T; k++)
		X[(size_t)3 * T + k] = cos(k * 0.3);
	glm_model_make(X, T, P, &m, &e);
	for (n = 0; n < 4; n++) {
		glm_acc *a = glm_acc_alloc(m, NV);

		glm_acc_threads(a, n % 2 ? 3 : 1);
		if (n >= 2)
			glm_acc_fit_only(a, keep, sizeof keep / sizeof *keep);
		if (n % 2)
			glm_acc_float32(a);
		for (k = 0; k < T; k++) {
			rules_layout(vol, NV, k);
			for (v = 0; v < NV; v++)
				vol[v] = (double)(float)vol[v];
			glm_acc_add(a, vol, &e);
		}
		glm_acc_finish(a, GLM_AR1_ADJUSTED, C, 1, NULL, 2, &o[n], &e);
		glm_acc_free(a);
	}
	/* 4: float32 volumes given as float32 (glm_acc_add_f32), 3 threads */
	{
		glm_acc *a = glm_acc_alloc(m, NV);

		refused = glm_acc_add_f32(a, volf, &e) == SR_EINVAL;
		glm_acc_threads(a, 3);
		glm_acc_float32(a);
		for (k = 0; k < T; k++) {
			rules_layout(vol, NV, k);
			for (v = 0; v < NV; v++)
				volf[v] = (float)vol[v];
			glm_acc_add_f32(a, volf, &e);
		}
		glm_acc_finish(a, GLM_AR1_ADJUSTED, C, 1, NULL, 2, &o[4], &e);
		glm_acc_free(a);
	}
	CHECK(refused, "float32 volumes before glm_acc_float32 are refused");
	same &= memcmp(o[1].effect, o[4].effect, NV * sizeof(double)) == 0;
	same &= memcmp(o[1].var, o[4].var, NV * sizeof(double)) == 0;
	same &= memcmp(o[1].mean, o[4].mean, NV * sizeof(double)) == 0;
	same &= memcmp(o[1].rule, o[4].rule, NV) == 0;
	for (n = 0; n < 4; n += 2) {
		same &= memcmp(o[n].effect, o[n + 1].effect, NV * sizeof(double)) == 0;
		same &= memcmp(o[n].var, o[n + 1].var, NV * sizeof(double)) == 0;
		same &= memcmp(o[n].rho, o[n + 1].rho, NV * sizeof(double)) == 0;
		same &= memcmp(o[n].mean, o[n + 1].mean, NV * sizeof(double)) == 0;
		same &= memcmp(o[n].ok, o[n + 1].ok, NV) == 0 && memcmp(o[n].rule, o[n + 1].rule, NV) == 0;
		same &= memcmp(o[n].left_out, o[n + 1].left_out, sizeof o[n].left_out) == 0;
		same &= memcmp(&o[n].ref_intensity, &o[n + 1].ref_intensity, sizeof(double)) == 0;
	}
	CHECK(o[0].ok[7001] && o[1].ok[7001] && isfinite(o[1].effect[7001]) && o[3].ok[7000] && !o[3].ok[7001],
	      "float32 batches (constant column %d): the layout's series are fitted", with_const);
	CHECK(same, "float32 batches (constant column %d): every voxel's effect, var, rho, mean, rule and the reference intensity bit for bit as double batches, whole and fit_only, given as doubles or as float32", with_const);
	for (n = 0; n < 5; n++)
		glm_out_release(&o[n]);
	glm_model_free(m);
	free(vol);
	free(volf);
}

static void test_float32_batches(void)
{
	float32_batches(1);
	float32_batches(0);
}

/* 1 when voxel v has the same effect, var, rho, ok and rule bits in a and b (one contrast), and the same mean with means. */
static int same_voxel(const glm_out *a, const glm_out *b, int v, int means)
{
	return memcmp(&a->effect[v], &b->effect[v], sizeof(double)) == 0 &&
	       memcmp(&a->var[v], &b->var[v], sizeof(double)) == 0 &&
	       memcmp(&a->rho[v], &b->rho[v], sizeof(double)) == 0 &&
	       (!means || memcmp(&a->mean[v], &b->mean[v], sizeof(double)) == 0) &&
	       a->ok[v] == b->ok[v] && a->rule[v] == b->rule[v];
}

/*
 * A run for glm_acc_defer_dim: a dim noisy background (deferred), a bright
 * block, -0 and +0 voxels, a dim voxel with a negative mean, a constant
 * bright voxel, NaN at volume 0 and at volume 5, a dim voxel under the floor.
 * wake: 100 voxels dark in volume 0 and bright from volume 10 (deferred, then
 * analyzable). zero: one deferred voxel alternating +1 and -1 and ending at
 * 0, its mean 0 up to roundoff.
 */
static void defer_layout(double *vol, int nv, int k, int wake, int zero)
{
	int v;

	for (v = 0; v < nv; v++) {
		uint64_t st = (uint64_t)v * 1000033u + (uint64_t)k + 1, *s = &st;
		double y = 0.0;

		if (v < 6000)
			y = 10 + 2 * nrand(s);
		else if (v < 9000)
			y = 500 + v % 7 + nrand(s);
		else if (v < 12000)
			y = -0.0;
		vol[v] = y;
	}
	vol[12001] = -3 + nrand(&(uint64_t){ (uint64_t)k + 99 });
	vol[12002] = 410;
	vol[12003] = k == 0 ? NAN : 450 + k % 3;
	vol[12004] = k == 5 ? NAN : 8 + k % 2;
	vol[7000] = k == 5 ? INFINITY : vol[7000];
	for (v = 13000; wake && v < 13100; v++)
		vol[v] = k < 10 ? (double)(v % 2) : 300 + nrand(&(uint64_t){ (uint64_t)v * 31u + (uint64_t)k });
	if (zero)
		vol[14000] = k == 36 ? 0.0 : (k % 2 ? -1.0 : 1.0);
	/* deferred voxels that wake, dim, in chunks whose other voxels stay +0: +0 until
	   volume 20; -0 (not +0) until volume 7; one voxel of an all-zero chunk at volume 30 */
	for (v = 15000; v < 15010; v++)
		vol[v] = k < 20 ? 0.0 : 3 + nrand(&(uint64_t){ (uint64_t)v * 17u + (uint64_t)k });
	for (v = 15500; v < 15506; v++)
		vol[v] = k < 7 ? -0.0 : 2 + (v + k) % 3;
	vol[16200] = k < 30 ? 0.0 : 4 + k % 2;
	vol[16300] = k % 5 == 1 ? 0.0 : 1.5 + 0.25 * (k % 3);  /* back to +0 after other values */
	for (v = 0; v < nv; v++)
		vol[v] = (float)vol[v]; /* float32 exactly, so that the float32 fit reads the same numbers */
}

/*
 * Deferring the voxels dim in the first volume gives every output of the
 * plain fit bit for bit but the deferred voxels' means (which agree to
 * rounding), with float32 volumes and 3 threads too; a deferred voxel that
 * becomes analyzable, or whose mean's sign roundoff could flip, makes the
 * finish ask for the plain fit (SR_EREDO).
 */
static void defer_dim(int with_const)
{
	enum { T = 37, P = 4, NV = 24000 };
	double X[T * P], *vol = xmalloc_array(NV, sizeof(double)), C[P] = { 1, -1, 0, 0 }, worst = 0.0;
	float *volf = xmalloc_array(NV, sizeof(float));
	glm_out o[3], w;
	glm_model *m;
	sr_err e;
	uint64_t s = 79;
	int n, k, v, same = 1, means = 1;
	size_t expect = 0, ndefer[3] = { 0, 0, 0 };
	sr_status redo_wake = SR_OK, redo_zero = SR_OK;

	sr_err_init(&e, NULL, NULL);
	random_design(X, T, P, &s);
	for (k = 0; !with_const && k < T; k++)
		X[(size_t)3 * T + k] = cos(k * 0.3);
	glm_model_make(X, T, P, &m, &e);
	defer_layout(vol, NV, 0, 0, 0);
	for (v = 0; v < NV; v++)
		expect += isfinite(vol[v]) && vol[v] < 100; /* the 98th percentile is near 500: the limit near 25 */
	/* 0: plain; 1: deferred; 2: deferred, float32 volumes, 3 threads */
	for (n = 0; n < 3; n++) {
		glm_acc *a = glm_acc_alloc(m, NV);

		glm_acc_threads(a, n == 2 ? 3 : 1);
		if (n == 2)
			glm_acc_float32(a);
		if (n > 0)
			glm_acc_defer_dim(a);
		for (k = 0; k < T; k++) {
			defer_layout(vol, NV, k, 0, 0);
			if (n == 2) {
				for (v = 0; v < NV; v++)
					volf[v] = (float)vol[v];
				glm_acc_add_f32(a, volf, &e);
			} else {
				glm_acc_add(a, vol, &e);
			}
		}
		ndefer[n] = glm_acc_deferred(a);
		CHECK(glm_acc_finish(a, GLM_AR1_ADJUSTED, C, 1, NULL, 2, &o[n], &e) == SR_OK,
		      "defer_dim (constant column %d): fit %d finishes", with_const, n);
		glm_acc_free(a);
	}
	for (n = 1; n < 3; n++)
		for (v = 0; v < NV; v++) {
			same &= same_voxel(&o[0], &o[n], v, 0);
			if (v >= 6000 && v < 9000)
				means &= memcmp(&o[0].mean[v], &o[n].mean[v], sizeof(double)) == 0;
			else if (isnan(o[0].mean[v]) != isnan(o[n].mean[v]))
				worst = INFINITY;
			else if (!isnan(o[0].mean[v]))
				worst = fmax(worst, fabs(o[0].mean[v] - o[n].mean[v]) / fmax(1.0, fabs(o[0].mean[v])));
		}
	CHECK(ndefer[0] == 0 && ndefer[1] == expect && ndefer[2] == expect && expect > 20000,
	      "defer_dim (constant column %d): the %zu voxels dim in volume 0 deferred (%zu, %zu)", with_const,
	      expect, ndefer[1], ndefer[2]);
	CHECK(isfinite(o[1].mean[15005]) && o[1].mean[15005] > 1 && o[1].mean[15503] > 2 &&
	      o[1].mean[16200] > 0.5 && o[1].mean[16300] > 1 && o[1].rule[15005] == GLM_OUT_FLOOR && o[1].rule[16200] == GLM_OUT_FLOOR,
	      "defer_dim (constant column %d): voxels +0 or -0 at first and dim later have their means and the floor rule (%g, %g, %g)",
	      with_const, o[1].mean[15005], o[1].mean[15503], o[1].mean[16200]);
	CHECK(o[0].ok[6500] && !o[0].ok[7000] && !o[0].ok[12002] && !o[0].ok[12003] && !o[0].ok[100] &&
	      o[0].rule[100] == GLM_OUT_FLOOR && o[0].rule[12001] == GLM_OUT_NONPOSITIVE &&
	      o[0].rule[12004] == GLM_OUT_NONFINITE && o[0].rule[9500] == GLM_OUT_NONPOSITIVE,
	      "defer_dim layout (constant column %d): bright voxels analyzable, each other kind left out by its rule",
	      with_const);
	CHECK(same, "defer_dim (constant column %d): every voxel's effect, var, rho, ok and rule bit for bit as the plain fit (doubles, and float32 with 3 threads)", with_const);
	CHECK(means && worst < 1e-12, "defer_dim (constant column %d): the fitted voxels' means bit for bit, the deferred ones' to rounding (worst %.2g)", with_const, worst);
	CHECK(memcmp(&o[0].ref_intensity, &o[1].ref_intensity, sizeof(double)) == 0 &&
	      memcmp(&o[0].ref_intensity, &o[2].ref_intensity, sizeof(double)) == 0 &&
	      memcmp(o[0].left_out, o[1].left_out, sizeof o[0].left_out) == 0 &&
	      memcmp(o[0].left_out, o[2].left_out, sizeof o[0].left_out) == 0,
	      "defer_dim (constant column %d): the reference intensity bit for bit and every rule's count", with_const);
	for (n = 0; n < 2; n++) {
		glm_acc *a = glm_acc_alloc(m, NV);

		glm_acc_defer_dim(a);
		for (k = 0; k < T; k++) {
			defer_layout(vol, NV, k, n == 0, n == 1);
			glm_acc_add(a, vol, &e);
		}
		if (n == 0)
			redo_wake = glm_acc_finish(a, GLM_AR1_ADJUSTED, C, 1, NULL, 1, &w, &e);
		else
			redo_zero = glm_acc_finish(a, GLM_AR1_ADJUSTED, C, 1, NULL, 1, &w, &e);
		glm_acc_free(a);
	}
	CHECK(redo_wake == SR_EREDO && w.ok == NULL,
	      "defer_dim (constant column %d): voxels dark in volume 0 and bright later ask for the plain fit", with_const);
	CHECK(redo_zero == SR_EREDO,
	      "defer_dim (constant column %d): a deferred voxel with a mean of 0 up to roundoff asks for the plain fit", with_const);
	for (n = 0; n < 3; n++)
		glm_out_release(&o[n]);
	glm_model_free(m);
	free(vol);
	free(volf);
}

/* defer_layout without the voxels that are +0 first and other values later, unless wake16200. */
static void zero_stay_layout(double *vol, int nv, int k, int wake16200)
{
	int v;

	defer_layout(vol, nv, k, 0, 0);
	for (v = 15000; v < 15010; v++)
		vol[v] = 0.0;
	if (!wake16200)
		vol[16200] = 0.0;
}

/*
 * glm_acc_defer_zero: only voxels +0 in the first volume wait, and when they
 * stay +0 every output, means included, is the plain fit's bit for bit; one
 * that wakes makes the finish ask for the plain fit.
 */
static void test_defer_zero(void)
{
	enum { T = 37, P = 4, NV = 24000 };
	double X[T * P], *vol = xmalloc_array(NV, sizeof(double)), C[P] = { 1, -1, 0, 0 };
	glm_out o[2], w;
	glm_model *m;
	sr_err e;
	uint64_t s = 83;
	int n, k, v, same = 1;
	size_t expect = 0, ndefer = 0;
	sr_status wake;
	glm_acc *a;

	sr_err_init(&e, NULL, NULL);
	random_design(X, T, P, &s);
	glm_model_make(X, T, P, &m, &e);
	zero_stay_layout(vol, NV, 0, 0);
	for (v = 0; v < NV; v++)
		expect += vol[v] == 0.0 && !signbit(vol[v]);
	for (n = 0; n < 2; n++) {
		a = glm_acc_alloc(m, NV);
		glm_acc_threads(a, 2);
		if (n == 1)
			glm_acc_defer_zero(a);
		for (k = 0; k < T; k++) {
			zero_stay_layout(vol, NV, k, 0);
			glm_acc_add(a, vol, &e);
		}
		if (n == 1)
			ndefer = glm_acc_deferred(a);
		glm_acc_finish(a, GLM_AR1_ADJUSTED, C, 1, NULL, 2, &o[n], &e);
		glm_acc_free(a);
	}
	for (v = 0; v < NV; v++)
		same &= same_voxel(&o[0], &o[1], v, 1);
	CHECK(ndefer == expect && expect > 9000, "defer_zero: the %zu voxels at +0 in volume 0 wait (%zu), the -0 and dim ones do not", expect, ndefer);
	CHECK(same && memcmp(&o[0].ref_intensity, &o[1].ref_intensity, sizeof(double)) == 0,
	      "defer_zero: every voxel's effect, var, rho, mean, ok and rule and the reference intensity bit for bit as the plain fit");
	a = glm_acc_alloc(m, NV);
	glm_acc_defer_zero(a);
	for (k = 0; k < T; k++) {
		zero_stay_layout(vol, NV, k, 1);
		glm_acc_add(a, vol, &e);
	}
	wake = glm_acc_finish(a, GLM_AR1_ADJUSTED, C, 1, NULL, 1, &w, &e);
	glm_acc_free(a);
	CHECK(wake == SR_EREDO, "defer_zero: a voxel at +0 in volume 0 and 4 from volume 30 asks for the plain fit");
	for (n = 0; n < 2; n++)
		glm_out_release(&o[n]);
	glm_model_free(m);
	free(vol);
}

static void test_defer_dim(void)
{
	defer_dim(1);
	defer_dim(0);
}

/*
 * A run whose sums are larger than 32 MB takes float32 batches of 8 instead
 * of 4 (glm.c's batch_size): the same bits as the double batches of 4.
 */
static void test_big_float32(void)
{
	enum { T = 21, P = 4, NV = 600000 };
	double X[T * P], *vol = xmalloc_array(NV, sizeof(double)), C[P] = { 1, -1, 0, 0 };
	float *volf = xmalloc_array(NV, sizeof(float));
	glm_out o[2];
	glm_model *m;
	sr_err e;
	uint64_t s = 81;
	int n, k, v, same = 1, nok = 0;

	sr_err_init(&e, NULL, NULL);
	random_design(X, T, P, &s);
	glm_model_make(X, T, P, &m, &e);
	for (n = 0; n < 2; n++) {
		glm_acc *a = glm_acc_alloc(m, NV);

		glm_acc_threads(a, 2);
		if (n == 1)
			glm_acc_float32(a);
		for (k = 0; k < T; k++) {
			for (v = 0; v < NV; v++) {
				uint64_t st = (uint64_t)v * 7907u + (uint64_t)k + 3;

				vol[v] = (float)(v % 3 == 0 ? 0.0 : 800 + v % 11 + 3 * nrand(&st));
				volf[v] = (float)vol[v];
			}
			if (n == 1)
				glm_acc_add_f32(a, volf, &e);
			else
				glm_acc_add(a, vol, &e);
		}
		glm_acc_finish(a, GLM_AR1_ADJUSTED, C, 1, NULL, 2, &o[n], &e);
		glm_acc_free(a);
	}
	for (v = 0; v < NV; v++) {
		same &= same_voxel(&o[0], &o[1], v, 1);
		nok += o[0].ok[v];
	}
	CHECK(same && nok == 400000, "float32 run with sums over 32 MB (batches of 8): every voxel's bits as double batches of 4 (%d analyzable)", nok);
	for (n = 0; n < 2; n++)
		glm_out_release(&o[n]);
	glm_model_free(m);
	free(vol);
	free(volf);
}

int main(void)
{
	test_longley();
	test_prais_winsten_example();
	test_identities();
	test_stream_vs_explicit();
	test_rank_deficient();
	test_analyzable();
	test_ffx();
	test_threads();
	test_zero_background();
	test_fit_only();
	test_float32_batches();
	test_defer_dim();
	test_defer_zero();
	test_big_float32();
	return TEST_DONE();
}
