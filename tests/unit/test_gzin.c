/* test_gzin.c - the gzip reader: ISA-L and zlib give the same bytes and the same verdicts on the same files. */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <zlib.h>

#include "core/mem.h"
#include "io/gzin.h"
#include "testlib.h"
#include "tfiles.h"

static char *dir;

/* Compresses src into one gzip member (zlib's deflate with a gzip wrapper); *n is its size. */
static unsigned char *member(const unsigned char *src, size_t len, int level, int with_name, size_t *n)
{
	z_stream zs;
	gz_header h;
	size_t cap = len + len / 10 + 1024;
	unsigned char *out = xmalloc(cap);

	memset(&zs, 0, sizeof zs);
	if (deflateInit2(&zs, level, Z_DEFLATED, 15 + 16, 8, Z_DEFAULT_STRATEGY) != Z_OK)
		abort();
	if (with_name) {
		/* a file name, a comment, an extra field and a header CRC: all legal gzip */
		static unsigned char extra[] = { 'S', 'R', 2, 0, 'o', 'k' };

		memset(&h, 0, sizeof h);
		h.name = (Bytef *)"run-1_bold.nii";
		h.comment = (Bytef *)"invented test data";
		h.extra = extra;
		h.extra_len = sizeof extra;
		h.hcrc = 1;
		h.os = 3;
		deflateSetHeader(&zs, &h);
	}
	zs.next_in = (Bytef *)src;
	zs.avail_in = (uInt)len;
	zs.next_out = out;
	zs.avail_out = (uInt)cap;
	if (deflate(&zs, Z_FINISH) != Z_STREAM_END)
		abort();
	*n = zs.total_out;
	deflateEnd(&zs);
	return out;
}

static char *paths[32];
static int npaths;

/* Writes a test file (n > 0 bytes); the path is freed at the end. */
static const char *write_file(const char *name, const unsigned char *a, size_t n)
{
	return paths[npaths++] = tf_write(dir, name, (const char *)a, n);
}

/* What reading a whole file in chunks of `chunk` bytes gave: the bytes and the final verdict. */
typedef struct outcome {
	unsigned char *data;
	size_t n;
	enum gzin_result last;
	char what[256];
	const char *backend;
} outcome;

static void read_whole(const char *path, enum gzin_backend b, size_t chunk, outcome *o)
{
	gzin *z;
	sr_err e;
	size_t cap = 1 << 20;

	memset(o, 0, sizeof *o);
	sr_err_init(&e, NULL, NULL);
	if (gzin_open(path, b, &z, &e) != SR_OK) {
		o->last = GZIN_ERROR;
		snprintf(o->what, sizeof o->what, "%s", e.msg);
		return;
	}
	o->backend = gzin_backend_name(z);
	o->data = xmalloc(cap);
	for (;;) {
		size_t got;
		enum gzin_result r;

		if (o->n + chunk > cap) {
			cap = 2 * (o->n + chunk);
			o->data = xrealloc(o->data, cap);
		}
		r = gzin_read(z, o->data + o->n, chunk, &got, o->what, sizeof o->what);
		o->n += got;
		if (r != GZIN_OK) {
			o->last = r;
			break;
		}
	}
	gzin_close(z);
}

/* Reads exactly `n` bytes, then asks gzin_finish for the verdict on the rest. */
static enum gzin_result read_then_finish(const char *path, enum gzin_backend b, size_t n, char *what)
{
	gzin *z;
	sr_err e;
	unsigned char *buf = xmalloc(n ? n : 1);
	enum gzin_result r;

	sr_err_init(&e, NULL, NULL);
	if (gzin_open(path, b, &z, &e) != SR_OK) {
		free(buf);
		return GZIN_ERROR;
	}
	r = gzin_read(z, buf, n, NULL, what, 256);
	if (r == GZIN_OK)
		r = gzin_finish(z, what, 256);
	gzin_close(z);
	free(buf);
	return r;
}

static const char *rname(enum gzin_result r)
{
	static const char *n[] = { "ok", "end", "short", "corrupt", "error" };

	return n[r];
}

/*
 * Both inflaters on one file: the same bytes, and the same verdict at the end.
 * want: the expected bytes (NULL: not checked), want_last the expected verdict.
 */
