/* test_design.c - the HRF, drift basis, regressors and confounds against published values and hand-worked cases. */
#include <math.h>
#include <string.h>

#include "core/design.h"
#include "testlib.h"

/* Ternary search for the extremum of design_hrf_raw on [a, b] (sign = +1 max, -1 min). */
static double extremum(double a, double b, double sign)
{
	for (int i = 0; i < 200; i++) {
		double m1 = a + (b - a) / 3, m2 = b - (b - a) / 3;

		if (sign * design_hrf_raw(m1) < sign * design_hrf_raw(m2))
			a = m1;
		else
			b = m2;
	}
	return (a + b) / 2;
}

/* Composite Simpson's rule for design_hrf_raw on [a, b] with n (even) panels. */
static double simpson(double a, double b, int n)
{
	double hstep = (b - a) / n, s = design_hrf_raw(a) + design_hrf_raw(b);

	for (int i = 1; i < n; i++)
		s += design_hrf_raw(a + i * hstep) * (i % 2 ? 4 : 2);
	return s * hstep / 3;
}

static void test_kernel(void)
{
	/*
	 * Computed with scipy.stats.gamma (pdf(t, 6) - pdf(t, 16) / 6), REFERENCES.md;
	 * the form is Friston et al. 1998. Tolerance: half a unit in the last digit given.
	 */
	static const struct { double t, h, tol; } ref[] = {
		{ 1, 0.00306566, 5e-9 },    { 2, 0.0360894, 5e-8 },     { 4, 0.156291, 5e-7 },
		{ 5, 0.175441, 5e-7 },      { 6, 0.160475, 5e-7 },      { 8, 0.0900993, 5e-8 },
		{ 10, 0.0320469, 5e-8 },    { 12, 0.000675452, 5e-10 }, { 15, -0.0151369, 5e-8 },
		{ 16, -0.0155529, 5e-8 },   { 20, -0.00855318, 5e-9 },  { 30, -0.000171114, 5e-10 },
	};
	double lo = 10, hi = 14, h[700], sum = 0;
	size_t M, m, arg = 0;

	for (size_t i = 0; i < sizeof ref / sizeof ref[0]; i++) {
		char name[64];

		snprintf(name, sizeof name, "raw kernel h(%g) vs scipy (REFERENCES.md)", ref[i].t);
		CHECK_NEAR(design_hrf_raw(ref[i].t), ref[i].h, ref[i].tol, name);
	}
	CHECK(design_hrf_raw(0) == 0.0, "h(0) is exactly 0");
	CHECK(design_hrf_raw(-1) == 0.0 && design_hrf_raw(-1e-300) == 0.0, "h(t < 0) = 0");
	CHECK(isfinite(design_hrf_raw(1e-300)) && design_hrf_raw(1e-300) >= 0,
	      "h near 0+ is finite (no log overflow)");

	/* Published shape points (REFERENCES.md, computed with scipy). */
	CHECK_NEAR(extremum(3, 7, 1), 4.99851, 5e-6, "raw kernel peak at 4.99851 s");
	CHECK_NEAR(extremum(14, 18, -1), 15.7488, 5e-5, "undershoot minimum at 15.7488 s");
	CHECK_NEAR(design_hrf_raw(extremum(14, 18, -1)), -0.0155986, 5e-8,
		   "undershoot minimum value -0.0155986");
	for (int i = 0; i < 100; i++) {
		double mid = (lo + hi) / 2;

		if (design_hrf_raw(mid) > 0)
			lo = mid;
		else
			hi = mid;
	}
	CHECK_NEAR(lo, 12.0655, 5e-5, "zero crossing at 12.0655 s");
	CHECK_NEAR(simpson(0, 32, 6400), 0.833443, 5e-7, "area over 0..32 s = 0.833443");
	CHECK_NEAR(simpson(0, 200, 40000), 5.0 / 6.0, 1e-9,
		   "area over 0..inf = 1 - 1/6 (two unit-area densities)");

	/* Scaled kernel on the 0.05 s grid. */
	M = design_hrf(DESIGN_DT, NULL);
	CHECK(M == 640, "M = round(32 / 0.05) = 640 (got %zu)", M);
	CHECK(design_hrf(0.1, NULL) == 320, "M = 320 at dt = 0.1");
	CHECK(design_hrf(0, NULL) == 0 && design_hrf(-1, NULL) == 0 && design_hrf(NAN, NULL) == 0,
	      "bad dt gives M = 0");
	CHECK(design_hrf(DESIGN_DT, h) == 640, "design_hrf fills 640 samples");
	for (m = 0; m < M; m++) {
		sum += h[m];
		if (h[m] > h[arg])
			arg = m;
	}
	CHECK_NEAR(sum * DESIGN_DT, 1.0, 1e-12, "scaled kernel: sum * dt = 1");
	CHECK_NEAR(arg * DESIGN_DT, 5.00, 1e-12, "scaled kernel argmax at 5.00 s on the 0.05 s grid");
	CHECK(h[0] == 0.0, "scaled kernel h_0 = 0");
	CHECK_CLOSE(h[100] / h[20], design_hrf_raw(5.0) / design_hrf_raw(1.0), 1e-13,
		    "scaling is one common factor");
}

