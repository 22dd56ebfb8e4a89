/* nii.c - NIfTI-1/NIfTI-2 headers, streamed volumes (read through gzin) and atomically written maps via nifticlib and znz. */

/* The installed znzlib is built with zlib; its struct must match (gives access to the gzFile). */
#define HAVE_ZLIB 1

#include "nii.h"

#include <errno.h>
#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <zlib.h>
#include <nifti2_io.h>

#include "../core/mem.h"
#include "afile.h"
#include "gzin.h"

_Static_assert(NII_INTENT_NONE == NIFTI_INTENT_NONE && NII_INTENT_TTEST == NIFTI_INTENT_TTEST,
	       "nii.h's intent codes are NIfTI-1's");

/* Bigger than zlib's 8 KiB default: inflating a run is the slow part of reading it. */
#define NII_GZBUF (256u * 1024u)

/* Quiets nifticlib once per process, thread safely (its debug level is a library global). */
static pthread_once_t quiet_once = PTHREAD_ONCE_INIT;
static void quiet_nifti(void)
{
	nifti_set_debug_level(0);
}

/* The header fields we use, the same for both NIfTI versions, in native byte order. */
typedef struct raw_hdr {
	int version, swapped, hdr_size;
	int64_t dim[8];
	int datatype;
	double pixdim[8];
	double vox_offset;
	double slope, inter;
	int xyzt_units, qform_code, sform_code;
	double qb, qc, qd, qx, qy, qz;
	double srow[3][4];
} raw_hdr;

/* Bytes per voxel of the datatypes we read, 0 for the others. */
static int dtype_bytes(int dt)
{
	switch (dt) {
	case NIFTI_TYPE_UINT8:
	case NIFTI_TYPE_INT8: return 1;
	case NIFTI_TYPE_INT16:
	case NIFTI_TYPE_UINT16: return 2;
	case NIFTI_TYPE_INT32:
	case NIFTI_TYPE_UINT32:
	case NIFTI_TYPE_FLOAT32: return 4;
	case NIFTI_TYPE_INT64:
	case NIFTI_TYPE_UINT64:
	case NIFTI_TYPE_FLOAT64: return 8;
	}
	return 0;
}

/* Millimetres per stored spatial unit (unknown is read as mm, common practice). */
static double space_factor(int xyzt_units)
{
	switch (XYZT_TO_SPACE(xyzt_units)) {
	case NIFTI_UNITS_METER: return 1000.0;
	case NIFTI_UNITS_MICRON: return 0.001;
	}
	return 1.0;
}

static int ends_with(const char *s, const char *suffix)
{
	size_t n = strlen(s), m = strlen(suffix);

	return n >= m && strcmp(s + n - m, suffix) == 0;
}

static uint32_t bswap32(uint32_t v)
{
	return (v >> 24) | ((v >> 8) & 0xff00u) | ((v << 8) & 0xff0000u) | (v << 24);
}

/* Copies a NIfTI-1 header (already in native order) into the common form. */
static void from_n1(const nifti_1_header *h, raw_hdr *r)
{
	for (int i = 0; i < 8; i++) {
		r->dim[i] = h->dim[i];
		r->pixdim[i] = h->pixdim[i];
	}
	r->datatype = h->datatype;
	r->vox_offset = h->vox_offset;
	r->slope = h->scl_slope;
	r->inter = h->scl_inter;
	r->xyzt_units = h->xyzt_units;
	r->qform_code = h->qform_code;
	r->sform_code = h->sform_code;
	r->qb = h->quatern_b, r->qc = h->quatern_c, r->qd = h->quatern_d;
	r->qx = h->qoffset_x, r->qy = h->qoffset_y, r->qz = h->qoffset_z;
	for (int j = 0; j < 4; j++) {
		r->srow[0][j] = h->srow_x[j];
		r->srow[1][j] = h->srow_y[j];
		r->srow[2][j] = h->srow_z[j];
	}
}

static void from_n2(const nifti_2_header *h, raw_hdr *r)
{
	for (int i = 0; i < 8; i++) {
		r->dim[i] = h->dim[i];
		r->pixdim[i] = h->pixdim[i];
	}
	r->datatype = h->datatype;
	r->vox_offset = (double)h->vox_offset;
	r->slope = h->scl_slope;
	r->inter = h->scl_inter;
	r->xyzt_units = h->xyzt_units;
	r->qform_code = h->qform_code;
	r->sform_code = h->sform_code;
	r->qb = h->quatern_b, r->qc = h->quatern_c, r->qd = h->quatern_d;
	r->qx = h->qoffset_x, r->qy = h->qoffset_y, r->qz = h->qoffset_z;
	for (int j = 0; j < 4; j++) {
		r->srow[0][j] = h->srow_x[j];
		r->srow[1][j] = h->srow_y[j];
		r->srow[2][j] = h->srow_z[j];
	}
}

enum { RD_OK, RD_SHORT, RD_CORRUPT, RD_ERROR };

/*
 * Reads exactly n bytes at the current position. On failure returns the kind
 * and describes it in what ("got X of N bytes", the inflater or system message).
 */
static int read_exact(gzin *z, void *buf, size_t n, char *what, size_t whatlen)
{
	switch (gzin_read(z, buf, n, NULL, what, whatlen)) {
	case GZIN_OK: return RD_OK;
	case GZIN_END:
	case GZIN_SHORT: return RD_SHORT;
	case GZIN_CORRUPT: return RD_CORRUPT;
	default: return RD_ERROR;
	}
}

/* The inflater: SPLITROI_INFLATER=zlib or isa-l chooses one (to compare them), else the fastest built in. */
static enum gzin_backend inflater(void)
{
	const char *v = getenv("SPLITROI_INFLATER");

