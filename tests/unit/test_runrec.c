/* test_runrec.c - the run record reader: run.json fields, bad JSON named with line and column,
 * and keys of the recorded study text read exactly as the study loader reads them. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/runrec.h"
#include "io/study.h"
#include "testlib.h"
#include "tfiles.h"

static void expect_key(const char *text, const char *sec, const char *key, const char *want, const char *name)
{
	char *got = runrec_ini_get(text, sec, key);

	if (want)
		CHECK(got && strcmp(got, want) == 0, "%s: '%s'", name, got ? got : "(null)");
	else
		CHECK(got == NULL, "%s: absent ('%s')", name, got ? got : "(null)");
	free(got);
}

static void test_ini(void)
{
	/* a motion list continued on an indented line: the report must see all six columns,
	 * as analyze does (the earlier hand-written reader saw only the first line) */
	const char *text = "; comment\n[study]\nbids = data ; inline comment\n"
			   "[model]\nmotion = tx ty tz\n    rx ry rz\nfd_threshold = 0.5 # mm\n"
			   "empty =\n[measure memory]\ntask = memory\n"
			   "[parcels]\nnames = \"my; parcels.tsv\"\n";

	expect_key(text, "model", "motion", "tx ty tz rx ry rz", "a continuation line joins the value");
	expect_key(text, "study", "bids", "data", "an inline ';' comment is cut");
	expect_key(text, "model", "fd_threshold", "0.5", "an inline '#' comment is cut");
	expect_key(text, "model", "empty", NULL, "an empty value reads as absent");
	expect_key(text, "model", "nothere", NULL, "a missing key reads as absent");
	expect_key(text, "measure memory", "task", "memory", "a named section");
	expect_key(text, "parcels", "names", "\"my; parcels.tsv\"", "';' inside quotes is no comment");
	expect_key("\xEF\xBB\xBF[study]\r\nout = res\r\n", "study", "out", "res", "BOM and CRLF");
	expect_key(NULL, "study", "out", NULL, "no text");
	expect_key("[study]\nout = a\nout = b\n", "study", "out", "b", "a repeated key: the last one");
}

static void test_json(void)
{
	char *dir = tf_tmpdir(), *p;
	runrec r;
	sr_err e;

	p = tf_write(dir, "run.json",
		     "{\"subject\": \"01\", \"study_file\": \"/s/study.ini\", \"study_text\": \"[study]\\n\",\n"
		     " \"seconds\": 2.5, \"inputs\": {\"tones\": [{\"bold\": \"/d/b.nii.gz\", \"run\": \"1\",\n"
		     " \"tr\": 2.0, \"dims\": [4, 4, 4, 30]}]}}\n", 0);
	sr_err_init(&e, NULL, NULL);
	CHECK(runrec_read(p, &r, &e) == SR_OK, "a run record reads (%s)", e.msg);
	CHECK(r.subject && strcmp(r.subject, "01") == 0, "its subject is the label as written, 01");
	CHECK(r.study_file && strcmp(r.study_file, "/s/study.ini") == 0, "its study file");
	CHECK(r.nruns == 1 && strcmp(r.runs[0].task, "tones") == 0 && strcmp(r.runs[0].run, "1") == 0 &&
	      r.runs[0].tr == 2.0 && r.runs[0].nt == 30, "its one run: task, label, TR and volumes");
	CHECK(r.seconds == 2.5, "its time");
	runrec_release(&r);
	free(p);

	p = tf_write(dir, "bad.json", "{\"subject\": \"01\",\n  \"inputs\": [1,\n", 0);
	sr_err_init(&e, NULL, NULL);
	CHECK(runrec_read(p, &r, &e) != SR_OK && strstr(e.msg, "bad.json") && strstr(e.msg, "line 3"),
	      "broken JSON is an error naming the file and line: %s", e.msg);
	free(p);
	tf_rmtree(dir);
	free(dir);
}

int main(void)
{
	test_ini();
	test_json();
	return TEST_DONE();
}
