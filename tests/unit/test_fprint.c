/* test_fprint.c - content fingerprints: known CRC-32 values, a change of content changes them, a
 * change of modification time does not; gzip files by their trailer; errors name the file. */
#include <fcntl.h>
#include <string.h>
#include <sys/stat.h>
#include <zlib.h>

#include "io/fprint.h"
#include "testlib.h"
#include "tfiles.h"

/* Sets path's modification time to t seconds after the epoch. */
static int set_mtime(const char *path, time_t t)
{
	struct timespec ts[2] = { { t, 0 }, { t, 0 } };

	return utimensat(AT_FDCWD, path, ts, 0);
}

/* Writes text gzipped (one member) to path with zlib. */
static void write_gz(const char *path, const char *text)
{
	gzFile g = gzopen(path, "wb");

	gzwrite(g, text, (unsigned)strlen(text));
	gzclose(g);
}

static void test_plain(const char *dir)
{
	char a[96], b[96], *p;
	struct stat st;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	/* CRC-32 check value of "123456789" is cbf43926 (the standard check value, also given
	 * by Python's zlib.crc32); "" is 00000000 */
	p = tf_write(dir, "check.txt", "123456789", 0);
	CHECK(fprint_file(p, 0, a, sizeof a, &e) == SR_OK && strcmp(a, "crc32 9 cbf43926") == 0,
	      "'123456789' -> 'crc32 9 cbf43926' (got '%s')", a);
	free(p);
	p = tf_write(dir, "empty.txt", "", 0);
	CHECK(fprint_file(p, 0, a, sizeof a, &e) == SR_OK && strcmp(a, "crc32 0 00000000") == 0,
	      "an empty file -> 'crc32 0 00000000' (got '%s')", a);
	free(p);

	p = tf_write(dir, "events.tsv", "onset\tduration\ttrial_type\n0\t12\tmelody\n", 0);
	set_mtime(p, 1000000000);
	fprint_file(p, 0, a, sizeof a, &e);
	set_mtime(p, 1700000000);
	CHECK(stat(p, &st) == 0 && st.st_mtime == 1700000000, "the modification time moved");
	fprint_file(p, 0, b, sizeof b, &e);
	CHECK(strcmp(a, b) == 0, "a new modification time keeps the fingerprint ('%s')", b);
	/* the same size, one letter different */
	free(tf_write(dir, "events.tsv", "onset\tduration\ttrial_type\n0\t12\tmelodY\n", 0));
	set_mtime(p, 1700000000);
	fprint_file(p, 0, b, sizeof b, &e);
	CHECK(strcmp(a, b) != 0, "one changed letter, same size and time, changes it ('%s' vs '%s')", a, b);
	/* longer content: the size changes too */
	free(tf_write(dir, "events.tsv", "onset\tduration\ttrial_type\n0\t12\tmelody\n24\t12\tscrambled\n", 0));
	fprint_file(p, 0, b, sizeof b, &e);
	CHECK(strcmp(a, b) != 0 && strncmp(b, "crc32 54 ", 9) == 0, "an added line (38 + 16 bytes) changes it ('%s')", b);
	CHECK(fprint_file(p, 1, a, sizeof a, &e) == SR_OK && strcmp(a, b) == 0,
	      "whole = 1 gives the same for a file that is not gzip");
	free(p);

	/* a file bigger than the 64 KiB read buffer, changed in its last byte */
	{
		static char big[200001];
		memset(big, 'a', sizeof big - 1);
		p = tf_write(dir, "big.bin", big, sizeof big - 1);
		fprint_file(p, 0, a, sizeof a, &e);
		big[sizeof big - 2] = 'b';
		free(tf_write(dir, "big.bin", big, sizeof big - 1));
		fprint_file(p, 0, b, sizeof b, &e);
		CHECK(strncmp(a, "crc32 200000 ", 13) == 0 && strcmp(a, b) != 0,
		      "the last byte of a 200000-byte file counts ('%s' vs '%s')", a, b);
		free(p);
	}
	/* starts like gzip but is too short for a trailer: hashed whole */
	p = tf_write(dir, "short.gz", "\x1f\x8b\x08", 3);
	CHECK(fprint_file(p, 0, a, sizeof a, &e) == SR_OK && strncmp(a, "crc32 3 ", 8) == 0,
	      "a 3-byte file starting 1f 8b is hashed whole ('%s')", a);
	free(p);
}

static void test_gzip(const char *dir)
{
	char path[4200], a[96], b[96], want[96];
	struct stat st;
	FILE *f;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	snprintf(path, sizeof path, "%s/bold.nii.gz", dir);
	write_gz(path, "123456789");
	stat(path, &st);
	/* the trailer holds the CRC-32 and the length of the uncompressed data (RFC 1952) */
	snprintf(want, sizeof want, "gz %lld cbf43926 9", (long long)st.st_size);
	CHECK(fprint_file(path, 0, a, sizeof a, &e) == SR_OK && strcmp(a, want) == 0,
	      "gzip of '123456789' -> '%s' (got '%s')", want, a);
	CHECK(fprint_file(path, 1, b, sizeof b, &e) == SR_OK && strncmp(b, "crc32 ", 6) == 0,
	      "whole = 1 hashes the compressed bytes instead ('%s')", b);

	/* rewrite the gzip header's own time stamp (bytes 4..7): the content is the same */
	f = fopen(path, "r+b");
	fseek(f, 4, SEEK_SET);
	fputc(0x12, f), fputc(0x34, f), fputc(0x56, f), fputc(0x78, f);
	fclose(f);
	set_mtime(path, 1234567890);
	fprint_file(path, 0, b, sizeof b, &e);
	CHECK(strcmp(a, b) == 0, "new header and file times keep the gzip fingerprint ('%s')", b);
	fprint_file(path, 1, b, sizeof b, &e);
	fprint_file(path, 1, want, sizeof want, &e);
	CHECK(strcmp(b, want) == 0, "the same file gives the same text twice");

	write_gz(path, "123456780");
	fprint_file(path, 0, b, sizeof b, &e);
	CHECK(strcmp(a, b) != 0 && strstr(b, " 9") != NULL, "one changed digit changes it ('%s')", b);
}

static void test_errors(const char *dir)
{
	char path[4200], a[96];
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	snprintf(path, sizeof path, "%s/nothere.tsv", dir);
	CHECK(fprint_file(path, 0, a, sizeof a, &e) == SR_EIO && strstr(e.msg, path) &&
		      strstr(e.msg, "cannot open"),
	      "a missing file is SR_EIO naming it: %s", e.msg);
	CHECK(fprint_file(dir, 0, a, sizeof a, &e) == SR_EIO && strstr(e.msg, dir) &&
		      strstr(e.msg, "not a regular file"),
	      "a folder is SR_EIO: %s", e.msg);
}

int main(void)
{
	char *dir = tf_tmpdir();

	test_plain(dir);
	test_gzip(dir);
	test_errors(dir);
	tf_rmtree(dir);
	free(dir);
	return TEST_DONE();
}
