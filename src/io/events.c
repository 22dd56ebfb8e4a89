/* events.c - reading and checking BIDS _events.tsv files (METHODS.md sections 1 and 11). */
#include "events.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"
#include "table.h"

/* "onset, duration, trial_type" for the message about a missing column. */
static void list_columns(const table *t, char *buf, size_t size)
{
	size_t used = 0;

	buf[0] = '\0';
	for (size_t i = 0; i < t->ncols && used + 1 < size; i++) {
		int n = snprintf(buf + used, size - used, "%s'%s'", i ? ", " : "", t->header[i]);

		if (n < 0)
			break;
		used += (size_t)n;
	}
	if (used >= size && size > 4)
		memcpy(buf + size - 4, "...", 4);
}

static int is_missing(const char *s)
{
	return s[0] == '\0' || strcmp(s, "n/a") == 0;
}

sr_status events_read(const char *path, const char *column, event_list *out, sr_err *e)
{
	const char *need[3];
	int col[3];
	table t;
	sr_status st;
	size_t cap;

	out->ev = NULL;
	out->n = 0;
	need[0] = "onset";
	need[1] = "duration";
	need[2] = column ? column : "trial_type";
	st = table_read(path, '\t', &t, e);
	if (st)
		return st;
	for (int k = 0; k < 3; k++) {
		col[k] = table_col(&t, need[k]);
		if (col[k] < 0) {
			char present[1024];

			list_columns(&t, present, sizeof present);
			sr_fail(e, SR_EFORMAT, "%s: line %zu: no column '%s' (columns present: %s)",
				path, t.header_line, need[k], present);
			table_release(&t);
			return SR_EFORMAT;
		}
	}
	cap = t.nrows ? t.nrows : 1;
	out->ev = xmalloc_array(cap, sizeof *out->ev);
	for (size_t r = 0; r < t.nrows; r++) {
		const char *cond = table_cell(&t, r, (size_t)col[2]);
		double onset, dur;
		int na;

		/* A garbled onset is an error even on a row that would be skipped. */
		st = table_number(&t, r, (size_t)col[0], &onset, &na, 1, e);
		if (st)
			goto fail;
		if (na) {
			sr_warnf(e, "%s: line %zu: onset is '%s', row skipped", path, t.line[r],
				 table_cell(&t, r, (size_t)col[0]));
			continue;
		}
		if (is_missing(cond)) {
			sr_warnf(e, "%s: line %zu: %s is '%s', row skipped", path, t.line[r], need[2],
				 cond);
			continue;
		}
		st = table_number(&t, r, (size_t)col[1], &dur, &na, 1, e);
		if (st)
			goto fail;
		if (na) {
			st = sr_fail(e, SR_EFORMAT,
				     "%s: line %zu, column %d (duration): '%s' is not a duration (every event needs one; 0 for an impulse)",
				     path, t.line[r], col[1] + 1, table_cell(&t, r, (size_t)col[1]));
			goto fail;
		}
		if (dur < 0) {
			st = sr_fail(e, SR_EFORMAT,
				     "%s: line %zu, column %d (duration): negative duration %g",
				     path, t.line[r], col[1] + 1, dur);
			goto fail;
		}
		out->ev[out->n].onset = onset;
		out->ev[out->n].duration = dur;
		out->ev[out->n].condition = xstrdup(cond);
		out->ev[out->n].line = t.line[r];
		out->n++;
	}
	table_release(&t);
	return SR_OK;
fail:
	table_release(&t);
	events_release(out);
	return st;
}

void events_release(event_list *l)
{
	if (!l)
		return;
	for (size_t i = 0; i < l->n; i++)
		free(l->ev[i].condition);
	free(l->ev);
	l->ev = NULL;
	l->n = 0;
}
