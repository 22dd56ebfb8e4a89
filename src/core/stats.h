/* stats.h - group statistics: one-sample t, Student t tail, Benjamini-Hochberg (METHODS.md 9). */
#ifndef SR_STATS_H
#define SR_STATS_H

#include <stddef.h>

typedef struct stats_one {
	size_t n;
	double mean, sd, sem, t, df, p, d;   /* NaN where undefined (n < 2 for all but mean) */
} stats_one;

/* One-sample t test of the finite values of x against 0. */
void stats_one_sample(const double *x, size_t n, stats_one *out);
/* Two-sided p = P(|T_df| >= |t|), accurate in the far tail. */
double stats_t_p2(double t, double df);
/* Quantile: the t with P(T_df <= t) = prob. */
double stats_t_quantile(double prob, double df);
/* Benjamini-Hochberg adjusted q for the finite p (NaN stays NaN). */
void stats_bh(const double *p, size_t n, double *q);

#endif
