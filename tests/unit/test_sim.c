/* test_sim.c - the simulator's numerics: generator reference values, noise statistics, phantom shape, regions, events. */
#include <math.h>
#include <stdint.h>
#include <string.h>

#include "core/design.h"
#include "core/mem.h"
#include "core/sim.h"
#include "testlib.h"

static void small_space(sim_space *sp)
{
	/* 24x28x20 voxels of 3 mm, world origin at the centre, axes aligned (the --grid small layout) */
	memset(sp, 0, sizeof *sp);
	sp->nx = 24;
	sp->ny = 28;
	sp->nz = 20;
	sp->affine[0][0] = sp->affine[1][1] = sp->affine[2][2] = 3.0;
	sp->affine[0][3] = -3.0 * 23 / 2;
	sp->affine[1][3] = -3.0 * 27 / 2;
	sp->affine[2][3] = -3.0 * 19 / 2;
}

static void test_generators(void)
{
	uint64_t st = 0;
	uint64_t s4[4] = { 1, 2, 3, 4 };
	sim_rng a, b, c;
	int i, same = 1, diff_stream = 0, diff_seed = 0;

	/* splitmix64 from state 0: the reference outputs quoted with Vigna's
	 * splitmix64.c and Java's SplittableRandom (from memory) */
	CHECK(sim_splitmix64(&st) == UINT64_C(0xE220A8397B1DCDAF), "splitmix64(0) 1st output");
	CHECK(sim_splitmix64(&st) == UINT64_C(0x6E789E6AA1B965F4), "splitmix64(0) 2nd output");
	CHECK(sim_splitmix64(&st) == UINT64_C(0x06C45D188009454F), "splitmix64(0) 3rd output");
	/* xoshiro256** from state {1, 2, 3, 4}: the first value is rotl(2 * 5, 7) * 9 = 11520
	 * by hand; the next three are the published test vector (from memory) */
	sim_rng_set_state(&a, s4);
	CHECK(sim_rng_next(&a) == 11520u, "xoshiro256** 1st output is 11520");
	CHECK(sim_rng_next(&a) == 0u, "xoshiro256** 2nd output is 0");
	CHECK(sim_rng_next(&a) == UINT64_C(1509978240), "xoshiro256** 3rd output");
	CHECK(sim_rng_next(&a) == UINT64_C(1215971899390074240), "xoshiro256** 4th output");

	sim_rng_seed(&a, 42, 7);
	sim_rng_seed(&b, 42, 7);
	for (i = 0; i < 1000; i++)
		if (sim_rng_next(&a) != sim_rng_next(&b))
			same = 0;
	CHECK(same, "same seed and stream give the same 1000 outputs");
	sim_rng_seed(&a, 42, 7);
	sim_rng_seed(&b, 42, 8);
	sim_rng_seed(&c, 43, 7);
	for (i = 0; i < 100; i++) {
		uint64_t x = sim_rng_next(&a);

		diff_stream += x != sim_rng_next(&b);
		diff_seed += x != sim_rng_next(&c);
	}
	CHECK(diff_stream == 100, "another stream differs at every draw (%d of 100)", diff_stream);
	CHECK(diff_seed == 100, "another seed differs at every draw (%d of 100)", diff_seed);
}

static void test_distributions(void)
{
	enum { N = 400000 };
	sim_rng r;
	double su = 0, sz = 0, sz2 = 0, below = 0, umin = 1, umax = 0;
	int i;

	sim_rng_seed(&r, 1, 1);
	for (i = 0; i < N; i++) {
		double u = sim_rng_uniform(&r), z = sim_rng_normal(&r);

		su += u;
		umin = u < umin ? u : umin;
		umax = u > umax ? u : umax;
		sz += z;
		sz2 += z * z;
		below += z < 1.959963985;
	}
	CHECK(umin >= 0.0 && umax < 1.0, "uniform draws lie in [0, 1)");
	/* uniform mean 1/2, SD of the mean sqrt(1/12/N); bounds at 4 standard errors */
	CHECK_NEAR(su / N, 0.5, 4 * sqrt(1.0 / 12 / N), "uniform mean within 4 SE of 1/2");
	CHECK_NEAR(sz / N, 0.0, 4 / sqrt((double)N), "normal mean within 4 SE of 0");
	/* variance of s^2 for N(0,1) is 2/N */
	CHECK_NEAR(sz2 / N - (sz / N) * (sz / N), 1.0, 4 * sqrt(2.0 / N), "normal variance within 4 SE of 1");
	/* P(Z < 1.959964) = 0.975 (textbook normal table); binomial SE */
	CHECK_NEAR(below / N, 0.975, 4 * sqrt(0.975 * 0.025 / N), "normal 97.5% quantile within 4 SE");
}

