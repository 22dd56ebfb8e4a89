/* test_stats.c - group statistics against published worked examples, tables and nifticdf. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <stdio.h>

#include <nifti1.h>
#include <nifticdf.h>

#include "core/stats.h"
#include "testlib.h"

static void one_sample_worked_example(void)
{
	/* REFERENCES.md "One-sample worked example" (reproduced by scipy.stats.ttest_1samp). */
	const double x[] = { 0.5, 1.2, 0.8, -0.1, 0.9, 1.5, 0.3, 0.7 };
	stats_one s;

	stats_one_sample(x, 8, &s);
	CHECK(s.n == 8, "worked example n = 8 (got %zu)", s.n);
	CHECK_CLOSE(s.mean, 0.725, 1e-12, "worked example mean");
	CHECK_CLOSE(s.sd, 0.503559, 1e-6, "worked example sd (n - 1)");
	CHECK_CLOSE(s.sem, 0.178035, 1e-5, "worked example sem");
	CHECK_CLOSE(s.t, 4.072235, 1e-6, "worked example t");
	CHECK_CLOSE(s.df, 7, 0, "worked example df");
	CHECK_CLOSE(s.p, 0.00473585, 1e-6, "worked example two-sided p");
	CHECK_CLOSE(s.d, 1.439753, 1e-6, "worked example Cohen's d");
	CHECK_CLOSE(s.d, s.t / sqrt(8.0), 1e-12, "d = t / sqrt(n) (REFERENCES.md)");
}

static void one_sample_edges(void)
{
	const double two[] = { 1.0, 3.0 };
	const double one[] = { 2.5 };
	const double withnan[] = { NAN, 0.5, 1.2, INFINITY, 0.8, -0.1, 0.9, NAN, 1.5, 0.3, 0.7, -INFINITY };
	const double allnan[] = { NAN, NAN };
	const double same[] = { 0.1, 0.1, 0.1 };
	stats_one s;

	stats_one_sample(NULL, 0, &s);
	CHECK(s.n == 0 && isnan(s.mean) && isnan(s.sd) && isnan(s.t) && isnan(s.p) && isnan(s.d),
	      "n = 0: every field NaN");
	stats_one_sample(allnan, 2, &s);
	CHECK(s.n == 0 && isnan(s.mean), "only NaN values count as n = 0");
	stats_one_sample(one, 1, &s);
	CHECK(s.n == 1 && s.mean == 2.5, "n = 1 keeps the mean (%g)", s.mean);
	CHECK(isnan(s.sd) && isnan(s.sem) && isnan(s.t) && isnan(s.df) && isnan(s.p) && isnan(s.d),
	      "n = 1: sd, sem, t, df, p, d NaN (METHODS.md 11)");
	/* n = 2, by hand: mean 2, sd = sqrt(2), sem = 1, t(1) = 2; p = 1 - 2 atan(2) / pi for
	 * the Cauchy (t with 1 df), a textbook closed form. */
	stats_one_sample(two, 2, &s);
	CHECK_CLOSE(s.mean, 2.0, 1e-15, "n = 2 mean");
	CHECK_CLOSE(s.sd, sqrt(2.0), 1e-15, "n = 2 sd");
	CHECK_CLOSE(s.sem, 1.0, 1e-15, "n = 2 sem");
	CHECK_CLOSE(s.t, 2.0, 1e-15, "n = 2 t");
	CHECK_CLOSE(s.df, 1.0, 0, "n = 2 df");
	CHECK_CLOSE(s.p, 1.0 - 2.0 * atan(2.0) / M_PI, 1e-12, "n = 2 p (Cauchy closed form)");
	/* Non-finite values are left out: the same numbers as the worked example. */
	stats_one_sample(withnan, 12, &s);
	CHECK(s.n == 8, "NaN and infinities are not counted (n = %zu)", s.n);
	CHECK_CLOSE(s.t, 4.072235, 1e-6, "NaN-padded worked example t");
	CHECK_CLOSE(s.p, 0.00473585, 1e-6, "NaN-padded worked example p");
	/* Identical values: sd exactly 0, t and d undefined rather than huge. */
	stats_one_sample(same, 3, &s);
	CHECK(s.sd == 0.0 && s.mean == 0.1 && isnan(s.t) && isnan(s.p) && isnan(s.d),
	      "zero spread: sd 0, t, p and d NaN (sd %g, t %g)", s.sd, s.t);
}

