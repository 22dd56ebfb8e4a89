/* csvout.h - RFC 4180 CSV writer for result tables, atomic (temporary file then rename). */
/*
 * Rows end in LF rather than RFC 4180's CRLF, so that line tools (grep, cut,
 * awk) see clean last fields; every CSV reader accepts both. A writer is used
 * by one thread at a time.
 */
#ifndef SR_CSVOUT_H
#define SR_CSVOUT_H

#include <stddef.h>

#include "../core/err.h"
#include "afile.h"

typedef struct csvout {
	afile file;
	size_t ncols, col;  /* fields per row, fields written in the current row */
	int failed;
	size_t rows;        /* rows ended so far, header included */
	size_t bad_row, bad_fields;  /* first row with a wrong field count (1-based), its count */
} csvout;

/* Opens path (a temporary file beside it) and writes the header row. On error nothing is left behind. */
sr_status csvout_open(csvout *c, const char *path, const char *const *header, size_t ncols,
		      sr_err *e);
/* A text field (quoted when it holds a comma, quote, CR or LF). */
void csvout_str(csvout *c, const char *s);
/* A number with up to 9 significant digits ("%.9g"); NaN or infinite writes an empty field. */
void csvout_num(csvout *c, double v);
/* A number in full precision ("%.17g": reads back to the same double); NaN or infinite: empty. */
void csvout_num_exact(csvout *c, double v);
/* A whole number. */
void csvout_int(csvout *c, long long v);
/* An empty field. */
void csvout_empty(csvout *c);
/* Ends the row; a row with the wrong number of fields marks the writer failed. */
void csvout_endrow(csvout *c);
/*
 * Checks, closes and renames into place. A row with the wrong field count, an
 * unfinished row or a failed write is an error and leaves no file (nor the
 * temporary one). The writer is released either way.
 */
sr_status csvout_commit(csvout *c, sr_err *e);
/* Drops the temporary file; safe after a failed open or commit. */
void csvout_abort(csvout *c);

#endif
