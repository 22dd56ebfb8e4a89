/* stats.c - one-sample t test, Student t tail and quantile, Benjamini-Hochberg (METHODS.md 9). */
#include "stats.h"

#include <math.h>
#include <stdlib.h>

#include "mem.h"
#include "strv.h"

/* Beyond this many degrees of freedom the t distribution is taken as the standard normal:
 * the lgamma differences below lose digits there, and the difference is O(1/df). */
#define STATS_DF_NORMAL 1e10

/*
 * Continued fraction of the regularized incomplete beta function I_x(a, b)
 * (Abramowitz & Stegun 1964, 26.5.8), evaluated with the modified Lentz
 * method. Converges quickly for x < (a + 1) / (a + b + 2); the caller swaps
 * the arguments otherwise. Returns the fraction only (without the prefactor).
 */
static double beta_cf(double a, double b, double x)
{
	const double tiny = 1e-300, eps = 1e-16;
	double c = 1.0, d, h;
	int m;

	d = 1.0 - (a + b) * x / (a + 1.0);
	if (fabs(d) < tiny)
		d = tiny;
	d = 1.0 / d;
	h = d;
	for (m = 1; m <= 10000; m++) {
		double m2 = 2.0 * m, num, del;

		/* even step: d_2m = m (b - m) x / ((a + 2m - 1)(a + 2m)) */
		num = m * (b - m) * x / ((a + m2 - 1.0) * (a + m2));
		d = 1.0 + num * d;
		if (fabs(d) < tiny)
			d = tiny;
		c = 1.0 + num / c;
		if (fabs(c) < tiny)
			c = tiny;
		d = 1.0 / d;
		h *= d * c;
		/* odd step: d_2m+1 = -(a + m)(a + b + m) x / ((a + 2m)(a + 2m + 1)) */
		num = -(a + m) * (a + b + m) * x / ((a + m2) * (a + m2 + 1.0));
		d = 1.0 + num * d;
		if (fabs(d) < tiny)
			d = tiny;
		c = 1.0 + num / c;
		if (fabs(c) < tiny)
			c = tiny;
		d = 1.0 / d;
		del = d * c;
		h *= del;
		if (fabs(del - 1.0) < eps)
			break;
	}
	return h;
}

/*
 * I_x(a, b) given log x and log(1 - x) separately, so that neither x nor
 * 1 - x is ever formed by subtraction (that is what keeps the far tail
 * accurate in relative terms).
 */
static double ibeta(double a, double b, double lx, double l1x)
{
	double x = exp(lx), x1 = exp(l1x);
	int sg; /* lgamma_r: lgamma's global signgam is a data race when runs are fitted in parallel */
	double lbeta = lgamma_r(a, &sg) + lgamma_r(b, &sg) - lgamma_r(a + b, &sg);
	double lfront;

	if (x <= 0.0)
		return 0.0;
	if (x1 <= 0.0)
		return 1.0;
	if (x < (a + 1.0) / (a + b + 2.0)) {
		lfront = a * lx + b * l1x - lbeta;
		return exp(lfront) * beta_cf(a, b, x) / a;
	}
	lfront = b * l1x + a * lx - lbeta;
	return 1.0 - exp(lfront) * beta_cf(b, a, x1) / b;
}

double stats_t_p2(double t, double df)
{
	double at, lx, l1x, r;

	if (isnan(t) || isnan(df) || df <= 0.0)
		return NAN;
	at = fabs(t);
	if (at == 0.0)
		return 1.0;
	if (isinf(at))
		return 0.0;
	if (df >= STATS_DF_NORMAL)
		return erfc(at / sqrt(2.0));
	/* Two-sided p = I_x(df/2, 1/2) with x = df / (df + t^2) (A&S 26.7.1 via 26.5.27);
	 * r = df / t^2 keeps t^2 from overflowing. */
	r = df / at / at;
	lx = log(r) - log1p(r);   /* log(df / (df + t^2)) */
	l1x = -log1p(r);          /* log(t^2 / (df + t^2)) */
	return ibeta(0.5 * df, 0.5, lx, l1x);
}

/* Density of Student's t. */
static double t_pdf(double t, double df)
{
	int sg;

	if (df >= STATS_DF_NORMAL)
		return exp(-0.5 * t * t) / sqrt(2.0 * M_PI);
	return exp(lgamma_r(0.5 * (df + 1.0), &sg) - lgamma_r(0.5 * df, &sg) - 0.5 * log(df * M_PI) -
		   0.5 * (df + 1.0) * log1p(t * t / df));
}

