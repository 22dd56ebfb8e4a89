/* test_parcels.c - the parcel image and names table reader: good input, and each check failing with file and line. */
#include <string.h>

#include "io/nii.h"
#include "io/parcels.h"
#include "testlib.h"
#include "tfiles.h"

/* A 4 x 3 x 2 image: voxels 0-5 label 1, 6-9 label 2, 10-11 label 5, the rest 0. */
static char *write_image(const char *dir, const char *rel)
{
	nii_grid g;
	int32_t lab[24] = { 1, 1, 1, 1, 1, 1, 2, 2, 2, 2, 5, 5 };
	char *path = malloc(strlen(dir) + strlen(rel) + 2);
	sr_err e;

	sprintf(path, "%s/%s", dir, rel);
	nii_grid_make(&g, 4, 3, 2, 2, 2, 2, 0, 0, 0);
	sr_err_init(&e, NULL, NULL);
	if (nii_write_labels(path, &g, lab, "test parcels", &e) != SR_OK)
		printf("# cannot write %s: %s\n", path, e.msg);
	return path;
}

/* A float image whose voxel (1, 0, 0) holds 2.5 (not a label). */
static char *write_float_image(const char *dir)
{
	nii_grid g;
	float d[24] = { 1, 2.5f, 1, 1 };
	char *path = malloc(strlen(dir) + 16);
	sr_err e;

	sprintf(path, "%s/frac.nii.gz", dir);
	nii_grid_make(&g, 4, 3, 2, 2, 2, 2, 0, 0, 0);
	sr_err_init(&e, NULL, NULL);
	if (nii_write_float(path, &g, d, 1, 0, "fractional labels", &e) != SR_OK)
		printf("# cannot write %s: %s\n", path, e.msg);
	return path;
}

static void test_good(const char *dir, const char *img)
{
	char *names = tf_write(dir, "good.tsv", "index\tname\n5\tbelt\n1\tcore\n2\tparabelt\n", 0);
	parcels_set p;
	tf_warnings w = { "", 0 };
	sr_err e;

	sr_err_init(&e, tf_warn, &w);
	CHECK(parcels_load(img, names, &p, &e) == SR_OK, "good image and table load (%s)", e.msg);
	CHECK(p.n == 3 && p.index[0] == 1 && p.index[1] == 2 && p.index[2] == 5, "labels 1, 2, 5 ascending");
	CHECK(p.count[0] == 6 && p.count[1] == 4 && p.count[2] == 2, "voxel counts 6, 4, 2");
	CHECK(strcmp(p.name[0], "core") == 0 && strcmp(p.name[2], "belt") == 0 && p.named[2],
	      "names from the table, not its row order");
	CHECK(parcels_name(&p, 2) && strcmp(parcels_name(&p, 2), "parabelt") == 0, "parcels_name by label");
	CHECK(parcels_name(&p, 3) == NULL && parcels_find(&p, 3) == -1 && parcels_find(&p, 5) == 2,
	      "an absent label has no row and no name");
	CHECK(w.n == 0, "no warnings for a complete table (%s)", w.text);
	parcels_release(&p);
	CHECK(parcels_load(img, NULL, &p, &e) == SR_OK && strcmp(p.name[1], "2") == 0 && !p.named[1] &&
	      !p.have_names, "no table: the label is the name");
	parcels_release(&p);
	free(names);
}

static void test_rows(const char *dir, const char *img)
{
	/* image label 5 has no row; table row 9 (line 3) has no voxels */
	char *names = tf_write(dir, "short.tsv", "index\tname\n1\tcore\n9\tlost\n2\tparabelt\n", 0);
	parcels_set p;
	tf_warnings w = { "", 0 };
	sr_err e;

	sr_err_init(&e, tf_warn, &w);
	CHECK(parcels_load(img, names, &p, &e) == SR_OK, "a table with missing and extra rows still loads");
	CHECK(p.n == 3 && strcmp(p.name[2], "5") == 0 && !p.named[2], "label absent from the table: its number");
	CHECK(strstr(w.text, "short.tsv: line 3: parcel lost (index 9) has no voxels in ") != NULL,
	      "a table row without voxels is warned with file and line (%s)", w.text);
	CHECK(strstr(w.text, "img.nii.gz: parcel 5 has no row in ") && strstr(w.text, "short.tsv; its label is its name"),
	      "an image label without a row is warned naming both files (%s)", w.text);
	CHECK(w.n == 2, "two warnings (%d)", w.n);
	parcels_release(&p);
	free(names);
}

/* Loads img with a table of text; the message must hold want. */
static void expect_fail(const char *dir, const char *img, const char *rel, const char *text, const char *want,
			const char *what)
{
	char *names = text ? tf_write(dir, rel, text, 0) : NULL;
	parcels_set p;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	CHECK(parcels_load(img, names, &p, &e) != SR_OK && strstr(e.msg, want) != NULL, "%s (%s)", what, e.msg);
	CHECK(p.labels == NULL && p.n == 0, "%s: nothing half-loaded", what);
	free(names);
}

