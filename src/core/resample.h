/* resample.h - nearest-neighbour resampling of a label image onto another grid (affine math only). */
#ifndef SR_RESAMPLE_H
#define SR_RESAMPLE_H

#include <stddef.h>
#include <stdint.h>

/*
 * For every voxel of the target grid (tn[3] dims, affine ta: voxel -> world,
 * 3 x 4), looks up the source voxel nearest to its world position (source
 * dims sn[3], affine sa) and copies its label; outside the source: 0.
 * Returns 0, or -1 when the source affine is singular.
 */
int resample_nearest(const int32_t *src, const int64_t sn[3], const double sa[3][4],
		     int32_t *dst, const int64_t tn[3], const double ta[3][4]);

/* Inverts a 3 x 4 affine (the 4th row 0 0 0 1 implied). Returns -1 when singular. */
int resample_affine_inverse(const double a[3][4], double inv[3][4]);

#endif
