/* table.c - reading TSV/CSV files through libcsv, keeping the file line of every row. */
#include "table.h"

#include <csv.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "../core/mem.h"
#include "readall.h"

/*
 * Parser state. The file is fed to libcsv one physical line at a time, so a
 * row-end callback knows the line it happened on; subtracting the newlines
 * held inside the row's quoted fields gives the line the row started on.
 */
typedef struct parse_state {
	const char *path;
	sr_err *e;
	int failed;                /* the message is in e; the status is always SR_EFORMAT */
	size_t cur_line;           /* line being fed */
	char **row;                /* fields of the row in progress */
	size_t nrow, caprow;
	size_t row_newlines;       /* '\n' inside the fields of the row in progress */
	int have_header;
	table *t;
	size_t caprows;            /* rows allocated in t->cells / t->line */
} parse_state;

static void row_clear(parse_state *s)
{
	for (size_t i = 0; i < s->nrow; i++)
		free(s->row[i]);
	s->nrow = 0;
	s->row_newlines = 0;
}

static void on_field(void *data, size_t len, void *ctx)
{
	parse_state *s = ctx;
	char *f;

	if (s->failed)
		return;
	f = xmalloc(len + 1);
	if (len)
		memcpy(f, data, len);
	f[len] = '\0';
	for (size_t i = 0; i < len; i++)   /* line breaks: LF, CRLF, or a CR alone */
		if (f[i] == '\n' || (f[i] == '\r' && (i + 1 == len || f[i + 1] != '\n')))
			s->row_newlines++;
	XGROW(s->row, s->nrow, s->caprow);
	s->row[s->nrow++] = f;
}

static int row_is_blank(const parse_state *s)
{
	for (size_t i = 0; i < s->nrow; i++)
		if (s->row[i][0])
			return 0;
	return 1;
}

typedef struct named {
	const char *name;
	size_t pos;
} named;

static int cmp_named(const void *a, const void *b)
{
	const named *x = a, *y = b;
	int c = strcmp(x->name, y->name);

	return c ? c : (x->pos > y->pos) - (x->pos < y->pos);
}

static void take_header(parse_state *s, size_t line)
{
	table *t = s->t;

	/* A trailing delimiter on the header line leaves empty names at the end. */
	while (s->nrow > 1 && s->row[s->nrow - 1][0] == '\0') {
		free(s->row[s->nrow - 1]);
		s->nrow--;
	}
	/* duplicate names by sorting (name, position): linear-logarithmic, since a header
	   may have 100000 columns; reports the pair a left-to-right scan meets first */
	{
		named *v = xmalloc_array(s->nrow ? s->nrow : 1, sizeof *v);
		size_t i, bi = (size_t)-1, bj = 0;

		for (i = 0; i < s->nrow; i++) {
			v[i].name = s->row[i];
			v[i].pos = i;
		}
		qsort(v, s->nrow, sizeof *v, cmp_named);
		for (i = 1; i < s->nrow; i++)
			if (v[i].name[0] && strcmp(v[i].name, v[i - 1].name) == 0 &&
			    (i < 2 || strcmp(v[i - 1].name, v[i - 2].name) != 0) && v[i].pos < bi) {
				bi = v[i].pos;
				bj = v[i - 1].pos;
			}
		free(v);
		if (bi != (size_t)-1) {
			s->failed = 1;
			sr_fail(s->e, SR_EFORMAT,
				"%s: line %zu: column '%s' appears twice (columns %zu and %zu)",
				s->path, line, s->row[bi], bj + 1, bi + 1);
			return;
		}
	}
	t->ncols = s->nrow;
	t->header = s->row;
	t->header_line = line;
	s->row = NULL;
	s->nrow = s->caprow = 0;
	s->row_newlines = 0;
	s->have_header = 1;
}

