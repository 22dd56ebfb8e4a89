/* reliab.h - how reliable a subject's fROI is: agreement between the localizer's halves. */
#ifndef SR_RELIAB_H
#define SR_RELIAB_H

#include <stddef.h>
#include <stdint.h>

/* The define t above which parcel voxels are counted (n_above in reliability.csv). */
#define RELIAB_T_ABOVE 3.1

/*
 * Pearson's correlation of a and b over the voxels labelled `label` in lab
 * (n voxels each) where both a and b are finite: the centred cross product
 * over the root of the centred sums of squares, means taken first (two
 * passes; the textbook product-moment formula, Pearson 1895). NaN when fewer
 * than 3 voxels qualify or either has no spread. *nused (may be NULL) gets
 * the voxels used.
 */
double reliab_pearson(const double *a, const double *b, const int32_t *lab, size_t n,
		      int32_t label, size_t *nused);

/*
 * Voxels labelled `label` with finite t > thr; *nfinite (may be NULL) gets
 * the voxels of the label with finite t.
 */
size_t reliab_count_above(const double *t, const int32_t *lab, size_t n, int32_t label,
			  double thr, size_t *nfinite);

/* Agreement over every unordered pair (i < j) of a localizer's splits. */
typedef struct reliab_pairs {
	double r;        /* mean Pearson r of the pairs' define t where it is defined, else NaN */
	double dice;     /* mean Dice of the pairs' fROIs where it is defined (qc_dice), else NaN */
	size_t npairs;   /* nsplit (nsplit - 1) / 2 */
	size_t nr, ndice;   /* pairs with a defined r, a defined Dice */
} reliab_pairs;

/*
 * The pairs of nsplit splits (t[s] their define t maps, froi[s] their fROI
 * label images, n voxels each) for the parcel `label` of lab: odd-even has
 * the one pair (A, B); leave-one-out all nsplit (nsplit - 1) / 2 pairs of
 * folds.
 */
void reliab_pairs_of(const double *const *t, const int32_t *const *froi, size_t nsplit,
		     const int32_t *lab, size_t n, int32_t label, reliab_pairs *out);

#endif