/* The t > 0 whose upper tail P(T > t) is q, 0 < q < 0.5: safeguarded Newton on log P. */
static double t_upper_quantile(double q, double df)
{
	double lq = log(q), lo = 0.0, hi = 1.0, t;
	int i;

	while (log(0.5 * stats_t_p2(hi, df)) > lq) {
		lo = hi;
		hi *= 2.0;
		if (isinf(hi))
			return INFINITY;
	}
	t = lo > 0.0 ? sqrt(lo * hi) : 0.5 * hi;
	for (i = 0; i < 400; i++) {
		double sf = 0.5 * stats_t_p2(t, df), g, step, next;

		if (sf <= 0.0) {
			hi = t;
			next = 0.5 * (lo + hi);
		} else {
			g = log(sf) - lq;
			if (g > 0.0)
				lo = t;
			else
				hi = t;
			/* d log sf / dt = -pdf / sf */
			step = g * sf / t_pdf(t, df);
			next = t + step;
			if (!(next > lo && next < hi))
				next = (lo > 0.0 && hi / lo > 4.0) ? sqrt(lo * hi) : 0.5 * (lo + hi);
		}
		if (fabs(next - t) <= 1e-15 * fabs(t) || hi - lo <= 1e-15 * hi)
			return next;
		t = next;
	}
	return t;
}

double stats_t_quantile(double prob, double df)
{
	if (isnan(prob) || isnan(df) || df <= 0.0 || prob < 0.0 || prob > 1.0)
		return NAN;
	if (prob == 0.0)
		return -INFINITY;
	if (prob == 1.0)
		return INFINITY;
	if (prob == 0.5)
		return 0.0;
	/* 1 - prob is exact for prob >= 0.5 (Sterbenz), so the upper branch loses nothing. */
	if (prob < 0.5)
		return -t_upper_quantile(prob, df);
	return t_upper_quantile(1.0 - prob, df);
}

void stats_one_sample(const double *x, size_t n, stats_one *out)
{
	size_t i, m = 0;
	double sum = 0.0, ss = 0.0, corr = 0.0, first = NAN, mean;
	int all_equal = 1;

	out->n = 0;
	out->mean = out->sd = out->sem = out->t = out->df = out->p = out->d = NAN;
	if (!x)
		return;
	for (i = 0; i < n; i++) {
		if (!isfinite(x[i]))
			continue;
		if (m == 0)
			first = x[i];
		else if (x[i] != first)
			all_equal = 0;
		sum += x[i];
		m++;
	}
	out->n = m;
	if (m == 0)
		return;
	mean = sum / (double)m;
	if (all_equal) {
		out->mean = first;
	} else {
		/* Corrected two-pass algorithm (Chan, Golub & LeVeque 1983): the second
		 * pass removes the rounding error of the first mean. */
		for (i = 0; i < n; i++) {
			if (!isfinite(x[i]))
				continue;
			corr += x[i] - mean;
		}
		mean += corr / (double)m;
		out->mean = mean;
	}
	if (m < 2)
		return;
	if (!all_equal)
		for (i = 0; i < n; i++) {
			double dv;

			if (!isfinite(x[i]))
				continue;
			dv = x[i] - mean;
			ss += dv * dv;
		}
	out->df = (double)(m - 1);
	out->sd = sqrt(ss / out->df);
	out->sem = out->sd / sqrt((double)m);
	/* Zero spread: t and d are not defined (0/0 or infinite); they stay NaN. */
	if (out->sd > 0.0) {
		out->t = out->mean / out->sem;
		out->p = stats_t_p2(out->t, out->df);
		out->d = out->mean / out->sd;
	}
}

/* A finite p and where it came from, sorted by p (then position, so ties are stable). */
typedef struct bh_item {
	double p;
	size_t i;
} bh_item;

static int bh_cmp(const void *a, const void *b)
{
	const bh_item *x = a, *y = b;

	if (x->p < y->p)
		return -1;
	if (x->p > y->p)
		return 1;
	return x->i < y->i ? -1 : x->i > y->i;
}