static void test_drift(void)
{
	/* REFERENCES.md: counts at cutoff 128 s; T = 256, TR = 2 is the kept boundary. */
	CHECK(design_drift_count(200, 2, 128) == 6, "Q(T=200, TR=2) = 6");
	CHECK(design_drift_count(150, 2, 128) == 4, "Q(T=150, TR=2) = 4");
	CHECK(design_drift_count(240, 2.5, 128) == 9, "Q(T=240, TR=2.5) = 9");
	CHECK(design_drift_count(256, 2, 128) == 8, "Q(T=256, TR=2) = 8 (boundary kept)");
	CHECK(design_drift_count(100, 0.7, 128.0) == 1, "Q(T=100, TR=0.7) = floor(1.09) = 1");
	CHECK(design_drift_count(200, 2, 0) == 0 && design_drift_count(200, 2, -1) == 0,
	      "cutoff <= 0 disables drift");
	CHECK(design_drift_count(10, 2, 1) == 9, "Q capped at T - 1");
	CHECK(design_drift_count(1, 2, 128) == 0, "one volume: no drift");

	static const int cases[][2] = { { 200, 6 }, { 256, 8 }, { 7, 6 }, { 1000, 30 } };
	static double C[1000 * 30];
	for (size_t ci = 0; ci < sizeof cases / sizeof cases[0]; ci++) {
		int T = cases[ci][0], Q = cases[ci][1];
		double worst = 0, worst_mean = 0;

		design_drift(T, Q, C);
		for (int a = 0; a < Q; a++) {
			double s = 0;

			for (int k = 0; k < T; k++)
				s += C[a * T + k];
			if (fabs(s) > worst_mean)
				worst_mean = fabs(s);
			for (int b = 0; b < Q; b++) {
				double dot = 0;

				for (int k = 0; k < T; k++)
					dot += C[a * T + k] * C[b * T + k];
				dot -= a == b;
				if (fabs(dot) > worst)
					worst = fabs(dot);
			}
		}
		/* Orthonormal DCT-II (scipy.fft.dct docs): C'C = I, columns orthogonal to 1. */
		CHECK(worst <= 1e-12, "T=%d Q=%d: C'C = I to 1e-12 (worst %.3g)", T, Q, worst);
		CHECK(worst_mean <= 1e-12, "T=%d Q=%d: cosines sum to 0 (worst %.3g)", T, Q,
		      worst_mean);
	}
	design_drift(4, 1, C);
	/* By hand: sqrt(2/4) cos(pi (2k+1) / 8) = cos(pi/8)/sqrt2 ... */
	CHECK_CLOSE(C[0], sqrt(0.5) * cos(M_PI / 8), 1e-15, "c_1(0) for T = 4 by hand");
	CHECK_CLOSE(C[3], sqrt(0.5) * cos(7 * M_PI / 8), 1e-15, "c_1(3) for T = 4 by hand");
}

/* Regressor of one condition from the given events; returns the status. */
static sr_status reg1(int T, double tr, double s, const design_event *ev, size_t nev, double *out)
{
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	return design_regressors(T, tr, s, ev, nev, 1, out, &e);
}

static double maxdiff(const double *a, const double *b, int n)
{
	double w = 0;

	for (int i = 0; i < n; i++)
		if (fabs(a[i] - b[i]) > w)
			w = fabs(a[i] - b[i]);
	return w;
}

