/* qc.h - quality-control numerics for the report: motion, overlap, slices, colours, axis ticks. */
#ifndef SR_QC_H
#define SR_QC_H

#include <stddef.h>
#include <stdint.h>

#include "err.h"

/*
 * Framewise displacement (Power et al. 2012, NeuroImage 59:2142-2154).
 * mp holds nt rows of six rigid-body parameters, row-major: three
 * translations (mm), then three rotations (radians, or degrees when
 * degrees != 0). fd[0] = 0; fd[i] = sum over the six parameters of
 * |p_i - p_{i-1}|, rotations first turned into arc length on a sphere of
 * radius_mm (50 mm in the paper). A non-finite parameter makes the two
 * differences it enters NaN. Fails (SR_EINVAL) when radius_mm <= 0.
 */
sr_status qc_fd(const double *mp, size_t nt, int degrees, double radius_mm, double *fd, sr_err *e);

/* Mean and maximum of the finite values of x (NaN when none). */
void qc_mean_max(const double *x, size_t n, double *mean, double *max);

/*
 * Overlap of the voxels labelled `label` in a and b (n voxels each):
 * Dice = 2|A and B| / (|A| + |B|) (Dice 1945, Ecology 26:297-302).
 * Returns NaN when both are empty. na, nb, nab (may be NULL) get the counts.
 */
double qc_dice(const int32_t *a, const int32_t *b, size_t n, int32_t label, size_t *na,
	       size_t *nb, size_t *nab);

/*
 * The perceptually uniform "viridis" colour map (van der Walt & Smith 2015,
 * matplotlib; CC0). t in [0, 1] (clamped; NaN gives the lowest colour) to
 * 8-bit sRGB.
 */
void qc_viridis(double t, unsigned char rgb[3]);

/*
 * "Nice" axis ticks covering [lo, hi] (Heckbert 1990, Graphics Gems I,
 * "Nice numbers for graph labels"): steps 1, 2 or 5 times a power of ten,
 * about `target` intervals. Writes up to max ticks (ascending) and returns
 * how many; *step gets the spacing. lo == hi is widened by one unit.
 */
size_t qc_ticks(double lo, double hi, int target, double *ticks, size_t max, double *step);

/* Copies axial slice k (0-based) of an nx*ny*nz volume (x fastest) into out (nx*ny). */
void qc_slice_z(const double *vol, size_t nx, size_t ny, size_t nz, size_t k, double *out);

/*
 * Picks up to want axial slices through the voxels labelled `label` of an
 * nx*ny*nz image: evenly spaced among the slices that contain any, so the
 * fROI's extent shows. Writes ascending slice indices into out; returns how
 * many (0 when the label is absent).
 */
size_t qc_pick_slices(const int32_t *lab, size_t nx, size_t ny, size_t nz, int32_t label,
		      size_t want, size_t *out);

/*
 * Display window for a grayscale image: the plo and phi quantiles (0..1,
 * linear interpolation between order statistics) of the finite, non-zero
 * values of x. Falls back to min/max when there are fewer than two such
 * values; lo == hi when flat. Allocates a scratch copy.
 */
void qc_window(const double *x, size_t n, double plo, double phi, double *lo, double *hi);

/*
 * Marks the edge of a 2-D mask (nx*ny, x fastest): edge[v] = 1 where
 * mask[v] is set and a 4-neighbour is unset or outside the image.
 */
void qc_edge(const unsigned char *mask, size_t nx, size_t ny, unsigned char *edge);

/*
 * A robust lower fence for outlier marking: median - k * 1.4826 * MAD over the
 * finite values of x (1.4826 * MAD estimates the standard deviation of normal
 * data; common practice). NaN when fewer than 3 values are finite. x is not
 * changed.
 */
double qc_low_fence(const double *x, size_t n, double k);

#endif
