/* analyze.h - the group step that analyze runs after its subjects (defined in group.c). */
#ifndef SR_ANALYZE_H
#define SR_ANALYZE_H

#include <stddef.h>

#include "../core/err.h"
#include "../io/study.h"

/* Runs the group step on OUT for the study's subjects (those without a table are listed missing); group.c; 0 = ok.
 * shown: the folder its "wrote" line names (the tables are staged in OUT and moved there), or NULL for OUT.
 * participants: the study's participants.tsv path (it may be absent), or NULL. */
int analyze_group_step(const char *out, const char *shown, char *const *subs, size_t nsub,
		       const char *participants, int quiet);

#endif