	if (v && strcmp(v, "zlib") == 0)
		return GZIN_ZLIB;
	if (v && (strcmp(v, "isa-l") == 0 || strcmp(v, "isal") == 0))
		return GZIN_ISAL;
	return GZIN_AUTO;
}

/* The message for a failed header read. */
static sr_status header_fail(sr_err *e, const char *path, int kind, int version, const char *what)
{
	if (kind == RD_CORRUPT)
		return sr_fail(e, SR_EIO, "%s: corrupt gzip data (%s)", path, what);
	if (kind == RD_ERROR)
		return sr_fail(e, SR_EIO, "%s: read error: %s", path, what);
	return sr_fail(e, SR_EFORMAT, "%s: not a NIfTI%s file: header truncated (%s)", path,
		       version == 2 ? "-2" : "", what);
}

/*
 * Opens path plainly first (errno gives the reason; two bytes tell gzip from plain):
 * a regular file of at least 2 bytes. Fills *st and *is_gz.
 */
static sr_status probe_file(const char *path, struct stat *st, int *is_gz, sr_err *e)
{
	unsigned char magic2[2] = {0, 0};
	FILE *f = fopen(path, "rb");

	if (!f)
		return sr_fail(e, SR_EIO, "%s: cannot open: %s", path, strerror(errno));
	if (fstat(fileno(f), st) != 0 || !S_ISREG(st->st_mode)) {
		fclose(f);
		return sr_fail(e, SR_EIO, "%s: cannot open: not a regular file", path);
	}
	if (fread(magic2, 1, 2, f) != 2) {
		fclose(f);
		return sr_fail(e, SR_EFORMAT, "%s: not a NIfTI file: %lld bytes, too short for a header",
			       path, (long long)st->st_size);
	}
	fclose(f);
	*is_gz = magic2[0] == 0x1f && magic2[1] == 0x8b;
	return SR_OK;
}

/* Reads the NIfTI-1 or NIfTI-2 header at the start of zf into rh (native byte order). */
static sr_status read_raw_header(gzin *zf, const char *path, raw_hdr *rh, sr_err *e)
{
	unsigned char raw[sizeof(nifti_2_header)];
	char what[512];
	uint32_t s0;
	int kind;

	if ((kind = read_exact(zf, raw, 348, what, sizeof what)) != RD_OK)
		return header_fail(e, path, kind, 1, what);
	memcpy(&s0, raw, 4);
	if (s0 == 348 || bswap32(s0) == 348) {
		nifti_1_header h1;

		rh->version = 1;
		rh->swapped = s0 != 348;
		rh->hdr_size = 348;
		if (memcmp(raw + 344, "ni1", 4) == 0)
			return sr_fail(e, SR_EFORMAT,
				       "%s: a NIfTI-1 header/image pair (.hdr/.img) is not supported; "
				       "use a single .nii or .nii.gz file", path);
		if (memcmp(raw + 344, "n+1", 4) != 0)
			return sr_fail(e, SR_EFORMAT,
				       "%s: not a NIfTI-1 file: bad magic (expected \"n+1\")", path);
		memcpy(&h1, raw, sizeof h1);
		if (rh->swapped)
			swap_nifti_header(&h1, 1);
		from_n1(&h1, rh);
		return SR_OK;
	}
	if (s0 == 540 || bswap32(s0) == 540) {
		nifti_2_header h2;

		rh->version = 2;
		rh->swapped = s0 != 540;
		rh->hdr_size = 540;
		if ((kind = read_exact(zf, raw + 348, 540 - 348, what, sizeof what)) != RD_OK)
			return header_fail(e, path, kind, 2, what);
		if (memcmp(raw + 4, "ni2", 4) == 0)
			return sr_fail(e, SR_EFORMAT,
				       "%s: a NIfTI-2 header/image pair is not supported; "
				       "use a single .nii or .nii.gz file", path);
		if (memcmp(raw + 4, "n+2", 4) != 0)
			return sr_fail(e, SR_EFORMAT,
				       "%s: not a NIfTI-2 file: bad magic (expected \"n+2\")", path);
		memcpy(&h2, raw, sizeof h2);
		if (rh->swapped)
			swap_nifti_header(&h2, 2);
		from_n2(&h2, rh);
		return SR_OK;
	}
	return sr_fail(e, SR_EFORMAT, "%s: not a NIfTI file: sizeof_hdr is %u (expected 348 or 540)",
		       path, (unsigned)s0);
}

/* Dimensions: dim[0] counts them; each used one at least 1; beyond the 4th all 1. */
static sr_status check_dims(raw_hdr *rh, const char *path, sr_err *e)
{
	if (rh->dim[0] < 1 || rh->dim[0] > 7)
		return sr_fail(e, SR_EFORMAT, "%s: bad header: dim[0] is %lld (expected 1 to 7)", path,
			       (long long)rh->dim[0]);
	for (int i = 1; i <= rh->dim[0]; i++)
		if (rh->dim[i] < 1)
			return sr_fail(e, SR_EFORMAT,
				       "%s: bad header: dim[%d] is %lld (must be positive)", path, i,
				       (long long)rh->dim[i]);
	for (int i = (int)rh->dim[0] + 1; i < 8; i++)
		rh->dim[i] = 1;
	for (int i = 5; i <= rh->dim[0]; i++)
		if (rh->dim[i] > 1)
			return sr_fail(e, SR_EDIM,
				       "%s: a %d-D image (dim[%d] = %lld); only 3-D and 4-D images are "
				       "supported", path, i, i, (long long)rh->dim[i]);
	return SR_OK;
}

