/* designcsv.h - the one writer of design matrices as CSV (analyze's design/ folder and fit's output). */
#ifndef SR_DESIGNCSV_H
#define SR_DESIGNCSV_H

#include "../core/design.h"
#include "../core/err.h"

/*
 * Writes d as CSV (atomically, LF line ends): a header naming the columns in
 * the design's order, one per condition (conds[0..ncond-1]), one per confound
 * (confs[0..nconf-1]), cos_1..cos_Q for the cosine drifts and baseline for the
 * column of ones; then one row per volume, every value in full precision
 * ("%.17g") so that the matrix can be refitted exactly.
 */
sr_status designcsv_write(const char *path, const design *d, const char *const *conds,
			  const char *const *confs, sr_err *e);

#endif