static void on_problem(void *ctx, const char *msg)
{
	tf_warn(ctx, msg);
}

static void test_failures(const char *dir, const char *img)
{
	char *frac = write_float_image(dir), *names;
	char nope[4200];
	parcels_set p;
	tf_warnings w = { "", 0 };
	sr_err e;

	expect_fail(dir, img, "dup.tsv", "index\tname\n1\tcore\n2\tbelt\n1\tagain\n",
		    "dup.tsv: line 4, column 1 (index): parcel 1 is already named on line 2", "duplicate index");
	expect_fail(dir, img, "frac.tsv", "index\tname\n1\tcore\n2.5\tbelt\n",
		    "frac.tsv: line 3, column 1 (index): '2.5' is not a parcel label (a whole number >= 1)",
		    "non-integer index in the table");
	expect_fail(dir, img, "zero.tsv", "index\tname\n0\tnothing\n",
		    "zero.tsv: line 2, column 1 (index): '0' is not a parcel label", "index 0 in the table");
	expect_fail(dir, img, "text.tsv", "index\tname\nfirst\tcore\n", "text.tsv: line 2, column 1 (index): 'first' is not a number",
		    "text as index");
	expect_fail(dir, img, "cols.tsv", "\nlabel\tname\n1\tcore\n",
		    "cols.tsv: line 2: the parcel names table needs columns 'index' and 'name'", "wrong columns");
	expect_fail(dir, frac, NULL, NULL,
		    "frac.nii.gz: voxel (1, 0, 0) holds 2.5; parcel labels must be whole numbers >= 0",
		    "non-integer label in the image");
	snprintf(nope, sizeof nope, "%s/missing.nii.gz", dir);
	expect_fail(dir, nope, NULL, NULL, "missing.nii.gz", "a missing image is named");
	/* the wrong file: a names table given as the image, an image as the names table */
	names = tf_write(dir, "asimage.nii.gz", "index\tname\n1\tcore\n", 0);
	expect_fail(dir, names, NULL, NULL, "asimage.nii.gz", "a table given as the image is named");
	free(names);
	sr_err_init(&e, NULL, NULL);
	CHECK(parcels_load(img, img, &p, &e) != SR_OK && strstr(e.msg, "img.nii.gz"),
	      "an image given as the names table is named (%s)", e.msg);
	{
		nii_grid g;
		int32_t lab[8] = { 0 };

		snprintf(nope, sizeof nope, "%s/empty.nii.gz", dir);
		nii_grid_make(&g, 2, 2, 2, 1, 1, 1, 0, 0, 0);
		nii_write_labels(nope, &g, lab, "empty", &e);
		expect_fail(dir, nope, NULL, NULL, "empty.nii.gz: no parcels (every voxel is 0)", "all-zero image");
	}
	/* listing: every bad row reported, the good ones kept */
	names = tf_write(dir, "many.tsv", "index\tname\n1\tcore\nx\tbad\n1\tdup\n2\tbelt\n", 0);
	sr_err_init(&e, NULL, NULL);
	CHECK(parcels_load_listing(img, names, on_problem, &w, &p, &e) == SR_OK && p.n == 3,
	      "listing goes on past bad rows");
	CHECK(w.n == 2 && strstr(w.text, "many.tsv: line 3, column 1 (index): 'x' is not a number") &&
	      strstr(w.text, "many.tsv: line 4, column 1 (index): parcel 1 is already named on line 2"),
	      "listing reports both bad rows (%s)", w.text);
	CHECK(strcmp(p.name[0], "core") == 0 && strcmp(p.name[1], "belt") == 0, "good rows still name parcels");
	parcels_release(&p);
	w.text[0] = 0;
	w.n = 0;
	CHECK(parcels_load_listing(nope, NULL, on_problem, &w, &p, &e) == SR_OK && p.n == 0 &&
	      strstr(w.text, "empty.nii.gz: no parcels"), "listing reports an all-zero image (%s)", w.text);
	parcels_release(&p);
	free(names);
	free(frac);
}

static void test_names_alone(const char *dir)
{
	char *names = tf_write(dir, "alone.tsv", "index\tname\n7\tseven\n3\t\n", 0);
	parcels_names t;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	CHECK(parcels_names_read(names, &t, &e) == SR_OK && t.n == 2 && t.index[0] == 7 && t.line[1] == 3,
	      "names table alone, file order and lines kept");
	CHECK(parcels_names_find(&t, 7) && strcmp(parcels_names_find(&t, 7), "seven") == 0 &&
	      parcels_names_find(&t, 3) == NULL, "an empty name cell names nothing");
	parcels_names_release(&t);
	free(names);
}

int main(void)
{
	char *dir = tf_tmpdir(), *img = write_image(dir, "img.nii.gz");

	test_good(dir, img);
	test_rows(dir, img);
	test_failures(dir, img);
	test_names_alone(dir);
	free(img);
	tf_rmtree(dir);
	free(dir);
	return TEST_DONE();
}
