/* rowfile.c - rows spilled to an unlinked temporary file (rowfile.h). */
#include "rowfile.h"

#include <errno.h>
#include <fcntl.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../core/mem.h"

struct rowfile {
	int fd;
	size_t rowbytes;
	size_t rows;
	char dir[1024];      /* for the messages */
};

rowfile *rowfile_new(size_t rowbytes)
{
	const char *dir = getenv("TMPDIR");
	char path[1100];
	rowfile *f;
	int fd;

	if (!dir || !*dir || strlen(dir) >= sizeof f->dir)
		dir = "/tmp";
	snprintf(path, sizeof path, "%s/splitroi-rows-XXXXXX", dir);
	fd = mkstemp(path);
	if (fd < 0)
		return NULL;
	/* unnamed from here on: closing it, or the process ending, frees the space */
	unlink(path);
	f = xcalloc(1, sizeof *f);
	f->fd = fd;
	f->rowbytes = rowbytes;
	snprintf(f->dir, sizeof f->dir, "%s", dir);
	return f;
}

sr_status rowfile_append(rowfile *f, const void *row, sr_err *e)
{
	const unsigned char *p = row;
	size_t left = f->rowbytes;
	size_t end;
	off_t at;

	if (sr_mul_size(f->rows + 1, f->rowbytes, &end) != 0 || end > (size_t)INT64_MAX)
		return sr_fail(e, SR_EIO, "%s: the temporary file of kept series is too large", f->dir);
	at = (off_t)(f->rows * f->rowbytes);
	while (left > 0) {
		ssize_t w = pwrite(f->fd, p, left, at);

		if (w < 0 && errno == EINTR)
			continue;
		if (w <= 0)
			return sr_fail(e, SR_EIO,
				       "%s: cannot write the kept series to a temporary file: %s (set TMPDIR to a folder with room)",
				       f->dir, w < 0 ? strerror(errno) : "no byte written");
		p += w;
		left -= (size_t)w;
		at += w;
	}
	f->rows++;
	return SR_OK;
}

sr_status rowfile_read(const rowfile *f, size_t k, void *row, sr_err *e)
{
	unsigned char *p = row;
	size_t left = f->rowbytes;
	off_t at = (off_t)(k * f->rowbytes);

	if (k >= f->rows)
		return sr_fail(e, SR_EIO, "%s: row %zu of a temporary file of %zu rows", f->dir, k, f->rows);
	while (left > 0) {
		ssize_t r = pread(f->fd, p, left, at);

		if (r < 0 && errno == EINTR)
			continue;
		if (r <= 0)
			return sr_fail(e, SR_EIO, "%s: cannot read back the kept series from a temporary file: %s",
				       f->dir, r < 0 ? strerror(errno) : "short read");
		p += r;
		left -= (size_t)r;
		at += r;
	}
	return SR_OK;
}

void rowfile_free(rowfile *f)
{
	if (!f)
		return;
	close(f->fd);
	free(f);
}
