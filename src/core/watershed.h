/* watershed.h - basins of a 3-D field by priority flood from its regional maxima. */
#ifndef SR_WATERSHED_H
#define SR_WATERSHED_H

#include <stdint.h>

#include "err.h"

/*
 * Splits the voxels with f >= floor_value (the foreground; non-finite values
 * are background) into basins around the regional maxima of f, following
 * Meyer's flooding (Meyer 1994, Signal Processing 38:113-125) turned upside
 * down, since here high values are the centres of regions:
 *   1. markers: connected plateaus of equal value (exact comparison) with no
 *      neighbour of higher value;
 *   2. every marker voxel goes into a priority queue; the queue pops the
 *      highest value first and, among equal values, the lowest linear index
 *      (x fastest), so plateaus and ties are handled the same way every run;
 *   3. a popped voxel gives its label to each unlabelled foreground
 *      neighbour, which is then queued. A voxel thus belongs to the first
 *      basin that reaches it; there are no watershed lines.
 * connectivity 6 (faces) or 26 (faces, edges, corners) defines neighbours,
 * for plateaus and flooding alike. Labels are 1..*nlabels ordered by peak
 * value, highest first (ties: lower linear index of the plateau's first
 * voxel); background 0. labels holds nx*ny*nz values.
 * Errors: SR_EDIM for bad sizes, SR_EINVAL for a bad connectivity.
 */
sr_status watershed_label(const double *f, int64_t nx, int64_t ny, int64_t nz, double floor_value,
			  int connectivity, int32_t *labels, int32_t *nlabels, sr_err *e);

#endif
