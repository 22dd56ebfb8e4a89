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
	size_t header_line; /* 1-based file line of the header (1 unless blank lines precede it) */
} table;

/*
 * Reads path. delim: '\t', ',' or 0 to choose by extension (.csv comma,
 * anything else tab). Strips a UTF-8 byte-order mark, accepts LF and CRLF,
 * quoted fields (which may span lines; line numbers stay those of the file).
 * Spaces around unquoted cells are trimmed. A row with more non-empty fields
 * than the header is an error naming line (extra empty fields, as left by a
 * trailing delimiter, are dropped); a file with no header, a quote that is
 * never closed and a column name given twice are errors. Blank lines are
 * skipped. On error *t is left empty (safe to release).
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
