/* test_studycheck_names.c - the one check of conditions named by effects that check and analyze share (studycheck_names). */
#include <stdlib.h>
#include <string.h>

#include "core/expr.h"
#include "pipeline/studycheck.h"
#include "testlib.h"

static char *conds_a[] = { "melody", "scrambled" };
static char *conds_b[] = { "melody" };

static void test_names(void)
{
	study st;
	study_key key = { "localizer", "contrast", 9 };
	study_problems probs = { 0 }, warns = { 0 }, reported = { 0 };
	studycheck_ctx c;
	studycheck_task seen[2];
	char *known[] = { "melody", "scrambled" }, *subs[] = { "01", "02" };
	expr fx[2];
	char msg[256] = "";

	memset(&st, 0, sizeof st);
	st.path = "study.ini";
	st.keys = &key;
	st.nkeys = 1;
	memset(&c, 0, sizeof c);
	c.st = &st;
	c.probs = &probs;
	c.warns = &warns;
	memset(seen, 0, sizeof seen);
	seen[0].nruns = 2;
	seen[0].conds.v = conds_a;
	seen[0].conds.n = 2;
	seen[1].nruns = 2;
	seen[1].conds.v = conds_b;
	seen[1].conds.n = 1;
	CHECK(expr_parse("melody - scrambld", &fx[0], msg, sizeof msg) == 0, "the first effect parses %s", msg);
	CHECK(expr_parse("scrambled - scrambld", &fx[1], msg, sizeof msg) == 0, "the second effect parses %s", msg);

	studycheck_names(&c, "localizer", "contrast", "tones", fx, 2, known, 2, subs, 2, seen, 1, &reported);
	CHECK(probs.n == 1, "one problem for the one unknown condition, said once (%zu)", probs.n);
	CHECK(probs.n >= 1 && strcmp(probs.msg[0], "study.ini: line 9: contrast 'melody-scrambld' names condition 'scrambld', "
				     "unknown to every subject of task tones (known: melody, scrambled)") == 0,
	      "the problem names the study file's line, the key and the known conditions: %s", probs.n ? probs.msg[0] : "");
	CHECK(warns.n == 1 && strstr(warns.msg[0], "sub-02 has no 'scrambled' events in task tones") != NULL,
	      "a subject without a known condition gets a warning (%zu): %s", warns.n, warns.n ? warns.msg[0] : "");
	study_problems_release(&probs);
	study_problems_release(&warns);
	memset(&probs, 0, sizeof probs);
	memset(&warns, 0, sizeof warns);

	/* an effect set nowhere in the file is a default; no runs at all says nothing */
	study_problems_release(&reported);
	memset(&reported, 0, sizeof reported);
	studycheck_names(&c, "measure memory", "effects", "tones", fx, 1, known, 0, subs, 2, seen, 1, &reported);
	CHECK(probs.n == 2 && strstr(probs.msg[0], "study.ini: default effect 'melody-scrambld' names condition 'melody'") &&
		      strstr(probs.msg[0], "(known: none)"),
	      "no line: a default effect, no known conditions: %s", probs.n ? probs.msg[0] : "");
	study_problems_release(&probs);
	memset(&probs, 0, sizeof probs);
	study_problems_release(&reported);
	memset(&reported, 0, sizeof reported);
	seen[0].nruns = seen[1].nruns = 0;
	studycheck_names(&c, "localizer", "contrast", "tones", fx, 2, known, 0, subs, 2, seen, 1, &reported);
	CHECK(probs.n == 0 && warns.n == 0, "no subject with runs: nothing said (%zu, %zu)", probs.n, warns.n);
	study_problems_release(&reported);
	expr_release(&fx[0]);
	expr_release(&fx[1]);
}

int main(void)
{
	test_names();
	return TEST_DONE();
}