/*
 * The sizes the header decides, bounded before anything is allocated: the datatype
 * is one we read, the product of the dimensions does not overflow, a volume is within
 * NII_MAX_VOXELS, a gzip file can hold the data, and the data lie inside a plain file.
 */
static sr_status check_sizes(const raw_hdr *rh, const struct stat *st, int gz, const char *path,
			     sr_err *e)
{
	int bytes = dtype_bytes(rh->datatype);
	size_t nvox, nbytes;

	if (!bytes) {
		const char *name = nifti_datatype_string(rh->datatype);

		return sr_fail(e, SR_EFORMAT,
			       "%s: unsupported datatype %d (%s); supported: uint8, int8, int16, uint16, "
			       "int32, uint32, int64, uint64, float32, float64",
			       path, rh->datatype, name ? name : "unknown");
	}
	if (sr_mul_size((size_t)rh->dim[1], (size_t)rh->dim[2], &nvox) ||
	    sr_mul_size(nvox, (size_t)rh->dim[3], &nvox) ||
	    sr_mul_size(nvox, (size_t)rh->dim[4], &nbytes) ||
	    sr_mul_size(nbytes, (size_t)bytes, &nbytes) || nbytes > (size_t)INT64_MAX / 2)
		return sr_fail(e, SR_EDIM,
			       "%s: image too large: %lld x %lld x %lld x %lld voxels of %d bytes overflows",
			       path, (long long)rh->dim[1], (long long)rh->dim[2], (long long)rh->dim[3],
			       (long long)rh->dim[4], bytes);
	if (nvox > NII_MAX_VOXELS)
		return sr_fail(e, SR_EDIM,
			       "%s: the header claims %lld x %lld x %lld voxels per volume, more than the limit of %lld (NII_MAX_VOXELS)",
			       path, (long long)rh->dim[1], (long long)rh->dim[2], (long long)rh->dim[3],
			       (long long)NII_MAX_VOXELS);
	/* deflate cannot expand a byte to more than 1032 (RFC 1951's longest match over its
	   shortest code), so a gzip file can hold at most that many times its size */
	if (gz && (double)nbytes > NII_GZ_MAX_RATIO * (double)st->st_size)
		return sr_fail(e, SR_EFORMAT,
			       "%s: the header claims %.0f bytes of image data (%lld x %lld x %lld x %lld of %d bytes), larger than a gzip file of %lld bytes can hold (at most %.0f): truncated or damaged",
			       path, (double)nbytes, (long long)rh->dim[1], (long long)rh->dim[2],
			       (long long)rh->dim[3], (long long)rh->dim[4], bytes,
			       (long long)st->st_size, NII_GZ_MAX_RATIO * (double)st->st_size);
	if (!isfinite(rh->vox_offset) || rh->vox_offset < rh->hdr_size ||
	    rh->vox_offset != floor(rh->vox_offset) || rh->vox_offset > 1e15)
		return sr_fail(e, SR_EFORMAT,
			       "%s: bad header: vox_offset %g (must be a whole number >= %d)", path,
			       rh->vox_offset, rh->hdr_size);
	if (!gz && (double)st->st_size < rh->vox_offset + (double)nbytes)
		return sr_fail(e, SR_EIO,
			       "%s: truncated: expected %.0f bytes (%.0f of header and %zu of image data) "
			       "but the file has %lld",
			       path, rh->vox_offset + (double)nbytes, rh->vox_offset, nbytes,
			       (long long)st->st_size);
	return SR_OK;
}

/* The grid and its affine in mm: sform, else qform, else NIfTI "method 1" scaling. */
static sr_status fill_grid(const raw_hdr *rh, nii_grid *g, const char *path, sr_err *e)
{
	double f_mm = space_factor(rh->xyzt_units);
	double qfac = rh->pixdim[0] < 0 ? -1.0 : 1.0;

	g->nx = rh->dim[1], g->ny = rh->dim[2], g->nz = rh->dim[3];
	g->dx = fabs(rh->pixdim[1]) * f_mm;
	g->dy = fabs(rh->pixdim[2]) * f_mm;
	g->dz = fabs(rh->pixdim[3]) * f_mm;
	g->qform_code = rh->qform_code;
	g->sform_code = rh->sform_code;
	g->quatern_b = rh->qb, g->quatern_c = rh->qc, g->quatern_d = rh->qd;
	g->qoffset_x = rh->qx, g->qoffset_y = rh->qy, g->qoffset_z = rh->qz;
	g->qfac = qfac;
	memcpy(g->srow, rh->srow, sizeof g->srow);
	g->xyz_units = XYZT_TO_SPACE(rh->xyzt_units);
	if (rh->sform_code > 0) {
		for (int i = 0; i < 3; i++)
			for (int j = 0; j < 4; j++)
				g->affine[i][j] = rh->srow[i][j] * f_mm;
	} else if (rh->qform_code > 0) {
		nifti_dmat44 m = nifti_quatern_to_dmat44(rh->qb, rh->qc, rh->qd, rh->qx, rh->qy,
							 rh->qz, fabs(rh->pixdim[1]),
							 fabs(rh->pixdim[2]), fabs(rh->pixdim[3]),
							 qfac);
		for (int i = 0; i < 3; i++)
			for (int j = 0; j < 4; j++)
				g->affine[i][j] = m.m[i][j] * f_mm;
	} else {
		/* NIfTI "method 1": plain scaling, no offset. */
		memset(g->affine, 0, sizeof g->affine);
		g->affine[0][0] = g->dx;
		g->affine[1][1] = g->dy;
		g->affine[2][2] = g->dz;
	}
	for (int i = 0; i < 3; i++)
		for (int j = 0; j < 4; j++)
			if (!isfinite(g->affine[i][j]))
				return sr_fail(e, SR_EFORMAT, "%s: bad header: non-finite %s", path,
					       rh->sform_code > 0 ? "sform" : "qform");
	return SR_OK;
}