void stats_bh(const double *p, size_t n, double *q)
{
	size_t i, m = 0;
	bh_item *it;
	double run = 1.0;

	for (i = 0; i < n; i++)
		if (!isnan(p[i]))
			m++;
	if (m == 0) {
		for (i = 0; i < n; i++)
			q[i] = NAN;
		return;
	}
	it = xmalloc_array(m, sizeof *it);
	m = 0;
	for (i = 0; i < n; i++)
		if (!isnan(p[i])) {
			it[m].p = p[i];
			it[m].i = i;
			m++;
		}
	/* p and q may be the same array: every p is read before any q is written. */
	for (i = 0; i < n; i++)
		q[i] = NAN;
	qsort(it, m, sizeof *it, bh_cmp);
	/* Step-up (Benjamini & Hochberg 1995): q_(k) = min over j >= k of m p_(j) / j, capped at 1. */
	for (i = m; i-- > 0;) {
		double v = it[i].p * (double)m / (double)(i + 1);

		if (v < run)
			run = v;
		q[it[i].i] = run;
	}
	free(it);
}

double stats_quantile_sorted(const double *s, size_t n, double p)
{
	double h, f;
	size_t i;

	if (n == 0)
		return NAN;
	h = p * (double)(n - 1);
	f = floor(h);
	i = (size_t)f;
	if (i + 1 >= n)
		return s[n - 1];
	return s[i] + (h - f) * (s[i + 1] - s[i]);
}

double stats_quantile(double *x, size_t n, double p)
{
	if (n == 0)
		return NAN;
	qsort(x, n, sizeof *x, strv_cmp_double);
	return stats_quantile_sorted(x, n, p);
}

/*
 * Moves the k-th smallest of x[0..n-1] (k < n, no NaN) to x[k], with none
 * larger before it and none smaller after it: Hoare's selection (FIND,
 * CACM 4:321, 1961), the pivot the median of the first, middle and last.
 */
static void select_kth(double *x, size_t n, size_t k)
{
	size_t lo = 0, hi = n - 1;

	while (hi > lo) {
		size_t mid = lo + (hi - lo) / 2, i = lo, j = hi;
		double a = x[lo], b = x[mid], c = x[hi], piv;

		piv = a < b ? (b < c ? b : (a < c ? c : a)) : (a < c ? a : (b < c ? c : b));
		/* afterwards x[lo..j] <= piv <= x[i..hi] and every x between j and i equals piv */
		while (i <= j) {
			while (x[i] < piv)
				i++;
			while (x[j] > piv)
				j--;
			if (i <= j) {
				double t = x[i];

				x[i] = x[j];
				x[j] = t;
				i++;
				if (j == 0)
					break;
				j--;
			}
		}
		if (k <= j)
			hi = j;
		else if (k >= i)
			lo = i;
		else
			return;
	}
}

double stats_quantile_select(double *x, size_t n, double p)
{
	double h, f, next;
	size_t i, k;

	if (n == 0)
		return NAN;
	h = p * (double)(n - 1);
	f = floor(h);
	i = (size_t)f;
	if (i + 1 >= n) {
		select_kth(x, n, n - 1);
		return x[n - 1];
	}
	select_kth(x, n, i);
	/* the next order statistic is the smallest of what lies above */
	next = x[i + 1];
	for (k = i + 2; k < n; k++)
		if (x[k] < next)
			next = x[k];
	return x[i] + (h - f) * (next - x[i]);
}

void stats_welch(const double *a, size_t na, const double *b, size_t nb, stats_two *out)
{
	stats_one sa, sb;
	double qa, qb;

	stats_one_sample(a, na, &sa);
	stats_one_sample(b, nb, &sb);
	out->na = sa.n;
	out->nb = sb.n;
	out->diff = out->sem = out->t = out->df = out->p = out->d = NAN;
	if (sa.n == 0 || sb.n == 0)
		return;
	out->diff = sa.mean - sb.mean;
	if (sa.n < 2 || sb.n < 2)
		return;
	qa = sa.sd * sa.sd / (double)sa.n;
	qb = sb.sd * sb.sd / (double)sb.n;
	if (!(qa + qb > 0))
		return;
	out->sem = sqrt(qa + qb);
	out->t = out->diff / out->sem;
	out->df = (qa + qb) * (qa + qb) / (qa * qa / (double)(sa.n - 1) + qb * qb / (double)(sb.n - 1));
	out->p = stats_t_p2(out->t, out->df);
	out->d = out->diff / sqrt(0.5 * (sa.sd * sa.sd + sb.sd * sb.sd));
}
