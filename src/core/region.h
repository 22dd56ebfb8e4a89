/* region.h - label images: spheres around centres, sizes, centres of mass, renumbering. */
#ifndef SR_REGION_H
#define SR_REGION_H

#include <stddef.h>
#include <stdint.h>

#include "err.h"

/*
 * Spheres on a grid: voxel (i, j, k), at world position A [i j k 1]' (A the
 * 3x4 voxel-to-world affine, mm), belongs to sphere c when its distance to
 * centre c (xyz[3c..3c+2], mm) is <= radius. A voxel inside several spheres
 * goes to the nearest centre; equal distances go to the lower c. labels
 * (nx*ny*nz, x fastest) gets c + 1, or 0 outside every sphere.
 * Errors: SR_EDIM for bad sizes, SR_EINVAL for a negative or non-finite
 * radius or centre.
 */
sr_status region_spheres(const double A[3][4], int64_t nx, int64_t ny, int64_t nz,
			 const double *xyz, int n, double radius, int32_t *labels, sr_err *e);

/*
 * Per label l = 1..nlab: size[l-1] voxels and centre of mass com[3(l-1)..]
 * in world mm (the mean of the voxels' world positions; NaN for an empty
 * label). Labels outside 1..nlab are ignored.
 */
void region_stats(const int32_t *labels, int64_t nx, int64_t ny, int64_t nz, const double A[3][4],
		  int32_t nlab, size_t *size, double *com);

/*
 * Renumbers in place: label l (1..nlab) becomes map[l-1] (0 drops it);
 * other values become 0.
 */
void region_relabel(int32_t *labels, size_t nvox, int32_t nlab, const int32_t *map);

#endif
