/* tabledict.h - BIDS-style JSON data dictionaries beside the result tables (responses.json beside responses.csv). */
#ifndef SR_TABLEDICT_H
#define SR_TABLEDICT_H

#include <stddef.h>

#include "../core/err.h"

/*
 * Writes the dictionary of the CSV at csv_path (its .csv replaced by .json):
 * one member per column of header (n names), each an object with
 * "Description" and, for numbers, "Units". Columns splitroi knows get their
 * fixed text; names listed in participant_cols (np, may be 0) are described as
 * carried from participants.tsv; wide-table value columns (a '.' in the name)
 * as percent signal change. Atomic, like every output.
 */
sr_status tabledict_write(const char *csv_path, const char *const *header, size_t n,
			  char *const *participant_cols, size_t np, sr_err *e);

#endif
