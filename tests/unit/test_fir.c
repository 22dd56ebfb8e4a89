/* test_fir.c - FIR columns against a hand-built matrix; recovery of a response shape, overlapping events. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "core/design.h"
#include "core/fir.h"
#include "testlib.h"

static void test_bins(void)
{
	CHECK(fir_nbins(20, 2) == 10, "20 s at TR 2 s: 10 bins");
	CHECK(fir_nbins(20, 3) == 6, "20 s at TR 3 s: 6 bins (floor)");
	CHECK(fir_nbins(0.3 * 3, 0.3) == 3, "0.9 s at TR 0.3 s: 3 bins despite 0.9/0.3 < 3 in binary");
	CHECK(fir_nbins(1, 2) == 1, "a window shorter than the TR still has one bin");
}

static void test_columns(void)
{
	/* T 8, TR 2, volume_time 0.5: volume times 1, 3, 5, ..., 15 s */
	const design_event ev[4] = { { 0.0, 1.0, 0 }, { 4.5, 0.0, 0 }, { 3.0, 2.0, 1 }, { 0.5, 0.0, 0 } };
	double F[8 * 3], want[8 * 3];

	/* by hand, condition 0, events at 0, 4.5 and 0.5 s:
	   onset 0:   lags (t_k - 0)/2 = 0.5, 1.5, 2.5 -> bins 0, 1, 2 at volumes 0, 1, 2
	   onset 4.5: lags at volumes 2, 3, 4 = 0.25, 1.25, 2.25 -> bins 0, 1, 2
	   onset 0.5: lags at volumes 0, 1, 2 = 0.25, 1.25, 2.25 -> bins 0, 1, 2 (overlaps onset 0: adds) */
	memset(want, 0, sizeof want);
	want[0 + 8 * 0] = 2;
	want[1 + 8 * 1] = 2;
	want[2 + 8 * 2] = 2;
	want[2 + 8 * 0] = 1;
	want[3 + 8 * 1] = 1;
	want[4 + 8 * 2] = 1;
	fir_columns(8, 2.0, 0.5, ev, 4, 0, 3, F);
	CHECK(memcmp(F, want, sizeof F) == 0, "condition 0's FIR columns equal the hand-built matrix");
	/* condition 1, onset 3 s: volume 1 (3 s) has lag 0 -> bin 0; volumes 2, 3 -> bins 1, 2 */
	memset(want, 0, sizeof want);
	want[1 + 8 * 0] = 1;
	want[2 + 8 * 1] = 1;
	want[3 + 8 * 2] = 1;
	fir_columns(8, 2.0, 0.5, ev, 4, 1, 3, F);
	CHECK(memcmp(F, want, sizeof F) == 0,
	      "condition 1: an onset exactly at a volume time falls in bin 0 (durations unused)");
}

static double unif(unsigned long *s)
{
	*s = *s * 6364136223846793005UL + 1442695040888963407UL;
	return (double)(*s >> 11) / 9007199254740992.0;
}

static double gauss(unsigned long *s)
{
	double u = unif(s), v = unif(s);

	return sqrt(-2.0 * log(u > 1e-300 ? u : 1e-300)) * cos(6.283185307179586 * v);
}

/* Mean of the kernel over lags [a, b) (fine grid), in the kernel's own units (sum h dt = 1). */
static double kernel_mean(const double *h, size_t M, double a, double b)
{
	double s = 0;
	int n = 0;
	size_t m;

	for (m = 0; m < M; m++) {
		double t = (double)m * DESIGN_DT;

		if (t >= a && t < b) {
			s += h[m];
			n++;
		}
	}
	return n ? s / n : 0;
}

static double corr(const double *a, const double *b, int n)
{
	double ma = 0, mb = 0, sab = 0, saa = 0, sbb = 0;
	int i;

	for (i = 0; i < n; i++) {
		ma += a[i] / n;
		mb += b[i] / n;
	}
	for (i = 0; i < n; i++) {
		sab += (a[i] - ma) * (b[i] - mb);
		saa += (a[i] - ma) * (a[i] - ma);
		sbb += (b[i] - mb) * (b[i] - mb);
	}
	return sab / sqrt(saa * sbb);
}

