/* timecourse.h - response time courses per fROI (FIR, core/fir): timecourses.csv and its group table. */
#ifndef SR_TIMECOURSE_H
#define SR_TIMECOURSE_H

#include <stddef.h>
#include <stdint.h>

#include "../core/err.h"
#include "runfit.h"

/* One row of timecourses.csv: a bin of one condition's time course. */
typedef struct timecourse_row {
	char *localizer, *parcel, *split, *task, *condition;
	double time;     /* the bin's start, seconds after onset */
	double value;    /* percent signal change; NaN = empty */
} timecourse_row;

typedef struct timecourse_table {
	timecourse_row *rows;
	size_t n, cap;
} timecourse_table;

/* The columns of timecourses.csv, in order (the writer and the combined table use this list). */
extern const char *const timecourse_columns[];
extern const size_t timecourse_ncolumns;

void timecourse_table_add(timecourse_table *tb, const char *localizer, const char *parcel, const char *split,
		  const char *task, const char *condition, double time, double value);
void timecourse_table_release(timecourse_table *tb);
sr_status timecourse_table_write(const char *path, const char *subject, const timecourse_table *tb, sr_err *e);

/*
 * The time courses of nf fROIs (fROI i: count[i] voxels vox[start[i]..] of
 * the data grid; pos[v] is voxel v's place among the runs' kept series, -1
 * when not kept) over the nruns fitted runs run[r] (TR tr[r]): per run, the
 * mean over each fROI's voxels analyzable in that run of the series scaled
 * to 100 * y / mean(y) (METHODS.md section 3), fitted by fir_fit_many with
 * the run's own confound, drift and constant columns (one factorisation per
 * run); then the mean over the runs with a value, per bin. out gets nf x
 * ncond x nbins values (conditions in the task's order, bins ascending), NaN
 * where no run gives one. A run whose FIR design cannot be fitted is left
 * out with a warning. SR_EIO when a run's kept series cannot be read back.
 */
sr_status timecourse_frois(const runfit_result *const *run, const double *tr, int nruns, const size_t *vox,
		   const size_t *start, const size_t *count, int nf, const int32_t *pos, int ncond,
		   int nbins, double volume_time, double *out, sr_err *e);

/*
 * The group table: reads OUT/sub-<label>/timecourses.csv of the n labels and
 * writes OUT/timecourses_group.csv, per localizer, parcel, split kind (the
 * ":mean" and "all" rows), task, condition and time: n subjects with a
 * value, their mean and standard error (sd with n - 1 over sqrt n; empty for
 * n < 2). No subject with a file (tables made by hand): nothing written, an
 * old table removed; a subject without one is left out with a warning.
 */
sr_status timecourse_group_write(const char *out, char *const *labels, size_t n, sr_err *e);

#endif
