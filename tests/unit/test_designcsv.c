/* test_designcsv.c - the design-matrix CSV: column names by block, LF rows, values that read back exactly. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/design.h"
#include "io/designcsv.h"
#include "testlib.h"
#include "tfiles.h"

int main(void)
{
	char *dir = tf_tmpdir(), path[4200], line[8192];
	design_event ev[2] = { { 10.0, 5.0, 0 }, { 30.0, 0.0, 1 } };
	double conf[2 * 40];
	const char *conds[2] = { "melody", "scrambled" }, *confs[2] = { "trans_x", "a,b" };
	design d;
	sr_err e;
	FILE *f;
	int k, j, rows = 0, exact = 1, crlf = 0;

	for (k = 0; k < 80; k++)
		conf[k] = sin(0.37 * k) / 3.0;
	sr_err_init(&e, NULL, NULL);
	CHECK(design_build(40, 2.0, 0.5, ev, 2, 2, conf, 2, 40.0, &d, &e) == SR_OK, "a design builds (%s)", e.msg);
	snprintf(path, sizeof path, "%s/d.csv", dir);
	CHECK(designcsv_write(path, &d, conds, confs, &e) == SR_OK, "it is written (%s)", e.msg);
	f = fopen(path, "rb");
	if (!f) {
		CHECK(0, "the file exists");
		return TEST_DONE();
	}
	if (fgets(line, sizeof line, f)) {
		char want[256] = "melody,scrambled,trans_x,\"a,b\"";
		for (j = 1; j <= d.ndrift; j++)
			snprintf(want + strlen(want), sizeof want - strlen(want), ",cos_%d", j);
		strcat(want, ",baseline\n");
		CHECK(strcmp(line, want) == 0, "header names conditions, confounds (quoted when needed), cos_q, baseline: %s", line);
	}
	while (fgets(line, sizeof line, f)) {
		char *p = line, *end;

		if (strchr(line, '\r'))
			crlf = 1;
		for (j = 0; j < d.p; j++) {
			double v = strtod(p, &end);
			if (v != d.X[(size_t)j * 40 + (size_t)rows])
				exact = 0;
			p = end + 1;
		}
		rows++;
	}
	fclose(f);
	CHECK(rows == 40, "one row per volume (%d)", rows);
	CHECK(exact, "every value reads back to the same double");
	CHECK(!crlf, "rows end with LF only, like every other table");
	d.ndrift++; /* columns that no longer add up: an error, no file */
	snprintf(path, sizeof path, "%s/bad.csv", dir);
	CHECK(designcsv_write(path, &d, conds, confs, &e) != SR_OK && access(path, F_OK) != 0,
	      "an inconsistent design is an error and writes nothing: %s", e.msg);
	d.ndrift--;
	design_release(&d);
	tf_rmtree(dir);
	free(dir);
	return TEST_DONE();
}
