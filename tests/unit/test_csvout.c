/* test_csvout.c - CSV writer: RFC 4180 quoting, %.9g numbers, empty for missing, atomic outcome. */
#include <dirent.h>
#include <math.h>
#include <signal.h>
#include <string.h>
#include <sys/resource.h>

#include "io/csvout.h"
#include "io/table.h"
#include "testlib.h"
#include "tfiles.h"

static char *slurp(const char *path)
{
	FILE *f = fopen(path, "rb");
	char *b;
	long n;

	if (!f)
		return NULL;
	fseek(f, 0, SEEK_END);
	n = ftell(f);
	rewind(f);
	b = calloc((size_t)n + 1, 1);
	if (fread(b, 1, (size_t)n, f) != (size_t)n)
		b[0] = '\0';
	fclose(f);
	return b;
}

static const char *const header[] = { "subject", "parcel", "value", "n_voxels", "note" };

static void test_format(const char *dir)
{
	/*
	 * Expected bytes by RFC 4180 section 2 (fields with comma, quote or line
	 * break are quoted; a quote is doubled) and C's "%.9g" (C11 7.21.6.1:
	 * 9 significant digits, exponent form when the exponent is < -4 or >= 9).
	 */
	const char *want = "subject,parcel,value,n_voxels,note\n"
			   "01,\"a,b\",0.333333333,42,\"say \"\"hi\"\"\nnext\"\n"
			   "02,plain,,-7,\n"
			   "03,\"cr\"\"\r\",1e-20,1.23456789e+11,\n"
			   "04,x,0,,2.5\n";
	char *path = malloc(strlen(dir) + 32);
	table t;
	csvout c;
	sr_err e;
	char *got;

	sprintf(path, "%s/out/sub-01/r.csv", dir);
	sr_err_init(&e, NULL, NULL);
	CHECK(csvout_open(&c, path, header, 5, &e) == SR_OK, "open creates missing folders (%s)", e.msg);
	csvout_str(&c, "01");
	csvout_str(&c, "a,b");
	csvout_num(&c, 1.0 / 3.0);
	csvout_int(&c, 42);
	csvout_str(&c, "say \"hi\"\nnext");
	csvout_endrow(&c);
	csvout_str(&c, "02");
	csvout_str(&c, "plain");
	csvout_num(&c, NAN);
	csvout_int(&c, -7);
	csvout_empty(&c);
	csvout_endrow(&c);
	csvout_str(&c, "03");
	csvout_str(&c, "cr\"\r");
	csvout_num(&c, 1e-20);
	csvout_num(&c, 123456789012.0);
	csvout_num(&c, INFINITY);
	csvout_endrow(&c);
	csvout_str(&c, "04");
	csvout_str(&c, "x");
	csvout_num(&c, -0.0);
	csvout_num(&c, -INFINITY);
	csvout_num(&c, 2.5);
	csvout_endrow(&c);
	CHECK(slurp(path) == NULL, "nothing at the final name before commit");
	CHECK(csvout_commit(&c, &e) == SR_OK, "commit (%s)", e.msg);
	got = slurp(path);
	CHECK(got && strcmp(got, want) == 0, "bytes as RFC 4180 and %%.9g say");
	free(got);
	sprintf(path, "%s/out/sub-01", dir);
	CHECK(tf_entries(path, NULL) == 1, "no temporary file left beside it");

	/* Read back with our own reader: quoting round-trips. */
	sprintf(path, "%s/out/sub-01/r.csv", dir);
	if (table_read(path, 0, &t, &e) == SR_OK) {
		CHECK(t.nrows == 4 && strcmp(table_cell(&t, 0, 4), "say \"hi\"\nnext") == 0 &&
			      strcmp(table_cell(&t, 0, 1), "a,b") == 0 && strcmp(table_cell(&t, 1, 2), "") == 0,
		      "read back: quoted cells and empty NaN");
		table_release(&t);
	} else {
		CHECK(0, "read back (%s)", e.msg);
	}
	free(path);
}