static void test_regressors(void)
{
	enum { T = 120 };
	static double x[400], y[400], z[400], h[640];
	double hsum = 0;
	sr_err e;

	design_hrf(DESIGN_DT, h);
	for (int m = 0; m < 640; m++)
		hsum += design_hrf_raw(m * DESIGN_DT);

	/* A sustained stimulus plateaus at 1 (the unit-area scaling, METHODS.md 2). */
	design_event longblock = { 0, 1000, 0 };
	CHECK(reg1(T, 2, 0.5, &longblock, 1, x) == SR_OK, "long block builds");
	CHECK_NEAR(x[T - 1], 1.0, 1e-12, "sustained block plateaus at 1");
	CHECK_NEAR(x[0], 0.0, 1e-3, "sustained block starts near 0");

	/*
	 * An impulse on a frame time with s = 0: the regressor is the kernel
	 * itself, h_raw(t - onset) / (sum h_raw dt) * (1/dt) * dt.
	 */
	design_event imp = { 10, 0, 0 };
	CHECK(reg1(T, 2, 0, &imp, 1, x) == SR_OK, "impulse builds");
	double worst = 0;
	for (int k = 0; k < T; k++) {
		double t = 2.0 * k - 10, want = t < 32 ? design_hrf_raw(t) / (hsum * DESIGN_DT) : 0;

		if (fabs(x[k] - want) > worst)
			worst = fabs(x[k] - want);
	}
	CHECK(worst < 1e-12, "impulse at 10 s = scaled kernel shifted by 10 s (worst %.3g)", worst);

	/* Decimal onset on a bin edge: 0.15 / 0.05 = 2.9999999999999996 in binary. */
	design_event imp15 = { 0.15, 0, 0 };
	CHECK(reg1(T, 0.05, 0, &imp15, 1, x) == SR_OK, "impulse at 0.15 s builds");
	CHECK(fabs(x[3]) < 1e-20 && x[4] > 0.0 && fabs(x[4] - h[1]) < 1e-15,
	      "impulse at 0.15 s starts in bin 3, not bin 2 (x3=%g x4=%g)", x[3], x[4]);

	/* A one-bin block (height 1, area dt) equals dt times a unit-area impulse there. */
	design_event bin1 = { 10, 0.05, 0 };
	reg1(T, 2, 0.5, &bin1, 1, y);
	reg1(T, 2, 0.5, &imp, 1, x);
	for (int k = 0; k < T; k++)
		x[k] *= DESIGN_DT;
	CHECK(maxdiff(x, y, T) < 1e-12, "a 0.05 s block on one bin = an impulse there (diff %.3g)",
	      maxdiff(x, y, T));

	/* Partial bins: [10.025, 10.075) covers half of bins 200 and 201 -> average of two impulses. */
	design_event half = { 10.025, 0.05, 0 }, imp2 = { 10.05, 0, 0 };
	reg1(T, 2, 0.5, &half, 1, z);
	reg1(T, 2, 0.5, &imp, 1, x);
	reg1(T, 2, 0.5, &imp2, 1, y);
	for (int k = 0; k < T; k++)
		y[k] = 0.025 * (x[k] + y[k]);
	CHECK(maxdiff(z, y, T) < 1e-12, "half-bin cover on both sides (diff %.3g)", maxdiff(z, y, T));

	/* Overlapping events add; linearity. */
	design_event two[2] = { { 20, 8, 0 }, { 24, 8, 0 } }, a1 = { 20, 8, 0 }, a2 = { 24, 8, 0 };
	reg1(T, 2, 0.5, two, 2, z);
	reg1(T, 2, 0.5, &a1, 1, x);
	reg1(T, 2, 0.5, &a2, 1, y);
	for (int k = 0; k < T; k++)
		y[k] += x[k];
	CHECK(maxdiff(z, y, T) < 1e-12, "overlapping events add (diff %.3g)", maxdiff(z, y, T));

	/* Parts before 0 s are dropped: [-5, 5) = [0, 5). */
	design_event neg = { -5, 10, 0 }, pos = { 0, 5, 0 }, allneg = { -10, 5, 0 }, negimp = { -1, 0, 0 };
	reg1(T, 2, 0.5, &neg, 1, x);
	reg1(T, 2, 0.5, &pos, 1, y);
	CHECK(maxdiff(x, y, T) < 1e-15, "event part before 0 s dropped");
	reg1(T, 2, 0.5, &allneg, 1, x);
	reg1(T, 2, 0.5, &negimp, 1, y);
	CHECK(maxdiff(x, y, T) == 0 && x[T / 2] == 0, "events wholly before 0 s give zeros");

	/* Events past the end contribute nothing inside the run, and do not crash. */
	design_event late[3] = { { 1e6, 10, 0 }, { 1e300, 0, 0 }, { 239.99, 1e308, 0 } };
	CHECK(reg1(T, 2, 0.5, late, 2, x) == SR_OK, "events past the end accepted");
	for (int k = 0; k < T; k++)
		y[k] = 0;
	CHECK(maxdiff(x, y, T) == 0, "events past the end: all zeros inside the run");
	CHECK(reg1(T, 2, 1.0, late + 2, 1, x) == SR_OK && x[T - 1] > 0 && x[T - 1] < 1e-3,
	      "event at the last moment, huge duration: tiny start at the last frame (s = 1)");

	/* Fact of the trade: BOLD peaks ~5-6 s after a brief stimulus (Huettel & McCarthy 2000). */
	design_event brief = { 20, 1, 0 };
	reg1(400, 0.1, 0, &brief, 1, x);
	int arg = 0;
	for (int k = 0; k < 400; k++)
		if (x[k] > x[arg])
			arg = k;
	CHECK(arg * 0.1 - 20 >= 5 && arg * 0.1 - 20 <= 6, "1 s event peaks 5-6 s after onset (%.1f s)",
	      arg * 0.1 - 20);

	/* Slice reference shifts the read times: s = 0.5 at TR 2 reads 1 s later. */
	design_event blk = { 11, 6, 0 };
	reg1(T, 2, 0.5, &blk, 1, x);
	reg1(2 * T, 1, 0, &blk, 1, z);
	for (int k = 0; k < T - 1; k++)
		y[k] = z[2 * k + 1];
	CHECK(maxdiff(x, y, T - 1) < 1e-12, "slice reference 0.5 at TR 2 = TR 1 read at odd frames");

	/* Errors. */
	sr_err_init(&e, NULL, NULL);
	CHECK(design_regressors(0, 2, 0.5, &blk, 1, 1, x, &e) == SR_EDIM, "T = 0 rejected: %s", e.msg);
	CHECK(design_regressors(T, 0, 0.5, &blk, 1, 1, x, &e) == SR_EINVAL, "TR = 0 rejected: %s", e.msg);
	CHECK(design_regressors(T, NAN, 0.5, &blk, 1, 1, x, &e) == SR_EINVAL, "TR NaN rejected");
	CHECK(design_regressors(T, 2, 1.5, &blk, 1, 1, x, &e) == SR_EINVAL,
	      "slice reference 1.5 rejected: %s", e.msg);
	CHECK(design_regressors(T, 2, -0.1, &blk, 1, 1, x, &e) == SR_EINVAL, "slice reference < 0 rejected");
	design_event bad[3] = { { 1, 1, 1 }, { 1, -1, 0 }, { NAN, 1, 0 } };
	CHECK(design_regressors(T, 2, 0.5, bad, 1, 1, x, &e) == SR_EINVAL && strstr(e.msg, "condition"),
	      "condition out of range rejected: %s", e.msg);
	CHECK(design_regressors(T, 2, 0.5, bad + 1, 1, 1, x, &e) == SR_EINVAL && strstr(e.msg, "duration"),
	      "negative duration rejected: %s", e.msg);
	CHECK(design_regressors(T, 2, 0.5, bad + 2, 1, 1, x, &e) == SR_EINVAL && strstr(e.msg, "onset"),
	      "NaN onset rejected: %s", e.msg);
	CHECK(design_regressors(T, 2000, 0.5, &blk, 1, 1, x, &e) == SR_OK, "TR 2000 s still fits");
	CHECK(design_regressors(T, 1e9, 0.5, &blk, 1, 1, x, &e) == SR_EDIM, "absurd run length rejected: %s",
	      e.msg);
}

