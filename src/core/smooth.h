/* smooth.h - separable Gaussian smoothing of a 3-D field on a grid with anisotropic voxels. */
#ifndef SR_SMOOTH_H
#define SR_SMOOTH_H

#include <stdint.h>

#include "err.h"

/*
 * Sigma in voxels of a Gaussian of the given FWHM (mm) along an axis whose
 * voxels are voxel_mm wide: FWHM / (2 sqrt(2 ln 2)) / voxel_mm (the standard
 * FWHM relation of the normal density). 0 when fwhm_mm is 0.
 */
double smooth_fwhm_sigma(double fwhm_mm, double voxel_mm);

/*
 * Smooths x (nx*ny*nz values, x fastest) in place with a Gaussian of sigma[a]
 * voxels along axis a, one axis after the other. The 1-D kernel is
 * exp(-d^2 / (2 sigma^2)) for integer offsets |d| <= r, r = floor(4 sigma + 0.5),
 * normalised to sum 1 over those offsets; an axis with sigma <= 1e-15 is left
 * alone. Boundary: the field is zero outside the grid and the kernel is not
 * renormalised at the edges (mass near the border leaks out), the same as
 * scipy.ndimage.gaussian_filter(mode='constant', cval=0, truncate=4).
 * Non-finite input values are an error. Errors: SR_EDIM for bad sizes,
 * SR_EINVAL for a negative or non-finite sigma or a non-finite value.
 * Thread safe (no shared state).
 */
sr_status smooth_gauss3(double *x, int64_t nx, int64_t ny, int64_t nz, const double sigma[3],
			sr_err *e);

#endif
