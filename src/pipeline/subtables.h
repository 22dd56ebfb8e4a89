/* subtables.h - reading one kind of per-subject table of every subject, for a group summary. */
#ifndef SR_SUBTABLES_H
#define SR_SUBTABLES_H

#include <stddef.h>

#include "../core/err.h"

/* Reads one subject's table at path into ctx. */
typedef sr_status (*subtables_read_fn)(const char *path, void *ctx, sr_err *e);

/*
 * Calls read on OUT/sub-<label>/<name> of each subject that has the file, in
 * the order given, and warns (through e) for each that has not: "the subject
 * is left out of <summary>.csv" followed by hint (may be ""). When no subject
 * has it (tables made by hand or by an older version), *none = 1, read is
 * never called and OUT/<summary>.csv and .json are removed, so that no
 * summary is left from before. Stops at the first failing read.
 */
sr_status subtables_each(const char *out, char *const *labels, size_t n, const char *name,
			 const char *summary, const char *hint, subtables_read_fn read, void *ctx,
			 int *none, sr_err *e);

#endif
