/* reliability.h - reliability.csv (per subject and combined) and its group summary, reliability_group.csv. */
#ifndef SR_RELIABILITY_H
#define SR_RELIABILITY_H

#include <stddef.h>
#include <stdint.h>

#include "../core/err.h"

/* One row of reliability.csv: a split's own row (pair columns NaN) or a ":mean" row. */
typedef struct reliability_row {
	char *localizer, *parcel, *split, *define_runs;
	double n_voxels;       /* parcel voxels with a finite define t (a mean on ":mean" rows) */
	double n_above;        /* of those, t > RELIAB_T_ABOVE (a mean on ":mean" rows) */
	double froi_voxels;    /* the fROI's size (a mean on ":mean" rows) */
	double t_correlation, dice, pairs;   /* ":mean" rows only, else NaN */
} reliability_row;

typedef struct reliability_table {
	reliability_row *rows;
	size_t n, cap;
} reliability_table;

/* The columns of reliability.csv, in order (one list: the writer and the combined table use it). */
extern const char *const reliability_columns[];
extern const size_t reliability_ncolumns;

/*
 * Adds the rows of one localizer's splits: per split (name split[s], define
 * runs def[s]) and parcel, its counts from the define t map t[s] and fROI
 * froi[s]; then per parcel the ":mean" row (kind, e.g. "odd-even:mean",
 * define runs mdef) with the pairs' mean r and Dice (core/reliab). t[s] are
 * the maps as written (float32 values). lab (nvox) holds the parcels on the
 * data grid; np parcels with index[] and name[]; lost[p] (or NULL) marks a
 * parcel with no voxel, whose rows are empty.
 */
void reliability_add_splits(reliability_table *tb, const char *localizer, const char *const *split,
		       const char *const *def, const char *kind, const char *mdef,
		       const double *const *t, const int32_t *const *froi, size_t nsplit,
		       const int32_t *lab, size_t nvox, const int32_t *index, char *const *name, int np,
		       const unsigned char *lost);
void reliability_table_release(reliability_table *tb);

/* Writes the rows as reliability.csv (header + rows) atomically. */
sr_status reliability_table_write(const char *path, const char *subject, const reliability_table *tb,
			     sr_err *e);

/*
 * The group summary: reads OUT/sub-<label>/reliability.csv of the n labels
 * and writes OUT/reliability_group.csv, per localizer, parcel, split kind
 * and measure (t_correlation, dice, n_above) of the ":mean" rows: the number
 * of subjects with a value, median, minimum and maximum. A subject without
 * the file is left out with a warning through e->warn; when no subject has
 * one (tables made by hand), no summary is written and an old one removed.
 */
sr_status reliability_group_write(const char *out, char *const *labels, size_t n, sr_err *e);

#endif
