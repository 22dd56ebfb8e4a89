/* gzin.c - sequential reads of plain or gzip files through ISA-L's igzip or zlib (see gzin.h). */
#include "gzin.h"

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include <zlib.h>
#ifdef SR_HAVE_ISAL
#include <isa-l/igzip_lib.h>
#endif

#include "../core/mem.h"

/* Compressed input is read in blocks of this size. */
#define GZIN_BUF (256u * 1024u)
/* the first refill's size: a header read (a study's every run, by check or
   slurm) then copies 16 KiB from the file, not 256 KiB */
#define GZIN_FIRST (16u * 1024u)

struct gzin {
	char *path;
	int gz;
	enum gzin_backend backend;   /* the one in use for gzip: GZIN_ZLIB or GZIN_ISAL */
	FILE *f;
	/* gzip: compressed input, shared by both inflaters */
	unsigned char *in;           /* GZIN_BUF bytes */
	unsigned char *next;         /* unread input */
	size_t avail;
	size_t step;                 /* bytes a refill reads: grows from GZIN_FIRST to GZIN_BUF */
	int eof;                     /* no more bytes in the file */
	int member_done;             /* the last member ended; look for another */
	int started;                 /* some output was produced (no fallback after that) */
	int zinit;                   /* zs is initialised */
	z_stream zs;
#ifdef SR_HAVE_ISAL
	struct inflate_state *st;
	int member_head;             /* ISA-L has not yet seen this member's header flags */
#endif
	int ended;                   /* GZIN_END or a failure was returned: nothing more to read */
};

int gzin_have_isal(void)
{
#ifdef SR_HAVE_ISAL
	return 1;
#else
	return 0;
#endif
}

int gzin_is_gz(const gzin *z)
{
	return z->gz;
}

const char *gzin_backend_name(const gzin *z)
{
	if (!z->gz)
		return "none";
	return z->backend == GZIN_ISAL ? "isa-l" : "zlib";
}

/* Starts (or restarts, for the next member) the inflater on a gzip member. */
static int engine_reset(gzin *z)
{
#ifdef SR_HAVE_ISAL
	if (z->backend == GZIN_ISAL) {
		if (!z->st) {
			z->st = xmalloc(sizeof *z->st);
			isal_inflate_init(z->st);
		} else {
			isal_inflate_reset(z->st);
		}
		z->st->crc_flag = ISAL_GZIP; /* parse the header, check CRC-32 and length */
		z->member_head = 1;
		return 0;
	}
#endif
	if (z->zinit)
		return inflateReset(&z->zs) == Z_OK ? 0 : -1;
	memset(&z->zs, 0, sizeof z->zs);
	/* 15 + 16: a gzip wrapper, checked with its CRC-32 and length */
	if (inflateInit2(&z->zs, 15 + 16) != Z_OK)
		return -1;
	z->zinit = 1;
	return 0;
}

sr_status gzin_open(const char *path, enum gzin_backend backend, gzin **out, sr_err *e)
{
	unsigned char magic[2] = { 0, 0 };
	struct stat sb;
	gzin *z;
	FILE *f;

	*out = NULL;
	if (backend == GZIN_ISAL && !gzin_have_isal())
		return sr_fail(e, SR_EINVAL, "%s: ISA-L inflation asked for, but this build has no ISA-L", path);
	f = fopen(path, "rb");
	if (!f)
		return sr_fail(e, SR_EIO, "%s: cannot open: %s", path, strerror(errno));
	if (fstat(fileno(f), &sb) != 0 || !S_ISREG(sb.st_mode)) {
		fclose(f);
		return sr_fail(e, SR_EIO, "%s: cannot open: not a regular file", path);
	}
	z = xcalloc(1, sizeof *z);
	z->path = xstrdup(path);
	z->f = f;
	z->gz = fread(magic, 1, 2, f) == 2 && magic[0] == 0x1f && magic[1] == 0x8b;
	rewind(f);
	z->backend = backend == GZIN_ZLIB || !gzin_have_isal() ? GZIN_ZLIB : GZIN_ISAL;
	if (z->gz) {
		z->in = xmalloc(GZIN_BUF);
		z->next = z->in;
		if (engine_reset(z) != 0) {
			gzin_close(z);
			return sr_fail(e, SR_ENOMEM, "%s: cannot start the inflater", path);
		}
	}
	*out = z;
	return SR_OK;
}