static void take_row(parse_state *s, size_t line)
{
	table *t = s->t;
	size_t base;

	for (size_t i = t->ncols; i < s->nrow; i++)
		if (s->row[i][0]) {
			s->failed = 1;
			sr_fail(s->e, SR_EFORMAT,
				"%s: line %zu: %zu fields but the header (line %zu) has %zu columns",
				s->path, line, s->nrow, t->header_line, t->ncols);
			return;
		}
	if (t->nrows == s->caprows) {
		size_t bytes;

		s->caprows = s->caprows ? 2 * s->caprows : 64;
		if (sr_mul_size(s->caprows, t->ncols * sizeof(char *), &bytes))
			bytes = (size_t)-1;
		t->cells = xrealloc(t->cells, bytes);
		t->line = xrealloc(t->line, s->caprows * sizeof *t->line);
	}
	base = t->nrows * t->ncols;
	for (size_t i = 0; i < t->ncols; i++) {
		if (i < s->nrow) {
			t->cells[base + i] = s->row[i];
			s->row[i] = NULL;
		} else {
			t->cells[base + i] = xstrdup("");
		}
	}
	t->line[t->nrows++] = line;
}

static void on_row(int c, void *ctx)
{
	parse_state *s = ctx;
	size_t line;

	(void)c;
	if (s->failed)
		return;
	line = s->cur_line - s->row_newlines;
	if (row_is_blank(s)) {
		row_clear(s);
		return;
	}
	if (!s->have_header)
		take_header(s, line);
	else
		take_row(s, line);
	if (!s->failed)
		row_clear(s);
}

static sr_status slurp(const char *path, char **buf, size_t *len, sr_err *e)
{
	switch (readall_file(path, 0, buf, len)) {
	case READALL_OK:
		return SR_OK;
	case READALL_EOPEN:
		return sr_fail(e, SR_EIO, "cannot open %s: %s", path, strerror(errno));
	default:
		return sr_fail(e, SR_EIO, "cannot read %s: %s", path, strerror(errno));
	}
}

static char choose_delim(const char *path, char delim)
{
	size_t n = strlen(path);

	if (delim)
		return delim;
	if (n >= 4 && strcasecmp(path + n - 4, ".csv") == 0)
		return ',';
	return '\t';
}

/*
 * Bytes up to and including the end of the line at b: LF, CRLF, or a CR alone (as old
 * spreadsheet exports end lines; libcsv ends a row there too, so lines are counted alike).
 */
static size_t line_length(const char *b, size_t n)
{
	for (size_t i = 0; i < n; i++) {
		if (b[i] == '\n')
			return i + 1;
		if (b[i] == '\r' && (i + 1 == n || b[i + 1] != '\n'))
			return i + 1;
	}
	return n;
}

/* Line on which the unclosed quoted field began: the parser still holds its text. */
static size_t open_quote_line(const parse_state *s, const struct csv_parser *p)
{
	size_t nl = 0, n = p->entry_pos;

	const unsigned char *b = p->entry_buf;

	if (n && (b[n - 1] == '\n' || b[n - 1] == '\r'))
		n--;
	for (size_t i = 0; i < n; i++)
		if (b[i] == '\n' || (b[i] == '\r' && b[i + 1] != '\n'))
			nl++;
	return s->cur_line > nl ? s->cur_line - nl : 1;
}

