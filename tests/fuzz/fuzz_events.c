/* fuzz_events.c - afl++ harness for the events reader (src/io/events.c) and the TSV/CSV
 * reader under it (src/io/table.c).
 *
 * FILE is read as an events file (condition column trial_type, then one named by the file's
 * own second header cell, as a study's condition_column would), then as a table with tabs and
 * with commas, every cell through table_number. Checked beyond "no crash": an accepted events
 * list keeps what events.h promises (finite onsets, durations >= 0, a condition, lines in file
 * order), and an accepted table's cells and lines are within the table.
 */
#include <math.h>

#include "fuzz_common.h"
#include "io/events.h"
#include "io/table.h"

static void check_events(const char *path, const event_list *l)
{
	size_t i;

	for (i = 0; i < l->n; i++) {
		const event *v = &l->ev[i];

		if (!isfinite(v->onset) || !isfinite(v->duration) || v->duration < 0 || !v->condition ||
		    !v->condition[0] || v->line < 2 || (i && v->line <= l->ev[i - 1].line)) {
			fprintf(stderr, "fuzz: %s: event %zu breaks events.h (line %zu)\n", path, i, v->line);
			abort();
		}
	}
}

static int read_events(const char *path, const char *column)
{
	event_list l = { 0 };
	sr_err e;

	sr_err_init(&e, fuzz_quiet, NULL);
	if (events_read(path, column, &l, &e) != SR_OK) {
		if (l.n)
			abort();   /* on error the list is empty */
		return fuzz_refused(path, &e);
	}
	check_events(path, &l);
	printf("accepted as events (column %s): %zu\n", column ? column : "trial_type", l.n);
	events_release(&l);
	return 0;
}

static void read_table(const char *path, char delim)
{
	table t;
	sr_err e;
	size_t r, c, nums = 0;

	sr_err_init(&e, fuzz_quiet, NULL);
	if (table_read(path, delim, &t, &e) != SR_OK) {
		fuzz_refused(path, &e);
		table_release(&t);
		return;
	}
	if (t.ncols < 1 || t.header_line < 1) {
		fprintf(stderr, "fuzz: %s: an accepted table without a header\n", path);
		abort();
	}
	for (c = 0; c < t.ncols; c++)   /* names are unique (empty ones aside): each finds its own column */
		if (!t.header[c] || (t.header[c][0] && table_col(&t, t.header[c]) != (int)c)) {
			fprintf(stderr, "fuzz: %s: column %zu '%s' is found at %d\n", path, c + 1,
				t.header[c] ? t.header[c] : "(null)", table_col(&t, t.header[c] ? t.header[c] : ""));
			abort();
		}
	for (r = 0; r < t.nrows; r++) {
		if (t.line[r] <= t.header_line || (r && t.line[r] <= t.line[r - 1]))
			abort();
		for (c = 0; c < t.ncols; c++) {
			double v;
			int na;

			sr_err_init(&e, fuzz_quiet, NULL);
			if (table_number(&t, r, c, &v, &na, 1, &e) == SR_OK) {
				if (!na && !isfinite(v))
					abort();   /* numbers are finite, n/a is flagged */
				nums++;
			} else if (!strstr(e.msg, path)) {
				abort();
			}
		}
	}
	printf("accepted as a table ('%c'): %zu rows, %zu columns, %zu numbers\n", delim == '\t' ? 't' : delim,
	       t.nrows, t.ncols, nums);
	table_release(&t);
}

static int one(const char *path)
{
	table t;
	sr_err e;

	read_events(path, NULL);
	/* a study may name another condition column: the file's own last column, if it is not trial_type */
	sr_err_init(&e, fuzz_quiet, NULL);
	if (table_read(path, '\t', &t, &e) == SR_OK && t.ncols > 1 && strcmp(t.header[t.ncols - 1], "trial_type") != 0) {
		char *col = strdup(t.header[t.ncols - 1]);

		table_release(&t);
		read_events(path, col);
		free(col);
	} else {
		table_release(&t);
	}
	read_table(path, '\t');
	read_table(path, ',');
	return 0;
}

int main(int argc, char **argv)
{
	const char *path = fuzz_path(argc, argv);

	FUZZ_MAIN(one, path);
}