static void ar1_stats(const double *x, size_t n, double *var, double *r1)
{
	double m = 0, s0 = 0, s1 = 0;
	size_t k;

	for (k = 0; k < n; k++)
		m += x[k];
	m /= (double)n;
	for (k = 0; k < n; k++) {
		s0 += (x[k] - m) * (x[k] - m);
		if (k > 0)
			s1 += (x[k] - m) * (x[k - 1] - m);
	}
	*var = s0 / (double)n;
	*r1 = s1 / s0;
}

static void test_ar1(void)
{
	enum { N = 200000, V = 500, T = 200 };
	static const double rhos[3] = { 0.3, 0.8, -0.4 };
	double *x = xmalloc_array(N, sizeof *x);
	double *st = xmalloc_array(V, sizeof *st);
	double *series = xmalloc_array((size_t)V * T, sizeof *series);
	double var, r1, pooled = 0;
	sim_rng r;
	int i, k;
	size_t v;

	for (i = 0; i < 3; i++) {
		double rho = rhos[i];
		/* Bartlett: Var(r1) ~ (1 - rho^2) / N for an AR(1); Var(s^2) ~ (2 / N)(1 + rho^2)/(1 - rho^2) */
		double se_r = sqrt((1 - rho * rho) / N);
		double se_v = sqrt(2.0 / N * (1 + rho * rho) / (1 - rho * rho));

		sim_rng_seed(&r, 11, (uint64_t)i);
		sim_ar1_series(&r, rho, N, x);
		ar1_stats(x, N, &var, &r1);
		CHECK(fabs(r1 - rho) <= 4 * se_r,
		      "AR(1) rho %.1f: lag-1 autocorrelation %.4f within 4 SE (%.4f)", rho, r1, se_r);
		CHECK(fabs(var - 1.0) <= 4 * se_v, "AR(1) rho %.1f: variance %.4f within 4 SE (%.4f)",
		      rho, var, se_v);
	}
	/* many voxels stepped together, as the simulator does: stationary from the first sample */
	sim_rng_seed(&r, 12, 0);
	sim_ar1_init(&r, V, st);
	for (k = 0; k < T; k++) {
		if (k > 0)
			sim_ar1_step(&r, 0.3, V, st);
		for (v = 0; v < V; v++)
			series[v * T + k] = st[v];
	}
	for (v = 0; v < V; v++)
		pooled += series[v * T] * series[v * T];
	pooled /= V;
	CHECK_NEAR(pooled, 1.0, 4 * sqrt(2.0 / V), "first sample already has variance 1 (stationary start)");
	pooled = 0;
	for (v = 0; v < V; v++)
		pooled += series[v * T + T - 1] * series[v * T];
	pooled /= V;
	/* corr(e_0, e_199) = 0.3^199 = 0 */
	CHECK_NEAR(pooled, 0.0, 4 / sqrt((double)V), "voxels' far samples are uncorrelated");
	free(x);
	free(st);
	free(series);
}