static void test_confounds(void)
{
	sr_err e;
	/* By hand: [1, n/a, 3, 4] -> mean of numeric 8/3 -> [-5/3, 0, 1/3, 4/3]. */
	double c[8] = { 1, NAN, 3, 4, 2, 2, 2, 2 };

	sr_err_init(&e, NULL, NULL);
	CHECK(design_confounds(4, 2, c, &e) == SR_OK, "confounds with n/a accepted");
	CHECK_NEAR(c[0], -5.0 / 3, 1e-15, "n/a column: 1 - 8/3");
	CHECK(c[1] == 0.0, "n/a cell becomes the mean, so 0 after demeaning");
	CHECK_NEAR(c[2], 1.0 / 3, 1e-15, "n/a column: 3 - 8/3");
	CHECK_NEAR(c[3], 4.0 / 3, 1e-15, "n/a column: 4 - 8/3");
	CHECK(c[4] == 0 && c[7] == 0, "constant column demeaned to 0");

	double d[6] = { 1, 2, 3, NAN, NAN, NAN };
	CHECK(design_confounds(3, 2, d, &e) == SR_EFORMAT && strstr(e.msg, "column 2"),
	      "column without numbers rejected, named: %s", e.msg);
	double f[3] = { 1, INFINITY, 3 };
	CHECK(design_confounds(3, 1, f, &e) == SR_EFORMAT && strstr(e.msg, "row 2"),
	      "infinite cell rejected: %s", e.msg);
	CHECK(design_confounds(0, 1, f, &e) == SR_EDIM, "T = 0 rejected");
	CHECK(design_confounds(3, 0, NULL, &e) == SR_OK, "no confounds is fine");
}

