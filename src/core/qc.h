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

/* What a design-matrix column models, from its name (io/designcsv's column names). */
typedef enum qc_col_kind { QC_COL_CONDITION, QC_COL_CONFOUND, QC_COL_DRIFT, QC_COL_BASELINE } qc_col_kind;

/*
 * The kind of a design column: "baseline" is the baseline, "cos_<n>" a
 * drift (cosine) column, a name among the nconf
 * confound names a confound, anything else a condition.
 */
qc_col_kind qc_column_kind(const char *name, char *const *confounds, size_t nconf);

/*
 * Where a regressor rises: the rows i (ascending) at which x[i * stride]
 * first exceeds min + frac * (max - min) after being at or below it (row 0
 * counts when it starts above). Writes up to max indices into out and
 * returns how many (0 for a flat or non-finite column).
 */
size_t qc_rises(const double *x, size_t n, size_t stride, double frac, size_t *out, size_t max);

/*
 * The anatomical letter a voxel axis points to: axis 0..2 of the 3x4
 * voxel-to-world affine (NIfTI world space is RAS+: x to the subject's Right,
 * y Anterior, z Superior), sign +1 or -1 for the axis' positive or negative
 * direction. The world component with the largest magnitude decides, so an
 * oblique axis gets the letter it is closest to. Returns 'R','L','A','P','S'
 * or 'I' ('?' for a zero column). *cosine (may be NULL) gets |that component|
 * over the column's length: 1 for an axis-aligned image, lower when oblique.
 */
char qc_axis_letter(const double aff[3][4], int axis, int sign, double *cosine);

/*
 * The overlap check of the report, one fixed rule so a value gets the same
 * verdict wherever it appears: flagged (1) when either half's fROI is empty
 * (size 0 or not finite) or the halves share no voxel (Dice 0 or NaN).
 */
int qc_overlap_flag(double size_a, double size_b, double dice);
/* That rule in one line, as the pages and README state it. */
#define QC_OVERLAP_RULE "flagged when either half's fROI is empty or the two halves share no voxel " \
	"(Dice 0): one fixed rule, so equal Dice values get equal verdicts; a low but non-zero Dice is " \
	"common (near 0.1 for a top-10% fROI in a uniformly active region) and not flagged."

#endif