/* The rest of info: dimensionality, volumes, datatype, scaling and TR. */
static void fill_info(const raw_hdr *rh, nii_info *info)
{
	int nd = (int)rh->dim[0];
	double t = rh->pixdim[4];
	int tu = XYZT_TO_TIME(rh->xyzt_units);

	while (nd > 3 && rh->dim[nd] == 1)
		nd--;
	info->ndim = nd < 3 ? 3 : nd;
	info->nt = rh->dim[4];
	info->datatype = rh->datatype;
	info->nifti_version = rh->version;
	/* METHODS.md 1 and 11: slope 0 or non-finite is no scaling; bad inter is 0. */
	if (isfinite(rh->slope) && rh->slope != 0) {
		info->slope = rh->slope;
		info->inter = isfinite(rh->inter) ? rh->inter : 0.0;
	} else {
		info->slope = 1.0;
		info->inter = 0.0;
	}
	/*
	 * METHODS.md 11: pixdim[4] <= 0 is absent; time code 0 is seconds.
	 * Hz/ppm/rad units describe a 4th axis that is not time: no TR.
	 */
	if (!isfinite(t) || t <= 0 || rh->dim[0] < 4)
		t = 0; /* a 3-D image has no time axis, whatever pixdim[4] holds */
	else if (tu == NIFTI_UNITS_MSEC)
		t /= 1000.0;
	else if (tu == NIFTI_UNITS_USEC)
		t /= 1e6;
	else if (tu != 0 && tu != NIFTI_UNITS_SEC)
		t = 0;
	info->tr = t;
}

/* Skips from the end of the header to the image data (vox_offset counts from the start). */
static sr_status seek_data(gzin *zf, const raw_hdr *rh, const char *path, sr_err *e)
{
	char what[512];
	int kind = gzin_skip(zf, (uint64_t)rh->vox_offset - (uint64_t)rh->hdr_size, what,
			     sizeof what);

	if (kind == GZIN_OK)
		return SR_OK;
	if (kind == GZIN_CORRUPT)
		return sr_fail(e, SR_EIO, "%s: corrupt gzip data before the image (%s)", path, what);
	if (kind == GZIN_ERROR)
		return sr_fail(e, SR_EIO, "%s: read error: %s", path, what);
	return sr_fail(e, SR_EIO, "%s: truncated: image data at offset %.0f not reached", path,
		       rh->vox_offset);
}

/*
 * Opens path, reads and checks the header, fills info and (optionally) r.
 * On success *zfp is positioned at vox_offset when want_data, else closed.
 */
static sr_status open_header(const char *path, nii_info *info, raw_hdr *r, gzin **zfp,
			     int want_data, int *is_gz, sr_err *e)
{
	struct stat st;
	gzin *zf = NULL;
	raw_hdr rh;
	sr_status rc;

	pthread_once(&quiet_once, quiet_nifti);
	memset(&rh, 0, sizeof rh);
	memset(info, 0, sizeof *info);
	*zfp = NULL;
	rc = probe_file(path, &st, is_gz, e);
	if (rc == SR_OK)
		/* zlib inflates no more than the header asks for; ISA-L decodes a block's
		   worth ahead: for a header alone zlib is the faster */
		rc = gzin_open(path, want_data ? inflater() : GZIN_ZLIB, &zf, e);
	if (rc != SR_OK)
		return rc;
	if ((rc = read_raw_header(zf, path, &rh, e)) != SR_OK ||
	    (rc = check_dims(&rh, path, e)) != SR_OK ||
	    (rc = check_sizes(&rh, &st, *is_gz, path, e)) != SR_OK ||
	    (rc = fill_grid(&rh, &info->grid, path, e)) != SR_OK)
		goto fail;
	fill_info(&rh, info);
	if (r)
		*r = rh;
	if (!want_data) {
		gzin_close(zf);
		return SR_OK;
	}
	if ((rc = seek_data(zf, &rh, path, e)) != SR_OK)
		goto fail;
	*zfp = zf;
	return SR_OK;
fail:
	gzin_close(zf);
	return rc;
}

size_t nii_nvox(const nii_grid *g)
{
	return (size_t)g->nx * (size_t)g->ny * (size_t)g->nz;
}

sr_status nii_read_info(const char *path, nii_info *info, sr_err *e)
{
	gzin *zf;
	int gz;

	return open_header(path, info, NULL, &zf, 0, &gz, e);
}

struct nii_stream {
	gzin *zf;
	char *path;
	nii_info info;
	int swapped, bytes, gz;
	size_t nvox, volbytes;
	unsigned char *buf;
	int64_t next;      /* index of the next volume to read */
	int failed;        /* after an error the stream position is unknown */
};

sr_status nii_stream_open(const char *path, nii_stream **out, nii_info *info, sr_err *e)
{
	raw_hdr rh;
	gzin *zf;
	int gz;
	sr_status rc;
	nii_stream *s;

	*out = NULL;
	rc = open_header(path, info, &rh, &zf, 1, &gz, e);
	if (rc != SR_OK)
		return rc;
	s = xcalloc(1, sizeof *s);
	s->zf = zf;
	s->path = xstrdup(path);
	s->info = *info;
	s->swapped = rh.swapped;
	s->bytes = dtype_bytes(rh.datatype);
	s->gz = gz;
	s->nvox = nii_nvox(&info->grid);
	s->volbytes = s->nvox * (size_t)s->bytes; /* checked in open_header */
	s->buf = xmalloc(s->volbytes);
	*out = s;
	return SR_OK;
}