static void both(const char *label, const char *path, const unsigned char *want, size_t nwant,
		 enum gzin_result want_last)
{
	static const size_t chunks[] = { 1 << 20, 7777, 1 };
	outcome z, is;
	int c;

	for (c = 0; c < 3; c++) {
		size_t chunk = chunks[c];

		/* one-byte reads of a few MB are slow: only on the small files */
		if (chunk == 1 && nwant > 300000)
			continue;
		read_whole(path, GZIN_ZLIB, chunk, &z);
		CHECK(z.last == want_last && (!want || (z.n == nwant && memcmp(z.data, want, nwant) == 0)),
		      "%s, zlib, reads of %zu: %zu bytes, ends '%s' (%s)", label, chunk, z.n, rname(z.last), z.what);
		if (!gzin_have_isal()) {
			printf("skip - %s: no ISA-L in this build\n", label);
			free(z.data);
			continue;
		}
		read_whole(path, GZIN_ISAL, chunk, &is);
		/* after damage, how much came out before the verdict may differ; never for an end or a cut */
		CHECK(is.last == want_last && (want_last == GZIN_CORRUPT || (z.n == is.n && memcmp(z.data, is.data, z.n) == 0)),
		      "%s, reads of %zu: ISA-L (%s) gives zlib's %zu bytes and verdict '%s' (%s; %s)", label,
		      chunk, is.backend, z.n, rname(is.last), is.what, z.what);
		free(z.data);
		free(is.data);
	}
}

