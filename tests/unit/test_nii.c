/* test_nii.c - NIfTI round trips, grids, atomic writes, and malformed files that must fail cleanly. */
#define HAVE_ZLIB 1

#include <dirent.h>
#include <errno.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <nifti2_io.h>

#include "core/err.h"
#include "core/mem.h"
#include "io/afile.h"
#include "io/nii.h"
#include "testlib.h"

static char dir[256];

static const char *tpath(const char *name)
{
	static char buf[8][512];
	static int n;

	n = (n + 1) % 8;
	snprintf(buf[n], sizeof buf[n], "%s/%s", dir, name);
	return buf[n];
}

/* Deterministic values (fixed-seed LCG) that do not compress to nothing. */
static double lcg(unsigned long long *x)
{
	*x = *x * 6364136223846793005ULL + 1442695040888963407ULL;
	return (double)(*x >> 11) / 9007199254740992.0;
}

static long file_size(const char *p)
{
	struct stat st;

	return stat(p, &st) == 0 ? (long)st.st_size : -1;
}

static void patch(const char *p, long off, const void *bytes, size_t n)
{
	FILE *f = fopen(p, "r+b");

	if (!f || fseek(f, off, SEEK_SET) != 0 || fwrite(bytes, 1, n, f) != n || fclose(f) != 0) {
		printf("not ok - cannot patch %s\n", p);
		exit(1);
	}
}

static void copy_file(const char *from, const char *to)
{
	FILE *a = fopen(from, "rb"), *b = fopen(to, "wb");
	char buf[65536];
	size_t n;

	while (a && b && (n = fread(buf, 1, sizeof buf, a)) > 0)
		fwrite(buf, 1, n, b);
	if (a)
		fclose(a);
	if (b)
		fclose(b);
}

static int count_tmp_files(void)
{
	DIR *d = opendir(dir);
	struct dirent *de;
	int n = 0;

	while (d && (de = readdir(d)))
		if (strstr(de->d_name, ".tmp."))
			n++;
	if (d)
		closedir(d);
	return n;
}

/* Opens and reads every volume; the first failure's status (e filled), or SR_OK. */
static sr_status read_all(const char *p, sr_err *e)
{
	nii_stream *s;
	nii_info info;
	sr_status rc = nii_stream_open(p, &s, &info, e);
	double *vol;

	if (rc != SR_OK)
		return rc;
	vol = xmalloc_array(nii_nvox(&info.grid), sizeof *vol);
	for (int64_t t = 0; t < info.nt && rc == SR_OK; t++)
		rc = nii_stream_next(s, vol, e);
	free(vol);
	nii_stream_close(s);
	return rc;
}

/* An oblique grid with a qform and a different-but-valid sform, as a scanner might write. */
static void oblique_grid(nii_grid *g, int nx, int ny, int nz)
{
	nii_grid_make(g, nx, ny, nz, 2.0, 2.5, 3.0, 0, 0, 0);
	g->quatern_b = 0.0, g->quatern_c = 0.0, g->quatern_d = 0.25881904510252074; /* 30 deg about z */
	g->qoffset_x = -10, g->qoffset_y = 20, g->qoffset_z = -30;
	/* sform: rotation by 30 degrees about z, same offsets */
	{
		double c = cos(M_PI / 6), s = sin(M_PI / 6);
		g->quatern_b = 0, g->quatern_c = 0, g->quatern_d = sin(M_PI / 12);
		double S[3][4] = {{c * 2.0, -s * 2.5, 0, -10}, {s * 2.0, c * 2.5, 0, 20},
				  {0, 0, 3.0, -30}};
		memcpy(g->srow, S, sizeof S);
		memcpy(g->affine, S, sizeof S);
	}
	g->sform_code = 2;
}

static void test_grid_make(void)
{
	nii_grid g, h;
	double w[3];
	char why[1024];

	nii_grid_make(&g, 10, 12, 8, 2, 2, 3, 4.5, 5.5, 3.5);
	nii_voxel_to_world(&g, 4.5, 5.5, 3.5, w);
	CHECK(fabs(w[0]) < 1e-12 && fabs(w[1]) < 1e-12 && fabs(w[2]) < 1e-12,
	      "grid_make: origin voxel maps to world 0");
	nii_voxel_to_world(&g, 5.5, 5.5, 4.5, w);
	CHECK_NEAR(w[0], 2.0, 1e-12, "grid_make: one voxel in x is dx mm");
	CHECK_NEAR(w[2], 3.0, 1e-12, "grid_make: one voxel in z is dz mm");
	CHECK(g.qform_code == 1 && g.sform_code == 1, "grid_make: scanner codes");
	h = g;
	CHECK(nii_same_grid(&g, &h, 1e-3, why, sizeof why), "same grid: identical copies match");
	h.affine[1][3] += 5e-4;
	CHECK(nii_same_grid(&g, &h, 1e-3, why, sizeof why), "same grid: 0.5 um shift is within 1e-3 mm");
	h.affine[1][3] += 0.01;
	CHECK(!nii_same_grid(&g, &h, 1e-3, why, sizeof why) && strstr(why, "affine") &&
	      strstr(why, "10x12x8"), "same grid: shifted affine differs: %s", why);
	h = g;
	h.nz = 9;
	CHECK(!nii_same_grid(&g, &h, 1e-3, why, sizeof why) && strstr(why, "10x12x8") &&
	      strstr(why, "10x12x9"), "same grid: dims differ, both named: %s", why);
	CHECK(!nii_same_grid(&g, &h, 1e-3, NULL, 0), "same grid: NULL why allowed");
}