static void t_distribution(void)
{
	/* NIST/SEMATECH e-Handbook of Statistical Methods, 1.3.6.7.2 (critical values of t). */
	const double df[] = { 10, 20, 30, 100 };
	const double two5[] = { 2.228, 2.086, 2.042, 1.984 };
	const double df1[] = { 20, 30, 100 };
	const double one001[] = { 3.552, 3.385, 3.174 };
	char name[128];
	int i;

	for (i = 0; i < 4; i++) {
		double t = stats_t_quantile(0.975, df[i]);

		snprintf(name, sizeof name, "two-sided 5%% critical t at df %g (NIST table)", df[i]);
		CHECK_NEAR(t, two5[i], 0.002, name);
		snprintf(name, sizeof name, "p2 at the df %g critical value is 0.05", df[i]);
		CHECK_CLOSE(stats_t_p2(t, df[i]), 0.05, 1e-10, name);
		snprintf(name, sizeof name, "lower quantile is the negative upper one (df %g)", df[i]);
		CHECK_CLOSE(stats_t_quantile(0.025, df[i]), -t, 1e-12, name);
	}
	for (i = 0; i < 3; i++) {
		snprintf(name, sizeof name, "one-sided 0.001 critical t at df %g (NIST table)", df1[i]);
		CHECK_NEAR(stats_t_quantile(0.999, df1[i]), one001[i], 0.002, name);
	}
	/* REFERENCES.md: nifticdf values quoted there. */
	CHECK_CLOSE(stats_t_quantile(0.999, 100), 3.173739, 1e-6, "t quantile 0.999 df 100 (3.173739)");
	CHECK_CLOSE(0.5 * stats_t_p2(3.174, 100), 0.0009992, 1e-4, "upper tail at 3.174 df 100 (0.0009992)");

	/* Closed forms: df 1 is the Cauchy, df 2 has P(|T| > t) = 1 - t / sqrt(t^2 + 2). */
	CHECK_CLOSE(stats_t_p2(1.0, 1), 0.5, 1e-14, "Cauchy: P(|T| > 1) = 1/2");
	/* far tails in forms without cancellation: 2 atan(1/t) / pi and 2 / (s (s + t)), s = sqrt(t^2 + 2) */
	CHECK_CLOSE(stats_t_p2(1e6, 1), 2.0 * atan(1e-6) / M_PI, 1e-12, "Cauchy far tail");
	CHECK_CLOSE(stats_t_p2(3.0, 2), 1.0 - 3.0 / sqrt(11.0), 1e-13, "df 2 closed form at t = 3");
	CHECK_CLOSE(stats_t_p2(300.0, 2), 2.0 / (sqrt(90002.0) * (sqrt(90002.0) + 300.0)), 1e-12,
		    "df 2 closed form far tail");
	CHECK_CLOSE(stats_t_quantile(0.75, 1), 1.0, 1e-12, "Cauchy quartile is 1");
	CHECK_CLOSE(stats_t_p2(-2.5, 12), stats_t_p2(2.5, 12), 0, "p2 symmetric in t");
	CHECK(stats_t_p2(0, 5) == 1.0, "p2(0) = 1");
	CHECK(stats_t_p2(INFINITY, 5) == 0.0, "p2(inf) = 0");
	CHECK(isnan(stats_t_p2(NAN, 5)) && isnan(stats_t_p2(1, 0)) && isnan(stats_t_p2(1, NAN)),
	      "p2 NaN for NaN t, df <= 0 or NaN df");
	CHECK(isnan(stats_t_quantile(1.5, 5)) && stats_t_quantile(0.5, 5) == 0.0 &&
		      isinf(stats_t_quantile(1.0, 5)),
	      "quantile edges: out of range NaN, median 0, 1 -> inf");
	/* Very large df tends to the normal: 2 * Phi(-1.959963984540054) = 0.05 (normal table). */
	CHECK_CLOSE(stats_t_p2(1.959963984540054, 1e12), 0.05, 1e-9, "df 1e12 behaves as the normal");

	/* The far tail against nifticdf (an independent implementation of the t cdf). */
	{
		/* the last three lie where the complement I_x = 1 - I_(1-x) is used */
		const double tt[] = { 10, 25, 4, 40, 8, 0.3, 1.0, 0.05 };
		const double dd[] = { 30, 30, 7, 5, 200, 2.5, 30, 1000 };

		for (i = 0; i < 8; i++) {
			double ref = 2.0 * nifti_stat2rcdf(tt[i], NIFTI_INTENT_TTEST, dd[i], 0, 0);

			snprintf(name, sizeof name, "p2(t = %g, df = %g) against nifticdf", tt[i], dd[i]);
			CHECK_CLOSE(stats_t_p2(tt[i], dd[i]), ref, 1e-8, name);
		}
		for (i = 0; i < 5; i++) {
			double pr = 1.0 - 0.5 * stats_t_p2(tt[i] / 4.0, dd[i]);
			double ref = nifti_cdf2stat(pr, NIFTI_INTENT_TTEST, dd[i], 0, 0);

			snprintf(name, sizeof name, "quantile(%.6f, df %g) against nifticdf", pr, dd[i]);
			CHECK_CLOSE(stats_t_quantile(pr, dd[i]), ref, 1e-7, name);
		}
	}
	/* Round trip deep in the tail, where 1 - cdf would have lost every digit. */
	CHECK_CLOSE(stats_t_quantile(0.5 * stats_t_p2(-30, 30), 30), -30, 1e-10, "quantile inverts p2 at t = -30");
}

