/* test_tablekeys.c - the five key columns of the result tables: localizer, parcel, split, kind, part. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/csvout.h"
#include "io/readall.h"
#include "pipeline/tablekeys.h"
#include "testlib.h"
#include "tfiles.h"

static void test_keys(void)
{
	static const char *const head[] = { "localizer", "parcel", "split", "split_kind", "split_part", "value" };
	char *dir = tf_tmpdir(), path[4096], *text = NULL;
	size_t len = 0;
	csvout c;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	snprintf(path, sizeof path, "%s/k.csv", dir);
	CHECK(csvout_open(&c, path, head, 6, &e) == SR_OK, "open: %s", e.msg);
	tablekeys_put(&c, "tones", "left_auditory", "odd-even:A");
	csvout_num(&c, 1.5);
	csvout_endrow(&c);
	tablekeys_put(&c, "tones", "L, STG", "all");
	csvout_num(&c, 2);
	csvout_endrow(&c);
	tablekeys_put(&c, "", "p", "leave-one-out:3");
	csvout_num(&c, 3);
	csvout_endrow(&c);
	CHECK(csvout_commit(&c, &e) == SR_OK, "commit: %s", e.msg);
	CHECK(readall_file(path, 0, &text, &len) == READALL_OK, "read back %s", path);
	/* the split's kind and part as bidsname.h documents them (all gives all and all); a comma
	   quoted as RFC 4180 says; rows end in LF (csvout.h) */
	CHECK(text && strstr(text, "tones,left_auditory,odd-even:A,odd-even,A,1.5\n") != NULL,
	      "odd-even:A gives kind odd-even and part A: %s", text ? text : "(none)");
	CHECK(text && strstr(text, "tones,\"L, STG\",all,all,all,2\n") != NULL, "all gives kind and part all: %s",
	      text ? text : "(none)");
	CHECK(text && strstr(text, "\n,p,leave-one-out:3,leave-one-out,3,3\n") != NULL,
	      "leave-one-out:3 gives part 3: %s", text ? text : "(none)");
	free(text);
	tf_rmtree(dir);
	free(dir);
}

int main(void)
{
	test_keys();
	return TEST_DONE();
}