/*
 * Widens one volume of stored values (datatype dt) to OUT; x86 reads
 * unaligned-safe through memcpy. convert gives doubles for every type;
 * convert_f32 float32 for the integers of at most 16 bits (exact), which is
 * all it is called for (float32 is read as it is).
 */
#define CONV(T, OUT)                                  \
	for (i = 0; i < n; i++) {                     \
		T t;                                  \
		memcpy(&t, b + i * sizeof(T), sizeof t); \
		v[i] = (OUT)t;                        \
	}                                             \
	break
#define CONVERT_SMALL(OUT)                                      \
	case NIFTI_TYPE_UINT8: CONV(uint8_t, OUT);              \
	case NIFTI_TYPE_INT8: CONV(int8_t, OUT);                \
	case NIFTI_TYPE_INT16: CONV(int16_t, OUT);              \
	case NIFTI_TYPE_UINT16: CONV(uint16_t, OUT)

static void convert(const unsigned char *b, int dt, size_t n, double *v)
{
	size_t i;

	switch (dt) {
	CONVERT_SMALL(double);
	case NIFTI_TYPE_INT32: CONV(int32_t, double);
	case NIFTI_TYPE_UINT32: CONV(uint32_t, double);
	case NIFTI_TYPE_INT64: CONV(int64_t, double);
	case NIFTI_TYPE_UINT64: CONV(uint64_t, double);
	case NIFTI_TYPE_FLOAT32: CONV(float, double);
	case NIFTI_TYPE_FLOAT64: CONV(double, double);
	}
}

static void convert_f32(const unsigned char *b, int dt, size_t n, float *v)
{
	size_t i;

	switch (dt) {
	CONVERT_SMALL(float);
	}
}
#undef CONVERT_SMALL
#undef CONV

/* Reads the next volume's stored bytes into buf (s->volbytes), byte-swapped to this machine's order. */
static sr_status read_volume(nii_stream *s, unsigned char *buf, sr_err *e)
{
	char what[512];
	int64_t k;
	int kind;

	if (s->failed)
		return sr_fail(e, SR_EIO, "%s: stream already failed", s->path);
	if (s->next >= s->info.nt)
		return sr_fail(e, SR_EINVAL, "%s: all %lld volumes already read", s->path,
			       (long long)s->info.nt);
	k = s->next + 1;
	kind = read_exact(s->zf, buf, s->volbytes, what, sizeof what);
	if (kind != RD_OK) {
		s->failed = 1;
		if (kind == RD_SHORT)
			return sr_fail(e, SR_EIO, "%s: truncated: volume %lld of %lld could not be read (%s)",
				       s->path, (long long)k, (long long)s->info.nt, what);
		if (kind == RD_CORRUPT)
			return sr_fail(e, SR_EIO, "%s: volume %lld of %lld could not be read: corrupt "
				       "gzip data (%s)", s->path, (long long)k, (long long)s->info.nt,
				       what);
		return sr_fail(e, SR_EIO, "%s: volume %lld of %lld could not be read: %s", s->path,
			       (long long)k, (long long)s->info.nt, what);
	}
	s->next++;
	/*
	 * After the last volume of a gzip stream, read on to the trailer so that
	 * zlib checks the CRC: damage that still inflates would otherwise pass.
	 */
	if (s->gz && s->next == s->info.nt) {
		int r = gzin_finish(s->zf, what, sizeof what);

		if (r != GZIN_END) {
			s->failed = 1;
			if (r == GZIN_SHORT)
				return sr_fail(e, SR_EIO, "%s: truncated: gzip stream ends early after "
					       "volume %lld of %lld (%s)", s->path,
					       (long long)k, (long long)s->info.nt, what);
			if (r == GZIN_ERROR)
				return sr_fail(e, SR_EIO, "%s: read error after volume %lld of %lld: %s",
					       s->path, (long long)k, (long long)s->info.nt, what);
			return sr_fail(e, SR_EIO, "%s: corrupt gzip data (%s), found at the end "
				       "of volume %lld of %lld", s->path, what, (long long)k,
				       (long long)s->info.nt);
		}
	}
	if (s->swapped && s->bytes > 1)
		nifti_swap_Nbytes((int64_t)s->nvox, s->bytes, buf);
	return SR_OK;
}


sr_status nii_stream_next_f32(nii_stream *s, float *vol, sr_err *e)
{
	sr_status st;

	if (!nii_float32_exact(&s->info))
		return sr_fail(e, SR_EINVAL, "%s: its values are not all float32 (stored type %d, or scaled)",
			       s->path, s->info.datatype);
	/* float32 needs no widening: straight into vol */
	if (s->info.datatype == NIFTI_TYPE_FLOAT32)
		return read_volume(s, (unsigned char *)vol, e);
	st = read_volume(s, s->buf, e);
	if (st != SR_OK)
		return st;
	convert_f32(s->buf, s->info.datatype, s->nvox, vol);
	return SR_OK;
}

sr_status nii_stream_next(nii_stream *s, double *vol, sr_err *e)
{
	sr_status st = read_volume(s, s->buf, e);

	if (st != SR_OK)
		return st;
	convert(s->buf, s->info.datatype, s->nvox, vol);
	if (s->info.slope != 1.0 || s->info.inter != 0.0) {
		double a = s->info.slope, b = s->info.inter;

		for (size_t i = 0; i < s->nvox; i++)
			vol[i] = vol[i] * a + b;
	}
	return SR_OK;
}

int nii_float32_exact(const nii_info *info)
{
	int dt = info->datatype;

	if (info->slope != 1.0 || info->inter != 0.0)
		return 0;
	return dt == NIFTI_TYPE_FLOAT32 || dt == NIFTI_TYPE_INT16 || dt == NIFTI_TYPE_UINT16 ||
	       dt == NIFTI_TYPE_INT8 || dt == NIFTI_TYPE_UINT8;
}

