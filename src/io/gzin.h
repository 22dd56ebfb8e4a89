/* gzin.h - sequential reading of a plain or gzip-compressed file, inflated by ISA-L or zlib.
 *
 * One reader for the NIfTI streams: the bytes of a file as they come, with a
 * gzip file (recognised by its first two bytes) inflated on the fly in a
 * fixed buffer, so memory stays O(buffer) whatever the file's size. Where the
 * build has ISA-L (SR_HAVE_ISAL) its igzip inflater does the work, about three
 * times faster than zlib's; zlib is the fallback when ISA-L is not built in or
 * does not accept the stream's wrapper. Both check every member's CRC-32 and
 * length; concatenated members are read as one stream, and bytes after a
 * member that do not start another are ignored (as zlib's gzread does), so the
 * two give the same bytes or the same verdict on every file: ISA-L refuses
 * reserved header flags as zlib does, and a failure under ISA-L is read again
 * by zlib, whose verdict and message are returned (the two find damage at
 * different points).
 *
 * Not thread safe per reader; separate readers are independent.
 */
#ifndef SR_GZIN_H
#define SR_GZIN_H

#include <stddef.h>
#include <stdint.h>

#include "../core/err.h"

typedef struct gzin gzin;

/* Which inflater: the fastest built in, or one of them (for tests and comparisons). */
enum gzin_backend { GZIN_AUTO, GZIN_ZLIB, GZIN_ISAL };

/* What a read found. */
enum gzin_result {
	GZIN_OK,       /* all n bytes */
	GZIN_END,      /* the data ended cleanly before n bytes */
	GZIN_SHORT,    /* a gzip stream ended in the middle of a member (truncated file) */
	GZIN_CORRUPT,  /* damaged compressed data, CRC or length mismatch */
	GZIN_ERROR     /* a system read error */
};

/*
 * Opens path for reading. backend GZIN_ISAL without ISA-L built in is
 * SR_EINVAL. Errors (file missing, not a regular file, unreadable) name the
 * file. On success *out is the reader, owned by the caller (gzin_close).
 */
sr_status gzin_open(const char *path, enum gzin_backend backend, gzin **out, sr_err *e);

/*
 * Reads exactly n bytes into buf unless the data end or fail; *got (may be
 * NULL) is how many arrived. On anything but GZIN_OK, what (whatlen bytes)
 * says what happened ("got X of N bytes", the inflater's or system message).
 */
enum gzin_result gzin_read(gzin *z, void *buf, size_t n, size_t *got, char *what, size_t whatlen);

/* Skips n bytes (reads and drops them for gzip); results as gzin_read. */
enum gzin_result gzin_skip(gzin *z, uint64_t n, char *what, size_t whatlen);

/*
 * Reads on to the end of the data, dropping it, so that every remaining gzip
 * member's CRC and length are checked. GZIN_END when the data end cleanly,
 * else GZIN_SHORT / GZIN_CORRUPT / GZIN_ERROR with what filled.
 */
enum gzin_result gzin_finish(gzin *z, char *what, size_t whatlen);

/* 1 when the file is gzip-compressed. */
int gzin_is_gz(const gzin *z);

/* The inflater in use: "isa-l", "zlib" or "none" (a plain file). */
const char *gzin_backend_name(const gzin *z);

/* 1 when ISA-L is built in. */
int gzin_have_isal(void);

/* Closes; NULL does nothing. */
void gzin_close(gzin *z);

#endif