void gzin_close(gzin *z)
{
	if (!z)
		return;
	if (z->f)
		fclose(z->f);
	if (z->zinit)
		inflateEnd(&z->zs);
#ifdef SR_HAVE_ISAL
	free(z->st);
#endif
	free(z->in);
	free(z->path);
	free(z);
}

static enum gzin_result read_plain(gzin *z, unsigned char *buf, size_t n, size_t *got, char *what,
				   size_t whatlen)
{
	*got = fread(buf, 1, n, z->f);
	if (*got == n)
		return GZIN_OK;
	if (ferror(z->f)) {
		snprintf(what, whatlen, "%s", strerror(errno ? errno : EIO));
		return GZIN_ERROR;
	}
	snprintf(what, whatlen, "got %zu of %zu bytes", *got, n);
	return GZIN_END;
}

/* Moves the unread input to the front and tops the buffer up from the file; -1 on a read error. */
static int refill(gzin *z)
{
	size_t r, want;

	if (z->eof)
		return 0;
	if (z->avail && z->next != z->in)
		memmove(z->in, z->next, z->avail);
	z->next = z->in;
	want = GZIN_BUF - z->avail;
	if (z->step < GZIN_FIRST)
		z->step = GZIN_FIRST;
	if (want > z->step)
		want = z->step;
	z->step = z->step < GZIN_BUF / 2 ? 2 * z->step : GZIN_BUF;
	r = fread(z->in + z->avail, 1, want, z->f);
	if (r < want) {
		if (ferror(z->f))
			return -1;
		z->eof = 1;
	}
	z->avail += r;
	return 0;
}

#ifdef SR_HAVE_ISAL
static const char *isal_msg(int rc)
{
	switch (rc) {
	case ISAL_INVALID_BLOCK: return "invalid deflate block";
	case ISAL_INVALID_SYMBOL: return "invalid deflate symbol";
	case ISAL_INVALID_LOOKBACK: return "invalid distance too far back";
	case ISAL_INVALID_WRAPPER: return "invalid gzip header";
	case ISAL_UNSUPPORTED_METHOD: return "unsupported compression method";
	case ISAL_INCORRECT_CHECKSUM: return "incorrect data check (CRC-32 or length)";
	case ISAL_NEED_DICT: return "a preset dictionary is needed";
	default: return "unknown inflate error";
	}
}
#endif

enum { ENG_OK, ENG_MEMBER_END, ENG_BAD, ENG_BAD_WRAPPER };

/*
 * One call of the inflater on the buffered input into out (room bytes):
 * *produced bytes written, the input advanced. ENG_BAD* fill what.
 */
