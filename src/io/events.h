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
 * condition are skipped with a warning (sr_warnf) naming file and line. Errors
 * name file, line and column: missing required column (header line, with the
 * columns present), non-numeric onset (checked even on rows that are then
 * skipped), non-numeric, empty or n/a duration, negative duration. Negative
 * onsets are kept (the design drops what falls before 0 s); onsets past the
 * end of the run are the caller's to check. On error *out is empty. Rows keep
 * file order.
 */
sr_status events_read(const char *path, const char *column, event_list *out, sr_err *e);
void events_release(event_list *l);

#endif