static void test_failures(const char *dir)
{
	char *path = malloc(strlen(dir) + 64);
	char *sub = malloc(strlen(dir) + 64);
	csvout c;
	sr_err e;
	char *got;

	sr_err_init(&e, NULL, NULL);
	sprintf(sub, "%s/fail", dir);
	sprintf(path, "%s/fail/t.csv", dir);

	CHECK(csvout_open(&c, path, header, 5, &e) == SR_OK, "open");
	csvout_str(&c, "01");
	csvout_endrow(&c);
	CHECK(csvout_commit(&c, &e) == SR_EINVAL && strstr(e.msg, "row 2 has 1 fields"),
	      "short row fails the commit (%s)", e.msg);
	CHECK(tf_entries(sub, NULL) == 0, "and leaves no file at all");

	CHECK(csvout_open(&c, path, header, 2, &e) == SR_OK, "open");
	csvout_str(&c, "a");
	csvout_str(&c, "b");
	csvout_str(&c, "c");
	csvout_endrow(&c);
	CHECK(csvout_commit(&c, &e) == SR_EINVAL && tf_entries(sub, NULL) == 0, "long row fails, no file");

	CHECK(csvout_open(&c, path, header, 2, &e) == SR_OK, "open");
	csvout_str(&c, "a");
	CHECK(csvout_commit(&c, &e) == SR_EINVAL && tf_entries(sub, NULL) == 0, "unfinished row fails, no file");

	/* An existing table survives an aborted rewrite and is replaced by a committed one. */
	free(tf_write(sub, "t.csv", "old\n", 0));
	CHECK(csvout_open(&c, path, header, 1, &e) == SR_OK, "open over an existing file");
	csvout_str(&c, "new");
	csvout_endrow(&c);
	csvout_abort(&c);
	got = slurp(path);
	CHECK(got && strcmp(got, "old\n") == 0 && tf_entries(sub, NULL) == 1, "abort keeps the old file, no temporary");
	free(got);
	csvout_abort(&c);
	got = slurp(path);
	CHECK(got && strcmp(got, "old\n") == 0 && tf_entries(sub, NULL) == 1,
	      "a second abort keeps the old file and leaves no temporary");
	free(got);
	CHECK(csvout_open(&c, path, header, 1, &e) == SR_OK, "open again");
	csvout_str(&c, "new");
	csvout_endrow(&c);
	CHECK(csvout_commit(&c, &e) == SR_OK, "commit replaces");
	got = slurp(path);
	CHECK(got && strcmp(got, "subject\nnew\n") == 0, "new content in place");
	free(got);

	/* A write that fails part-way (file size limit: writes get EFBIG) leaves nothing. */
	{
		struct rlimit old, small;
		sr_status st;

		sprintf(path, "%s/fail/big.csv", dir);
		signal(SIGXFSZ, SIG_IGN);
		getrlimit(RLIMIT_FSIZE, &old);
		small = old;
		small.rlim_cur = 4096;
		if (setrlimit(RLIMIT_FSIZE, &small) == 0) {
			st = csvout_open(&c, path, header, 5, &e);
			for (int i = 0; i < 20000 && st == SR_OK; i++) {
				csvout_str(&c, "01");
				csvout_str(&c, "parcel");
				csvout_num(&c, i / 7.0);
				csvout_int(&c, i);
				csvout_str(&c, "");
				csvout_endrow(&c);
			}
			if (st == SR_OK)
				st = csvout_commit(&c, &e);
			setrlimit(RLIMIT_FSIZE, &old);
			CHECK(st == SR_EIO && strstr(e.msg, "big.csv") && strstr(e.msg, "write failed"),
			      "failed write is an i/o error naming the file (%s)", e.msg);
			CHECK(tf_entries(sub, NULL) == 1, "and leaves neither the table nor a temporary file");
		} else {
			printf("skip - cannot lower the file size limit\n");
		}
		signal(SIGXFSZ, SIG_DFL);
	}

	/* Open fails when the folder cannot be made: nothing to abort, nothing left. */
	sprintf(path, "%s/fail/t.csv/x.csv", dir);
	CHECK(csvout_open(&c, path, header, 1, &e) == SR_EIO && strstr(e.msg, "t.csv"),
	      "open under a file is an error (%s)", e.msg);
	csvout_abort(&c);
	CHECK(csvout_commit(&c, &e) != SR_OK, "commit after a failed open is an error, not a crash");
	free(path);
	free(sub);
}

int main(void)
{
	char *dir = tf_tmpdir();

	test_format(dir);
	test_failures(dir);
	tf_rmtree(dir);
	free(dir);
	return TEST_DONE();
}
