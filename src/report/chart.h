/* chart.h - presentation for the report's figures: the colour map, axis ticks and tick labels. */
#ifndef SR_CHART_H
#define SR_CHART_H

#include <stddef.h>

/*
 * The perceptually uniform "viridis" colour map (van der Walt & Smith 2015,
 * matplotlib; CC0). t in [0, 1] (clamped; NaN gives the lowest colour) to
 * 8-bit sRGB.
 */
void chart_viridis(double t, unsigned char rgb[3]);

/*
 * "Nice" axis ticks covering [lo, hi] (Heckbert 1990, Graphics Gems I,
 * "Nice numbers for graph labels"): steps 1, 2 or 5 times a power of ten,
 * about `target` intervals. Writes up to max ticks (ascending) and returns
 * how many; *step gets the spacing. lo == hi is widened by one unit.
 */
size_t chart_ticks(double lo, double hi, int target, double *ticks, size_t max, double *step);

/*
 * Decimals to print numbers at a resolution of `step` (e.g. an axis step or
 * a tenth of it): 0 for steps >= 1, else enough that the step's first
 * significant digit shows (0.5 -> 1, 0.25 -> 2, 0.02 -> 2), at most 10.
 */
int chart_decimals(double step);

/*
 * Formats v with d decimals into buf (n bytes), never as "-0" / "-0.00":
 * a value that rounds to zero prints as zero.
 */
void chart_format(double v, int d, char *buf, size_t n);

#endif
