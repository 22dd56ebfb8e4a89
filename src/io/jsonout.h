/* jsonout.h - small JSON files (BIDS sidecars, dataset descriptions) written atomically through jansson. */
#ifndef SR_JSONOUT_H
#define SR_JSONOUT_H

#include <stddef.h>

#include "../core/err.h"

/* One member of a flat JSON object: a string when str is not NULL, else the number num. */
typedef struct jsonout_field {
	const char *key;
	const char *str;
	double num;
} jsonout_field;

/*
 * Writes {"key": value, ...} in the given order, indented, to path (temporary
 * file then rename, so a failure leaves no file). Non-finite numbers are an
 * error naming the key.
 */
sr_status jsonout_write_flat(const char *path, const jsonout_field *f, size_t n, sr_err *e);

#endif