static void test_phantom(void)
{
	sim_space sp;
	sim_head h;
	sim_rng r;
	size_t nvox = 24 * 28 * 20, v, nbrain = 0, nskull = 0, inside_bad = 0, order_bad = 0;
	size_t npar[SIM_NPARCELS + 1] = { 0 }, mirror_bad = 0, outside_brain = 0;
	uint8_t *tissue = xmalloc(nvox);
	double *b = xmalloc_array(nvox, sizeof *b), *u = xmalloc_array(nvox, 3 * sizeof *u);
	double *w = xmalloc_array(nvox, sizeof *w), *scratch = xmalloc_array(nvox, sizeof *w);
	int32_t *lab = xmalloc_array(nvox, sizeof *lab);
	double bmin = 1e9, bmax = 0, smin = 1e9, smax = 0, expect, centers[3 * SIM_NPARCELS], wmax = 0;
	int64_t i, j, k;
	int p;

	small_space(&sp);
	sim_head_for(&sp, &h);
	CHECK_NEAR(h.center[0], 0.0, 1e-12, "head centred in the field of view");
	CHECK_CLOSE(h.brain[0], 0.8 * 36.0, 1e-12, "brain half-width is 80% of the half field of view");
	sim_rng_seed(&r, 3, 1);
	sim_phantom(&sp, &h, &r, tissue, b, u);
	for (v = 0; v < nvox; v++) {
		if (tissue[v] == SIM_BRAIN_TISSUE) {
			nbrain++;
			bmin = b[v] < bmin ? b[v] : bmin;
			bmax = b[v] > bmax ? b[v] : bmax;
		} else if (tissue[v] == SIM_SKULL) {
			nskull++;
			smin = b[v] < smin ? b[v] : smin;
			smax = b[v] > smax ? b[v] : smax;
		} else if (b[v] != 0.0) {
			inside_bad++;
		}
	}
	/* ellipsoid volume 4/3 pi a b c (a, b, c = 28.8, 33.6, 24 mm) over 27 mm^3 voxels */
	expect = 4.0 / 3.0 * M_PI * 28.8 * 33.6 * 24.0 / 27.0;
	CHECK_CLOSE((double)nbrain, expect, 0.03, "brain voxel count matches the ellipsoid's volume");
	CHECK(nskull > nbrain / 4, "a shell surrounds the brain (%zu voxels)", nskull);
	CHECK(inside_bad == 0, "background is exactly zero");
	CHECK(tissue[0] == SIM_BACKGROUND && tissue[nvox - 1] == SIM_BACKGROUND, "corners are background");
	CHECK(bmin >= 500 && bmax <= 1000, "brain baseline within 500-1000 (%.0f-%.0f)", bmin, bmax);
	CHECK(smin >= 200 && smax <= 300, "shell baseline within 200-300 (%.0f-%.0f)", smin, smax);
	/* along every row from the centre outwards: brain, then shell, then background, never back */
	for (k = 0; k < sp.nz; k++)
		for (j = 0; j < sp.ny; j++) {
			int last = SIM_BRAIN_TISSUE;

			for (i = sp.nx / 2; i < sp.nx; i++) {
				int t = tissue[i + sp.nx * (j + sp.ny * k)];

				if (t > last)
					order_bad++;
				last = t;
			}
		}
	CHECK(order_bad == 0, "tissue classes nest: brain inside shell inside background");
	/* smoothness: neighbouring brain voxels differ by little */
	{
		double maxstep = 0;

		for (v = 1; v < nvox; v++)
			if (tissue[v] == SIM_BRAIN_TISSUE && tissue[v - 1] == SIM_BRAIN_TISSUE && v % 24)
				maxstep = fmax(maxstep, fabs(b[v] - b[v - 1]));
		CHECK(maxstep < 60, "baseline varies smoothly (largest step %.1f)", maxstep);
	}

	sim_parcels(&sp, &h, lab);
	for (k = 0; k < sp.nz; k++)
		for (j = 0; j < sp.ny; j++)
			for (i = 0; i < sp.nx; i++) {
				size_t a = (size_t)(i + sp.nx * (j + sp.ny * k));
				size_t m = (size_t)(sp.nx - 1 - i + sp.nx * (j + sp.ny * k));
				int la = lab[a], lm = lab[m];

				if (la < 0 || la > SIM_NPARCELS)
					continue;
				npar[la]++;
				if (la && tissue[a] != SIM_BRAIN_TISSUE)
					outside_brain++;
				/* left and right parcels are mirror images; the others are symmetric or one-sided */
				if ((la == 1 && lm != 2) || (la == 2 && lm != 1))
					mirror_bad++;
			}
	CHECK(outside_brain == 0, "parcels lie inside the brain");
	for (p = 1; p <= SIM_NPARCELS; p++)
		CHECK(npar[p] >= 100, "parcel %d has %zu voxels on the small grid", p, npar[p]);
	CHECK(npar[1] == npar[2] && mirror_bad == 0, "left and right parcels mirror each other (%zu, %zu)",
	      npar[1], npar[2]);

	sim_rng_seed(&r, 3, 2);
	for (p = 1; p <= SIM_NPARCELS; p++)
		sim_region_center(&r, p, centers + 3 * (p - 1));
	sim_region_weights(nvox, lab, u, centers, w);
	{
		size_t outside = 0, bad = 0;

		for (v = 0; v < nvox; v++) {
			if (lab[v] == 0 && w[v] != 0)
				outside++;
			if (!(w[v] >= 0 && w[v] <= 1))
				bad++;
			wmax = fmax(wmax, w[v]);
		}
		CHECK(outside == 0 && bad == 0, "weights in [0, 1] and zero outside parcels");
		CHECK(wmax == 1.0, "a region has voxels of weight exactly 1");
	}
	for (p = 1; p <= SIM_NPARCELS; p++) {
		size_t kk, n;
		double m = sim_top_mean(nvox, lab, w, p, 1000, scratch, &kk, &n);

		CHECK(kk == (n + 9) / 10 && m > 0.95,
		      "parcel %d: top 10%% (%zu of %zu) has mean weight %.3f, near the plateau", p, kk, n, m);
	}
	free(tissue);
	free(b);
	free(u);
	free(w);
	free(scratch);
	free(lab);
}

