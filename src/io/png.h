/* png.h - PNG images encoded through libpng, in memory (for data URIs) or as files. */
#ifndef SR_PNG_H
#define SR_PNG_H

#include <stddef.h>

#include "../core/err.h"

/*
 * Encodes w*h pixels, row-major from the top, 8 bits per sample; channels 1
 * (gray), 3 (RGB) or 4 (RGBA). *out is malloc'ed (caller frees) and *len its
 * size. Errors: SR_EINVAL for bad sizes, SR_ENOMEM/SR_EFORMAT from libpng.
 * Thread safe (no shared state).
 */
sr_status srpng_encode(const unsigned char *px, int w, int h, int channels, unsigned char **out,
		       size_t *len, sr_err *e);

/* Encodes as above and writes path atomically (temporary file, then rename). */
sr_status srpng_write(const char *path, const unsigned char *px, int w, int h, int channels,
		      sr_err *e);

#endif