/* Which headers give values that are all exactly float32 (int16 max 32767 < 2^24; int32 2^24 + 1 is not). */
static void test_float32_exact(void)
{
	nii_info in;
	float f = (float)16777217.0;

	memset(&in, 0, sizeof in);
	in.slope = 1.0;
	in.inter = 0.0;
	in.datatype = NIFTI_TYPE_FLOAT32;
	CHECK(nii_float32_exact(&in), "float32 exact: float32, no scaling");
	in.datatype = NIFTI_TYPE_INT16;
	CHECK(nii_float32_exact(&in), "float32 exact: int16, no scaling");
	in.datatype = NIFTI_TYPE_UINT8;
	CHECK(nii_float32_exact(&in), "float32 exact: uint8, no scaling");
	in.datatype = NIFTI_TYPE_INT32;
	CHECK(!nii_float32_exact(&in) && (double)f != 16777217.0,
	      "float32 exact: not int32 (2^24 + 1 rounds to %.1f)", (double)f);
	in.datatype = NIFTI_TYPE_FLOAT64;
	CHECK(!nii_float32_exact(&in), "float32 exact: not float64");
	in.datatype = NIFTI_TYPE_INT16;
	in.slope = 0.1;
	CHECK(!nii_float32_exact(&in) && (float)(3 * 0.1) != 3 * 0.1,
	      "float32 exact: not int16 with slope 0.1 (3 x 0.1 in double is no float32)");
	in.slope = 1.0;
	in.inter = 0.5;
	CHECK(!nii_float32_exact(&in), "float32 exact: not int16 with an intercept");
}

static void test_float_roundtrip(const char *name, int64_t nt)
{
	nii_grid g, g2;
	nii_info info;
	sr_err e;
	int nx = 9, ny = 7, nz = 5;
	size_t nvox = (size_t)nx * ny * nz;
	float *v = xmalloc(nvox * (size_t)nt * sizeof *v);
	double *back = xmalloc(nvox * sizeof *back);
	unsigned long long seed = 7;
	nii_stream *s;
	int same = 1;
	char why[1024];

	sr_err_init(&e, NULL, NULL);
	oblique_grid(&g, nx, ny, nz);
	for (size_t i = 0; i < nvox * (size_t)nt; i++)
		v[i] = (float)(lcg(&seed) * 2000 - 1000);
	v[3] = NAN; /* a masked voxel must survive as NaN */
	CHECK(nii_write_float(tpath(name), &g, v, nt, 2.0, "a map with a very long description "
			      "that goes on and on beyond the seventy-nine bytes the header holds",
			      &e) == SR_OK, "%s: write float (%s)", name, e.msg);
	CHECK(nii_stream_open(tpath(name), &s, &info, &e) == SR_OK, "%s: open (%s)", name, e.msg);
	if (!s)
		goto out;
	g2 = info.grid;
	CHECK(nii_same_grid(&g, &g2, 1e-4, why, sizeof why), "%s: grid kept: %s", name, why);
	CHECK(g2.qform_code == 1 && g2.sform_code == 2, "%s: xform codes kept", name);
	CHECK_NEAR(g2.quatern_d, g.quatern_d, 1e-7, "quatern_d kept");
	CHECK(info.nt == nt && info.datatype == NIFTI_TYPE_FLOAT32 && info.nifti_version == 1,
	      "%s: nt, datatype, version", name);
	CHECK(info.ndim == (nt > 1 ? 4 : 3), "%s: ndim %d", name, info.ndim);
	CHECK_NEAR(info.tr, nt > 1 ? 2.0 : 0.0, 1e-12, "tr");
	CHECK(info.slope == 1.0 && info.inter == 0.0, "%s: no scaling on float maps", name);
	for (int64_t t = 0; t < nt; t++) {
		if (nii_stream_next(s, back, &e) != SR_OK) {
			same = 0;
			break;
		}
		for (size_t i = 0; i < nvox; i++) {
			double want = v[(size_t)t * nvox + i];
			if (!(back[i] == want || (isnan(want) && isnan(back[i]))))
				same = 0;
		}
	}
	CHECK(same, "%s: values identical, volume by volume", name);
	CHECK(nii_stream_next(s, back, &e) != SR_OK && strstr(e.msg, "already read"),
	      "%s: reading past the end is an error", name);
	nii_stream_close(s);
out:
	free(v);
	free(back);
}

