/* parcels.c - one reader and validator for a parcel image and its names table. */
#include "parcels.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"
#include "../core/strv.h"
#include "table.h"

void parcels_names_release(parcels_names *t)
{
	size_t i;

	if (!t)
		return;
	for (i = 0; i < t->n; i++)
		free(t->name[i]);
	free(t->name);
	free(t->index);
	free(t->line);
	free(t->path);
	memset(t, 0, sizeof *t);
}

/* A problem: to each when listing (returns 0, go on), else into e (returns 1, stop). */
static int trouble(parcels_problem_fn each, void *ctx, sr_err *e)
{
	if (!each)
		return 1;
	each(ctx, e->msg);
	e->code = SR_OK;
	return 0;
}

/* The rows of a read table that pass; 0, or 1 on the first problem when not listing. */
static int names_rows(const table *tb, int ci, int cn, parcels_names *t, parcels_problem_fn each, void *ctx,
		      sr_err *e)
{
	size_t r, k;

	t->index = xmalloc_array(tb->nrows ? tb->nrows : 1, sizeof *t->index);
	t->name = xmalloc_array(tb->nrows ? tb->nrows : 1, sizeof *t->name);
	t->line = xmalloc_array(tb->nrows ? tb->nrows : 1, sizeof *t->line);
	for (r = 0; r < tb->nrows; r++) {
		double x;
		int na;

		if (table_number(tb, r, (size_t)ci, &x, &na, 0, e) != SR_OK) {
			if (trouble(each, ctx, e))
				return 1;
			continue;
		}
		if (na || x != floor(x) || x < 1 || x > 2147483647.0) {
			sr_fail(e, SR_EFORMAT, "%s: line %zu, column %d (index): '%s' is not a parcel label (a whole number >= 1)",
				tb->path, tb->line[r], ci + 1, table_cell(tb, r, (size_t)ci));
			if (trouble(each, ctx, e))
				return 1;
			continue;
		}
		for (k = 0; k < t->n && t->index[k] != (int32_t)x; k++)
			;
		if (k < t->n) {
			sr_fail(e, SR_EFORMAT, "%s: line %zu, column %d (index): parcel %d is already named on line %zu",
				tb->path, tb->line[r], ci + 1, (int)x, t->line[k]);
			if (trouble(each, ctx, e))
				return 1;
			continue;
		}
		t->index[t->n] = (int32_t)x;
		t->line[t->n] = tb->line[r];
		t->name[t->n++] = xstrdup(table_cell(tb, r, (size_t)cn));
	}
	return 0;
}

/* Reads path into t; 1 when it cannot be used (the reason in e, and to each when listing). */
static int names_load(const char *path, parcels_names *t, parcels_problem_fn each, void *ctx, sr_err *e)
{
	table tb;
	int ci, cn, bad;

	memset(t, 0, sizeof *t);
	if (table_read(path, 0, &tb, e) != SR_OK) {
		trouble(each, ctx, e);
		return 1;
	}
	ci = table_col(&tb, "index");
	cn = table_col(&tb, "name");
	if (ci < 0 || cn < 0) {
		sr_fail(e, SR_EFORMAT, "%s: line %zu: the parcel names table needs columns 'index' and 'name'", path,
			tb.header_line);
		table_release(&tb);
		trouble(each, ctx, e);
		return 1;
	}
	t->path = xstrdup(path);
	bad = names_rows(&tb, ci, cn, t, each, ctx, e);
	table_release(&tb);
	if (bad)
		parcels_names_release(t);
	return bad;
}

sr_status parcels_names_read(const char *path, parcels_names *t, sr_err *e)
{
	return names_load(path, t, NULL, NULL, e) ? e->code : SR_OK;
}

const char *parcels_names_find(const parcels_names *t, int32_t label)
{
	size_t k;

	for (k = 0; t && k < t->n; k++)
		if (t->index[k] == label)
			return t->name[k][0] ? t->name[k] : NULL;
	return NULL;
}

void parcels_release(parcels_set *p)
{
	int i;

	if (!p)
		return;
	free(p->labels);
	for (i = 0; p->name && i < p->n; i++)
		free(p->name[i]);
	free(p->name);
	free(p->named);
	free(p->index);
	free(p->count);
	parcels_names_release(&p->names);
	memset(p, 0, sizeof *p);
}

int parcels_find(const parcels_set *p, int32_t label)
{
	const int32_t *hit = p->n ? bsearch(&label, p->index, (size_t)p->n, sizeof *p->index, strv_cmp_i32) : NULL;

	return hit ? (int)(hit - p->index) : -1;
}

