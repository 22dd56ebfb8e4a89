/* png.c - PNG encoding through libpng into a growing memory buffer; files written atomically. */
#include <png.h>
#include <setjmp.h>
#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"
#include "../core/sbuf.h"
#include "afile.h"
#include "png.h"

/* libpng's output goes to the one growing buffer, sbuf, as bytes (sbuf_room, then a copy). */
static void mem_write(png_structp png, png_bytep data, png_size_t n)
{
	sbuf *b = png_get_io_ptr(png);

	sbuf_room(b, n);
	memcpy(b->p + b->n, data, n);
	b->n += n;
}

static void mem_flush(png_structp png)
{
	(void)png;
}

/* libpng reports through longjmp; keep its message for our error record. */
static void on_error(png_structp png, png_const_charp msg)
{
	char *slot = png_get_error_ptr(png);

	snprintf(slot, 256, "%s", msg);
	png_longjmp(png, 1);
}

static void on_warning(png_structp png, png_const_charp msg)
{
	(void)png;
	(void)msg;
}

sr_status srpng_encode(const unsigned char *px, int w, int h, int channels, unsigned char **out,
		       size_t *len, sr_err *e)
{
	static const int types[5] = { 0, PNG_COLOR_TYPE_GRAY, 0, PNG_COLOR_TYPE_RGB,
				      PNG_COLOR_TYPE_RGB_ALPHA };
	png_structp png;
	png_infop info;
	sbuf b = { NULL, 0, 0 };
	char msg[256] = "";
	volatile int y;

	*out = NULL;
	*len = 0;
	if (w <= 0 || h <= 0 || w > 1000000 || h > 1000000 ||
	    (channels != 1 && channels != 3 && channels != 4))
		return sr_fail(e, SR_EINVAL, "png: bad image size %d x %d x %d", w, h, channels);
	png = png_create_write_struct(PNG_LIBPNG_VER_STRING, msg, on_error, on_warning);
	if (!png)
		return sr_fail(e, SR_ENOMEM, "png: cannot create the encoder");
	info = png_create_info_struct(png);
	if (!info) {
		png_destroy_write_struct(&png, NULL);
		return sr_fail(e, SR_ENOMEM, "png: cannot create the encoder");
	}
	if (setjmp(png_jmpbuf(png))) {
		png_destroy_write_struct(&png, &info);
		free(b.p);
		return sr_fail(e, SR_EFORMAT, "png: %s", msg);
	}
	png_set_write_fn(png, &b, mem_write, mem_flush);
	png_set_IHDR(png, info, (png_uint_32)w, (png_uint_32)h, 8, types[channels],
		     PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
	png_write_info(png, info);
	for (y = 0; y < h; y++)
		png_write_row(png, (png_const_bytep)(px + (size_t)y * (size_t)w * (size_t)channels));
	png_write_end(png, info);
	png_destroy_write_struct(&png, &info);
	*out = (unsigned char *)b.p;
	*len = b.n;
	return SR_OK;
}

sr_status srpng_write(const char *path, const unsigned char *px, int w, int h, int channels,
		      sr_err *e)
{
	unsigned char *buf;
	size_t n;
	afile a;
	sr_status rc = srpng_encode(px, w, h, channels, &buf, &n, e);

	if (rc)
		return rc;
	rc = afile_open(&a, path, e);
	if (rc) {
		free(buf);
		return rc;
	}
	if (fwrite(buf, 1, n, a.f) != n) {
		free(buf);
		afile_abort(&a);
		return sr_fail(e, SR_EIO, "%s: write failed", path);
	}
	free(buf);
	return afile_commit(&a, e);
}