static void test_labels_and_3d(void)
{
	nii_grid g;
	nii_info info;
	sr_err e;
	int32_t lab[4 * 3 * 2];
	double *d = NULL;
	int same = 1;

	sr_err_init(&e, NULL, NULL);
	nii_grid_make(&g, 4, 3, 2, 3, 3, 4, 1.5, 1, 0.5);
	for (int i = 0; i < 24; i++)
		lab[i] = (i * 7919) % 13 - 3 + (i == 5 ? 16777217 : 0); /* 2^24+1: not a float32 */
	CHECK(nii_write_labels(tpath("sub/deeper/labels.nii.gz"), &g, lab, "labels", &e) == SR_OK,
	      "labels: written into missing folders (%s)", e.msg);
	CHECK(nii_read_3d(tpath("sub/deeper/labels.nii.gz"), &info, &d, &e) == SR_OK,
	      "labels: read_3d (%s)", e.msg);
	if (d) {
		for (int i = 0; i < 24; i++)
			same &= d[i] == (double)lab[i];
		CHECK(same, "labels: int32 values exact, 2^24+1 included");
		CHECK(info.datatype == NIFTI_TYPE_INT32 && info.nt == 1, "labels: int32 3-D");
	}
	free(d);
}

/* The one mask rule: inside where the value is finite and not 0 (NaN, +-Inf and 0 outside; negative and fractional inside). */
static void test_mask(void)
{
	nii_grid g;
	nii_info info;
	sr_err e;
	const float v[8] = { 0.0f, 1.0f, NAN, INFINITY, -2.0f, 0.5f, -INFINITY, -0.0f };
	const unsigned char want[8] = { 0, 1, 0, 0, 1, 1, 0, 0 };
	unsigned char *m = NULL;
	size_t count = 99;

	sr_err_init(&e, NULL, NULL);
	nii_grid_make(&g, 2, 2, 2, 2, 2, 2, 0, 0, 0);
	CHECK(nii_write_float(tpath("mask.nii.gz"), &g, v, 1, 0, NULL, &e) == SR_OK, "mask: written (%s)", e.msg);
	CHECK(nii_read_mask(tpath("mask.nii.gz"), &info, &m, &count, &e) == SR_OK && m,
	      "mask: read (%s)", e.msg);
	if (m) {
		CHECK(memcmp(m, want, sizeof want) == 0,
		      "mask: 0 NaN Inf -Inf -0 outside, 1 -2 0.5 inside (got %d%d%d%d%d%d%d%d)", m[0], m[1], m[2],
		      m[3], m[4], m[5], m[6], m[7]);
		CHECK(count == 3, "mask: 3 voxels inside (got %zu)", count);
		CHECK(info.grid.nx == 2 && info.grid.ny == 2 && info.grid.nz == 2, "mask: its grid is returned");
	}
	free(m);
	m = (unsigned char *)&count;   /* a failed read must set it to NULL */
	CHECK(nii_read_mask(tpath("no-such-mask.nii.gz"), &info, &m, NULL, &e) == SR_EIO && m == NULL &&
		      strstr(e.msg, "no-such-mask.nii.gz"),
	      "mask: a missing file is SR_EIO naming it, no mask: %s", e.msg);
}

static void test_int16_writer(const char *name)
{
	nii_grid g;
	nii_writer *w;
	nii_info info;
	nii_stream *s;
	sr_err e;
	double vol[24], back[24];
	int ok = 1;
	double slope = 0.5, inter = 100;

	sr_err_init(&e, NULL, NULL);
	nii_grid_make(&g, 4, 3, 2, 2, 2, 2, 0, 0, 0);
	CHECK(nii_writer_open(tpath(name), &g, 3, 0.8, NIFTI_TYPE_INT16, slope, inter, &w, &e) ==
	      SR_OK, "%s: int16 writer open", name);
	for (int t = 0; t < 3 && w; t++) {
		for (int i = 0; i < 24; i++)
			vol[i] = 100 + 37.3 * i - 11.1 * t;
		vol[0] = 1e9;   /* clamps to 32767 */
		vol[1] = -1e9;  /* clamps to -32768 */
		vol[2] = 100.75; /* (0.75 / 0.5) = 1.5 rounds to even: 2 -> 101 */
		CHECK(nii_writer_put(w, vol, &e) == SR_OK, "%s: put volume %d", name, t + 1);
	}
	CHECK(w && nii_writer_commit(w, &e) == SR_OK, "%s: commit (%s)", name, e.msg);
	CHECK(nii_stream_open(tpath(name), &s, &info, &e) == SR_OK, "%s: reopen", name);
	if (!s)
		return;
	CHECK(info.datatype == NIFTI_TYPE_INT16 && info.slope == 0.5 && info.inter == 100,
	      "%s: int16 with slope 0.5, inter 100", name);
	CHECK_NEAR(info.tr, 0.8, 1e-6, "int16 series: tr stored as float32");
	for (int t = 0; t < 3; t++) {
		if (nii_stream_next(s, back, &e) != SR_OK) {
			ok = 0;
			break;
		}
		for (int i = 3; i < 24; i++)
			ok &= fabs(back[i] - (100 + 37.3 * i - 11.1 * t)) <= slope / 2 + 1e-9;
		ok &= back[0] == 32767 * slope + inter && back[1] == -32768 * slope + inter;
		ok &= back[2] == 101.0;
	}
	CHECK(ok, "%s: values within slope/2, clamped at the int16 range, halves to even", name);
	nii_stream_close(s);
}

