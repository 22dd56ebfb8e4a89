/* test_bidsname.c - BIDS file names: the specification's entity order, alphanumeric values, split and effect values. */
#include <string.h>

#include "io/bidsname.h"
#include "testlib.h"

static void make_order(void)
{
	char buf[256];
	bids_entities b;

	memset(&b, 0, sizeof b);
	/* given in any order, written sub, ses, task, acq, run, space, res, label, desc (the entity table) */
	b.desc = "oddevenA";
	b.space = "MNI152NLin2009cAsym";
	b.task = "tones";
	b.sub = "01";
	b.res = "2";
	CHECK(bidsname_make(&b, "tstat", ".nii.gz", buf, sizeof buf) == 0 &&
	      strcmp(buf, "sub-01_task-tones_space-MNI152NLin2009cAsym_res-2_desc-oddevenA_tstat.nii.gz") == 0,
	      "entities in the specification's order (%s)", buf);
	b.space = NULL;
	b.res = "";
	CHECK(bidsname_make(&b, "dseg", ".tsv", buf, sizeof buf) == 0 &&
	      strcmp(buf, "sub-01_task-tones_desc-oddevenA_dseg.tsv") == 0, "NULL and empty entities left out (%s)", buf);
	b.desc = "odd-even";
	CHECK(bidsname_make(&b, "dseg", ".tsv", buf, sizeof buf) == -1 && buf[0] == '\0',
	      "a value with a '-' is refused");
	b.desc = "x";
	CHECK(bidsname_make(&b, "d_seg", ".tsv", buf, sizeof buf) == -1, "a suffix with '_' is refused");
	CHECK(bidsname_make(&b, "dseg", ".tsv", buf, 10) == -1 && buf[0] == '\0', "a short buffer is refused, not cut");
}

static void parse_build(void)
{
	bidsname_kv kv[8];
	size_t n;
	char buf[256];

	CHECK(bidsname_parse("sub-01_task-tones_run-2_echo-1_space-T1w_desc-preproc", kv, 8, &n) == 0 && n == 6 &&
	      strcmp(kv[3].key, "echo") == 0 && strcmp(kv[5].value, "preproc") == 0, "a derivative's stem parses");
	CHECK(bidsname_parse("sub-01_task-tones_foo-1", kv, 8, &n) == -1, "an unknown key is refused");
	CHECK(bidsname_parse("sub-01_bold", kv, 8, &n) == -1, "a part without '-' is refused");
	CHECK(bidsname_parse("sub-0.1", kv, 8, &n) == -1, "a value with '.' is refused");
	CHECK(bidsname_parse("sub-01_task-tones_run-2_echo-1_space-T1w_desc-preproc", kv, 8, &n) == 0 &&
	      bidsname_build(kv + 1, n - 1, "bold", ".nii", buf, sizeof buf) == 0 &&
	      strcmp(buf, "task-tones_run-2_echo-1_space-T1w_desc-preproc_bold.nii") == 0, "build keeps the order (%s)", buf);
	/* reversed input comes out in table order */
	{
		bidsname_kv r[3] = { { "desc", "x" }, { "run", "1" }, { "sub", "02" } };

		CHECK(bidsname_build(r, 3, "effect", ".json", buf, sizeof buf) == 0 &&
		      strcmp(buf, "sub-02_run-1_desc-x_effect.json") == 0, "build sorts by the entity table (%s)", buf);
	}
	{
		bidsname_kv r[2] = { { "run", "1" }, { "run", "2" } };

		CHECK(bidsname_build(r, 2, "bold", ".nii", buf, sizeof buf) == -1, "a key given twice is refused");
	}
	CHECK(bidsname_rank("sub") == 0 && bidsname_rank("desc") == 30 && bidsname_rank("space") < bidsname_rank("res") &&
	      bidsname_rank("stat") == -1, "ranks follow the entity table (desc last of 31)");
}

static void values(void)
{
	char buf[128], k[32], p[32];

	bidsname_value("melody - scrambled", buf, sizeof buf);
	CHECK(strcmp(buf, "melodyMinusScrambled") == 0, "melody - scrambled (%s)", buf);
	bidsname_value("0.5*melody+0.5*scrambled", buf, sizeof buf);
	CHECK(strcmp(buf, "0p5TimesMelodyPlus0p5TimesScrambled") == 0, "weights and operators (%s)", buf);
	bidsname_value("-melody", buf, sizeof buf);
	CHECK(strcmp(buf, "minusMelody") == 0, "a leading minus (%s)", buf);
	bidsname_value("face_happy/2", buf, sizeof buf);
	CHECK(strcmp(buf, "faceHappyOver2") == 0, "an underscore goes, the next letter upper case (%s)", buf);
	bidsname_value("  ", buf, sizeof buf);
	CHECK(strcmp(buf, "x") == 0, "nothing left gives x");
	CHECK(bidsname_valid_value("melodyMinusScrambled") && !bidsname_valid_value("") &&
	      !bidsname_valid_value("a b") && !bidsname_valid_value("caf\xc3\xa9"), "valid values are ASCII letters and digits");
	bidsname_split("odd-even:A", NULL, buf, sizeof buf);
	CHECK(strcmp(buf, "oddevenA") == 0, "odd-even:A (%s)", buf);
	bidsname_split("leave-one-out:3", NULL, buf, sizeof buf);
	CHECK(strcmp(buf, "leaveoneout3") == 0, "leave-one-out:3 (%s)", buf);
	bidsname_split("leave-one-out:1.2", NULL, buf, sizeof buf);
	CHECK(strcmp(buf, "leaveoneout1r2") == 0, "a session.run label (%s)", buf);
	bidsname_split("all", "memory", buf, sizeof buf);
	CHECK(strcmp(buf, "allmemory") == 0, "all for memory (%s)", buf);
	bidsname_split_parts("odd-even:mean", k, sizeof k, p, sizeof p);
	CHECK(strcmp(k, "odd-even") == 0 && strcmp(p, "mean") == 0, "odd-even:mean parts");
	bidsname_split_parts("leave-one-out:1.2", k, sizeof k, p, sizeof p);
	CHECK(strcmp(k, "leave-one-out") == 0 && strcmp(p, "1.2") == 0, "leave-one-out parts keep the run label");
	bidsname_split_parts("all", k, sizeof k, p, sizeof p);
	CHECK(strcmp(k, "all") == 0 && strcmp(p, "all") == 0, "all is its own kind and part");
}

int main(void)
{
	make_order();
	parse_build();
	values();
	return TEST_DONE();
}
