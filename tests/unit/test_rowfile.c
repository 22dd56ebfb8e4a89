/* test_rowfile.c - rows spilled to an unlinked temporary file: every byte back in any order, nothing left behind, errors. */
#include <dirent.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "io/rowfile.h"
#include "testlib.h"
#include "tfiles.h"

enum { NROWS = 5000, NCOL = 7 };   /* 5000 rows of 56 bytes: past a page, past a single write's buffer */

/* Row k's values: distinct in every row and column, and not a pattern a stale or shifted read would repeat. */
static void fill(double *row, size_t k)
{
	for (size_t c = 0; c < NCOL; c++)
		row[c] = (double)k * 1000.0 + (double)c + 1.0 / (double)(k + c + 3);
}

int main(void)
{
	char *dir = tf_tmpdir(), missing[4200];
	double row[NCOL], want[NCOL];
	rowfile *f;
	sr_err e;
	size_t k;
	int bad;

	sr_err_init(&e, NULL, NULL);
	setenv("TMPDIR", dir, 1);
	f = rowfile_new(sizeof row);
	CHECK(f != NULL, "a row file in $TMPDIR (%s)", dir);
	if (!f) {
		tf_rmtree(dir);
		free(dir);
		return TEST_DONE();
	}
	CHECK(tf_entries(dir, NULL) == 0, "the file has no name in $TMPDIR once made (%d entries)",
	      tf_entries(dir, NULL));

	bad = 0;
	for (k = 0; k < NROWS && !bad; k++) {
		fill(row, k);
		bad = rowfile_append(f, row, &e) != SR_OK;
	}
	CHECK(!bad, "%d rows appended (%s)", NROWS, bad ? e.msg : "no error");

	/* backwards, then a stride through the file: each row exactly as written */
	bad = 0;
	for (k = NROWS; k-- > 0 && !bad;) {
		memset(row, 0xff, sizeof row);
		fill(want, k);
		bad = rowfile_read(f, k, row, &e) != SR_OK || memcmp(row, want, sizeof row) != 0;
	}
	CHECK(!bad, "every row read back backwards, byte for byte");
	bad = 0;
	for (k = 0; k < NROWS && !bad; k += 997) {
		fill(want, k);
		bad = rowfile_read(f, k, row, &e) != SR_OK || memcmp(row, want, sizeof row) != 0;
	}
	CHECK(!bad, "rows read back in a stride of 997");

	/* appending after reads goes on at the end */
	fill(row, NROWS);
	CHECK(rowfile_append(f, row, &e) == SR_OK, "one more row after the reads");
	memset(row, 0, sizeof row);
	fill(want, NROWS);
	CHECK(rowfile_read(f, NROWS, row, &e) == SR_OK && memcmp(row, want, sizeof row) == 0,
	      "the row appended after the reads is the last");
	fill(want, 0);
	CHECK(rowfile_read(f, 0, row, &e) == SR_OK && memcmp(row, want, sizeof row) == 0,
	      "and the first is still the first");

	/* a row not yet written is an error naming the folder, and leaves row alone */
	memset(row, 0, sizeof row);
	CHECK(rowfile_read(f, NROWS + 1, row, &e) == SR_EIO && strstr(e.msg, dir) &&
		      strstr(e.msg, "row 5001") && row[0] == 0.0,
	      "row 5001 of 5001 rows: SR_EIO naming the folder: %s", e.msg);

	rowfile_free(f);
	CHECK(tf_entries(dir, NULL) == 0, "nothing is left in $TMPDIR after free (%d entries)",
	      tf_entries(dir, NULL));
	rowfile_free(NULL);   /* allowed: must not crash */

	/* no usable $TMPDIR: no file, and the caller keeps its rows in memory */
	snprintf(missing, sizeof missing, "%s/no/such/folder", dir);
	setenv("TMPDIR", missing, 1);
	f = rowfile_new(8);
	CHECK(f == NULL, "a missing $TMPDIR gives no row file (NULL, not an error)");
	rowfile_free(f);

	/* a one-byte row file: sizes are the caller's */
	setenv("TMPDIR", dir, 1);
	f = rowfile_new(1);
	CHECK(f != NULL, "a row file of 1-byte rows");
	if (f) {
		unsigned char b = 0;

		for (k = 0; k < 300; k++) {
			b = (unsigned char)(k * 7);
			rowfile_append(f, &b, &e);
		}
		bad = 0;
		for (k = 0; k < 300; k++)
			bad |= rowfile_read(f, k, &b, &e) != SR_OK || b != (unsigned char)(k * 7);
		CHECK(!bad, "300 one-byte rows back as written");
		rowfile_free(f);
	}
	tf_rmtree(dir);
	free(dir);
	return TEST_DONE();
}