const char *parcels_name(const parcels_set *p, int32_t label)
{
	return p->have_names ? parcels_names_find(&p->names, label) : NULL;
}

/* The image's labels, their distinct values ascending and their voxel counts. */
static sr_status read_image(const char *image, parcels_set *p, sr_err *e)
{
	nii_info info;
	double *d;
	size_t v, nx, ny, cap = 0;
	sr_status rc = nii_read_3d(image, &info, &d, e);

	if (rc)
		return rc;
	p->grid = info.grid;
	p->nvox = nii_nvox(&info.grid);
	nx = (size_t)info.grid.nx;
	ny = (size_t)info.grid.ny;
	p->labels = xmalloc_array(p->nvox ? p->nvox : 1, sizeof *p->labels);
	for (v = 0; v < p->nvox; v++) {
		double x = d[v];

		if (!isfinite(x) || x < 0 || x != floor(x) || x > 2147483647.0) {
			free(d);
			parcels_release(p);
			return sr_fail(e, SR_EFORMAT,
				       "%s: voxel (%zu, %zu, %zu) holds %g; parcel labels must be whole numbers >= 0",
				       image, v % nx, v / nx % ny, v / (nx * ny), x);
		}
		p->labels[v] = (int32_t)x;
	}
	free(d);
	for (v = 0; v < p->nvox; v++) {
		int32_t l = p->labels[v];
		int k;

		if (l == 0)
			continue;
		for (k = 0; k < p->n && p->index[k] != l; k++)
			;
		if (k < p->n)
			continue;
		XGROW(p->index, (size_t)p->n, cap);
		p->index[p->n++] = l;
	}
	if (p->n)   /* qsort wants a real array even for no elements */
		qsort(p->index, (size_t)p->n, sizeof *p->index, strv_cmp_i32);
	p->count = xcalloc(p->n ? (size_t)p->n : 1, sizeof *p->count);
	for (v = 0; v < p->nvox; v++)
		if (p->labels[v])
			p->count[parcels_find(p, p->labels[v])]++;
	return SR_OK;
}

/* Names of the parcels present, warnings for rows and parcels the other side lacks. */
static void name_parcels(const char *image, parcels_set *p, sr_err *e)
{
	size_t k;
	int i;

	/* the image decides which parcels exist; names only label them */
	for (k = 0; p->have_names && k < p->names.n; k++)
		if (parcels_find(p, p->names.index[k]) < 0)
			sr_warnf(e, "%s: line %zu: parcel %s (index %d) has no voxels in %s; it gets no rows",
				 p->names.path, p->names.line[k], p->names.name[k], (int)p->names.index[k], image);
	p->name = xcalloc(p->n ? (size_t)p->n : 1, sizeof *p->name);
	p->named = xcalloc(p->n ? (size_t)p->n : 1, 1);
	for (i = 0; i < p->n; i++) {
		const char *nm = parcels_name(p, p->index[i]);
		char buf[32];

		snprintf(buf, sizeof buf, "%d", (int)p->index[i]);
		p->name[i] = xstrdup(nm ? nm : buf);
		p->named[i] = nm != NULL;
		if (p->have_names && !nm)
			sr_warnf(e, "%s: parcel %d has no row in %s; its label is its name", image, (int)p->index[i],
				 p->names.path);
	}
}

static sr_status load(const char *image, const char *names, parcels_problem_fn each, void *ctx, parcels_set *p,
		      sr_err *e)
{
	sr_status rc;

	memset(p, 0, sizeof *p);
	rc = read_image(image, p, e);
	if (rc)
		return rc;
	if (names) {
		if (names_load(names, &p->names, each, ctx, e) == 0)
			p->have_names = 1;
		else if (!each) {
			rc = e->code;
			parcels_release(p);
			return rc;
		}
	}
	name_parcels(image, p, e);
	if (p->n == 0) {
		/* nothing could be defined: stop before fitting a single run */
		sr_fail(e, SR_EFORMAT, "%s: no parcels (every voxel is 0)", image);
		if (trouble(each, ctx, e)) {
			parcels_release(p);
			return SR_EFORMAT;
		}
	}
	return SR_OK;
}

sr_status parcels_load(const char *image, const char *names, parcels_set *p, sr_err *e)
{
	return load(image, names, NULL, NULL, p, e);
}

sr_status parcels_load_listing(const char *image, const char *names, parcels_problem_fn each, void *ctx,
			       parcels_set *p, sr_err *e)
{
	return load(image, names, each, ctx, p, e);
}
