/* groupunit.h - the combined and group tables as one unit: staged, swapped in, with a completion record. */
#ifndef SR_GROUPUNIT_H
#define SR_GROUPUNIT_H

#include <stddef.h>

#include "../core/err.h"
#include "../io/study.h"

/* The unit's completion record, OUT/tables.json, and the tables it covers. */
#define GROUPUNIT_RECORD "tables.json"

/*
 * 1 when OUT/tables.json exists and matches what is there now: the same
 * subjects, each complete now exactly when it was (its run.json unchanged),
 * every table present with the recorded fingerprint, made with (group = 1)
 * or without the group step as asked.
 */
int groupunit_current(const study *st, char *const *subs, size_t nsub, int group);

/*
 * Redoes the unit: withdraws the record, snapshots the complete subjects'
 * tables into a staging folder OUT/.tables.tmp.PID, writes the combined table
 * from them and (group = 1) runs the group step on the same snapshot, so the
 * tables can never disagree; then renames them into OUT and writes the
 * record last. On failure the earlier tables stay as they were (without a
 * record, so that the next run redoes the unit). *ncomplete: subjects in the
 * combined table. Returns 0, or 1 with the reason printed on stderr.
 * The caller holds the group lock (outlock.h).
 */
int groupunit_write(const study *st, char *const *subs, size_t nsub, int group, int quiet,
		    size_t *ncomplete);

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
