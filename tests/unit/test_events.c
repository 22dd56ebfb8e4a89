/* test_events.c - BIDS events files: good rows, skipped rows with warnings, malformed files. */
#include <math.h>
#include <string.h>

#include "io/events.h"
#include "testlib.h"
#include "tfiles.h"

static void test_good(const char *dir)
{
	/* Extra columns are ignored (METHODS.md section 1); column order is free. */
	const char *text = "trial_type\tonset\tresponse_time\tduration\n"
			   "melody\t0\t0.8\t12\n"
			   "scrambled\t-1.5\tn/a\t0\n"
			   "n/a\t30\t1\t12\n"
			   "melody\tn/a\t1\t12\n"
			   "\t40\t1\t12\n"
			   "scrambled\t44.25\t1\t12.5\n";
	char *p = tf_write(dir, "sub-01_task-tones_events.tsv", text, 0);
	tf_warnings w = { "", 0 };
	event_list l;
	sr_err e;

	sr_err_init(&e, tf_warn, &w);
	CHECK(events_read(p, NULL, &l, &e) == SR_OK, "good events file reads (%s)", e.msg);
	CHECK(l.n == 3, "3 usable events (%zu)", l.n);
	if (l.n == 3) {
		CHECK(strcmp(l.ev[0].condition, "melody") == 0 && l.ev[0].onset == 0 &&
			      l.ev[0].duration == 12 && l.ev[0].line == 2,
		      "first event melody at 0 s for 12 s, line 2");
		CHECK(l.ev[1].onset == -1.5 && l.ev[1].duration == 0,
		      "negative onset kept (cut at 0 s later), zero duration is an impulse");
		CHECK(strcmp(l.ev[2].condition, "scrambled") == 0 && l.ev[2].onset == 44.25 &&
			      l.ev[2].duration == 12.5 && l.ev[2].line == 7,
		      "last event scrambled at 44.25 s for 12.5 s, line 7");
	}
	CHECK(w.n == 3, "three skipped rows warned (%d)", w.n);
	CHECK(strstr(w.text, "sub-01_task-tones_events.tsv: line 4: trial_type is 'n/a', row skipped") != NULL,
	      "n/a condition warning names file and line 4");
	CHECK(strstr(w.text, "events.tsv: line 5: onset is 'n/a', row skipped") != NULL,
	      "n/a onset warning names line 5");
	CHECK(strstr(w.text, "events.tsv: line 6: trial_type is '', row skipped") != NULL,
	      "empty condition warning names line 6");
	events_release(&l);
	CHECK(l.n == 0 && l.ev == NULL, "release empties the list");
	free(p);

	p = tf_write(dir, "other.tsv", "onset\tduration\tstimulus\ttrial_type\n2\t1\tfamiliar\tx\n", 0);
	CHECK(events_read(p, "stimulus", &l, &e) == SR_OK && l.n == 1 &&
		      strcmp(l.ev[0].condition, "familiar") == 0,
	      "condition taken from the named column");
	events_release(&l);
	free(p);
}

/* Each malformed file, the status expected and text the message must hold. */
static void test_bad(const char *dir)
{
	static const struct {
		const char *name, *text, *want1, *want2;
	} cases[] = {
		{ "noonset.tsv", "start\tduration\ttrial_type\n1\t2\tmelody\n",
		  "noonset.tsv: line 1: no column 'onset'", "columns present: 'start', 'duration', 'trial_type'" },
		{ "nodur.tsv", "onset\ttrial_type\n1\tmelody\n", "line 1: no column 'duration'", "'onset'" },
		{ "nocond.tsv", "onset\tduration\n1\t2\n", "line 1: no column 'trial_type'", "'duration'" },
		{ "badonset.tsv", "onset\tduration\ttrial_type\n1\t2\tmelody\nsoon\t2\tmelody\n",
		  "badonset.tsv: line 3, column 1 (onset): 'soon' is not a number", "" },
		{ "negdur.tsv", "onset\tduration\ttrial_type\n1\t-2\tmelody\n",
		  "negdur.tsv: line 2, column 2 (duration)", "negative duration -2" },
		{ "nadur.tsv", "onset\tduration\ttrial_type\n1\t2\tmelody\n\n5\tn/a\tnovel\n",
		  "nadur.tsv: line 4, column 2 (duration): 'n/a'", "" },
		{ "emptydur.tsv", "onset\tduration\ttrial_type\n1\t\tmelody\n",
		  "emptydur.tsv: line 2, column 2 (duration)", "" },
		{ "textdur.tsv", "onset\tduration\ttrial_type\n1\tlong\tmelody\n",
		  "line 2, column 2 (duration): 'long' is not a number", "" },
	};
	event_list l;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
		char *p = tf_write(dir, cases[i].name, cases[i].text, 0);
		sr_status st = events_read(p, NULL, &l, &e);

		CHECK(st == SR_EFORMAT && strstr(e.msg, cases[i].want1) && strstr(e.msg, cases[i].want2),
		      "%s is an error with file, line and column (%s)", cases[i].name, e.msg);
		CHECK(l.n == 0 && l.ev == NULL, "%s: nothing returned on error", cases[i].name);
		free(p);
	}
	CHECK(events_read("/nonexistent/sub-01_task-tones_events.tsv", NULL, &l, &e) == SR_EIO &&
		      strstr(e.msg, "/nonexistent/sub-01_task-tones_events.tsv"),
	      "missing file names the file (%s)", e.msg);
}

int main(void)
{
	char *dir = tf_tmpdir();

	test_good(dir);
	test_bad(dir);
	tf_rmtree(dir);
	free(dir);
	return TEST_DONE();
}