static void bh(void)
{
	/* Benjamini & Hochberg 1995, JRSS B 57:289-300: their 15 p-values; adjusted values
	 * from statsmodels multipletests(..., 'fdr_bh') as quoted in REFERENCES.md. */
	const double p[15] = { 0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344,
			       0.0459, 0.3240, 0.4262, 0.5719, 0.6528, 0.7590, 1.000 };
	const double want[15] = { 0.0015, 0.003, 0.0095, 0.035625, 0.0603, 0.0638571, 0.0638571,
				  0.0645, 0.0765, 0.486, 0.581182, 0.714875, 0.753231, 0.813214, 1.0 };
	double q[15], shuffled[15], qs[15], withnan[17], qn[17];
	const int perm[15] = { 7, 14, 2, 0, 11, 5, 9, 1, 13, 3, 12, 6, 10, 4, 8 };
	char name[64];
	int i, rejected = 0, ok;

	stats_bh(p, 15, q);
	for (i = 0; i < 15; i++) {
		snprintf(name, sizeof name, "BH 1995 example adjusted p #%d", i + 1);
		CHECK_CLOSE(q[i], want[i], 1e-5, name);
		rejected += q[i] <= 0.05;
	}
	CHECK(rejected == 4, "BH 1995 example: 4 rejections at 0.05 (got %d)", rejected);

	/* Order of input does not matter. */
	for (i = 0; i < 15; i++)
		shuffled[i] = p[perm[i]];
	stats_bh(shuffled, 15, qs);
	ok = 1;
	for (i = 0; i < 15; i++)
		ok &= fabs(qs[i] - q[perm[i]]) < 1e-15;
	CHECK(ok, "BH adjusted values follow their p through a shuffle");

	/* NaN stays NaN and does not count towards m. */
	withnan[0] = NAN;
	for (i = 0; i < 15; i++)
		withnan[i + 1] = p[i];
	withnan[16] = NAN;
	stats_bh(withnan, 17, qn);
	ok = isnan(qn[0]) && isnan(qn[16]);
	for (i = 0; i < 15; i++)
		ok &= fabs(qn[i + 1] - q[i]) < 1e-15;
	CHECK(ok, "BH: NaN p gives NaN q and is not counted in m");

	/* Edge cases: empty, single, all NaN, in place. */
	stats_bh(p, 0, q);
	{
		double one = 0.03, qo, nan2[2] = { NAN, NAN }, inplace[15];

		stats_bh(&one, 1, &qo);
		CHECK(qo == 0.03, "BH with one p leaves it unchanged");
		stats_bh(nan2, 2, nan2);
		CHECK(isnan(nan2[0]) && isnan(nan2[1]), "BH of only NaN stays NaN");
		for (i = 0; i < 15; i++)
			inplace[i] = p[i];
		stats_bh(inplace, 15, inplace);
		ok = 1;
		for (i = 0; i < 15; i++)
			ok &= inplace[i] == q[i];
		CHECK(ok, "BH may work in place");
	}
}

