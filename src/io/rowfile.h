/* rowfile.h - rows of one fixed size spilled to an unnamed temporary file and read back one at a time.
 *
 * For data written once in order and read later a row at a time, which need
 * not stay in memory meanwhile (a subject's kept parcel series, read only by
 * the time courses after every run is fitted). The file is unlinked as soon
 * as it is made, so nothing is left behind whatever way the process ends; its
 * pages live in the system's file cache, which the kernel can write out or
 * drop, instead of in the process.
 */
#ifndef SR_ROWFILE_H
#define SR_ROWFILE_H

#include <stddef.h>

#include "../core/err.h"

typedef struct rowfile rowfile;

/*
 * A new empty row file for rows of rowbytes bytes, in $TMPDIR (else /tmp).
 * NULL when no temporary file can be made there (the caller keeps its rows
 * in memory instead); never an error.
 */
rowfile *rowfile_new(size_t rowbytes);

/* Appends the next row (rowbytes bytes). SR_EIO naming the folder when it cannot be written (a full disk). */
sr_status rowfile_append(rowfile *f, const void *row, sr_err *e);

/* Reads row k (0-based, already appended) into row. SR_EIO on a read error or a short read. */
sr_status rowfile_read(const rowfile *f, size_t k, void *row, sr_err *e);

/* Closes (and so deletes) the file; NULL is allowed. */
void rowfile_free(rowfile *f);

#endif
