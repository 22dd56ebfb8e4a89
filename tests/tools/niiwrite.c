/* niiwrite.c - test tool: writes images with our NIfTI writers and dumps what our reader sees, for outside checks. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/err.h"
#include "core/mem.h"
#include "io/nii.h"

/*
 * The test grid: anisotropic voxels, a rotation about an oblique axis and an
 * offset, so that a swapped axis or a lost rotation shows. The quaternion is
 * normalised here; the checker builds the affine from these same parameters
 * on its own.
 */
#define NX 7
#define NY 5
#define NZ 4
#define NT 3

static void test_grid(nii_grid *g, const char *form)
{
	double b = 0.1, c = -0.2, d = 0.3, a, n;
	double dx = 2.5, dy = 3.0, dz = 3.5, qfac = -1.0;
	double R[3][3];

	memset(g, 0, sizeof *g);
	n = sqrt(1.0 + b * b + c * c + d * d);
	a = 1.0 / n, b /= n, c /= n, d /= n;
	R[0][0] = a * a + b * b - c * c - d * d;
	R[0][1] = 2 * (b * c - a * d);
	R[0][2] = 2 * (b * d + a * c);
	R[1][0] = 2 * (b * c + a * d);
	R[1][1] = a * a + c * c - b * b - d * d;
	R[1][2] = 2 * (c * d - a * b);
	R[2][0] = 2 * (b * d - a * c);
	R[2][1] = 2 * (c * d + a * b);
	R[2][2] = a * a + d * d - c * c - b * b;
	g->nx = NX, g->ny = NY, g->nz = NZ;
	g->dx = dx, g->dy = dy, g->dz = dz;
	g->quatern_b = b, g->quatern_c = c, g->quatern_d = d;
	g->qoffset_x = -40.5, g->qoffset_y = 12.25, g->qoffset_z = 7.0;
	g->qfac = qfac;
	g->xyz_units = 2; /* mm */
	for (int i = 0; i < 3; i++) {
		g->srow[i][0] = R[i][0] * dx;
		g->srow[i][1] = R[i][1] * dy;
		g->srow[i][2] = R[i][2] * dz * qfac;
	}
	g->srow[0][3] = g->qoffset_x, g->srow[1][3] = g->qoffset_y, g->srow[2][3] = g->qoffset_z;
	g->qform_code = 1;
	g->sform_code = strcmp(form, "qform") == 0 ? 0 : 2;
	memcpy(g->affine, g->srow, sizeof g->affine);
	printf("quatern %.17g %.17g %.17g offset %.17g %.17g %.17g pixdim %g %g %g qfac %g\n", b,
	       c, d, g->qoffset_x, g->qoffset_y, g->qoffset_z, dx, dy, dz, qfac);
}

/* The values the checker recomputes: voxel (i, j, k) of volume t. */
static double value(int i, int j, int k, int t)
{
	return sin(0.7 * i) * 100.0 + 3.0 * j - 0.5 * k * k + 11.0 * t;
}

static int fail(const sr_err *e)
{
	fprintf(stderr, "niiwrite: %s\n", e->msg);
	return 1;
}

static int do_write(const char *kind, const char *out, const char *form)
{
	nii_grid g;
	sr_err e;
	size_t nvox = NX * NY * NZ;

	sr_err_init(&e, NULL, NULL);
	test_grid(&g, form);
	if (strcmp(kind, "float") == 0) {
		float *v = xmalloc(nvox * NT * sizeof *v);

		for (int t = 0; t < NT; t++)
			for (int k = 0; k < NZ; k++)
				for (int j = 0; j < NY; j++)
					for (int i = 0; i < NX; i++)
						v[(size_t)t * nvox + i + NX * (j + NY * k)] =
							(float)value(i, j, k, t);
		if (nii_write_float(out, &g, v, NT, 2.5, "float test", &e) != SR_OK) {
			free(v);
			return fail(&e);
		}
		free(v);
	} else if (strcmp(kind, "labels") == 0) {
		int32_t *l = xmalloc(nvox * sizeof *l);

		for (int k = 0; k < NZ; k++)
			for (int j = 0; j < NY; j++)
				for (int i = 0; i < NX; i++)
					l[i + NX * (j + NY * k)] = (int32_t)((i + 2 * j + 3 * k) % 7) * 100000 - 1;
		if (nii_write_labels(out, &g, l, "label test", &e) != SR_OK) {
			free(l);
			return fail(&e);
		}
		free(l);
	} else if (strcmp(kind, "int16") == 0 || strcmp(kind, "series") == 0) {
		int dt = kind[0] == 'i' ? 4 /* int16 */ : 16 /* float32 */;
		nii_writer *w;
		double *vol = xmalloc(nvox * sizeof *vol);

		if (nii_writer_open(out, &g, NT, 2.5, dt, 0.25, 10.0, &w, &e) != SR_OK) {
			free(vol);
			return fail(&e);
		}
		for (int t = 0; t < NT; t++) {
			for (int k = 0; k < NZ; k++)
				for (int j = 0; j < NY; j++)
					for (int i = 0; i < NX; i++)
						vol[i + NX * (j + NY * k)] = value(i, j, k, t);
			if (nii_writer_put(w, vol, &e) != SR_OK) {
				nii_writer_abort(w);
				free(vol);
				return fail(&e);
			}
		}
		free(vol);
		if (nii_writer_commit(w, &e) != SR_OK)
			return fail(&e);
	} else {
		fprintf(stderr, "niiwrite: unknown kind %s\n", kind);
		return 2;
	}
	return 0;
}