static void welch(void)
{
	/* References: scipy.stats.ttest_ind(a, b, equal_var=False), scipy 1.10.1 (t, p), and the
	 * Welch-Satterthwaite df computed with numpy from the sample variances (ddof 1). */
	const double a[] = { 0.5, 1.2, 0.8, -0.1, 0.9, 1.5, 0.3, 0.7 };
	const double b[] = { 0.1, -0.4, NAN, 0.35, 0.0, -0.2, 0.6 };
	const double a2[] = { 3.1, 2.9 }, b2[] = { 1.0, 1.5, 0.5, 2.0 };
	const double same[] = { 1.0, 1.0 }, one[] = { 2.0 };
	stats_two w;

	stats_welch(a, 8, b, 7, &w);
	CHECK(w.na == 8 && w.nb == 6, "Welch counts the finite values (%zu, %zu)", w.na, w.nb);
	CHECK_CLOSE(w.t, 2.806139264659676, 1e-12, "Welch t (scipy)");
	CHECK_CLOSE(w.p, 0.01586560146118523, 1e-9, "Welch two-sided p (scipy)");
	CHECK_CLOSE(w.df, 11.997286507565088, 1e-12, "Welch-Satterthwaite df (numpy)");
	CHECK_CLOSE(w.diff, 0.725 - 0.075, 1e-12, "Welch difference of means");
	stats_welch(a2, 2, b2, 4, &w);
	CHECK_CLOSE(w.t, 5.1792680485033955, 1e-12, "Welch t, n = 2 and 4 (scipy)");
	CHECK_CLOSE(w.p, 0.00939282347509639, 1e-9, "Welch p, n = 2 and 4 (scipy)");
	/* by hand: mean 3 vs 1.25, variances 0.02 and 0.41667: d = 1.75 / sqrt(0.21833) */
	CHECK_CLOSE(w.d, 1.75 / sqrt(0.5 * (0.02 + 5.0 / 12.0)), 1e-12, "Welch d over the root mean variance");
	stats_welch(same, 2, same, 2, &w);
	CHECK(isnan(w.t) && isnan(w.df) && isnan(w.p) && w.diff == 0.0, "no spread: t, df, p NaN");
	stats_welch(one, 1, a, 8, &w);
	CHECK(isnan(w.t) && w.na == 1 && isfinite(w.diff), "one value in a sample: t NaN, diff kept");
	stats_welch(NULL, 0, a, 8, &w);
	CHECK(isnan(w.diff) && w.na == 0, "an empty sample: everything NaN");
}

/* stats_quantile_select gives stats_quantile's bits on orders that trouble a selection: sorted, reversed, all equal, few values. */
static void quantile_select(void)
{
	static const double ps[] = { 0.0, 0.02, 0.25, 0.5, 0.98, 0.999, 1.0 };
	unsigned long long st = 12345;
	int kind, bad = 0, cases = 0;
	size_t n, i, j;

	for (kind = 0; kind < 5; kind++)
		for (n = 1; n <= 3000; n = n < 40 ? n + 1 : n * 3) {
			double *x = malloc(n * sizeof *x), *y = malloc(n * sizeof *y), *z = malloc(n * sizeof *z);

			for (i = 0; i < n; i++) {
				st = st * 6364136223846793005ULL + 1442695040888963407ULL;
				x[i] = kind == 0 ? (double)(st >> 11) / 9007199254740992.0 * 1000.0 /* spread */
				     : kind == 1 ? (double)((st >> 33) % 7)                         /* many ties */
				     : kind == 2 ? (double)i                                          /* sorted */
				     : kind == 3 ? (double)(n - i)                                    /* reversed */
				     : 42.0;                                                          /* all equal */
			}
			for (j = 0; j < sizeof ps / sizeof *ps; j++) {
				double a, b;

				memcpy(y, x, n * sizeof *x);
				memcpy(z, x, n * sizeof *x);
				a = stats_quantile(y, n, ps[j]);
				b = stats_quantile_select(z, n, ps[j]);
				bad += memcmp(&a, &b, sizeof a) != 0;
				cases++;
			}
			free(x);
			free(y);
			free(z);
		}
	CHECK(bad == 0, "quantile by selection: %d cases (spread, ties, sorted, reversed, equal; n 1 to 3000) bit for bit as by sorting (%d differ)",
	      cases, bad);
	{
		double v[5] = { 1000, 100, 10.5, 100, 9.99 };

		/* numpy.percentile([9.99, 10.5, 100, 100, 1000], 98) = 100 + 0.92 * 900 = 928 (h = 3.92) */
		CHECK_CLOSE(stats_quantile_select(v, 5, 0.98), 928.0, 1e-12, "quantile by selection: numpy's 98th percentile example");
	}
}

int main(void)
{
	welch();
	one_sample_worked_example();
	one_sample_edges();
	t_distribution();
	bh();
	quantile_select();
	return TEST_DONE();
}
