/* events.h - BIDS _events.tsv: onset, duration and condition per row, checked. */
#ifndef SR_EVENTS_H
#define SR_EVENTS_H

#include <stddef.h>

#include "../core/err.h"

typedef struct event {
	double onset, duration;  /* seconds from the first stored volume; duration >= 0 */
	char *condition;         /* owned by the event list */
	size_t line;             /* file line, for messages */
} event;

typedef struct event_list {
	event *ev;
	size_t n;
} event_list;

/*
 * Reads an events file (METHODS.md sections 1 and 11). column names the
 * condition column (NULL means "trial_type"). Rows with n/a or empty onset or
 * condition are skipped with a warning naming file and line. Errors name file,
 * line and column: missing required column, non-numeric onset, non-numeric or
 * n/a duration, negative duration.
 */
sr_status events_read(const char *path, const char *column, event_list *out, sr_err *e);
void events_release(event_list *l);

#endif
