/* csvout.c - writing result tables as CSV through an atomic file. */
#include "csvout.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

sr_status csvout_open(csvout *c, const char *path, const char *const *header, size_t ncols,
		      sr_err *e)
{
	sr_status st;

	memset(c, 0, sizeof *c);
	if (ncols == 0)
		return sr_fail(e, SR_EINVAL, "%s: a table needs at least one column", path);
	st = afile_open(&c->file, path, e);
	if (st)
		return st;
	c->ncols = ncols;
	for (size_t i = 0; i < ncols; i++)
		csvout_str(c, header[i]);
	csvout_endrow(c);
	return SR_OK;
}

/* Starts a field: the separator, or a failure mark when the row is already full. */
static int field_begin(csvout *c)
{
	if (!c->file.f)
		return 0;
	if (c->col >= c->ncols) {
		c->col++;
		return 0;
	}
	if (c->col)
		fputc(',', c->file.f);
	c->col++;
	return 1;
}

void csvout_str(csvout *c, const char *s)
{
	if (!field_begin(c))
		return;
	if (!s)
		s = "";
	if (!strpbrk(s, ",\"\r\n")) {
		fputs(s, c->file.f);
		return;
	}
	fputc('"', c->file.f);
	for (; *s; s++) {
		if (*s == '"')
			fputc('"', c->file.f);
		fputc(*s, c->file.f);
	}
	fputc('"', c->file.f);
}

void csvout_num(csvout *c, double v)
{
	if (!field_begin(c))
		return;
	if (!isfinite(v))
		return;
	if (v == 0)
		v = 0;  /* no "-0" in tables */
	fprintf(c->file.f, "%.9g", v);
}

void csvout_num_exact(csvout *c, double v)
{
	if (!field_begin(c))
		return;
	if (!isfinite(v))
		return;
	if (v == 0)
		v = 0;
	fprintf(c->file.f, "%.17g", v);
}

void csvout_int(csvout *c, long long v)
{
	if (field_begin(c))
		fprintf(c->file.f, "%lld", v);
}

void csvout_empty(csvout *c)
{
	field_begin(c);
}

void csvout_endrow(csvout *c)
{
	if (!c->file.f)
		return;
	c->rows++;
	if (c->col != c->ncols && !c->failed) {
		c->failed = 1;
		c->bad_row = c->rows;
		c->bad_fields = c->col;
	}
	if (c->col <= c->ncols)
		fputc('\n', c->file.f);
	c->col = 0;
}

sr_status csvout_commit(csvout *c, sr_err *e)
{
	if (!c->file.f) {
		afile_abort(&c->file);
		return sr_fail(e, SR_EINVAL, "table writer used without a successful open");
	}
	if (c->col && !c->failed) {
		c->failed = 1;
		c->bad_row = c->rows + 1;
		c->bad_fields = c->col;
	}
	if (c->failed) {
		sr_status st = sr_fail(e, SR_EINVAL,
				       "%s: internal error: row %zu has %zu fields but the header has %zu; table not written",
				       c->file.path ? c->file.path : "table", c->bad_row, c->bad_fields,
				       c->ncols);

		afile_abort(&c->file);
		return st;
	}
	return afile_commit(&c->file, e);
}

void csvout_abort(csvout *c)
{
	afile_abort(&c->file);
	c->col = 0;
}