static int engine_run(gzin *z, unsigned char *out, uint32_t room, uint32_t *produced, char *what,
		      size_t whatlen)
{
#ifdef SR_HAVE_ISAL
	if (z->backend == GZIN_ISAL) {
		struct inflate_state *st = z->st;
		int rc;

		/* reserved header flag bits (RFC 1952, FLG bits 5-7): zlib refuses them; ISA-L reads
		   past them and ends the member early or runs out of input (afl++ found it), so a
		   member with them is refused here as zlib refuses it */
		if (z->member_head) {
			if (z->avail < 4 && !z->eof)
				(void)refill(z);   /* a read error shows on the next refill */
			if (z->avail >= 4 && (z->next[3] & 0xE0)) {
				*produced = 0;
				snprintf(what, whatlen, "isa-l: unknown header flags set");
				return ENG_BAD_WRAPPER;
			}
			if (z->avail >= 4 || z->eof)
				z->member_head = 0;
		}
		st->next_in = z->next;
		st->avail_in = (uint32_t)z->avail;
		st->next_out = out;
		st->avail_out = room;
		rc = isal_inflate(st);
		*produced = room - st->avail_out;
		z->next = st->next_in;
		z->avail = st->avail_in;
		if (rc < 0) {
			snprintf(what, whatlen, "isa-l: %s", isal_msg(rc));
			return rc == ISAL_INVALID_WRAPPER || rc == ISAL_UNSUPPORTED_METHOD ? ENG_BAD_WRAPPER : ENG_BAD;
		}
		return st->block_state == ISAL_BLOCK_FINISH ? ENG_MEMBER_END : ENG_OK;
	}
#endif
	{
		z_stream *zs = &z->zs;
		int rc;

		zs->next_in = z->next;
		zs->avail_in = (uInt)z->avail;
		zs->next_out = out;
		zs->avail_out = room;
		rc = inflate(zs, Z_NO_FLUSH);
		*produced = room - zs->avail_out;
		z->next = zs->next_in;
		z->avail = zs->avail_in;
		if (rc == Z_STREAM_END)
			return ENG_MEMBER_END;
		if (rc == Z_OK || rc == Z_BUF_ERROR)
			return ENG_OK;
		snprintf(what, whatlen, "zlib: %s", zs->msg ? zs->msg : rc == Z_NEED_DICT ? "a preset dictionary is needed" : "inflate error");
		return ENG_BAD;
	}
}

/*
 * The first member's wrapper is not one ISA-L takes: start over from the first
 * byte with zlib, which then decides (nothing has been handed out yet).
 */
static int fall_back(gzin *z)
{
	if (fseeko(z->f, 0, SEEK_SET) != 0)
		return -1;
	clearerr(z->f);
	z->eof = 0;
	z->avail = 0;
	z->next = z->in;
	z->backend = GZIN_ZLIB;
	return engine_reset(z);
}

/* The member loop, the same for both inflaters. */
static enum gzin_result read_gz(gzin *z, unsigned char *buf, size_t n, size_t *got, char *what,
				size_t whatlen)
{
	*got = 0;
	while (*got < n) {
		uint32_t room, produced;
		size_t before_in;
		int rc;

		if (z->member_done) {
			/* another member follows only if the next bytes are a gzip magic */
			if (z->avail < 2 && !z->eof && refill(z) < 0)
				goto read_error;
			if (z->avail >= 2 && z->next[0] == 0x1f && z->next[1] == 0x8b) {
				if (engine_reset(z) != 0) {
					snprintf(what, whatlen, "cannot restart the inflater");
					return GZIN_ERROR;
				}
				z->member_done = 0;
				continue;
			}
			/* the end, possibly with bytes that are not gzip (ignored, as zlib's gzread does) */
			snprintf(what, whatlen, "got %zu of %zu bytes", *got, n);
			return GZIN_END;
		}
		if (z->avail == 0 && !z->eof && refill(z) < 0)
			goto read_error;
		room = n - *got > (1u << 30) ? (1u << 30) : (uint32_t)(n - *got);
		before_in = z->avail;
		rc = engine_run(z, buf + *got, room, &produced, what, whatlen);
		*got += produced;
		if (produced)
			z->started = 1;
		if (rc == ENG_BAD_WRAPPER && !z->started) {
			if (fall_back(z) != 0)
				goto read_error;
			continue;
		}
		if (rc == ENG_BAD || rc == ENG_BAD_WRAPPER)
			return GZIN_CORRUPT;
		if (rc == ENG_MEMBER_END) {
			z->member_done = 1;
			continue;
		}
		if (produced == 0 && before_in == z->avail) {
			/* no progress: more input, or none left in the middle of a member */
			if (z->eof) {
				snprintf(what, whatlen, "got %zu of %zu bytes; the gzip stream ends early", *got, n);
				return GZIN_SHORT;
			}
			if (z->avail == GZIN_BUF) {
				snprintf(what, whatlen, "%s: no progress on a full input buffer",
					 gzin_backend_name(z));
				return GZIN_CORRUPT;
			}
			if (refill(z) < 0)
				goto read_error;
		}
	}
	return GZIN_OK;
read_error:
	snprintf(what, whatlen, "%s", strerror(errno ? errno : EIO));
	return GZIN_ERROR;
}

