/* parcels.h - a parcel label image and its names table (.tsv, columns index and name), read and validated once for every caller. */
#ifndef SR_PARCELS_H
#define SR_PARCELS_H

#include <stddef.h>
#include <stdint.h>

#include "../core/err.h"
#include "nii.h"

/* A names table in file order; every index a whole number >= 1, none twice. */
typedef struct parcels_names {
	char *path;
	size_t n;
	int32_t *index;
	char **name;          /* as written; "" when the cell is empty */
	size_t *line;         /* 1-based file line of each row */
} parcels_names;

/* A parcel image with the distinct labels it holds and their names. */
typedef struct parcels_set {
	nii_grid grid;        /* the image's own grid */
	int32_t *labels;      /* nvox labels on that grid, 0 = no parcel */
	size_t nvox;
	int n;                /* parcels present, ascending index */
	int32_t *index;
	size_t *count;        /* voxels of each */
	char **name;          /* the table's name, else the integer label */
	unsigned char *named; /* 1 where the table gave the name */
	int have_names;       /* a names table was read (names holds it) */
	parcels_names names;
} parcels_set;

/* Receives one problem found while listing (parcels_load_listing). */
typedef void (*parcels_problem_fn)(void *ctx, const char *msg);

/*
 * Reads a parcel image (every voxel a whole number >= 0, at least one
 * nonzero) and, when names is not NULL, its names table. Warnings through
 * e: a table row whose index has no voxels in the image, an image label with
 * no (or an empty) row in the table. The first problem fails the load.
 */
sr_status parcels_load(const char *image, const char *names, parcels_set *p, sr_err *e);

/*
 * As parcels_load, but problems of the names table and an empty image go to
 * each (with ctx) and the load goes on, so that every bad row is listed:
 * rows that fail are left out, a table that cannot be used is left out
 * whole. Fails (p empty) only when the image itself cannot be read.
 */
sr_status parcels_load_listing(const char *image, const char *names, parcels_problem_fn each, void *ctx,
			       parcels_set *p, sr_err *e);

void parcels_release(parcels_set *p);

/* Row of label among the parcels present, or -1. */
int parcels_find(const parcels_set *p, int32_t label);

/* The table's name for label (present in the image or not), or NULL when no table row names it. */
const char *parcels_name(const parcels_set *p, int32_t label);

/* Reads and validates a names table alone (file order kept). */
sr_status parcels_names_read(const char *path, parcels_names *t, sr_err *e);
void parcels_names_release(parcels_names *t);

/* The table's name for label, or NULL when no row names it (an empty cell names nothing). */
const char *parcels_names_find(const parcels_names *t, int32_t label);

#endif