static void test_atomic(void)
{
	nii_grid g;
	nii_writer *w;
	sr_err e;
	double vol[8] = {0};
	afile a;

	sr_err_init(&e, NULL, NULL);
	nii_grid_make(&g, 2, 2, 2, 1, 1, 1, 0, 0, 0);
	CHECK(count_tmp_files() == 0, "atomic: no temporary files after successful writes");
	CHECK(nii_writer_open(tpath("partial.nii.gz"), &g, 3, 1, NIFTI_TYPE_FLOAT32, 1, 0, &w, &e) ==
	      SR_OK, "atomic: writer open");
	nii_writer_put(w, vol, &e);
	CHECK(nii_writer_commit(w, &e) != SR_OK && strstr(e.msg, "1 of 3"),
	      "atomic: committing 1 of 3 volumes fails: %s", e.msg);
	CHECK(file_size(tpath("partial.nii.gz")) < 0 && count_tmp_files() == 0,
	      "atomic: no file and no temporary after a failed commit");
	CHECK(nii_writer_open(tpath("aborted.nii"), &g, 1, 0, NIFTI_TYPE_FLOAT32, 1, 0, &w, &e) ==
	      SR_OK, "atomic: writer open again");
	nii_writer_abort(w);
	CHECK(file_size(tpath("aborted.nii")) < 0 && count_tmp_files() == 0,
	      "atomic: abort leaves nothing");
	vol[0] = NAN;
	CHECK(nii_writer_open(tpath("nan16.nii"), &g, 1, 0, NIFTI_TYPE_INT16, 1, 0, &w, &e) == SR_OK &&
	      nii_writer_put(w, vol, &e) != SR_OK && strstr(e.msg, "NaN"),
	      "int16 writer refuses NaN: %s", e.msg);
	nii_writer_abort(w);
	CHECK(nii_writer_open(tpath("bad.nii"), &g, 1, 0, NIFTI_TYPE_INT16, 0, 0, &w, &e) != SR_OK &&
	      !w, "int16 writer refuses slope 0");
	CHECK(nii_write_float(tpath("no/such/../x.nii"), &g, (float[8]){0}, 1, 0, NULL, &e) == SR_OK,
	      "write through a path that needs folders made (%s)", e.msg);

	CHECK(afile_open(&a, tpath("t/table.tsv"), &e) == SR_OK, "afile: open in a new folder");
	fprintf(a.f, "a\tb\n1\t2\n");
	CHECK(file_size(tpath("t/table.tsv")) < 0, "afile: nothing at the final name before commit");
	CHECK(afile_commit(&a, &e) == SR_OK && file_size(tpath("t/table.tsv")) == 8,
	      "afile: committed file has its 8 bytes");
	CHECK(afile_open(&a, tpath("t/gone.tsv"), &e) == SR_OK, "afile: open another");
	fputs("x", a.f);
	afile_abort(&a);
	CHECK(file_size(tpath("t/gone.tsv")) < 0, "afile: abort leaves no file");
	afile_abort(&a); /* twice is harmless */
	CHECK(afile_open(&a, tpath("map.nii/x"), &e) != SR_OK && strstr(e.msg, "not a folder"),
	      "afile: a file in the way of a folder is an error: %s", e.msg);
	CHECK(afile_mkdirs(tpath("m/n/o/"), &e) == SR_OK && afile_mkdirs(tpath("m/n/o"), &e) == SR_OK,
	      "afile: mkdirs twice, trailing slash");
}

/* u.nii (test_header_fields' 2x2x2 float32 image) byte-swapped as name, with this scaling: 1 when written. */
static int write_swapped(const char *name, float slope, float inter)
{
	nifti_1_header h;
	float data[8];
	FILE *fp = fopen(tpath("u.nii"), "rb");
	int ok = fp && fread(&h, 348, 1, fp) == 1 && fseek(fp, 352, SEEK_SET) == 0 && fread(data, 4, 8, fp) == 8;

	if (fp)
		fclose(fp);
	h.scl_slope = slope, h.scl_inter = inter;
	swap_nifti_header(&h, 1);
	nifti_swap_4bytes(8, data);
	fp = fopen(tpath(name), "wb");
	ok = ok && fp && fwrite(&h, 348, 1, fp) == 1 && fwrite("\0\0\0\0", 4, 1, fp) == 1 &&
	     fwrite(data, 4, 8, fp) == 8;
	if (fp)
		fclose(fp);
	return ok;
}