/* Prints the header as our reader sees it and writes every value (doubles, native order) to out. */
static int do_dump(const char *in, const char *out)
{
	nii_stream *s;
	nii_info info;
	sr_err e;
	FILE *f;
	double *vol;
	size_t nvox;
	double sum = 0;

	sr_err_init(&e, NULL, NULL);
	if (nii_stream_open(in, &s, &info, &e) != SR_OK)
		return fail(&e);
	nvox = nii_nvox(&info.grid);
	printf("dims %lld %lld %lld %lld\n", (long long)info.grid.nx, (long long)info.grid.ny,
	       (long long)info.grid.nz, (long long)info.nt);
	printf("tr %.17g\nslope %.17g\ninter %.17g\ndatatype %d\nversion %d\n", info.tr,
	       info.slope, info.inter, info.datatype, info.nifti_version);
	printf("voxel %.17g %.17g %.17g\naffine", info.grid.dx, info.grid.dy, info.grid.dz);
	for (int i = 0; i < 3; i++)
		for (int j = 0; j < 4; j++)
			printf(" %.17g", info.grid.affine[i][j]);
	printf("\n");
	f = fopen(out, "wb");
	if (!f) {
		nii_stream_close(s);
		perror(out);
		return 1;
	}
	vol = xmalloc_array(nvox, sizeof *vol);
	for (int64_t t = 0; t < info.nt; t++) {
		if (nii_stream_next(s, vol, &e) != SR_OK) {
			free(vol);
			fclose(f);
			nii_stream_close(s);
			return fail(&e);
		}
		for (size_t i = 0; i < nvox; i++)
			sum += vol[i];
		if (fwrite(vol, sizeof *vol, nvox, f) != nvox) {
			perror(out);
			break;
		}
	}
	printf("sum %.17g\n", sum);
	free(vol);
	nii_stream_close(s);
	if (fclose(f) != 0) {
		perror(out);
		return 1;
	}
	return 0;
}

/* Reads a file volume by volume and prints nothing but the sum: for timing the stream. */
static int do_sum(const char *in)
{
	nii_stream *s;
	nii_info info;
	sr_err e;
	double *vol, sum = 0;

	sr_err_init(&e, NULL, NULL);
	if (nii_stream_open(in, &s, &info, &e) != SR_OK)
		return fail(&e);
	vol = xmalloc_array(nii_nvox(&info.grid), sizeof *vol);
	for (int64_t t = 0; t < info.nt; t++) {
		if (nii_stream_next(s, vol, &e) != SR_OK) {
			free(vol);
			nii_stream_close(s);
			return fail(&e);
		}
		sum += vol[0];
	}
	printf("volumes %lld sum %.17g\n", (long long)info.nt, sum);
	free(vol);
	nii_stream_close(s);
	return 0;
}

/* Writes a float32 series of the given size (for the speed check), values from a fixed-seed LCG. */
static int do_big(const char *out, int nx, int ny, int nz, int nt)
{
	nii_grid g;
	nii_writer *w;
	sr_err e;
	size_t nvox = (size_t)nx * ny * nz;
	double *vol = xmalloc_array(nvox, sizeof *vol);
	unsigned long long x = 12345;

	sr_err_init(&e, NULL, NULL);
	nii_grid_make(&g, nx, ny, nz, 3, 3, 3.5, nx / 2.0, ny / 2.0, nz / 2.0);
	if (nii_writer_open(out, &g, nt, 2.0, 16, 1, 0, &w, &e) != SR_OK) {
		free(vol);
		return fail(&e);
	}
	for (int t = 0; t < nt; t++) {
		for (size_t i = 0; i < nvox; i++) {
			x = x * 6364136223846793005ULL + 1442695040888963407ULL;
			vol[i] = 1000.0 + (double)(x >> 40) / (double)(1ULL << 24) * 20.0;
		}
		if (nii_writer_put(w, vol, &e) != SR_OK) {
			free(vol);
			nii_writer_abort(w);
			return fail(&e);
		}
	}
	free(vol);
	if (nii_writer_commit(w, &e) != SR_OK)
		return fail(&e);
	return 0;
}

int main(int argc, char **argv)
{
	if (argc == 5 && strcmp(argv[1], "write") == 0)
		return do_write(argv[2], argv[3], argv[4]);
	if (argc == 4 && strcmp(argv[1], "dump") == 0)
		return do_dump(argv[2], argv[3]);
	if (argc == 3 && strcmp(argv[1], "sum") == 0)
		return do_sum(argv[2]);
	if (argc == 7 && strcmp(argv[1], "big") == 0)
		return do_big(argv[2], atoi(argv[3]), atoi(argv[4]), atoi(argv[5]), atoi(argv[6]));
	fprintf(stderr, "usage: niiwrite write float|int16|labels|series OUT sform|qform\n"
			"       niiwrite dump IN OUT.f64\n"
			"       niiwrite sum IN\n"
			"       niiwrite big OUT NX NY NZ NT\n");
	return 2;
}
