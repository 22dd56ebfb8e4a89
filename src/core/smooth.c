/* smooth.c - separable Gaussian smoothing, zero outside the grid, and normalised convolution (see smooth.h). */
#include "smooth.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "mem.h"

struct smooth_plan {
	size_t n[3], nvox;
	long r[3];           /* kernel radius per axis; -1 = axis left alone */
	double *k[3];        /* 2 r + 1 weights per axis, normalised to sum 1 */
	double *tmp;         /* nvox scratch */
	double *den;         /* nvox: G*(1_S) of the support in sup */
	unsigned char *sup;  /* nvox: the support of the last smooth_support call */
	size_t *chg;         /* indices whose support changed, up to max_chg */
	size_t max_chg;      /* more changes than this: the denominator is computed afresh */
	int have_den, since_full;
};

/* Incremental updates of the denominator between two full computations (bounds rounding drift). */
#define SMOOTH_MAX_UPDATES 64

double smooth_fwhm_sigma(double fwhm_mm, double voxel_mm)
{
	if (fwhm_mm == 0)
		return 0;
	return fwhm_mm / (2.0 * sqrt(2.0 * log(2.0))) / voxel_mm;
}

sr_status smooth_plan_alloc(int64_t nx, int64_t ny, int64_t nz, const double sigma[3],
			    smooth_plan **out, sr_err *e)
{
	smooth_plan *p;
	size_t nvox;
	int a;

	*out = NULL;
	if (nx <= 0 || ny <= 0 || nz <= 0 ||
	    sr_mul_size((size_t)nx, (size_t)ny, &nvox) || sr_mul_size(nvox, (size_t)nz, &nvox) ||
	    nvox > ((size_t)-1) / (2 * sizeof(double)))
		return sr_fail(e, SR_EDIM, "smoothing: bad grid size %lld x %lld x %lld", (long long)nx,
			       (long long)ny, (long long)nz);
	for (a = 0; a < 3; a++)
		if (!isfinite(sigma[a]) || sigma[a] < 0 || sigma[a] > 1e6)
			return sr_fail(e, SR_EINVAL, "smoothing: bad sigma %g along axis %d", sigma[a], a);
	p = xcalloc(1, sizeof *p);
	p->n[0] = (size_t)nx;
	p->n[1] = (size_t)ny;
	p->n[2] = (size_t)nz;
	p->nvox = nvox;
	for (a = 0; a < 3; a++) {
		double sum = 0;
		long d, r;

		p->r[a] = -1;
		/* an axis whose sigma is (nearly) zero is not filtered, as scipy does */
		if (!(sigma[a] > 1e-15))
			continue;
		r = (long)floor(4.0 * sigma[a] + 0.5);
		p->r[a] = r;
		p->k[a] = xmalloc_array((size_t)(2 * r + 1), sizeof(double));
		for (d = -r; d <= r; d++) {
			p->k[a][d + r] = exp(-0.5 * (double)d * (double)d / (sigma[a] * sigma[a]));
			sum += p->k[a][d + r];
		}
		for (d = 0; d <= 2 * r; d++)
			p->k[a][d] /= sum;
	}
	{
		/* an update costs one kernel box per changed voxel; a full pass about taps x nvox */
		double box = 1, taps = 0;

		for (a = 0; a < 3; a++) {
			box *= p->r[a] >= 0 ? (double)(2 * p->r[a] + 1) : 1.0;
			taps += p->r[a] >= 0 ? (double)(2 * p->r[a] + 1) : 0.0;
		}
		p->max_chg = (size_t)((double)nvox * taps / box / 2.0);
	}
	*out = p;
	return SR_OK;
}

void smooth_plan_free(smooth_plan *p)
{
	int a;

	if (!p)
		return;
	for (a = 0; a < 3; a++)
		free(p->k[a]);
	free(p->tmp);
	free(p->den);
	free(p->sup);
	free(p->chg);
	free(p);
}

/*
 * One pass along x (contiguous lines of n samples): out = k * in, zero beyond
 * the ends. Each output adds its terms in the order of the offset d, written
 * as one contiguous loop per offset so that it vectorizes.
 */
static void pass_x(const double *restrict in, double *restrict out, size_t nlines, size_t n,
		   const double *k, long r)
{
	size_t l;
	long nn = (long)n;

	for (l = 0; l < nlines; l++) {
		const double *restrict x = in + l * n;
		double *restrict y = out + l * n;
		long i, d;

		for (i = 0; i < nn; i++)
			y[i] = 0;
		for (d = -r; d <= r; d++) {
			long lo = d < 0 ? -d : 0, hi = d > 0 ? nn - d : nn;
			double w = k[d + r];

			for (i = lo; i < hi; i++)
				y[i] += w * x[i + d];
		}
	}
}

/*
 * One pass along an outer axis: element (o, a, b) sits at (o * n + a) * block + b;
 * each output row of `block` values is a weighted sum of the input rows a + d,
 * added in the order of d, so that the inner loop runs over contiguous memory.
 */
static void pass_rows(const double *restrict in, double *restrict out, size_t nouter, size_t n,
		      size_t block, const double *k, long r)
{
	size_t o, b;

	for (o = 0; o < nouter; o++) {
		long a, d, nn = (long)n;

		for (a = 0; a < nn; a++) {
			long lo = a - r < 0 ? -a : -r;
			long hi = a + r >= nn ? nn - 1 - a : r;
			double *restrict y = out + (o * n + (size_t)a) * block;

			for (b = 0; b < block; b++)
				y[b] = 0;
			for (d = lo; d <= hi; d++) {
				const double *restrict x = in + (o * n + (size_t)(a + d)) * block;
				double w = k[d + r];

				for (b = 0; b < block; b++)
					y[b] += w * x[b];
			}
		}
	}
}