/* Units, scaling and byte order through patched headers (offsets from nifti1.h's struct). */
static void test_header_fields(void)
{
	nii_grid g;
	nii_info info;
	sr_err e;
	float v[8] = {1, 2, 3, 4, 5, 6, 7, 8}, f;
	char u;
	double *d = NULL;

	sr_err_init(&e, NULL, NULL);
	nii_grid_make(&g, 2, 2, 2, 2, 3, 4, 0, 0, 0);
	nii_write_float(tpath("u.nii"), &g, v, 1, 0, NULL, &e);
	/* 4-D with one volume: dim[0] = 4, pixdim[4] = 2000 ms (NIfTI-1: NIFTI_UNITS_MSEC = 16) */
	patch(tpath("u.nii"), 40, (short[1]){4}, 2);
	f = 2000;
	patch(tpath("u.nii"), 76 + 4 * 4, &f, 4);
	u = NIFTI_UNITS_MM | NIFTI_UNITS_MSEC;
	patch(tpath("u.nii"), 123, &u, 1);
	CHECK(nii_read_info(tpath("u.nii"), &info, &e) == SR_OK, "units: read");
	CHECK_NEAR(info.tr, 2.0, 1e-12, "units: 2000 ms is a TR of 2 s");
	u = NIFTI_UNITS_MM | NIFTI_UNITS_USEC;
	patch(tpath("u.nii"), 123, &u, 1);
	nii_read_info(tpath("u.nii"), &info, &e);
	CHECK_NEAR(info.tr, 0.002, 1e-15, "units: 2000 us is 0.002 s");
	u = NIFTI_UNITS_METER; /* time code 0 reads as seconds (METHODS.md 11) */
	patch(tpath("u.nii"), 123, &u, 1);
	nii_read_info(tpath("u.nii"), &info, &e);
	CHECK_NEAR(info.tr, 2000, 1e-9, "units: time code 0 is seconds");
	CHECK_NEAR(info.grid.dx, 2000, 1e-9, "units: 2 m voxels are 2000 mm");
	CHECK_NEAR(info.grid.affine[1][1], 3000, 1e-9, "units: affine converted to mm");
	u = NIFTI_UNITS_MICRON | NIFTI_UNITS_HZ;
	patch(tpath("u.nii"), 123, &u, 1);
	nii_read_info(tpath("u.nii"), &info, &e);
	CHECK_NEAR(info.grid.dz, 0.004, 1e-15, "units: 4 micron voxels are 0.004 mm");
	CHECK(info.tr == 0, "units: a 4th axis in Hz is not a TR");
	f = -1;
	patch(tpath("u.nii"), 76 + 4 * 4, &f, 4);
	u = NIFTI_UNITS_MM | NIFTI_UNITS_SEC;
	patch(tpath("u.nii"), 123, &u, 1);
	nii_read_info(tpath("u.nii"), &info, &e);
	CHECK(info.tr == 0, "units: pixdim[4] <= 0 is no TR");

	/* scaling rules, METHODS.md 1 and 11 */
	patch(tpath("u.nii"), 112, (float[2]){2.0f, 10.0f}, 8);
	CHECK(nii_read_3d(tpath("u.nii"), &info, &d, &e) == SR_OK && d && d[7] == 26.0,
	      "scaling: 8 * 2 + 10 = 26");
	free(d), d = NULL;
	patch(tpath("u.nii"), 112, (float[2]){2.0f, NAN}, 8);
	CHECK(nii_read_3d(tpath("u.nii"), &info, &d, &e) == SR_OK && d && d[7] == 16.0 &&
	      info.inter == 0, "scaling: NaN inter with a valid slope counts as 0");
	free(d), d = NULL;
	patch(tpath("u.nii"), 112, (float[2]){0.0f, 10.0f}, 8);
	CHECK(nii_read_3d(tpath("u.nii"), &info, &d, &e) == SR_OK && d && d[7] == 8.0 &&
	      info.slope == 1 && info.inter == 0, "scaling: slope 0 means no scaling");
	free(d), d = NULL;
	patch(tpath("u.nii"), 112, (float[2]){INFINITY, 10.0f}, 8);
	CHECK(nii_read_3d(tpath("u.nii"), &info, &d, &e) == SR_OK && d && d[7] == 8.0,
	      "scaling: infinite slope means no scaling");
	free(d), d = NULL;

	/* byte-swapped: header through nifticlib's swapper, data by hand */
	{
		int ok = write_swapped("swapped.nii", 0.5f, 1.0f);

		CHECK(ok && nii_read_3d(tpath("swapped.nii"), &info, &d, &e) == SR_OK && d &&
		      d[0] == 1.5 && d[7] == 5.0 && info.grid.dy == 3,
		      "byte-swapped header and data read (%s)", e.msg);
		free(d), d = NULL;
	}
}