void nii_stream_close(nii_stream *s)
{
	if (!s)
		return;
	gzin_close(s->zf);
	free(s->buf);
	free(s->path);
	free(s);
}

sr_status nii_read_3d(const char *path, nii_info *info, double **data, sr_err *e)
{
	nii_stream *s;
	sr_status rc;

	*data = NULL;
	rc = nii_stream_open(path, &s, info, e);
	if (rc != SR_OK)
		return rc;
	if (info->nt != 1) {
		nii_stream_close(s);
		return sr_fail(e, SR_EDIM, "%s: expected a 3-D image, found a 4-D image with %lld volumes",
			       path, (long long)info->nt);
	}
	*data = xmalloc_array(s->nvox, sizeof **data);
	rc = nii_stream_next(s, *data, e);
	nii_stream_close(s);
	if (rc != SR_OK) {
		free(*data);
		*data = NULL;
	}
	return rc;
}

sr_status nii_read_mask(const char *path, nii_info *info, unsigned char **mask, size_t *count, sr_err *e)
{
	double *d;
	size_t v, n, inside = 0;
	sr_status rc;

	*mask = NULL;
	if (count)
		*count = 0;
	rc = nii_read_3d(path, info, &d, e);
	if (rc)
		return rc;
	n = nii_nvox(&info->grid);
	*mask = xmalloc(n ? n : 1);
	for (v = 0; v < n; v++) {
		(*mask)[v] = isfinite(d[v]) && d[v] != 0;
		inside += (*mask)[v];
	}
	free(d);
	if (count)
		*count = inside;
	return SR_OK;
}

/* ---- writing ---- */

/* An output image on its way: header written, volumes follow, then rename. */
typedef struct nii_out {
	znzFile zf;
	char *path, *tmp;
	int failed;
} nii_out;

/* The NIfTI-1 header for grid g; pixdim, srow and qoffset go back in the grid's stored units. */
static sr_status make_header(nifti_1_header *h, const char *path, const nii_grid *g, int64_t nt,
			     double tr, int datatype, int bitpix, double slope, double inter,
			     int intent, double intent_p1, const char *description, sr_err *e)
{
	double f_mm;

	if (g->nx < 1 || g->ny < 1 || g->nz < 1 || nt < 1 || g->nx > 32767 || g->ny > 32767 ||
	    g->nz > 32767 || nt > 32767)
		return sr_fail(e, SR_EDIM,
			       "%s: cannot write %lld x %lld x %lld x %lld voxels as NIfTI-1 (each "
			       "dimension 1 to 32767)", path, (long long)g->nx, (long long)g->ny,
			       (long long)g->nz, (long long)nt);
	f_mm = space_factor(g->xyz_units);
	memset(h, 0, sizeof *h);
	h->sizeof_hdr = 348;
	h->dim[0] = nt > 1 ? 4 : 3;
	h->dim[1] = (short)g->nx;
	h->dim[2] = (short)g->ny;
	h->dim[3] = (short)g->nz;
	h->dim[4] = (short)nt;
	h->dim[5] = h->dim[6] = h->dim[7] = 1;
	h->datatype = (short)datatype;
	h->bitpix = (short)bitpix;
	h->intent_code = (short)intent;
	h->intent_p1 = (float)intent_p1;
	h->pixdim[0] = g->qfac < 0 ? -1.0f : 1.0f;
	h->pixdim[1] = (float)(g->dx / f_mm);
	h->pixdim[2] = (float)(g->dy / f_mm);
	h->pixdim[3] = (float)(g->dz / f_mm);
	h->pixdim[4] = tr > 0 ? (float)tr : 0.0f;
	h->vox_offset = 352;
	h->scl_slope = (float)slope;
	h->scl_inter = (float)inter;
	h->xyzt_units = (char)(XYZT_TO_SPACE(g->xyz_units) | (tr > 0 ? NIFTI_UNITS_SEC : 0));
	if (description)
		snprintf(h->descrip, sizeof h->descrip, "%s", description);
	h->qform_code = (short)g->qform_code;
	h->sform_code = (short)g->sform_code;
	h->quatern_b = (float)g->quatern_b;
	h->quatern_c = (float)g->quatern_c;
	h->quatern_d = (float)g->quatern_d;
	h->qoffset_x = (float)g->qoffset_x;
	h->qoffset_y = (float)g->qoffset_y;
	h->qoffset_z = (float)g->qoffset_z;
	for (int j = 0; j < 4; j++) {
		h->srow_x[j] = (float)g->srow[0][j];
		h->srow_y[j] = (float)g->srow[1][j];
		h->srow_z[j] = (float)g->srow[2][j];
	}
	memcpy(h->magic, "n+1", 4);
	return SR_OK;
}

static void out_abort(nii_out *o)
{
	if (o->zf)
		znzclose(o->zf);
	if (o->tmp)
		unlink(o->tmp);
	free(o->tmp);
	free(o->path);
	memset(o, 0, sizeof *o);
}

static sr_status out_write(nii_out *o, const void *buf, size_t n, sr_err *e)
{
	if (o->failed)
		return sr_fail(e, SR_EIO, "%s: write failed earlier", o->path);
	if (n && znzwrite(buf, 1, n, o->zf) != n) {
		o->failed = 1;
		return sr_fail(e, SR_EIO, "%s: write failed: %s", o->path,
			       errno ? strerror(errno) : "short write");
	}
	return SR_OK;
}

