/* nii.h - NIfTI-1/NIfTI-2 images through nifticlib: headers, streamed volumes, maps. */
#ifndef SR_NII_H
#define SR_NII_H

#include <stdint.h>
#include <stddef.h>

#include "../core/err.h"

/*
 * The grid of an image: what two images must share to be compared voxel by
 * voxel, and what a written map copies so that it lands in the same place.
 * Plain data; copy freely.
 */
typedef struct nii_grid {
	int64_t nx, ny, nz;       /* spatial dims (missing dims are 1) */
	double dx, dy, dz;        /* voxel size, in mm (converted from xyzt_units) */
	int qform_code, sform_code;
	double quatern_b, quatern_c, quatern_d, qoffset_x, qoffset_y, qoffset_z, qfac;
	double srow[3][4];        /* sform rows (valid when sform_code > 0) */
	/* quatern_*, qoffset_* and srow are as stored, in xyz_units; dx..dz and affine are in mm. */
	double affine[3][4];      /* voxel to world: sform if set, else qform, else scaling */
	int xyz_units;            /* NIFTI_UNITS_* of the input (written back unchanged) */
} nii_grid;

/* What a header says, beyond the grid. */
typedef struct nii_info {
	nii_grid grid;
	int ndim;                 /* dim[0] after dropping trailing 1s, at least 3 */
	int64_t nt;               /* volumes (1 for a 3-D image) */
	double tr;                /* pixdim[4] in seconds; 0 when absent, <= 0, not a time unit, or dim[0] < 4 */
	int datatype;             /* NIFTI_TYPE_* as stored */
	double slope, inter;      /* scaling actually applied (1, 0 when none) */
	int nifti_version;        /* 1 or 2 */
} nii_info;

/* Voxels per volume (nx*ny*nz); the caller knows it fits in memory once opened. */
size_t nii_nvox(const nii_grid *g);

/*
 * Limits on what a header may claim, checked before anything is allocated:
 * at most NII_MAX_VOXELS voxels per volume (2^26, e.g. 406^3; a 0.5 mm
 * whole-brain grid has about 4.3e7), and for gzip files at most
 * NII_GZ_MAX_RATIO bytes of image data per byte of file (deflate's largest
 * possible expansion), so that a damaged or hostile header is an error naming
 * the file instead of a huge allocation.
 */
#define NII_MAX_VOXELS ((size_t)1 << 26)
#define NII_GZ_MAX_RATIO 1032.0

/*
 * Reads and checks a header: magic, sizeof_hdr, dims (positive, at most 4 used
 * dimensions, nx*ny*nz*nt*bytes not overflowing, not beyond the file for an
 * uncompressed .nii, within the limits above), datatype supported. Errors name
 * the file.
 */
sr_status nii_read_info(const char *path, nii_info *info, sr_err *e);

/*
 * Streaming reader: volumes in order, each read once from one open handle, so
 * a .nii.gz is inflated once from start to end. Not thread safe per stream;
 * separate streams may be used from separate threads.
 */
typedef struct nii_stream nii_stream;

/*
 * Opens path (gzip recognised by its first bytes, not the name); fills info.
 * On failure *out is NULL. Checks as nii_read_info.
 */
sr_status nii_stream_open(const char *path, nii_stream **out, nii_info *info, sr_err *e);
/*
 * Reads the next volume into vol (nvox doubles, scaling applied). A short file
 * is an error naming the volume (counted from 1); a damaged gzip stream is an
 * error too, including a CRC mismatch, which is checked after the last volume.
 * After an error the stream only closes.
 */
sr_status nii_stream_next(nii_stream *s, double *vol, sr_err *e);

/*
 * Whether every value nii_stream_next gives for this header is exactly a
 * float32: stored as float32 or as an integer of at most 16 bits (all exact
 * in float32's 24-bit significand), with no scaling applied (slope 1 and
 * inter 0 after fill_info's rule; a real slope or inter is applied in double).
 */
int nii_float32_exact(const nii_info *info);
/*
 * nii_stream_next for a header that nii_float32_exact accepts, into nvox
 * float32 values: the same numbers (each nii_stream_next value is one of
 * these widened), in half the memory. SR_EINVAL for any other header.
 */
