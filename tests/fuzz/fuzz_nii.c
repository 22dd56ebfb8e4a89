/* fuzz_nii.c - afl++ harness for the NIfTI reader (src/io/nii.c) and the gzip input (src/io/gzin.c).
 *
 * FILE is read as analyze reads a run: header (nii_read_info, then nii_stream_open) and every
 * volume (nii_stream_next), plain or gzip-compressed, then as a 3-D image (nii_read_3d) when it
 * has one volume. Checked beyond "no crash": both header readers agree, an accepted header
 * keeps the documented limits (src/io/nii.h), and where ISA-L is built in, zlib and ISA-L read
 * the file's bytes to the same verdict, and to the same bytes when both read it to its end.
 */
#include <stdint.h>
#include <sys/stat.h>
#include <zlib.h>

#include "fuzz_common.h"
#include "io/gzin.h"
#include "io/nii.h"

/* Reads the whole file through one inflater: verdict, byte count and CRC-32 of what came. */
static enum gzin_result read_all(const char *path, enum gzin_backend b, uint64_t *n, uLong *crc)
{
	static unsigned char buf[1 << 16];
	char what[256];
	gzin *z;
	sr_err e;
	enum gzin_result r;

	sr_err_init(&e, fuzz_quiet, NULL);
	*n = 0;
	*crc = crc32(0L, Z_NULL, 0);
	if (gzin_open(path, b, &z, &e) != SR_OK)
		return GZIN_ERROR;
	do {
		size_t got = 0;

		r = gzin_read(z, buf, sizeof buf, &got, what, sizeof what);
		*n += got;
		*crc = crc32(*crc, buf, (uInt)got);
	} while (r == GZIN_OK);
	gzin_close(z);
	return r;
}

static void same_inflation(const char *path)
{
	uint64_t nz, ni;
	uLong cz, ci;
	enum gzin_result rz, ri;

	if (!gzin_have_isal())
		return;
	rz = read_all(path, GZIN_ZLIB, &nz, &cz);
	ri = read_all(path, GZIN_ISAL, &ni, &ci);
	if (rz != ri || (rz == GZIN_END && (nz != ni || cz != ci))) {
		fprintf(stderr, "fuzz: zlib and ISA-L disagree on %s: verdicts %d and %d, %llu and %llu bytes\n",
			path, (int)rz, (int)ri, (unsigned long long)nz, (unsigned long long)ni);
		abort();
	}
}

/* What nii.h promises of an accepted header. */
static void check_info(const char *path, const nii_info *a, const nii_info *b)
{
	const nii_grid *g = &a->grid;
	struct stat st;

	if (memcmp(&a->grid, &b->grid, sizeof a->grid) != 0)   /* both zeroed first, then filled alike */
		goto bad;
	if (a->nt != b->nt || a->datatype != b->datatype || a->ndim != b->ndim)
		goto bad;
	if (g->nx < 1 || g->ny < 1 || g->nz < 1 || a->nt < 1 || a->ndim < 3 || a->ndim > 4)
		goto bad;
	if (nii_nvox(g) > NII_MAX_VOXELS || (a->nifti_version != 1 && a->nifti_version != 2))
		goto bad;
	/* a voxel takes a byte at least: a plain file holds its data, a gzip file inflates at most so much */
	if (stat(path, &st) != 0 || (double)nii_nvox(g) * (double)a->nt > NII_GZ_MAX_RATIO * (double)st.st_size)
		goto bad;
	return;
bad:
	fprintf(stderr, "fuzz: %s: an accepted header breaks nii.h: %lldx%lldx%lld, nt %lld, ndim %d\n",
		path, (long long)g->nx, (long long)g->ny, (long long)g->nz, (long long)a->nt, a->ndim);
	abort();
}

static int one(const char *path)
{
	nii_info info, info2;
	nii_stream *s;
	sr_err e;
	double *vol, *v3, sum = 0;
	int64_t k;

	same_inflation(path);
	sr_err_init(&e, fuzz_quiet, NULL);
	if (nii_read_info(path, &info, &e) != SR_OK)
		return fuzz_refused(path, &e);
	if (nii_stream_open(path, &s, &info2, &e) != SR_OK)
		return fuzz_refused(path, &e);
	check_info(path, &info, &info2);
	vol = malloc(nii_nvox(&info.grid) * sizeof *vol);
	if (!vol)
		abort();
	for (k = 0; k < info.nt; k++) {
		if (nii_stream_next(s, vol, &e) != SR_OK) {
			free(vol);
			nii_stream_close(s);
			return fuzz_refused(path, &e);
		}
		sum += vol[0];
	}
	nii_stream_close(s);
	if (info.nt == 1) {
		if (nii_read_3d(path, &info2, &v3, &e) != SR_OK) {
			fprintf(stderr, "fuzz: %s: read as a stream, refused by nii_read_3d: %s\n", path, e.msg);
			abort();
		}
		if (memcmp(v3, vol, nii_nvox(&info.grid) * sizeof *vol) != 0) {
			fprintf(stderr, "fuzz: %s: nii_read_3d and the stream read different values\n", path);
			abort();
		}
		free(v3);
	}
	free(vol);
	printf("accepted: %lldx%lldx%lld, %lld volumes, datatype %d, NIfTI-%d (first voxels sum %g)\n",
	       (long long)info.grid.nx, (long long)info.grid.ny, (long long)info.grid.nz,
	       (long long)info.nt, info.datatype, info.nifti_version, sum);
	return 0;
}

int main(int argc, char **argv)
{
	const char *path = fuzz_path(argc, argv);

	FUZZ_MAIN(one, path);
}
