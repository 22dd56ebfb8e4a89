/* test_readall.c - a whole file into memory: content, the size limit at its edge, open and read errors. */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "io/readall.h"
#include "testlib.h"

static void put(const char *path, size_t n)
{
	FILE *f = fopen(path, "wb");
	size_t i;

	for (i = 0; f && i < n; i++)
		fputc('a' + (int)(i % 26), f);
	if (f)
		fclose(f);
}

int main(void)
{
	char dir[] = "/tmp/sr_readall_XXXXXX", path[64];
	char *buf;
	size_t len, i;
	int rc, ok = 1;

	if (!mkdtemp(dir)) {
		CHECK(0, "mkdtemp");
		return 1;
	}
	snprintf(path, sizeof path, "%s/f", dir);
	put(path, 200000);   /* past the first 64 KiB chunk, twice doubled */
	rc = readall_file(path, 0, &buf, &len);
	CHECK(rc == READALL_OK && len == 200000 && buf && buf[len] == 0, "200000 bytes, NUL after them (rc %d)", rc);
	for (i = 0; rc == READALL_OK && i < len; i++)
		ok &= buf[i] == 'a' + (int)(i % 26);
	CHECK(ok, "every byte as written");
	free(buf);
	put(path, 100);
	rc = readall_file(path, 100, &buf, &len);
	CHECK(rc == READALL_OK && len == 100, "exactly the limit is allowed (rc %d, len %zu)", rc, len);
	free(buf);
	rc = readall_file(path, 99, &buf, &len);
	CHECK(rc == READALL_ETOOBIG && buf == NULL, "one byte over the limit is refused (rc %d)", rc);
	put(path, 0);
	rc = readall_file(path, 10, &buf, &len);
	CHECK(rc == READALL_OK && len == 0 && buf && buf[0] == 0, "an empty file is an empty string");
	free(buf);
	unlink(path);
	errno = 0;
	rc = readall_file(path, 0, &buf, &len);
	CHECK(rc == READALL_EOPEN && errno == ENOENT && buf == NULL, "a missing file: EOPEN with ENOENT (rc %d, %s)", rc,
	      strerror(errno));
	errno = 0;
	rc = readall_file(dir, 0, &buf, &len);
	CHECK(rc == READALL_EREAD && errno == EISDIR, "a directory: EREAD with EISDIR (rc %d, %s)", rc, strerror(errno));
	rmdir(dir);
	return TEST_DONE();
}