/* Creates the temporary file and writes the header and the 4 empty extension bytes. */
static sr_status out_open(nii_out *o, const char *path, const nifti_1_header *h, int level,
			  sr_err *e)
{
	char mode[4] = {'w', 'b', (char)('0' + level), '\0'};
	static const unsigned char ext[4] = {0, 0, 0, 0};
	int gz = ends_with(path, ".gz");
	int fd;

	pthread_once(&quiet_once, quiet_nifti);
	memset(o, 0, sizeof *o);
	fd = afile_reserve(path, &o->tmp, e);
	if (fd < 0)
		return e ? e->code : SR_EIO;
	close(fd);
	o->path = xstrdup(path);
	/* The gz flag comes from the final name, not the temporary one. */
	o->zf = znzopen(o->tmp, gz ? mode : "wb", gz);
	if (znz_isnull(o->zf)) {
		int err = errno;

		out_abort(o);
		return sr_fail(e, SR_EIO, "%s: cannot write: %s", path, strerror(err ? err : EIO));
	}
	if (gz)
		gzbuffer(o->zf->zfptr, NII_GZBUF);
	if (out_write(o, h, sizeof *h, e) != SR_OK || out_write(o, ext, 4, e) != SR_OK) {
		out_abort(o);
		return e ? e->code : SR_EIO;
	}
	return SR_OK;
}

static sr_status out_commit(nii_out *o, sr_err *e)
{
	sr_status rc;
	int zrc;

	if (o->failed) {
		rc = sr_fail(e, SR_EIO, "%s: not written (an earlier write failed)", o->path);
		out_abort(o);
		return rc;
	}
	zrc = znzclose(o->zf);
	o->zf = NULL;
	if (zrc != 0) {
		rc = sr_fail(e, SR_EIO, "%s: write failed on close: %s", o->path,
			     errno ? strerror(errno) : "error");
		out_abort(o);
		return rc;
	}
	rc = afile_publish(o->tmp, o->path, e);
	free(o->tmp);
	o->tmp = NULL; /* published or already removed */
	out_abort(o);
	return rc;
}

sr_status nii_write_float(const char *path, const nii_grid *g, const float *data, int64_t nt,
			  double tr, const char *description, sr_err *e)
{
	return nii_write_stat(path, g, data, nt, tr, NIFTI_INTENT_NONE, 0.0, description, e);
}

sr_status nii_write_stat(const char *path, const nii_grid *g, const float *data, int64_t nt,
			 double tr, int intent, double intent_p1, const char *description, sr_err *e)
{
	nifti_1_header h;
	nii_out o;
	size_t n;
	sr_status rc;

	rc = make_header(&h, path, g, nt, tr, NIFTI_TYPE_FLOAT32, 32, 0.0, 0.0, intent, intent_p1,
			 description, e);
	if (rc != SR_OK)
		return rc;
	if (sr_mul_size(nii_nvox(g), (size_t)nt, &n) || sr_mul_size(n, sizeof *data, &n))
		return sr_fail(e, SR_EDIM, "%s: image too large", path);
	rc = out_open(&o, path, &h, 6, e); /* maps are small: zlib's default level */
	if (rc != SR_OK)
		return rc;
	rc = out_write(&o, data, n, e);
	if (rc != SR_OK) {
		out_abort(&o);
		return rc;
	}
	return out_commit(&o, e);
}

sr_status nii_write_labels(const char *path, const nii_grid *g, const int32_t *labels,
			   const char *description, sr_err *e)
{
	nifti_1_header h;
	nii_out o;
	size_t n;
	sr_status rc;

	rc = make_header(&h, path, g, 1, 0.0, NIFTI_TYPE_INT32, 32, 0.0, 0.0, NIFTI_INTENT_LABEL,
			 0.0, description, e);
	if (rc != SR_OK)
		return rc;
	if (sr_mul_size(nii_nvox(g), sizeof *labels, &n))
		return sr_fail(e, SR_EDIM, "%s: image too large", path);
	rc = out_open(&o, path, &h, 6, e); /* maps are small: zlib's default level */
	if (rc != SR_OK)
		return rc;
	rc = out_write(&o, labels, n, e);
	if (rc != SR_OK) {
		out_abort(&o);
		return rc;
	}
	return out_commit(&o, e);
}

struct nii_writer {
	nii_out o;
	int datatype;
	double slope, inter;
	int64_t nt, done;
	size_t nvox;
	void *buf;
};

sr_status nii_writer_open(const char *path, const nii_grid *g, int64_t nt, double tr,
			  int datatype, double slope, double inter, nii_writer **out, sr_err *e)
{
	nifti_1_header h;
	nii_writer *w;
	size_t bytes = datatype == NIFTI_TYPE_INT16 ? 2 : 4;
	size_t n;
	sr_status rc;

	*out = NULL;
	if (datatype != NIFTI_TYPE_FLOAT32 && datatype != NIFTI_TYPE_INT16)
		return sr_fail(e, SR_EINVAL, "%s: the series writer stores float32 or int16, not datatype %d",
			       path, datatype);
	if (datatype == NIFTI_TYPE_INT16 && (!isfinite(slope) || slope == 0 || !isfinite(inter)))
		return sr_fail(e, SR_EINVAL, "%s: int16 needs a finite non-zero slope and a finite "
			       "intercept (got %g, %g)", path, slope, inter);
	if (datatype == NIFTI_TYPE_FLOAT32)
		slope = 0.0, inter = 0.0; /* slope 0: the stored values are the values */
	rc = make_header(&h, path, g, nt, tr, datatype, (int)bytes * 8, slope, inter,
			 NIFTI_INTENT_NONE, 0.0, NULL, e);
	if (rc != SR_OK)
		return rc;
	if (sr_mul_size(nii_nvox(g), bytes, &n))
		return sr_fail(e, SR_EDIM, "%s: image too large", path);
	w = xcalloc(1, sizeof *w);
	/* Series are large and noisy: level 1 is ~5x faster than 6 for ~2% more bytes. */
	rc = out_open(&w->o, path, &h, 1, e);
	if (rc != SR_OK) {
		free(w);
		return rc;
	}
	w->datatype = datatype;
	/* What the header holds (float32 rounding), so stored values decode as the reader will. */
	w->slope = h.scl_slope;
	w->inter = h.scl_inter;
	w->nt = nt;
	w->nvox = nii_nvox(g);
	w->buf = xmalloc(n);
	*out = w;
	return SR_OK;
}