static void test_build(void)
{
	enum { T = 200 };
	static double conf[2 * T], reg[2 * T], C[6 * T];
	design_event ev[3] = { { 10, 20, 0 }, { 50, 20, 1 }, { 90.5, 0, 0 } };
	design d;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	for (int k = 0; k < T; k++) {
		conf[k] = sin(k * 0.1);
		conf[T + k] = k % 3 - 1.0;
	}
	design_confounds(T, 2, conf, &e);
	CHECK(design_build(T, 2, 0.5, ev, 3, 2, conf, 2, 128, &d, &e) == SR_OK, "design builds");
	CHECK(d.p == 2 + 2 + 6 + 1 && d.ncond == 2 && d.nconf == 2 && d.ndrift == 6 && d.T == T,
	      "columns: 2 conditions, 2 confounds, 6 cosines, constant (p = %d)", d.p);
	design_regressors(T, 2, 0.5, ev, 3, 2, reg, &e);
	design_drift(T, 6, C);
	CHECK(maxdiff(d.X, reg, 2 * T) == 0, "condition block first");
	CHECK(maxdiff(d.X + 2 * T, conf, 2 * T) == 0, "confound block second");
	CHECK(maxdiff(d.X + 4 * T, C, 6 * T) == 0, "cosine block third");
	int ones = 1;
	for (int k = 0; k < T; k++)
		ones &= d.X[10 * T + k] == 1.0;
	CHECK(ones, "last column all ones");
	design_release(&d);
	CHECK(d.X == NULL, "release empties");
	design_release(&d);

	CHECK(design_build(T, 2, 0.5, ev, 3, 2, NULL, 0, 0, &d, &e) == SR_OK && d.p == 3 &&
		      d.ndrift == 0,
	      "no confounds, no drift: p = 3");
	design_release(&d);
	CHECK(design_build(T, 2, 0.5, NULL, 0, 0, NULL, 0, 128, &d, &e) == SR_OK && d.p == 7,
	      "no conditions: cosines and constant");
	design_release(&d);
	CHECK(design_build(T, 2, 0.5, ev, 3, 1, NULL, 0, 128, &d, &e) == SR_EINVAL && d.X == NULL,
	      "bad condition index: error, design empty: %s", e.msg);
	CHECK(design_build(T, 2, 0.5, ev, 3, 2, NULL, 1, 128, &d, &e) == SR_EINVAL,
	      "confound count without array rejected");
	conf[5] = NAN;
	CHECK(design_build(T, 2, 0.5, ev, 3, 2, conf, 2, 128, &d, &e) == SR_EFORMAT,
	      "unfilled n/a in confounds rejected: %s", e.msg);
	CHECK(design_build(-1, 2, 0.5, ev, 3, 2, NULL, 0, 128, &d, &e) == SR_EDIM, "T < 1 rejected");
}

int main(void)
{
	test_kernel();
	test_drift();
	test_regressors();
	test_confounds();
	test_build();
	return TEST_DONE();
}
