/* test_table.c - TSV/CSV reading: BOM, CRLF, quotes, blank lines, file line numbers, numbers, errors. */
#include <math.h>
#include <string.h>

#include "io/table.h"
#include "testlib.h"
#include "tfiles.h"

static void test_tsv(const char *dir)
{
	/*
	 * Line 1 header (after a UTF-8 byte-order mark), 2 a row with a quoted
	 * cell holding a tab, a comma and doubled quotes (RFC 4180 quoting),
	 * 3 blank, 4-5 one row whose quoted cell spans two lines, 6 a short row.
	 * Every line ends in CRLF.
	 */
	const char *text = "\xEF\xBB\xBFonset\tduration\ttrial_type\tnote\r\n"
			   "1.5\t2\tmelody\t\"a\tb, \"\"q\"\"\"\r\n"
			   "\r\n"
			   "3\tn/a\t\"multi\nline\"\tx\r\n"
			   "-4e-1\t1\tscrambled\r\n";
	char *path = tf_write(dir, "t.tsv", text, 0);
	table t;
	sr_err e;
	double v;
	int na;

	sr_err_init(&e, NULL, NULL);
	CHECK(table_read(path, 0, &t, &e) == SR_OK, "tsv with BOM, CRLF and quotes reads (%s)", e.msg);
	CHECK(t.ncols == 4 && t.nrows == 3, "3 rows of 4 columns (%zu x %zu)", t.nrows, t.ncols);
	CHECK(strcmp(t.header[0], "onset") == 0, "byte-order mark stripped from the first name");
	CHECK(strcmp(t.header[3], "note") == 0, "CR not part of the last name");
	CHECK(table_col(&t, "trial_type") == 2 && table_col(&t, "nope") == -1, "columns by name");
	CHECK(strcmp(table_cell(&t, 0, 3), "a\tb, \"q\"") == 0, "quoted tab, comma and quotes kept ('%s')",
	      table_cell(&t, 0, 3));
	CHECK(strcmp(table_cell(&t, 1, 2), "multi\nline") == 0, "quoted newline kept");
	CHECK(strcmp(table_cell(&t, 2, 3), "") == 0, "short row padded with empty cells");
	CHECK(strcmp(table_cell(&t, 9, 9), "") == 0, "out-of-range cell is empty, not NULL");
	CHECK(t.header_line == 1, "header on line 1");
	CHECK(t.line[0] == 2 && t.line[1] == 4 && t.line[2] == 6,
	      "file lines 2, 4, 6 (blank line and a two-line row counted: %zu %zu %zu)", t.line[0],
	      t.line[1], t.line[2]);
	CHECK(table_number(&t, 0, 0, &v, &na, 0, &e) == SR_OK && v == 1.5 && !na, "1.5 parses");
	CHECK(table_number(&t, 2, 0, &v, &na, 0, &e) == SR_OK && v == -0.4, "-4e-1 parses");
	CHECK(table_number(&t, 1, 1, &v, &na, 0, &e) == SR_OK && na && isnan(v), "n/a gives NaN and is_na");
	CHECK(table_number(&t, 1, 3, &v, &na, 0, &e) == SR_EFORMAT, "text is not a number");
	CHECK(strstr(e.msg, "t.tsv: line 4, column 4 (note): 'x' is not a number") != NULL,
	      "message names file, line 4, column 4 and name (%s)", e.msg);
	CHECK(table_number(&t, 2, 3, &v, &na, 1, &e) == SR_OK && na, "empty is n/a when allowed");
	CHECK(table_number(&t, 2, 3, &v, &na, 0, &e) == SR_EFORMAT && strstr(e.msg, "line 6, column 4"),
	      "empty is an error when not allowed (%s)", e.msg);
	table_release(&t);
	free(path);
}

