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

/*
 * A reusable smoother for many volumes of one grid with one kernel (the
 * volumes of a run): kernels and two volumes of scratch are allocated once,
 * so that smoothing a volume never allocates. Not thread safe: one plan per
 * thread; plans are independent of each other.
 */
typedef struct smooth_plan smooth_plan;

/*
 * Makes a plan for grids of nx*ny*nz voxels and the kernel of smooth_gauss3.
 * Errors as smooth_gauss3 (sizes, sigmas). On failure *out is NULL.
 * The caller frees it with smooth_plan_free (NULL does nothing).
 */
sr_status smooth_plan_alloc(int64_t nx, int64_t ny, int64_t nz, const double sigma[3],
			    smooth_plan **out, sr_err *e);
void smooth_plan_free(smooth_plan *p);

/*
 * Normalised convolution inside a support (METHODS.md section 2b): the
 * support S is the voxels with (mask == NULL or mask[i] != 0) whose value is
 * finite and > 0. Replaces vol (nx*ny*nz values) by
 *   G*(vol 1_S) / G*(1_S)   on S,   NaN outside S,
 * with G the plan's Gaussian, zero outside the grid: the ratio of two
 * scipy.ndimage.gaussian_filter(mode='constant', cval=0, truncate=4) results.
 * G*(1_S) is kept between calls: when S is the same as in the previous call it
 * is reused, when it differs in a few voxels it is updated by adding or
 * subtracting the kernel at those voxels (equal to a fresh computation up to
 * rounding, about 1e-15 relative; computed afresh at least every 65 volumes),
 * else computed afresh. The result depends only on the sequence of volumes
 * given to the plan. Cannot fail.
 */
void smooth_support(smooth_plan *p, double *vol, const unsigned char *mask);

#endif
