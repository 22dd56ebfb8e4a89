/* subunit.h - one subject's outputs as a unit: staged in a folder of their own, then swapped in. */
#ifndef SR_SUBUNIT_H
#define SR_SUBUNIT_H

#include "../core/err.h"
#include "subject.h"

/*
 * The whole job of one subject for analyze: takes the subject's lock
 * (waiting when wait, saying who holds it), removes staging folders that
 * dead processes left, and, unless force, skips a subject that another
 * process completed meanwhile (*skipped = 1); else subunit_analyze.
 */
sr_status subunit_run(const subject_ctx *ctx, const char *label, int force, int wait,
		      subject_result *res, int *skipped, sr_err *e);

/* rm -r of a folder of splitroi's own making (never follows links); a missing folder is fine. */
void subunit_remove_tree(const char *dir);

#endif
