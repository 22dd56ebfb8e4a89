/* fprint.c - content fingerprints of files: CRC-32 via zlib, or the gzip trailer of a .gz. */
#include "fprint.h"

#include <errno.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <zlib.h>

sr_status fprint_file(const char *path, int whole, char *buf, size_t n, sr_err *e)
{
	FILE *f = fopen(path, "rb");
	unsigned char b[1 << 16];
	struct stat st;
	size_t got;
	uLong crc = crc32(0L, Z_NULL, 0);

	if (!f)
		return sr_fail(e, SR_EIO, "%s: cannot open: %s", path, strerror(errno));
	if (fstat(fileno(f), &st) != 0 || !S_ISREG(st.st_mode)) {
		fclose(f);
		return sr_fail(e, SR_EIO, "%s: not a regular file", path);
	}
	got = fread(b, 1, 2, f);
	if (!whole && got == 2 && b[0] == 0x1f && b[1] == 0x8b && st.st_size >= 18) {
		unsigned char t[8];

		if (fseeko(f, st.st_size - 8, SEEK_SET) != 0 || fread(t, 1, 8, f) != 8) {
			fclose(f);
			return sr_fail(e, SR_EIO, "%s: cannot read the gzip trailer", path);
		}
		fclose(f);
		snprintf(buf, n, "gz %lld %02x%02x%02x%02x %lu", (long long)st.st_size, t[3], t[2], t[1],
			 t[0], (unsigned long)t[4] | (unsigned long)t[5] << 8 | (unsigned long)t[6] << 16 |
				       (unsigned long)t[7] << 24);
		return SR_OK;
	}
	crc = crc32(crc, b, (uInt)got);
	while ((got = fread(b, 1, sizeof b, f)) > 0)
		crc = crc32(crc, b, (uInt)got);
	if (ferror(f)) {
		fclose(f);
		return sr_fail(e, SR_EIO, "%s: read error", path);
	}
	fclose(f);
	snprintf(buf, n, "crc32 %lld %08lx", (long long)st.st_size, (unsigned long)crc);
	return SR_OK;
}