/* Brief events every 3-7 s (responses overlap: the kernel lasts 32 s), the canonical response, noise. */
static void test_recovery(double noise, const char *what)
{
	enum { T = 300, NB = 10 };   /* the default 20 s window */
	const double tr = 2.0, amp = 2.0;
	design_event ev[200];
	size_t nev = 0, M = design_hrf(DESIGN_DT, NULL);
	double *h = malloc(M * sizeof *h), *x = malloc(T * sizeof *x), y[T], nuis[T * 3], beta[NB];
	double truth[NB];
	unsigned long seed = 7;
	double t = 2.0;
	sr_err e;
	int k, b, pk = 0, tk = 0;

	sr_err_init(&e, NULL, NULL);
	design_hrf(DESIGN_DT, h);
	while (t < T * tr - 30 && nev < 200) {
		ev[nev].onset = t;
		ev[nev].duration = 0.0;
		ev[nev].cond = 0;
		nev++;
		t += 3.0 + 4.0 * unif(&seed);
	}
	design_regressors(T, tr, 0.5, ev, nev, 1, x, &e);
	for (k = 0; k < T; k++) {
		double drift = 0.5 * cos(3.141592653589793 * (2 * k + 1) / (2.0 * T));

		y[k] = 100.0 + amp * x[k] + drift + noise * gauss(&seed);
		nuis[k] = sqrt(2.0 / T) * cos(3.141592653589793 * (2 * k + 1) / (2.0 * T));
		nuis[k + T] = sqrt(2.0 / T) * cos(3.141592653589793 * 2 * (2 * k + 1) / (2.0 * T));
		nuis[k + 2 * T] = 1.0;
	}
	CHECK(fir_fit(T, tr, 0.5, ev, nev, 1, NB, nuis, 3, y, beta, &e) == SR_OK, "%s: FIR fit runs", what);
	/* the truth of bin b: the response to a unit impulse, averaged over the lags the bin holds
	   (jittered onsets spread them evenly over [b TR, (b + 1) TR)), times amp */
	for (b = 0; b < NB; b++) {
		truth[b] = amp * kernel_mean(h, M, b * tr, (b + 1) * tr);
		if (truth[b] > truth[tk])
			tk = b;
		if (beta[b] > beta[pk])
			pk = b;
	}
	/* onsets fall anywhere within a TR, so a bin mixes lags up to a TR apart and the estimate
	   is a little smoother than the truth: r about 0.985 without noise (seed 7) */
	CHECK(corr(beta, truth, NB) > (noise > 0 ? 0.9 : 0.98), "%s: FIR estimate follows the true shape (r = %.4f)",
	      what, corr(beta, truth, NB));
	CHECK(abs(pk - tk) <= 1, "%s: peak bin %d (%g s) within one bin of the true peak bin %d", what, pk,
	      pk * tr, tk);
	free(h);
	free(x);
}

/*
 * Onsets on the volume grid (intervals of 2, 4 or 6 s at TR 2 s): every lag
 * is (b + 0.5) TR exactly, so the FIR estimate must equal the kernel there
 * (noise-free, a 32 s window holding the whole response).
 */
static void test_exact(void)
{
	enum { T = 300, NB = 16 };
	const double tr = 2.0;
	design_event ev[300];
	size_t nev = 0;
	unsigned long seed = 11;
	double t = 2.0, x[T], y[T], one[T], beta[NB], worst = 0;
	double norm = 0;
	sr_err e;
	int k, b;
	size_t M = design_hrf(DESIGN_DT, NULL), m;

	sr_err_init(&e, NULL, NULL);
	for (m = 0; m < M; m++)   /* the kernel's scale: sum h dt = 1 (METHODS.md section 2) */
		norm += design_hrf_raw((double)m * DESIGN_DT) * DESIGN_DT;
	while (t < T * tr - 40 && nev < 300) {
		ev[nev].onset = t;
		ev[nev].duration = 0.0;
		ev[nev].cond = 0;
		nev++;
		t += 2.0 * (1 + floor(3 * unif(&seed)));
	}
	design_regressors(T, tr, 0.5, ev, nev, 1, x, &e);
	for (k = 0; k < T; k++) {
		y[k] = 100.0 + x[k];
		one[k] = 1.0;
	}
	fir_fit(T, tr, 0.5, ev, nev, 1, NB, one, 1, y, beta, &e);
	for (b = 0; b < NB; b++) {
		double want = design_hrf_raw((b + 0.5) * tr) / norm;

		if (fabs(beta[b] - want) > worst)
			worst = fabs(beta[b] - want);
	}
	CHECK(worst < 1e-6, "onsets on the volume grid, overlapping: FIR bins equal the kernel at (b + 0.5) TR (worst %.2g)",
	      worst);
}

int main(void)
{
	test_bins();
	test_columns();
	test_recovery(0.0, "noise-free, overlapping events");
	test_recovery(0.3, "noise sd 0.3%, overlapping events");
	test_exact();
	return TEST_DONE();
}