sr_status nii_stream_next_f32(nii_stream *s, float *vol, sr_err *e);
/* Closes; NULL does nothing. */
void nii_stream_close(nii_stream *s);

/* Reads a whole 3-D image (nt must be 1) as doubles with scaling; *data is xmalloc'ed, caller frees. */
sr_status nii_read_3d(const char *path, nii_info *info, double **data, sr_err *e);

/*
 * Reads a 3-D mask image, the one rule for every mask (the study's, a
 * subject's, fit's --mask): a voxel is inside when its value is finite and
 * not 0. *mask is xmalloc'ed (nvox bytes, 1 or 0; caller frees), *count (may
 * be NULL) the voxels inside. An empty mask is not an error here: callers say
 * what it means to them. Errors as nii_read_3d's.
 */
sr_status nii_read_mask(const char *path, nii_info *info, unsigned char **mask, size_t *count, sr_err *e);

/*
 * Writes float32 maps on grid g: nt volumes of nvox values each, one after the
 * other in data. Compressed when path ends in .gz. Written to a temporary file
 * in the same folder and renamed, so a failed write leaves no file behind.
 * `description` goes into the header's descrip (truncated to 79 bytes).
 * tr > 0 is stored as pixdim[4] in seconds.
 */
sr_status nii_write_float(const char *path, const nii_grid *g, const float *data, int64_t nt,
			  double tr, const char *description, sr_err *e);

/* The intent codes callers pass to nii_write_stat: NIfTI-1's values, so that no layer above io includes nifticlib. */
enum { NII_INTENT_NONE = 0, NII_INTENT_TTEST = 3 };

/*
 * nii_write_float with a NIfTI intent: intent (NII_INTENT_TTEST for a t
 * map) and its first parameter (the t map's degrees of freedom) in the header.
 */
sr_status nii_write_stat(const char *path, const nii_grid *g, const float *data, int64_t nt,
			 double tr, int intent, double intent_p1, const char *description, sr_err *e);

/* Writes an int32 label image (3-D, NIFTI_INTENT_LABEL) on grid g, atomically as above. */
sr_status nii_write_labels(const char *path, const nii_grid *g, const int32_t *labels,
			   const char *description, sr_err *e);

/*
 * Streaming writer for 4-D series too large to hold (the simulator's).
 * datatype NIFTI_TYPE_FLOAT32 or NIFTI_TYPE_INT16 (then values are stored as
 * round((v - inter) / slope) with the given slope and inter, half to even,
 * clamped to the int16 range; NaN is an error). slope and inter are ignored
 * for float32. A .gz series is compressed at zlib level 1 (maps at 6): series
 * are large and noisy, so speed matters more than the last few percent.
 */
typedef struct nii_writer nii_writer;
sr_status nii_writer_open(const char *path, const nii_grid *g, int64_t nt, double tr,
			  int datatype, double slope, double inter, nii_writer **out, sr_err *e);
sr_status nii_writer_put(nii_writer *w, const double *vol, sr_err *e);
/* Checks that nt volumes were written, flushes, closes and renames into place. */
sr_status nii_writer_commit(nii_writer *w, sr_err *e);
/* Abandons the file (temporary removed); NULL does nothing. */
void nii_writer_abort(nii_writer *w);

/*
 * Compares grids: same nx, ny, nz and affines equal within tol_mm (1e-3 in
 * METHODS.md). Returns 1 when they match; otherwise 0 and a description of
 * both grids in why (may be NULL; set to "" on a match).
 */
int nii_same_grid(const nii_grid *a, const nii_grid *b, double tol_mm, char *why, size_t whylen);

/*
 * A grid with the given dims and voxel size (absolute values), axes aligned,
 * world origin at voxel (ox, oy, oz); units mm. qform and sform both carry it
 * with code NIFTI_XFORM_SCANNER_ANAT (1): invented data claim no template space.
 */
void nii_grid_make(nii_grid *g, int64_t nx, int64_t ny, int64_t nz, double dx, double dy,
		   double dz, double ox, double oy, double oz);

/* World coordinates (mm) of voxel (i, j, k) through g->affine. */
void nii_voxel_to_world(const nii_grid *g, double i, double j, double k, double xyz[3]);

#endif
