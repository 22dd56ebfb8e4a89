/* table.h - TSV/CSV tables via libcsv: header row, columns by name, n/a, CRLF, BOM, quotes. */
#ifndef SR_TABLE_H
#define SR_TABLE_H

#include <stddef.h>

#include "../core/err.h"

/* A table held in memory. Rows do not include the header. Owned by the caller (table_release). */
typedef struct table {
	char *path;
	size_t nrows, ncols;
	char **header;      /* ncols names */
	char **cells;       /* nrows * ncols, row-major; a short row's missing cells are "" */
	size_t *line;       /* 1-based file line of each row (for messages) */
} table;

/*
 * Reads path. delim: '\t', ',' or 0 to choose by extension (.tsv tab, .csv
 * comma). Strips a UTF-8 byte-order mark, accepts LF and CRLF, quoted fields.
 * A row with more fields than the header is an error naming line; a file with
 * no header is an error. Blank lines are skipped.
 */
sr_status table_read(const char *path, char delim, table *t, sr_err *e);
void table_release(table *t);

/* Column index of name, or -1. */
int table_col(const table *t, const char *name);
/* Cell text (never NULL). */
const char *table_cell(const table *t, size_t row, size_t col);

/*
 * Parses a number cell. "n/a" (and "" when allow_empty) sets *is_na = 1 and
 * *v = NAN. Anything else that is not a finite decimal number is an error:
 * "FILE: line L, column C (NAME): 'text' is not a number".
 */
sr_status table_number(const table *t, size_t row, size_t col, double *v, int *is_na,
		       int allow_empty, sr_err *e);

#endif
