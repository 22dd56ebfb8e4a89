/* test_png.c - PNG encoding: images of each channel count decoded back by libpng's own reader
 * (size, colour type, every sample), files written atomically, and bad sizes or paths refused. */
#include <png.h>
#include <stdint.h>
#include <string.h>
#include <unistd.h>

#include "io/png.h"
#include "testlib.h"
#include "tfiles.h"

static const png_uint_32 formats[5] = { 0, PNG_FORMAT_GRAY, 0, PNG_FORMAT_RGB, PNG_FORMAT_RGBA };

/* Decodes a PNG (from memory when buf, else from path) with libpng's simplified reader;
 * returns the malloc'ed samples (format as stored) or NULL, with size and format. */
static unsigned char *decode(const unsigned char *buf, size_t len, const char *path, int *w,
			     int *h, png_uint_32 *format)
{
	png_image im;
	unsigned char *px;

	memset(&im, 0, sizeof im);
	im.version = PNG_IMAGE_VERSION;
	if (!(buf ? png_image_begin_read_from_memory(&im, buf, len)
		  : png_image_begin_read_from_file(&im, path)))
		return NULL;
	*w = (int)im.width;
	*h = (int)im.height;
	*format = im.format;
	px = malloc(PNG_IMAGE_SIZE(im));
	if (!png_image_finish_read(&im, NULL, px, 0, NULL)) {
		free(px);
		png_image_free(&im);
		return NULL;
	}
	return px;
}

/* Encodes w x h x ch samples, decodes them back and compares everything. */
static void roundtrip(const unsigned char *px, int w, int h, int ch, const char *name)
{
	unsigned char *out = NULL, *back;
	size_t len = 0;
	int bw = 0, bh = 0;
	png_uint_32 fmt = 99;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	CHECK(srpng_encode(px, w, h, ch, &out, &len, &e) == SR_OK && out && len > 8,
	      "%s: encodes (%zu bytes, %s)", name, len, e.msg);
	if (!out)
		return;
	CHECK(memcmp(out, "\x89PNG\r\n\x1a\n", 8) == 0, "%s: starts with the PNG signature", name);
	back = decode(out, len, NULL, &bw, &bh, &fmt);
	CHECK(back != NULL, "%s: libpng decodes it", name);
	CHECK(bw == w && bh == h, "%s: size %d x %d (got %d x %d)", name, w, h, bw, bh);
	CHECK(fmt == formats[ch], "%s: colour type for %d channels (format %u)", name, ch, (unsigned)fmt);
	CHECK(back && fmt == formats[ch] && memcmp(back, px, (size_t)w * h * ch) == 0,
	      "%s: every sample comes back unchanged, top row first", name);
	free(back);
	free(out);
}

static void test_encode(void)
{
	/* 3 x 2 RGB: red green blue / white black grey */
	const unsigned char rgb[18] = { 255, 0, 0, 0, 255, 0, 0, 0, 255, 255, 255, 255, 0, 0, 0, 128, 128, 128 };
	/* 2 x 3 gray: rows 0 10 / 20 30 / 254 255 (not square, so rows and columns cannot swap) */
	const unsigned char gray[6] = { 0, 10, 20, 30, 254, 255 };
	/* 2 x 2 RGBA with four different alphas */
	const unsigned char rgba[16] = { 10, 20, 30, 0, 40, 50, 60, 64, 70, 80, 90, 128, 100, 110, 120, 255 };
	enum { BW = 301, BH = 203 };
	unsigned char *noise = malloc(BW * BH * 3);
	uint32_t s = 12345;

	roundtrip(rgb, 3, 2, 3, "3x2 RGB");
	roundtrip(gray, 2, 3, 1, "2x3 gray");
	roundtrip(rgba, 2, 2, 4, "2x2 RGBA");
	/* noise does not compress, so the output buffer must grow well past its first 4 KiB */
	for (int i = 0; i < BW * BH * 3; i++) {
		s = s * 1664525u + 1013904223u;
		noise[i] = (unsigned char)(s >> 24);
	}
	roundtrip(noise, BW, BH, 3, "301x203 RGB noise");
	roundtrip(noise, 1, 1, 1, "1x1 gray");
	free(noise);
}

static void test_bad(void)
{
	unsigned char px[12] = { 0 }, *out = (unsigned char *)px;
	size_t len = 5;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	CHECK(srpng_encode(px, 0, 2, 3, &out, &len, &e) == SR_EINVAL && out == NULL && len == 0,
	      "width 0 is SR_EINVAL, no output: %s", e.msg);
	CHECK(srpng_encode(px, 2, -1, 3, &out, &len, &e) == SR_EINVAL, "a negative height is SR_EINVAL");
	CHECK(srpng_encode(px, 2, 2, 2, &out, &len, &e) == SR_EINVAL && strstr(e.msg, "2 x 2 x 2"),
	      "2 channels are refused: %s", e.msg);
	CHECK(srpng_encode(px, 2000000, 1, 1, &out, &len, &e) == SR_EINVAL, "a huge width is refused");
}

static void test_write(void)
{
	const unsigned char rgb[12] = { 1, 2, 3, 4, 5, 6, 7, 8, 9, 250, 251, 252 };
	char *dir = tf_tmpdir(), path[4200], probe[4300];
	unsigned char *back;
	int w = 0, h = 0;
	png_uint_32 fmt = 0;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	snprintf(path, sizeof path, "%s/figures/sub-01/map.png", dir);
	CHECK(srpng_write(path, rgb, 2, 2, 3, &e) == SR_OK, "write a file into missing folders (%s)", e.msg);
	back = decode(NULL, 0, path, &w, &h, &fmt);
	CHECK(back && w == 2 && h == 2 && fmt == PNG_FORMAT_RGB && memcmp(back, rgb, 12) == 0,
	      "the file decodes to the same 2 x 2 pixels");
	free(back);
	snprintf(probe, sizeof probe, "ls -a '%s/figures/sub-01' | grep -q tmp", dir);
	CHECK(system(probe) != 0, "no temporary left beside it");

	/* a bad size writes nothing at all */
	snprintf(path, sizeof path, "%s/figures/bad.png", dir);
	CHECK(srpng_write(path, rgb, 0, 2, 3, &e) == SR_EINVAL && access(path, F_OK) != 0,
	      "a bad size is refused before any file appears");
	/* a bad path: a regular file where a folder should be */
	free(tf_write(dir, "plain", "x", 0));
	snprintf(path, sizeof path, "%s/plain/map.png", dir);
	CHECK(srpng_write(path, rgb, 2, 2, 3, &e) == SR_EIO && strstr(e.msg, "plain") &&
		      access(path, F_OK) != 0,
	      "a bad path is SR_EIO naming it, nothing written: %s", e.msg);
	snprintf(path, sizeof path, "%s/figures/", dir);
	CHECK(srpng_write(path, rgb, 2, 2, 3, &e) != SR_OK && strstr(e.msg, "figures/"),
	      "a folder name is refused: %s", e.msg);
	tf_rmtree(dir);
	free(dir);
}

int main(void)
{
	test_encode();
	test_bad();
	test_write();
	return TEST_DONE();
}