static void test_top_mean(void)
{
	int32_t lab[12] = { 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 2 };
	double w[12] = { 0.1, 0.9, 0.2, 0.8, 0.3, 0.7, 0.4, 0.6, 0.5, 0.05, 1.0, 1.0 }, scratch[12];
	size_t k, n;
	double m;

	/* 11 voxels in parcel 1: ceil(10% of 11) = 2 -> mean of 1.0 and 0.9 */
	m = sim_top_mean(12, lab, w, 1, 1000, scratch, &k, &n);
	CHECK(k == 2 && n == 11, "top 10%% of 11 voxels keeps 2 (%zu of %zu)", k, n);
	CHECK_CLOSE(m, 0.95, 1e-15, "top mean of 1.0 and 0.9");
	/* 12.5% of 11 = 1.375 -> 2; 50% of 11 = 5.5 -> 6: 1, .9, .8, .7, .6, .5 */
	m = sim_top_mean(12, lab, w, 1, 5000, scratch, &k, &n);
	CHECK(k == 6, "top 50%% of 11 keeps 6");
	CHECK_CLOSE(m, 4.5 / 6, 1e-15, "top-half mean");
	m = sim_top_mean(12, lab, w, 3, 1000, scratch, &k, &n);
	CHECK(k == 0 && n == 0 && m == 0.0, "an empty parcel gives k = 0 and 0");
}