sr_status table_read(const char *path, char delim, table *t, sr_err *e)
{
	struct csv_parser p;
	parse_state s;
	char *buf = NULL;
	size_t len = 0, pos = 0;
	sr_status st;

	memset(t, 0, sizeof *t);
	st = slurp(path, &buf, &len, e);
	if (st)
		return st;
	if (csv_init(&p, CSV_APPEND_NULL) != 0) {
		free(buf);
		return sr_fail(e, SR_ENOMEM, "cannot start the table parser for %s", path);
	}
	csv_set_delim(&p, (unsigned char)choose_delim(path, delim));
	/* libcsv grows its field buffer by this much at a time: the default 128 bytes
	   makes a megabyte-long cell cost thousands of reallocs (minutes under ASan) */
	csv_set_blk_size(&p, 1 << 16);
	memset(&s, 0, sizeof s);
	s.path = path;
	s.e = e;
	s.t = t;
	t->path = xstrdup(path);
	if (len >= 3 && memcmp(buf, "\xEF\xBB\xBF", 3) == 0)
		pos = 3;
	while (pos < len && !s.failed) {
		size_t seg = line_length(buf + pos, len - pos);

		s.cur_line++;
		if (csv_parse(&p, buf + pos, seg, on_field, on_row, &s) != seg && !s.failed) {
			s.failed = 1;
			sr_fail(e, SR_EFORMAT, "%s: line %zu: %s", path, s.cur_line,
				csv_strerror(csv_error(&p)));
		}
		pos += seg;
	}
	/*
	 * libcsv reports an unclosed quote only in strict mode, which also rejects
	 * a stray quote inside an unquoted cell; check its state here instead
	 * (2 is its "field begun" state), or the rest of the file would silently
	 * become one cell.
	 */
	if (!s.failed && p.quoted && p.pstate == 2) {
		s.failed = 1;
		sr_fail(e, SR_EFORMAT, "%s: line %zu: a quoted field is never closed", path,
			open_quote_line(&s, &p));
	}
	if (!s.failed && csv_fini(&p, on_field, on_row, &s) != 0 && !s.failed) {
		s.failed = 1;
		sr_fail(e, SR_EFORMAT, "%s: %s", path, csv_strerror(csv_error(&p)));
	}
	if (!s.failed && !s.have_header) {
		s.failed = 1;
		sr_fail(e, SR_EFORMAT, "%s: no header row (the file is empty)", path);
	}
	csv_free(&p);
	row_clear(&s);
	free(s.row);
	free(buf);
	if (s.failed) {
		table_release(t);
		return SR_EFORMAT;
	}
	return SR_OK;
}

void table_release(table *t)
{
	if (!t)
		return;
	if (t->cells)
		for (size_t i = 0; i < t->nrows * t->ncols; i++)
			free(t->cells[i]);
	if (t->header)
		for (size_t i = 0; i < t->ncols; i++)
			free(t->header[i]);
	free(t->cells);
	free(t->header);
	free(t->line);
	free(t->path);
	memset(t, 0, sizeof *t);
}

int table_col(const table *t, const char *name)
{
	for (size_t i = 0; i < t->ncols; i++)
		if (strcmp(t->header[i], name) == 0)
			return (int)i;
	return -1;
}

const char *table_cell(const table *t, size_t row, size_t col)
{
	if (row >= t->nrows || col >= t->ncols)
		return "";
	return t->cells[row * t->ncols + col];
}

sr_status table_number(const table *t, size_t row, size_t col, double *v, int *is_na,
		       int allow_empty, sr_err *e)
{
	const char *s = table_cell(t, row, col);
	const char *name = col < t->ncols ? t->header[col] : "?";
	size_t line = row < t->nrows ? t->line[row] : 0;
	char *end;
	double x;

	*is_na = 0;
	*v = NAN;
	if (strcmp(s, "n/a") == 0 || (allow_empty && s[0] == '\0')) {
		*is_na = 1;
		return SR_OK;
	}
	if (s[0] == '\0')
		return sr_fail(e, SR_EFORMAT, "%s: line %zu, column %zu (%s): empty cell, expected a number",
			       t->path, line, col + 1, name);
	/* strtod also takes hexadecimal and "inf"/"nan": only finite decimals are numbers here. */
	errno = 0;
	x = strtod(s, &end);
	while (end != s && (*end == ' ' || *end == '\t'))
		end++;
	if (end == s || *end != '\0' || !isfinite(x) || strpbrk(s, "xX"))
		return sr_fail(e, SR_EFORMAT, "%s: line %zu, column %zu (%s): '%.80s' is not a number",
			       t->path, line, col + 1, name, s);
	*v = x;
	return SR_OK;
}
