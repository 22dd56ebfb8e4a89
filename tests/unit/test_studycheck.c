/* test_studycheck.c - the --subjects list check and analyze share: repeats once, "sub-" optional, every unknown label named. */
#include <stdlib.h>
#include <string.h>

#include "core/strv.h"
#include "io/bids.h"
#include "pipeline/studycheck.h"
#include "testlib.h"

static char *study_subs[] = { "01", "02", "03" };

static void test_only(void)
{
	char **v = NULL;
	size_t n = 0;
	study_problems p = { 0 };
	int rc;

	rc = studycheck_only(study_subs, 3, "01,01 sub-01", &v, &n, &p);
	CHECK(rc == 0 && n == 1 && strcmp(v[0], "01") == 0 && p.n == 0,
	      "01,01 sub-01 is one subject (rc %d, n %zu)", rc, n);
	strv_free_array(v, n);

	rc = studycheck_only(study_subs, 3, " 03,\t02 ,", &v, &n, &p);
	CHECK(rc == 0 && n == 2 && strcmp(v[0], "03") == 0 && strcmp(v[1], "02") == 0,
	      "labels keep the order given, separators and blanks skipped");
	strv_free_array(v, n);

	v = NULL;
	n = 0;
	rc = studycheck_only(study_subs, 3, "01,09,07,09", &v, &n, &p);
	CHECK(rc == 2 && v == NULL && n == 0, "an unknown label is a usage error (rc %d)", rc);
	CHECK(p.n == 2, "each unknown label named once (%zu problems)", p.n);
	CHECK(p.n == 2 && strcmp(p.msg[0], "subject '09' is not in the study (3 subjects: 01 ...)") == 0 &&
		      strstr(p.msg[1], "'07'") != NULL,
	      "the message names the label and the study's subjects: %s", p.n ? p.msg[0] : "");
	study_problems_release(&p);
	memset(&p, 0, sizeof p);

	rc = studycheck_only(study_subs, 1, "02", &v, &n, &p);
	CHECK(rc == 2 && p.n == 1 && strcmp(p.msg[0], "subject '02' is not in the study (1 subject: 01)") == 0,
	      "one subject: no ellipsis, singular (%s)", p.n ? p.msg[0] : "");
	study_problems_release(&p);
}

int main(void)
{
	test_only();
	return TEST_DONE();
}