/* nii_stream_next_f32 gives nii_stream_next's numbers as float32, volume by volume; 1 when every one matched. */
static int same_f32(const char *p, int *nvol)
{
	nii_stream *s, *s2;
	nii_info info;
	sr_err e;
	double *d;
	float *f;
	int ok = 1;

	sr_err_init(&e, NULL, NULL);
	*nvol = 0;
	if (nii_stream_open(p, &s, &info, &e) != SR_OK)
		return 0;
	if (nii_stream_open(p, &s2, &info, &e) != SR_OK) {
		nii_stream_close(s);
		return 0;
	}
	d = xmalloc_array(nii_nvox(&info.grid), sizeof *d);
	f = xmalloc_array(nii_nvox(&info.grid), sizeof *f);
	for (int64_t t = 0; t < info.nt && ok; t++) {
		ok = nii_stream_next(s, d, &e) == SR_OK && nii_stream_next_f32(s2, f, &e) == SR_OK;
		for (size_t i = 0; ok && i < nii_nvox(&info.grid); i++) {
			double w = f[i];

			ok = isnan(d[i]) ? isnan(w) : memcmp(&w, &d[i], sizeof w) == 0;
		}
		*nvol += ok;
	}
	/* the CRC was checked after the last volume on both */
	ok = ok && nii_stream_next_f32(s2, f, &e) != SR_OK && strstr(e.msg, "already read");
	free(d);
	free(f);
	nii_stream_close(s);
	nii_stream_close(s2);
	return ok;
}

static void test_stream_f32(void)
{
	nii_grid g;
	nii_writer *w;
	nii_stream *s;
	nii_info info;
	sr_err e;
	double vol[24];
	float f[24];
	int n;

	sr_err_init(&e, NULL, NULL);
	CHECK(same_f32(tpath("series.nii.gz"), &n) && n == 4, "float32 stream as float32: the same numbers (%d volumes, NaN kept)", n);
	CHECK(same_f32(tpath("series.nii"), &n) && n == 4, "float32 stream, uncompressed, as float32: the same numbers");
	nii_grid_make(&g, 4, 3, 2, 2, 2, 2, 0, 0, 0);
	CHECK(nii_writer_open(tpath("int16u.nii.gz"), &g, 3, 2.0, NIFTI_TYPE_INT16, 1.0, 0.0, &w, &e) == SR_OK,
	      "int16 writer without scaling");
	for (int t = 0; t < 3 && w; t++) {
		for (int i = 0; i < 24; i++)
			vol[i] = (i * 2731 + t * 977) % 65536 - 32768;
		nii_writer_put(w, vol, &e);
	}
	CHECK(w && nii_writer_commit(w, &e) == SR_OK, "int16 without scaling written (%s)", e.msg);
	CHECK(same_f32(tpath("int16u.nii.gz"), &n) && n == 3, "int16 stream as float32: the same numbers, -32768 to 32767");
	/* byte-swapped float32, no scaling */
	CHECK(write_swapped("swapped1.nii", 1.0f, 0.0f) && same_f32(tpath("swapped1.nii"), &n) && n == 1,
	      "byte-swapped float32 as float32: the same numbers");
	/* a scaled int16 run is not float32: refused, naming the file */
	CHECK(nii_stream_open(tpath("int16.nii.gz"), &s, &info, &e) == SR_OK, "scaled int16 opens");
	if (s) {
		CHECK(nii_stream_next_f32(s, f, &e) == SR_EINVAL && strstr(e.msg, "int16.nii.gz") &&
		      strstr(e.msg, "not all float32"), "a scaled int16 run refused as float32: %s", e.msg);
		nii_stream_close(s);
	}
}

/* Each malformed file must give a non-OK status and a message naming it. */
static void expect_fail(const char *what, sr_status rc, const sr_err *e, const char *file,
			const char *needle)
{
	CHECK(rc != SR_OK && strstr(e->msg, file) && (!needle || strstr(e->msg, needle)),
	      "malformed: %s -> %s", what, rc == SR_OK ? "(accepted!)" : e->msg);
}

static void write_n2(const char *p, int64_t d1, int64_t d2)
{
	nifti_2_header h;
	FILE *f = fopen(p, "wb");

	memset(&h, 0, sizeof h);
	h.sizeof_hdr = 540;
	memcpy(h.magic, "n+2\0\r\n\032\n", 8);
	h.datatype = NIFTI_TYPE_FLOAT32;
	h.bitpix = 32;
	h.dim[0] = 3, h.dim[1] = d1, h.dim[2] = d2, h.dim[3] = 1;
	h.pixdim[1] = h.pixdim[2] = h.pixdim[3] = 1;
	h.vox_offset = 544;
	if (f) {
		fwrite(&h, sizeof h, 1, f);
		fwrite("\0\0\0\0", 4, 1, f);
		fwrite((float[4]){1, 2, 3, 4}, 4, 4, f);
		fclose(f);
	}
}

