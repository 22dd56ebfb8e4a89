/* reliab.c - agreement between the localizer's halves per parcel (no I/O). */
#include "reliab.h"

#include <math.h>

#include "qc.h"

double reliab_pearson(const double *a, const double *b, const int32_t *lab, size_t n,
		      int32_t label, size_t *nused)
{
	double ma = 0, mb = 0, sab = 0, saa = 0, sbb = 0;
	size_t i, k = 0;

	for (i = 0; i < n; i++)
		if (lab[i] == label && isfinite(a[i]) && isfinite(b[i])) {
			ma += a[i];
			mb += b[i];
			k++;
		}
	if (nused)
		*nused = k;
	if (k < 3)
		return NAN;
	ma /= (double)k;
	mb /= (double)k;
	for (i = 0; i < n; i++)
		if (lab[i] == label && isfinite(a[i]) && isfinite(b[i])) {
			double da = a[i] - ma, db = b[i] - mb;

			sab += da * db;
			saa += da * da;
			sbb += db * db;
		}
	if (!(saa > 0) || !(sbb > 0))
		return NAN;
	return sab / sqrt(saa * sbb);
}

size_t reliab_count_above(const double *t, const int32_t *lab, size_t n, int32_t label,
			  double thr, size_t *nfinite)
{
	size_t i, c = 0, f = 0;

	for (i = 0; i < n; i++)
		if (lab[i] == label && isfinite(t[i])) {
			f++;
			c += (size_t)(t[i] > thr);
		}
	if (nfinite)
		*nfinite = f;
	return c;
}

void reliab_pairs_of(const double *const *t, const int32_t *const *froi, size_t nsplit,
		     const int32_t *lab, size_t n, int32_t label, reliab_pairs *out)
{
	double sr = 0, sd = 0;
	size_t i, j;

	out->npairs = nsplit > 1 ? nsplit * (nsplit - 1) / 2 : 0;
	out->nr = out->ndice = 0;
	for (i = 0; i < nsplit; i++)
		for (j = i + 1; j < nsplit; j++) {
			double r = reliab_pearson(t[i], t[j], lab, n, label, NULL);
			double d = qc_dice(froi[i], froi[j], n, label, NULL, NULL, NULL);

			if (isfinite(r)) {
				sr += r;
				out->nr++;
			}
			if (isfinite(d)) {
				sd += d;
				out->ndice++;
			}
		}
	out->r = out->nr ? sr / (double)out->nr : NAN;
	out->dice = out->ndice ? sd / (double)out->ndice : NAN;
}
