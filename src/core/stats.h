/* stats.h - group statistics: one-sample t, Student t tail, Benjamini-Hochberg (METHODS.md 9). */
#ifndef SR_STATS_H
#define SR_STATS_H

#include <stddef.h>

typedef struct stats_one {
	size_t n;
	double mean, sd, sem, t, df, p, d;   /* NaN where undefined (n < 2 for all but mean) */
} stats_one;

/*
 * One-sample t test of the finite values of x against 0 (NaN and infinities
 * are left out; x may be NULL when n is 0). n = 0: every field NaN; n = 1:
 * only the mean. All values equal: sd = sem = 0 and t, p, d NaN (undefined,
 * not infinite). Pure; thread safe.
 */
void stats_one_sample(const double *x, size_t n, stats_one *out);
/* A two-sample Welch t test: a - b. */
typedef struct stats_two {
	size_t na, nb;                      /* finite values of each sample */
	double diff, sem, t, df, p, d;      /* NaN where undefined */
} stats_two;

/*
 * Welch's two-sample t test of the finite values of a against those of b
 * (Welch 1947, Biometrika 34:28-35): diff = mean a - mean b, sem =
 * sqrt(va/na + vb/nb) (variances with n - 1), t = diff / sem, df by the
 * Welch-Satterthwaite formula (va/na + vb/nb)^2 / ((va/na)^2/(na-1) +
 * (vb/nb)^2/(nb-1)), two-sided p from t(df), and d = diff / sqrt((va + vb) / 2).
 * Needs at least 2 values in each sample and some spread (else t, df, p, d
 * NaN; diff is set when both samples have a value). Pure; thread safe.
 */
void stats_welch(const double *a, size_t na, const double *b, size_t nb, stats_two *out);

/*
 * Two-sided p = P(|T_df| >= |t|), accurate in relative terms far into the
 * tail (computed from the upper tail, never as 1 - cdf). df may be any
 * positive real; df >= 1e10 is taken as the normal. NaN for NaN t or df <= 0.
 */
double stats_t_p2(double t, double df);
/* Quantile: the t with P(T_df <= t) = prob; -inf at 0, inf at 1, NaN outside [0, 1]. */
double stats_t_quantile(double prob, double df);
/*
 * Benjamini-Hochberg adjusted q for the finite p (NaN stays NaN and is not
 * counted); q may be the same array as p. Allocates a scratch copy.
 */
void stats_bh(const double *p, size_t n, double *q);
/*
 * The p quantile (0..1) of s[0..n-1], sorted ascending, with linear
 * interpolation between order statistics (numpy's default rule): h = p (n - 1),
 * s[floor h] + (h - floor h) (s[floor h + 1] - s[floor h]). NaN when n is 0.
 */
double stats_quantile_sorted(const double *s, size_t n, double p);
/* Sorts x (n finite values) ascending in place and returns its p quantile as above. */
double stats_quantile(double *x, size_t n, double p);
/*
 * The same number as stats_quantile (the same two order statistics, the same
 * arithmetic) in O(n) time on average: x is reordered but not sorted.
 */
double stats_quantile_select(double *x, size_t n, double p);

#endif