static void test_malformed(void)
{
	nii_grid g;
	nii_info info;
	sr_err e;
	int nx = 16, ny = 16, nz = 8, nt = 6;
	size_t nvox = (size_t)nx * ny * nz;
	float *v = xmalloc(nvox * nt * sizeof *v);
	unsigned long long seed = 99;
	double *d = NULL;
	const char *p;

	sr_err_init(&e, NULL, NULL);
	nii_grid_make(&g, nx, ny, nz, 3, 3, 3, 0, 0, 0);
	for (size_t i = 0; i < nvox * nt; i++)
		v[i] = (float)lcg(&seed);
	nii_write_float(tpath("good.nii"), &g, v, nt, 2, NULL, &e);
	nii_write_float(tpath("good.nii.gz"), &g, v, nt, 2, NULL, &e);
	CHECK(read_all(tpath("good.nii.gz"), &e) == SR_OK && read_all(tpath("good.nii"), &e) == SR_OK,
	      "malformed: the intact originals read");

	p = tpath("trunc.nii");
	copy_file(tpath("good.nii"), p);
	CHECK(truncate(p, file_size(p) - 100) == 0, "truncate");
	expect_fail("truncated .nii", nii_read_info(p, &info, &e), &e, "trunc.nii", "truncated");
	CHECK(strstr(e.msg, "expected 49504") && strstr(e.msg, "has 49404"),
	      "truncated .nii: bytes expected and present: %s", e.msg);

	p = tpath("trunc.nii.gz");
	copy_file(tpath("good.nii.gz"), p);
	CHECK(truncate(p, file_size(p) / 2) == 0, "truncate gz");
	CHECK(nii_read_info(p, &info, &e) == SR_OK, "truncated .nii.gz: the header still reads");
	expect_fail("truncated .nii.gz", read_all(p, &e), &e, "trunc.nii.gz", "truncated: volume");
	CHECK(strstr(e.msg, "of 6"), "truncated .nii.gz names the volume: %s", e.msg);

	p = tpath("trailer.nii.gz");
	copy_file(tpath("good.nii.gz"), p);
	CHECK(truncate(p, file_size(p) - 4) == 0, "truncate gz trailer");
	expect_fail("gzip trailer cut off", read_all(p, &e), &e, "trailer.nii.gz", NULL);

	p = tpath("corrupt.nii.gz");
	copy_file(tpath("good.nii.gz"), p);
	{
		long n = file_size(p);
		unsigned char junk[64];

		for (int i = 0; i < 64; i++)
			junk[i] = (unsigned char)(0x5a ^ (i * 37));
		patch(p, n / 2, junk, sizeof junk);
	}
	expect_fail("corrupt gzip stream", read_all(p, &e), &e, "corrupt.nii.gz", NULL);
	CHECK(strstr(e.msg, "gzip") || strstr(e.msg, "truncated"), "corrupt gzip message: %s", e.msg);

	/* Larger than the 256 KiB gzip buffer, so the damage is met while streaming, not at open. */
	{
		nii_grid gb;
		size_t nb = 64 * 64 * 16;
		float *vb = xmalloc(nb * 6 * sizeof *vb);
		long n;
		unsigned char junk[64];

		for (size_t i = 0; i < nb * 6; i++)
			vb[i] = (float)lcg(&seed);
		nii_grid_make(&gb, 64, 64, 16, 3, 3, 3, 0, 0, 0);
		p = tpath("bigcorrupt.nii.gz");
		nii_write_float(p, &gb, vb, 6, 2, NULL, &e);
		n = file_size(p);
		for (int i = 0; i < 64; i++)
			junk[i] = (unsigned char)(0xa5 ^ (i * 53));
		patch(p, n * 3 / 4, junk, sizeof junk);
		CHECK(nii_read_info(p, &info, &e) == SR_OK, "big corrupt .nii.gz: header reads");
		expect_fail("corrupt gzip stream met mid-run", read_all(p, &e), &e, "bigcorrupt.nii.gz",
			    "corrupt gzip");
		CHECK(strstr(e.msg, "volume ") && strstr(e.msg, " of 6"), "mid-run corruption names the volume: %s",
		      e.msg);
		free(vb);
	}

	p = tpath("crc.nii.gz");
	copy_file(tpath("good.nii.gz"), p);
	patch(p, file_size(p) - 8, "\x01\x02\x03\x04", 4); /* CRC32 of the gzip trailer */
	expect_fail("gzip CRC mismatch", read_all(p, &e), &e, "crc.nii.gz", "corrupt gzip");

	p = tpath("magic.nii");
	copy_file(tpath("good.nii"), p);
	patch(p, 344, "abc", 4);
	expect_fail("wrong magic", nii_read_info(p, &info, &e), &e, "magic.nii", "magic");
	patch(p, 344, "ni1", 4);
	expect_fail("header/image pair magic", nii_read_info(p, &info, &e), &e, "magic.nii", ".hdr");

	p = tpath("negdim.nii");
	copy_file(tpath("good.nii"), p);
	patch(p, 44, (short[1]){-5}, 2); /* dim[2] */
	expect_fail("negative dim", nii_read_info(p, &info, &e), &e, "negdim.nii", "dim[2] is -5");

	p = tpath("dim0.nii");
	copy_file(tpath("good.nii"), p);
	patch(p, 40, (short[1]){9}, 2);
	expect_fail("dim[0] = 9", nii_read_info(p, &info, &e), &e, "dim0.nii", "dim[0]");

	p = tpath("huge.nii");
	copy_file(tpath("good.nii"), p);
	patch(p, 40, (short[5]){4, 32767, 32767, 32767, 32767}, 10);
	patch(p, 70, (short[2]){NIFTI_TYPE_FLOAT64, 64}, 4);
	expect_fail("absurd NIfTI-1 dims", nii_read_info(p, &info, &e), &e, "huge.nii", NULL);

	p = tpath("huge2.nii");
	write_n2(p, (int64_t)1 << 40, (int64_t)1 << 40);
	expect_fail("NIfTI-2 dims whose product overflows", nii_read_info(p, &info, &e), &e,
		    "huge2.nii", "overflow");
	p = tpath("small2.nii");
	write_n2(p, 2, 2);
	CHECK(nii_read_3d(p, &info, &d, &e) == SR_OK && d && d[3] == 4 && info.nifti_version == 2,
	      "a hand-made NIfTI-2 file reads (%s)", e.msg);
	free(d), d = NULL;

	p = tpath("five.nii");
	copy_file(tpath("good.nii"), p);
	patch(p, 40, (short[6]){5, 16, 16, 8, 3, 2}, 12);
	expect_fail("5-D image", nii_read_info(p, &info, &e), &e, "five.nii", "5-D");

	p = tpath("rgb.nii");
	copy_file(tpath("good.nii"), p);
	patch(p, 70, (short[2]){NIFTI_TYPE_RGB24, 24}, 4);
	expect_fail("unsupported datatype", nii_read_info(p, &info, &e), &e, "rgb.nii", "datatype 128");
	patch(p, 70, (short[2]){NIFTI_TYPE_COMPLEX64, 64}, 4);
	expect_fail("complex datatype", nii_read_info(p, &info, &e), &e, "rgb.nii", "unsupported");

	expect_fail("missing file", nii_read_info(tpath("nope.nii.gz"), &info, &e), &e, "nope.nii.gz",
		    strerror(ENOENT));
	expect_fail("missing file (stream)", nii_stream_open(tpath("nope.nii"), &(nii_stream *){0},
							    &info, &e), &e, "nope.nii", "cannot open");
	expect_fail("a folder", nii_read_info(dir, &info, &e), &e, dir, "not a regular file");

	p = tpath("sizeof.nii");
	copy_file(tpath("good.nii"), p);
	patch(p, 0, (int[1]){123}, 4);
	expect_fail("sizeof_hdr wrong", nii_read_info(p, &info, &e), &e, "sizeof.nii", "sizeof_hdr is 123");

	p = tpath("voxoff.nii");
	copy_file(tpath("good.nii"), p);
	patch(p, 108, (float[1]){100.5f}, 4);
	expect_fail("vox_offset inside the header", nii_read_info(p, &info, &e), &e, "voxoff.nii",
		    "vox_offset");

	p = tpath("tiny.nii");
	copy_file(tpath("good.nii"), p);
	CHECK(truncate(p, 200) == 0, "truncate to 200 bytes");
	expect_fail("file shorter than a header", nii_read_info(p, &info, &e), &e, "tiny.nii", NULL);
	CHECK(truncate(p, 0) == 0, "truncate to 0 bytes");
	expect_fail("empty file", nii_read_info(p, &info, &e), &e, "tiny.nii", NULL);

	p = tpath("text.nii.gz");
	{
		FILE *f = fopen(p, "wb");
		if (f) {
			fputs("\x1f\x8b not really gzip, just text pretending to be", f);
			fclose(f);
		}
	}
	expect_fail("gzip magic then garbage", nii_read_info(p, &info, &e), &e, "text.nii.gz", NULL);

	expect_fail("4-D file to nii_read_3d", nii_read_3d(tpath("good.nii.gz"), &info, &d, &e), &e,
		    "good.nii.gz", "3-D");
	CHECK(d == NULL, "read_3d leaves no data on failure");
	free(v);
}

static void rm_tree(const char *p)
{
	char cmd[600];

	snprintf(cmd, sizeof cmd, "rm -rf '%s'", p);
	if (system(cmd) != 0)
		printf("not ok - could not remove %s\n", p);
}

int main(void)
{
	const char *t = getenv("TMPDIR");

	snprintf(dir, sizeof dir, "%s/sr_test_nii_XXXXXX", t && *t ? t : "/tmp");
	if (!mkdtemp(dir)) {
		printf("not ok - mkdtemp: %s\n", strerror(errno));
		return 1;
	}
	test_grid_make();
	test_float32_exact();
	test_float_roundtrip("map.nii", 1);
	test_float_roundtrip("map.nii.gz", 1);
	test_float_roundtrip("series.nii", 4);
	test_float_roundtrip("series.nii.gz", 4);
	test_labels_and_3d();
	test_mask();
	test_int16_writer("int16.nii");
	test_int16_writer("int16.nii.gz");
	test_atomic();
	test_header_fields();
	test_stream_f32();
	test_malformed();
	rm_tree(dir);
	return TEST_DONE();
}
