/* roi.c - ranking a parcel's candidate voxels by t and keeping a rule's share (fROI definition). */
#include "roi.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>

#include "mem.h"

/* More fraction digits than this would overflow the 128-bit product below. */
#define ROI_MAX_DECIMALS 17

/*
 * Exact ceil(p n / 100): p = num / 10^f read digit by digit from the text,
 * so "10" with n = 30 gives 3, never the 4 that 0.1 * 30 in binary can give.
 * With num <= D = 100 10^f <= 10^19 < 2^64 and n < 2^64, num * n fits in
 * 128 bits.
 */
int roi_top_percent_count(const char *p_text, size_t n, size_t *k)
{
	uint64_t ipart = 0, num, den = 100;
	int idigits = 0, fdigits = 0, fkeep = 0;
	const char *s, *frac = NULL;
	unsigned __int128 prod, q;

	if (!p_text || !k)
		return -1;
	for (s = p_text; *s >= '0' && *s <= '9'; s++) {
		if (ipart > 100)
			return -1;  /* keep reading would only overflow; value > 100 anyway */
		ipart = ipart * 10 + (uint64_t)(*s - '0');
		idigits++;
	}
	if (*s == '.') {
		frac = ++s;
		for (; *s >= '0' && *s <= '9'; s++)
			fdigits++;
	}
	if (*s != '\0' || idigits + fdigits == 0 || ipart > 100)
		return -1;
	/* Trailing zeros of the fraction change nothing; drop them before counting digits. */
	for (fkeep = fdigits; fkeep > 0 && frac[fkeep - 1] == '0'; fkeep--)
		;
	if (fkeep > ROI_MAX_DECIMALS)
		return -1;
	num = ipart;
	for (int i = 0; i < fkeep; i++) {
		num = num * 10 + (uint64_t)(frac[i] - '0');
		den *= 10;
	}
	if (num > den)  /* p > 100 */
		return -1;
	prod = (unsigned __int128)num * (unsigned __int128)n;
	q = prod / den;
	if (prod % den != 0)
		q++;
	*k = (size_t)q;
	return 0;
}

/* A candidate with its define t, for sorting. */
typedef struct roi_cand {
	double t;
	size_t vox;
} roi_cand;

/*
 * t descending, ties to the lower voxel index; a NaN t (which callers should
 * have dropped) sorts last so it is never chosen by a top rule first.
 */
static int cmp_cand(const void *pa, const void *pb)
{
	const roi_cand *a = pa, *b = pb;
	int an = isnan(a->t), bn = isnan(b->t);

	if (an != bn)
		return an - bn;
	if (!an) {
		if (a->t > b->t)
			return -1;
		if (a->t < b->t)
			return 1;
	}
	return (a->vox > b->vox) - (a->vox < b->vox);
}

size_t roi_select(const size_t *cand, const double *t, size_t n, enum roi_rule rule,
		  double value, const char *p_text, size_t *chosen)
{
	roi_cand *c;
	size_t i, k = 0;

	if (n == 0 || !cand || !t || !chosen)
		return 0;
	switch (rule) {
	case ROI_TOP_PERCENT: {
		char buf[64];

		/* Without the text, the shortest decimal of value stands in for it. */
		if (!p_text) {
			snprintf(buf, sizeof buf, "%.15g", value);
			p_text = buf;
		}
		if (roi_top_percent_count(p_text, n, &k))
			return 0;
		break;
	}
	case ROI_TOP_VOXELS:
		if (!(value >= 1.0))
			return 0;
		k = value >= (double)n ? n : (size_t)floor(value);
		break;
	case ROI_MIN_T:
		k = n;  /* cut below, after ranking */
		break;
	default:
		return 0;
	}
	if (k == 0)
		return 0;

	c = xmalloc_array(n, sizeof *c);
	for (i = 0; i < n; i++) {
		c[i].t = t[i];
		c[i].vox = cand[i];
	}
	qsort(c, n, sizeof *c, cmp_cand);
	if (rule == ROI_MIN_T) {
		/* Strictly greater; a NaN threshold keeps nothing. */
		for (k = 0; k < n && c[k].t > value; k++)
			;
	}
	for (i = 0; i < k; i++)
		chosen[i] = c[i].vox;
	free(c);
	return k;
}