/*
 * ISA-L and zlib find damage at different points: zlib refuses reserved header flags that
 * ISA-L reads past, and checks the CRC-32 as soon as its 4 bytes are in, where ISA-L waits
 * for the whole trailer (so a cut trailer is "short" to one, "corrupt" to the other). So
 * that a file gets one verdict whichever inflater is built in, ISA-L's failures are read
 * again from the start by zlib, whose verdict and message are given (afl++ found the two
 * disagreeing). Only on the failure path; if zlib reads the file cleanly, ISA-L's stays.
 */
static enum gzin_result zlib_verdict(const gzin *z, enum gzin_result r, char *what, size_t whatlen)
{
	unsigned char *scratch;
	char zwhat[512];
	gzin *zz;
	sr_err e;
	enum gzin_result zr;

	sr_err_init(&e, NULL, NULL);
	if (gzin_open(z->path, GZIN_ZLIB, &zz, &e) != SR_OK)
		return r;
	scratch = xmalloc(65536);
	do
		zr = read_gz(zz, scratch, 65536, &(size_t){ 0 }, zwhat, sizeof zwhat);
	while (zr == GZIN_OK);
	free(scratch);
	gzin_close(zz);
	if (zr != GZIN_SHORT && zr != GZIN_CORRUPT)
		return r;
	snprintf(what, whatlen, "%s", zwhat);
	return zr;
}

enum gzin_result gzin_read(gzin *z, void *buf, size_t n, size_t *got, char *what, size_t whatlen)
{
	size_t dummy;
	enum gzin_result r;

	if (!got)
		got = &dummy;
	*got = 0;
	if (n == 0)
		return GZIN_OK;
	if (z->ended) {
		snprintf(what, whatlen, "got 0 of %zu bytes", n);
		return GZIN_END;
	}
	if (!z->gz)
		r = read_plain(z, buf, n, got, what, whatlen);
	else
		r = read_gz(z, buf, n, got, what, whatlen);
	if ((r == GZIN_SHORT || r == GZIN_CORRUPT) && z->backend == GZIN_ISAL)
		r = zlib_verdict(z, r, what, whatlen);
	if (r != GZIN_OK)
		z->ended = 1;
	return r;
}

enum gzin_result gzin_skip(gzin *z, uint64_t n, char *what, size_t whatlen)
{
	unsigned char scratch[16384];

	if (!z->gz && !z->ended) {
		if (fseeko(z->f, (off_t)n, SEEK_CUR) != 0) {
			snprintf(what, whatlen, "%s", strerror(errno ? errno : EIO));
			return GZIN_ERROR;
		}
		return GZIN_OK;
	}
	while (n > 0) {
		size_t k = n > sizeof scratch ? sizeof scratch : (size_t)n;
		enum gzin_result r = gzin_read(z, scratch, k, NULL, what, whatlen);

		if (r != GZIN_OK)
			return r;
		n -= k;
	}
	return GZIN_OK;
}

enum gzin_result gzin_finish(gzin *z, char *what, size_t whatlen)
{
	unsigned char *scratch;
	enum gzin_result r;

	if (!z->gz)
		return GZIN_END;
	scratch = xmalloc(65536);
	do
		r = gzin_read(z, scratch, 65536, NULL, what, whatlen);
	while (r == GZIN_OK);
	free(scratch);
	return r;
}
