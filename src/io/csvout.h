/* csvout.h - RFC 4180 CSV writer for result tables, atomic (temporary file then rename). */
#ifndef SR_CSVOUT_H
#define SR_CSVOUT_H

#include <stddef.h>

#include "../core/err.h"
#include "afile.h"

typedef struct csvout {
	afile file;
	size_t ncols, col;  /* fields per row, fields written in the current row */
	int failed;
} csvout;

/* Opens path and writes the header row. */
sr_status csvout_open(csvout *c, const char *path, const char *const *header, size_t ncols,
		      sr_err *e);
/* A text field (quoted when it holds a comma, quote, CR or LF). */
void csvout_str(csvout *c, const char *s);
/* A number with up to 9 significant digits ("%.9g"); NaN or infinite writes an empty field. */
void csvout_num(csvout *c, double v);
/* A whole number. */
void csvout_int(csvout *c, long long v);
/* An empty field. */
void csvout_empty(csvout *c);
/* Ends the row; a row with the wrong number of fields marks the writer failed. */
void csvout_endrow(csvout *c);
/* Checks, closes and renames into place. */
sr_status csvout_commit(csvout *c, sr_err *e);
void csvout_abort(csvout *c);

#endif
