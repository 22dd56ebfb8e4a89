/* pngtool.c - writes a PNG through our encoder with a fixed pattern, for the Python decoder test. */
#include <stdio.h>
#include <stdlib.h>

#include "core/mem.h"
#include "io/png.h"

/* Usage: pngtool OUT.png W H CHANNELS; sample (x, y, c) = (31x + 17y + 89c + xy) mod 256. */
int main(int argc, char **argv)
{
	int w, h, ch, x, y, c;
	unsigned char *px;
	sr_err e;

	if (argc != 5) {
		fprintf(stderr, "usage: pngtool OUT.png W H CHANNELS\n");
		return 2;
	}
	w = atoi(argv[2]);
	h = atoi(argv[3]);
	ch = atoi(argv[4]);
	px = xmalloc((size_t)(w > 0 ? w : 1) * (size_t)(h > 0 ? h : 1) * (size_t)(ch > 0 ? ch : 1));
	for (y = 0; y < h; y++)
		for (x = 0; x < w; x++)
			for (c = 0; c < ch; c++)
				px[((size_t)y * (size_t)w + (size_t)x) * (size_t)ch + (size_t)c] =
					(unsigned char)((31 * x + 17 * y + 89 * c + x * y) & 255);
	sr_err_init(&e, NULL, NULL);
	if (srpng_write(argv[1], px, w, h, ch, &e)) {
		fprintf(stderr, "pngtool: %s\n", e.msg);
		free(px);
		return 1;
	}
	free(px);
	return 0;
}