int main(void)
{
	size_t n = 3u << 20, i, n1, n2, n3, n0, nall;
	unsigned char *data = xmalloc(n), *m1, *m2, *m3, *m0, *all, *cut;
	uint64_t s = 12345;
	char what[256];
	const char *p;

	dir = tf_tmpdir();
	/* float32 noise around 1000, like a BOLD run: compressible, but not trivially */
	for (i = 0; i + 4 <= n; i += 4) {
		float f;

		s = s * 6364136223846793005ULL + 1442695040888963407ULL;
		f = 1000.0f + (float)((s >> 40) % 2000) / 100.0f;
		memcpy(data + i, &f, 4);
	}
	m1 = member(data, n, 6, 0, &n1);
	p = write_file("one.gz", m1, n1);
	both("one member", p, data, n, GZIN_END);

	/* three members: level 1, stored blocks (level 0) with a full header, level 9; then an empty one */
	m2 = member(data + n / 3, n / 3, 0, 1, &n2);
	m3 = member(data + 2 * (n / 3), n - 2 * (n / 3), 9, 0, &n3);
	free(m1);
	m1 = member(data, n / 3, 1, 0, &n1);
	m0 = member(data, 0, 6, 0, &n0);
	nall = n1 + n2 + n3 + n0;
	all = xmalloc(nall + 16);
	memcpy(all, m1, n1);
	memcpy(all + n1, m2, n2);
	memcpy(all + n1 + n2, m3, n3);
	memcpy(all + n1 + n2 + n3, m0, n0);
	p = write_file("multi.gz", all, nall);
	both("four members (stored blocks, name/comment/extra/header CRC, an empty one)", p, data, n, GZIN_END);

	/* bytes after the last member that start no member: ignored by both, the data complete */
	memcpy(all + nall, "not gzip", 8);
	p = write_file("garbage.gz", all, nall + 8);
	both("trailing bytes that are not gzip", p, data, n, GZIN_END);

	/* truncated inside the second member: a short read, never a clean end */
	p = write_file("trunc.gz", all, n1 + n2 / 2);
	both("truncated in the middle of a member", p, NULL, 0, GZIN_SHORT);
	CHECK(read_then_finish(p, GZIN_AUTO, 1000, what) == GZIN_SHORT,
	      "truncated: the finish after a first read says short (%s)", what);

	/* trailer cut off (the last 4 bytes: the length) */
	p = write_file("notrailer.gz", all, n1 + n2 + n3 - 4);
	both("gzip trailer cut off", p, NULL, 0, GZIN_SHORT);

	/* wrong CRC-32 of the second member */
	cut = xmalloc(nall);
	memcpy(cut, all, nall);
	cut[n1 + n2 - 8] ^= 0x55;
	p = write_file("crc.gz", cut, nall);
	both("wrong CRC-32 in a member's trailer", p, NULL, 0, GZIN_CORRUPT);
	CHECK(read_then_finish(p, GZIN_AUTO, n / 3, what) == GZIN_CORRUPT,
	      "wrong CRC: gzin_finish after the first member finds it (%s)", what);

	/* wrong length (ISIZE) of the last data member */
	memcpy(cut, all, nall);
	cut[n1 + n2 + n3 - 2] ^= 0x01;
	p = write_file("isize.gz", cut, nall);
	both("wrong length in a member's trailer", p, NULL, 0, GZIN_CORRUPT);

	/* reserved header flag bits: zlib refuses them, ISA-L read past them and then ran out
	   of input, "short" instead of "corrupt" (afl++ found it); in the first member and in
	   the second */
	memcpy(cut, all, nall);
	cut[3] |= 0x20;
	p = write_file("flags1.gz", cut, nall);
	both("reserved header flags in the first member", p, NULL, 0, GZIN_CORRUPT);
	memcpy(cut, all, nall);
	cut[n1 + 3] |= 0x40;
	p = write_file("flags2.gz", cut, nall);
	both("reserved header flags in the second member", p, NULL, 0, GZIN_CORRUPT);

	/* a wrong CRC-32 and the length cut off: zlib checks the CRC as soon as it is in,
	   ISA-L waited for the whole trailer and said "short" */
	memcpy(cut, all, nall);
	cut[n1 + n2 + n3 - 8] ^= 0x55;
	p = write_file("crccut.gz", cut, n1 + n2 + n3 - 4);
	both("wrong CRC-32 with the length cut off", p, NULL, 0, GZIN_CORRUPT);

	/* damaged deflate data in the middle */
	memcpy(cut, all, nall);
	for (i = 0; i < 64; i++)
		cut[n1 / 2 + i] ^= (unsigned char)(0x5a ^ (i * 37));
	p = write_file("damaged.gz", cut, nall);
	both("damaged deflate data", p, NULL, 0, GZIN_CORRUPT);

	/* a plain file reads as itself, whatever inflater is asked for */
	p = write_file("plain.bin", data, 100000);
	both("a plain file", p, data, 100000, GZIN_END);
	{
		gzin *z;
		sr_err e;
		unsigned char b[16];

		sr_err_init(&e, NULL, NULL);
		CHECK(gzin_open(p, GZIN_AUTO, &z, &e) == SR_OK && !gzin_is_gz(z) &&
		      strcmp(gzin_backend_name(z), "none") == 0, "a plain file is not gzip");
		CHECK(gzin_skip(z, 99990, what, sizeof what) == GZIN_OK &&
		      gzin_read(z, b, 16, NULL, what, sizeof what) == GZIN_END, "skip then a read past the end: end");
		gzin_close(z);
		p = write_file("multi2.gz", all, nall);
		CHECK(gzin_open(p, GZIN_AUTO, &z, &e) == SR_OK && gzin_is_gz(z) &&
		      strcmp(gzin_backend_name(z), gzin_have_isal() ? "isa-l" : "zlib") == 0,
		      "the default inflater is %s", gzin_have_isal() ? "isa-l" : "zlib");
		CHECK(gzin_skip(z, n - 8, what, sizeof what) == GZIN_OK &&
		      gzin_read(z, b, 8, NULL, what, sizeof what) == GZIN_OK && memcmp(b, data + n - 8, 8) == 0,
		      "skip across members lands on the right bytes");
		gzin_close(z);
		CHECK(gzin_open("/nonexistent/x.gz", GZIN_AUTO, &z, &e) != SR_OK && strstr(e.msg, "/nonexistent/x.gz"),
		      "a missing file: an error naming it (%s)", e.msg);
	}
	free(cut);
	free(all);
	free(m0);
	free(m1);
	free(m2);
	free(m3);
	free(data);
	tf_rmtree(dir);
	free(dir);
	for (i = 0; i < (size_t)npaths; i++)
		free(paths[i]);
	return TEST_DONE();
}
