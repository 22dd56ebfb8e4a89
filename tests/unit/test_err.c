/* test_err.c - the error record: sr_fail formatting and return value, truncation, warnings callback. */
#include <string.h>

#include "core/err.h"
#include "testlib.h"
#include "tfiles.h"

static void test_fail(void)
{
	sr_err e;
	char big[3000];

	sr_err_init(&e, NULL, NULL);
	CHECK(e.code == SR_OK && e.msg[0] == '\0' && e.warn == NULL, "a fresh record is empty");
	CHECK(sr_fail(&e, SR_EFORMAT, "%s: line %d, column %d: %s", "a.tsv", 12, 3, "bad cell") ==
		      SR_EFORMAT,
	      "sr_fail returns the code it was given");
	CHECK(e.code == SR_EFORMAT, "and stores it (%d)", (int)e.code);
	CHECK(strcmp(e.msg, "a.tsv: line 12, column 3: bad cell") == 0, "printf formatting: '%s'",
	      e.msg);
	sr_fail(&e, SR_EIO, "%s", "second");
	CHECK(e.code == SR_EIO && strcmp(e.msg, "second") == 0,
	      "a second failure replaces the first, code and message ('%s')", e.msg);
	CHECK(sr_fail(NULL, SR_EDIM, "no record %d", 1) == SR_EDIM,
	      "a NULL record is allowed: the code is still returned");

	/* a message longer than the buffer is cut, never overflows, and stays terminated */
	memset(big, 'x', sizeof big - 1);
	big[sizeof big - 1] = '\0';
	big[0] = 'A';
	sr_fail(&e, SR_EINVAL, "%s", big);
	CHECK(strlen(e.msg) == sizeof e.msg - 1 && e.msg[0] == 'A' && e.msg[sizeof e.msg - 2] == 'x',
	      "a 2999-byte message is cut to %zu bytes (got %zu)", sizeof e.msg - 1, strlen(e.msg));

	sr_err_init(&e, NULL, NULL);
	CHECK(e.code == SR_OK && e.msg[0] == '\0', "sr_err_init clears an earlier failure");
}

static void test_warn(void)
{
	tf_warnings w = { "", 0 };
	sr_err e;

	sr_err_init(&e, tf_warn, &w);
	CHECK(e.warn == tf_warn && e.warn_ctx == &w, "init keeps the warning sink and its context");
	sr_warnf(&e, "run %d of %s: %.2f%% of volumes censored", 2, "tones", 12.5);
	sr_warnf(&e, "second");
	CHECK(w.n == 2, "two warnings reach the callback (got %d)", w.n);
	CHECK(strcmp(w.text, "run 2 of tones: 12.50% of volumes censored\nsecond\n") == 0,
	      "warnings are formatted and arrive in order, one line each");
	CHECK(e.code == SR_OK && e.msg[0] == '\0', "a warning is not a failure: the record stays clean");

	sr_fail(&e, SR_ESTUDY, "unknown condition");
	CHECK(e.warn == tf_warn && e.warn_ctx == &w, "sr_fail keeps the warning sink");
	sr_warnf(&e, "after");
	CHECK(w.n == 3, "warnings still arrive after a failure");

	sr_err_init(&e, NULL, NULL);
	sr_warnf(&e, "nobody listens %d", 1);
	sr_warnf(NULL, "no record");
	CHECK(w.n == 3, "without a sink (or a record) warnings are dropped, no crash");
}

int main(void)
{
	test_fail();
	test_warn();
	return TEST_DONE();
}