static void test_events_and_signal(void)
{
	enum { T = 120 };
	design_event ev[256];
	sim_rng r;
	size_t n, i, c0 = 0;
	int order, bad = 0;
	double x[2 * T], m[6 * T], tr = 2.0, end = T * 2.0;

	for (order = 0; order < 2; order++) {
		sim_rng_seed(&r, 5, (uint64_t)order);
		n = sim_block_events(&r, T, tr, 16.0, order, ev, 256);
		CHECK(n >= 6, "a 240 s run holds %zu blocks", n);
		CHECK(ev[0].cond == order, "order %d starts with condition %d", order, order);
		for (i = 0; i < n; i++) {
			if (ev[i].duration != 16.0 || ev[i].onset + 16.0 + 16.0 > end + 1e-9)
				bad++;
			if (i > 0 && (ev[i].cond == ev[i - 1].cond ||
				      ev[i].onset < ev[i - 1].onset + 32.0 - 1e-9))
				bad++;
		}
		CHECK(bad == 0, "blocks alternate, rest at least a block long, 16 s left at the end");
	}
	sim_rng_seed(&r, 5, 9);
	n = sim_event_events(&r, T, tr, 3.0, 6.0, 10.0, ev, 256);
	for (i = 0; i < n; i++) {
		c0 += ev[i].cond == 0;
		if (i > 0 && (ev[i].onset - ev[i - 1].onset < 6.0 - 1e-9 ||
			      ev[i].onset - ev[i - 1].onset >= 10.0))
			bad++;
	}
	CHECK(n >= 20 && bad == 0, "%zu events, onset intervals in [6, 10) s", n);
	CHECK(c0 == (n + 1) / 2, "conditions balanced (%zu of %zu)", c0, n);

	/* an ideal voxel: no noise, drift or leak; 100 y / mean(y) regressed on [x, 1] gives amp */
	{
		sr_err e;
		double base = 800, uu[3] = { 0.1, 0.2, 0.3 }, amp[2] = { 2.0, 1.0 }, xc[2], mc[6] = { 0 };
		double y[T], ebuf = 0, xbar[2] = { 0, 0 }, ymean = 0;
		sim_run sr;
		int k, c;

		sr_err_init(&e, NULL, NULL);
		sim_rng_seed(&r, 5, 0);
		n = sim_block_events(&r, T, tr, 16.0, 0, ev, 256);
		CHECK(design_regressors(T, tr, 0.5, ev, n, 2, x, &e) == SR_OK, "regressors built");
		for (c = 0; c < 2; c++) {
			for (k = 0; k < T; k++)
				xbar[c] += x[c * T + k] / T;
		}
		memset(&sr, 0, sizeof sr);
		sr.nvox = 1;
		sr.baseline = &base;
		sr.u = uu;
		sr.amp = amp;
		sr.ncond = 2;
		for (k = 0; k < T; k++) {
			xc[0] = x[k] - xbar[0];
			xc[1] = x[T + k] - xbar[1];
			sim_volume(&sr, k, T, xc, mc, &ebuf, &y[k]);
			ymean += y[k] / T;
		}
		CHECK_CLOSE(ymean, base, 1e-12, "noise-free run mean equals the baseline");
		/* least squares on centred columns: beta = S^-1 s, S = Xc'Xc (2x2) */
		{
			double s00 = 0, s01 = 0, s11 = 0, t0 = 0, t1 = 0, det, b0, b1;

			for (k = 0; k < T; k++) {
				double a0 = x[k] - xbar[0], a1 = x[T + k] - xbar[1];
				double yy = 100 * y[k] / ymean - 100;

				s00 += a0 * a0;
				s01 += a0 * a1;
				s11 += a1 * a1;
				t0 += a0 * yy;
				t1 += a1 * yy;
			}
			det = s00 * s11 - s01 * s01;
			b0 = (s11 * t0 - s01 * t1) / det;
			b1 = (s00 * t1 - s01 * t0) / det;
			CHECK_CLOSE(b0, 2.0, 1e-9, "ideal voxel: GLM beta of condition 0 is its percent amplitude");
			CHECK_CLOSE(b1, 1.0, 1e-9, "ideal voxel: GLM beta of condition 1 is its percent amplitude");
		}
	}
	sim_rng_seed(&r, 6, 0);
	sim_motion(&r, T, m);
	{
		double tmax = 0, rmax = 0;
		int j, k;

		for (j = 0; j < 6; j++)
			for (k = 0; k < T; k++)
				if (j < 3)
					tmax = fmax(tmax, fabs(m[j * T + k]));
				else
					rmax = fmax(rmax, fabs(m[j * T + k]));
		CHECK(m[0] == 0.0 && m[3 * T] == 0.0, "motion starts at zero");
		/* common practice: usable subjects stay within a few mm and a few degrees */
		CHECK(tmax > 0.01 && tmax < 3.0, "translations within 3 mm (%.3f)", tmax);
		CHECK(rmax > 1e-4 && rmax < 0.05, "rotations within 0.05 rad (%.4f)", rmax);
	}
}

int main(void)
{
	test_generators();
	test_distributions();
	test_ar1();
	test_phantom();
	test_top_mean();
	test_events_and_signal();
	return TEST_DONE();
}