sr_status nii_writer_put(nii_writer *w, const double *vol, sr_err *e)
{
	size_t i;

	if (w->done >= w->nt)
		return sr_fail(e, SR_EINVAL, "%s: all %lld volumes already written", w->o.path,
			       (long long)w->nt);
	if (w->datatype == NIFTI_TYPE_FLOAT32) {
		float *f = w->buf;

		for (i = 0; i < w->nvox; i++)
			f[i] = (float)vol[i];
	} else {
		int16_t *s = w->buf;

		for (i = 0; i < w->nvox; i++) {
			double q = (vol[i] - w->inter) / w->slope;

			if (isnan(q))
				return sr_fail(e, SR_EINVAL,
					       "%s: volume %lld: NaN cannot be stored as int16",
					       w->o.path, (long long)w->done + 1);
			q = nearbyint(q);
			if (q < INT16_MIN)
				q = INT16_MIN;
			if (q > INT16_MAX)
				q = INT16_MAX;
			s[i] = (int16_t)q;
		}
	}
	if (out_write(&w->o, w->buf, w->nvox * (w->datatype == NIFTI_TYPE_INT16 ? 2 : 4), e) !=
	    SR_OK)
		return e ? e->code : SR_EIO;
	w->done++;
	return SR_OK;
}

sr_status nii_writer_commit(nii_writer *w, sr_err *e)
{
	sr_status rc;

	if (w->done != w->nt) {
		rc = sr_fail(e, SR_EINVAL, "%s: %lld of %lld volumes written; file not created",
			     w->o.path, (long long)w->done, (long long)w->nt);
		nii_writer_abort(w);
		return rc;
	}
	rc = out_commit(&w->o, e);
	free(w->buf);
	free(w);
	return rc;
}

void nii_writer_abort(nii_writer *w)
{
	if (!w)
		return;
	out_abort(&w->o);
	free(w->buf);
	free(w);
}

/* ---- grids ---- */

/* "NXxNYxNZ [a b c d; e f g h; i j k l]" for messages. */
static int describe_grid(char *buf, size_t n, const nii_grid *g)
{
	const double (*A)[4] = g->affine;

	return snprintf(buf, n,
			"%lldx%lldx%lld, affine [%g %g %g %g; %g %g %g %g; %g %g %g %g]",
			(long long)g->nx, (long long)g->ny, (long long)g->nz, A[0][0], A[0][1],
			A[0][2], A[0][3], A[1][0], A[1][1], A[1][2], A[1][3], A[2][0], A[2][1],
			A[2][2], A[2][3]);
}

int nii_same_grid(const nii_grid *a, const nii_grid *b, double tol_mm, char *why, size_t whylen)
{
	double worst = 0;
	int dims_ok = a->nx == b->nx && a->ny == b->ny && a->nz == b->nz;

	for (int i = 0; i < 3; i++)
		for (int j = 0; j < 4; j++) {
			double d = fabs(a->affine[i][j] - b->affine[i][j]);

			if (!(d <= worst))
				worst = d; /* NaN counts as a mismatch */
		}
	if (why && whylen)
		why[0] = '\0';
	if (dims_ok && worst <= tol_mm)
		return 1;
	if (why && whylen) {
		char ga[512], gb[512];

		describe_grid(ga, sizeof ga, a);
		describe_grid(gb, sizeof gb, b);
		if (!dims_ok)
			snprintf(why, whylen, "dimensions differ: %s vs %s", ga, gb);
		else
			snprintf(why, whylen, "affines differ by up to %g mm (tolerance %g): %s vs %s",
				 worst, tol_mm, ga, gb);
	}
	return 0;
}

void nii_grid_make(nii_grid *g, int64_t nx, int64_t ny, int64_t nz, double dx, double dy,
		   double dz, double ox, double oy, double oz)
{
	memset(g, 0, sizeof *g);
	g->nx = nx, g->ny = ny, g->nz = nz;
	g->dx = fabs(dx), g->dy = fabs(dy), g->dz = fabs(dz);
	/* Invented data have no other space to claim than the scanner's. */
	g->qform_code = NIFTI_XFORM_SCANNER_ANAT;
	g->sform_code = NIFTI_XFORM_SCANNER_ANAT;
	g->qfac = 1.0;
	g->qoffset_x = -ox * g->dx;
	g->qoffset_y = -oy * g->dy;
	g->qoffset_z = -oz * g->dz;
	g->srow[0][0] = g->affine[0][0] = g->dx;
	g->srow[1][1] = g->affine[1][1] = g->dy;
	g->srow[2][2] = g->affine[2][2] = g->dz;
	g->srow[0][3] = g->affine[0][3] = g->qoffset_x;
	g->srow[1][3] = g->affine[1][3] = g->qoffset_y;
	g->srow[2][3] = g->affine[2][3] = g->qoffset_z;
	g->xyz_units = NIFTI_UNITS_MM;
}

void nii_voxel_to_world(const nii_grid *g, double i, double j, double k, double xyz[3])
{
	for (int r = 0; r < 3; r++)
		xyz[r] = g->affine[r][0] * i + g->affine[r][1] * j + g->affine[r][2] * k +
			 g->affine[r][3];
}
