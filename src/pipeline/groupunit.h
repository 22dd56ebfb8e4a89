/* groupunit.h - the combined and group tables as one unit: staged, swapped in, with a completion record. */
#ifndef SR_GROUPUNIT_H
#define SR_GROUPUNIT_H

#include <stddef.h>

#include "../core/err.h"
#include "../io/study.h"

/* The unit's completion record, OUT/tables.json, and the tables it covers. */
#define GROUPUNIT_RECORD "tables.json"

/*
 * analyze's last steps under the group lock (waiting when wait): removes
 * temporary files dead processes left in OUT and OUT/sub-*, then, when redo
 * or the unit is not current, groupunit_write (else says the tables are left
 * as they are, unless quiet), then the report unless no_report. Returns 0, or
 * 1 when a step failed (said on stderr).
 */
int groupunit_step(const study *st, char *const *subs, size_t nsub, int group, int redo,
		   int wait, int no_report, int quiet, size_t *ncomplete);

#endif
