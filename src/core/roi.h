/* roi.h - choosing an fROI's voxels among a parcel's candidates (METHODS.md section 7). */
#ifndef SR_ROI_H
#define SR_ROI_H

#include <stddef.h>

enum roi_rule { ROI_TOP_PERCENT, ROI_TOP_VOXELS, ROI_MIN_T };

/*
 * k = ceil(p n / 100) computed exactly with p read as a decimal text
 * ("10", "12.5", ".5", "10."): digits with an optional point, no sign,
 * exponent or spaces, at most 17 significant decimals. Returns 0, or -1 when
 * the text is not such a decimal in [0, 100].
 */
int roi_top_percent_count(const char *p_text, size_t n, size_t *k);

/*
 * Ranks candidates by t descending (ties: lower voxel index first) and keeps
 * the rule's share. cand holds n voxel indices in ascending order, t their
 * define t (candidates with non-finite t must already be dropped). chosen gets
 * the kept voxel indices in rank order (room for n); returns their count.
 * value is N for top_voxels (fractions round down) and t0 for min_t (kept:
 * t > t0, strictly); top_percent reads p_text (validate it first with
 * roi_top_percent_count: an invalid text keeps nothing) or, when p_text is
 * NULL, the shortest decimal ("%.15g") of value. Allocates scratch; thread safe.
 */
size_t roi_select(const size_t *cand, const double *t, size_t n, enum roi_rule rule,
		  double value, const char *p_text, size_t *chosen);

#endif