/* Filters the field in a along every axis, with b as scratch; returns the buffer holding the result. */
static double *filter3(const smooth_plan *p, double *a, double *b)
{
	double *t;

	if (p->r[0] >= 0) {
		pass_x(a, b, p->n[1] * p->n[2], p->n[0], p->k[0], p->r[0]);
		t = a, a = b, b = t;
	}
	if (p->r[1] >= 0) {
		pass_rows(a, b, p->n[2], p->n[1], p->n[0], p->k[1], p->r[1]);
		t = a, a = b, b = t;
	}
	if (p->r[2] >= 0) {
		pass_rows(a, b, 1, p->n[2], p->n[0] * p->n[1], p->k[2], p->r[2]);
		t = a, a = b, b = t;
	}
	return a;
}

sr_status smooth_gauss3(double *x, int64_t nx, int64_t ny, int64_t nz, const double sigma[3],
			sr_err *e)
{
	smooth_plan *p;
	double *res;
	size_t v;
	sr_status st;

	st = smooth_plan_alloc(nx, ny, nz, sigma, &p, e);
	if (st != SR_OK)
		return st;
	for (v = 0; v < p->nvox; v++)
		if (!isfinite(x[v])) {
			smooth_plan_free(p);
			return sr_fail(e, SR_EINVAL, "smoothing: voxel %zu is not finite", v);
		}
	p->tmp = xmalloc_array(p->nvox, sizeof(double));
	res = filter3(p, x, p->tmp);
	if (res != x)
		memcpy(x, res, p->nvox * sizeof *x);
	smooth_plan_free(p);
	return SR_OK;
}

/* Adds sign times the kernel centred on voxel c to den (the change of G*(1_S) when c joins or leaves S). */
static void add_kernel(smooth_plan *p, size_t c, double sign)
{
	long cx = (long)(c % p->n[0]), cy = (long)(c / p->n[0] % p->n[1]), cz = (long)(c / p->n[0] / p->n[1]);
	long r[3], lo[3], hi[3], x, y, z;
	static const double one = 1.0;
	const double *k[3];
	int a;

	for (a = 0; a < 3; a++) {
		r[a] = p->r[a] >= 0 ? p->r[a] : 0;
		k[a] = p->r[a] >= 0 ? p->k[a] : &one;
	}
	lo[0] = cx - r[0] < 0 ? 0 : cx - r[0];
	hi[0] = cx + r[0] >= (long)p->n[0] ? (long)p->n[0] - 1 : cx + r[0];
	lo[1] = cy - r[1] < 0 ? 0 : cy - r[1];
	hi[1] = cy + r[1] >= (long)p->n[1] ? (long)p->n[1] - 1 : cy + r[1];
	lo[2] = cz - r[2] < 0 ? 0 : cz - r[2];
	hi[2] = cz + r[2] >= (long)p->n[2] ? (long)p->n[2] - 1 : cz + r[2];
	for (z = lo[2]; z <= hi[2]; z++)
		for (y = lo[1]; y <= hi[1]; y++) {
			double wyz = sign * k[2][z - cz + r[2]] * k[1][y - cy + r[1]];
			double *d = p->den + ((size_t)z * p->n[1] + (size_t)y) * p->n[0];

			for (x = lo[0]; x <= hi[0]; x++)
				d[x] += wyz * k[0][x - cx + r[0]];
		}
}

void smooth_support(smooth_plan *p, double *vol, const unsigned char *mask)
{
	size_t i, nvox = p->nvox, nchg = 0;
	int full = !p->have_den || p->since_full >= SMOOTH_MAX_UPDATES;
	double *res;

	if (!p->tmp) {
		p->tmp = xmalloc_array(nvox, sizeof(double));
		p->den = xmalloc_array(nvox, sizeof(double));
		p->sup = xcalloc(nvox, 1);
		p->chg = xmalloc_array(p->max_chg ? p->max_chg : 1, sizeof *p->chg);
	}
	/* the support, its changes since the last volume, and y 1_S in place */
	for (i = 0; i < nvox; i++) {
		unsigned char in = (!mask || mask[i]) && isfinite(vol[i]) && vol[i] > 0;

		if (in != p->sup[i]) {
			if (nchg < p->max_chg)
				p->chg[nchg] = i;
			nchg++;
		}
		p->sup[i] = in;
		if (!in)
			vol[i] = 0;
	}
	if (full || nchg > p->max_chg) {
		for (i = 0; i < nvox; i++)
			p->den[i] = p->sup[i];
		res = filter3(p, p->den, p->tmp);
		if (res != p->den)
			memcpy(p->den, res, nvox * sizeof *p->den);
		p->have_den = 1;
		p->since_full = 0;
	} else if (nchg > 0) {
		for (i = 0; i < nchg; i++)
			add_kernel(p, p->chg[i], p->sup[p->chg[i]] ? 1.0 : -1.0);
		p->since_full++;
	}
	res = filter3(p, vol, p->tmp);
	/* on S the denominator is at least about the kernel's centre weight, never 0 */
	for (i = 0; i < nvox; i++)
		vol[i] = p->sup[i] ? res[i] / p->den[i] : NAN;
}