/* strtod accepts more than decimal numbers; the cell rules do not. */
static void test_numbers(const char *dir)
{
	const char *text = "x\n0x10\ninf\nnan\n1e999\n2abc\n 7 \n\"8\"\n1e-3\n";
	const int ok[] = { 0, 0, 0, 0, 0, 1, 1, 1 };
	const double want[] = { 0, 0, 0, 0, 0, 7, 8, 1e-3 };
	char *path = tf_write(dir, "n.tsv", text, 0);
	table t;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	CHECK(table_read(path, '\t', &t, &e) == SR_OK && t.nrows == 8, "number table reads");
	for (size_t r = 0; r < t.nrows && r < 8; r++) {
		double v;
		int na;
		sr_status st = table_number(&t, r, 0, &v, &na, 0, &e);

		if (ok[r])
			CHECK(st == SR_OK && v == want[r], "'%s' is the number %g", table_cell(&t, r, 0), want[r]);
		else
			CHECK(st == SR_EFORMAT && strstr(e.msg, "is not a number"),
			      "'%s' is rejected (%s)", table_cell(&t, r, 0), e.msg);
	}
	table_release(&t);
	free(path);
}

static void test_csv_and_errors(const char *dir)
{
	table t;
	sr_err e;
	char *p;

	sr_err_init(&e, NULL, NULL);
	p = tf_write(dir, "c.csv", "a,b\n1,\"x,y\"\n", 0);
	CHECK(table_read(p, 0, &t, &e) == SR_OK && t.ncols == 2 && strcmp(table_cell(&t, 0, 1), "x,y") == 0,
	      ".csv chooses comma; quoted comma kept");
	table_release(&t);
	free(p);

	p = tf_write(dir, "extra.tsv", "a\tb\n1\t2\n1\t2\t3\n", 0);
	CHECK(table_read(p, 0, &t, &e) == SR_EFORMAT && strstr(e.msg, "extra.tsv: line 3"),
	      "extra non-empty field is an error naming line 3 (%s)", e.msg);
	CHECK(t.cells == NULL && t.nrows == 0, "failed read leaves an empty table");
	table_release(&t);
	free(p);

	p = tf_write(dir, "trail.tsv", "a\tb\t\n1\t2\t\n", 0);
	CHECK(table_read(p, 0, &t, &e) == SR_OK && t.ncols == 2 && t.nrows == 1,
	      "a trailing tab adds no column (%s)", e.msg);
	table_release(&t);
	free(p);

	p = tf_write(dir, "open.tsv", "a\tb\n1\t2\n3\t\"open\nmore\n", 0);
	CHECK(table_read(p, 0, &t, &e) == SR_EFORMAT && strstr(e.msg, "line 3") &&
		      strstr(e.msg, "never closed"),
	      "unclosed quote is an error naming its line (%s)", e.msg);
	free(p);

	p = tf_write(dir, "stray.tsv", "a\tb\nsay \"hi\"\t\"end\"", 0);
	CHECK(table_read(p, 0, &t, &e) == SR_OK && t.nrows == 1 &&
		      strcmp(table_cell(&t, 0, 0), "say \"hi\"") == 0 && strcmp(table_cell(&t, 0, 1), "end") == 0,
	      "a quote inside an unquoted cell is literal; a closed quote at end of file without newline is fine");
	table_release(&t);
	free(p);

	p = tf_write(dir, "empty.tsv", "\n\r\n", 0);
	CHECK(table_read(p, 0, &t, &e) == SR_EFORMAT && strstr(e.msg, "no header"),
	      "blank file has no header (%s)", e.msg);
	free(p);

	p = tf_write(dir, "dup.tsv", "a\tb\ta\n", 0);
	CHECK(table_read(p, 0, &t, &e) == SR_EFORMAT && strstr(e.msg, "'a' appears twice"),
	      "repeated column name is an error (%s)", e.msg);
	free(p);

	p = tf_write(dir, "late.tsv", "\n\nx\ty\n\n5\t6\n", 0);
	CHECK(table_read(p, 0, &t, &e) == SR_OK && t.header_line == 3 && t.nrows == 1 && t.line[0] == 5,
	      "blank lines before the header: header line 3, row line 5");
	table_release(&t);
	free(p);

	CHECK(table_read("/nonexistent/splitroi/x.tsv", 0, &t, &e) == SR_EIO &&
		      strstr(e.msg, "/nonexistent/splitroi/x.tsv"),
	      "missing file is an i/o error naming it (%s)", e.msg);
}

int main(void)
{
	char *dir = tf_tmpdir();

	test_tsv(dir);
	test_numbers(dir);
	test_csv_and_errors(dir);
	tf_rmtree(dir);
	free(dir);
	return TEST_DONE();
}
