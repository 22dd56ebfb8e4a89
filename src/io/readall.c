/* readall.c - a whole file into memory, in doubling chunks, with an optional size limit. */
#include "readall.h"

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>

#include "../core/mem.h"

int readall_file(const char *path, size_t max, char **buf, size_t *len)
{
	FILE *f = fopen(path, "rb");
	size_t cap = 65536, n = 0, want;
	char *b;
	int err;

	*buf = NULL;
	*len = 0;
	if (!f)
		return READALL_EOPEN;
	if (max && cap > max + 1)
		cap = max + 1;
	b = xmalloc(cap + 1);
	for (;;) {
		want = cap - n;
		n += fread(b + n, 1, want, f);
		if (n < cap || (max && n > max))
			break;
		cap *= 2;
		if (max && cap > max + 1)
			cap = max + 1;
		b = xrealloc(b, cap + 1);
	}
	if (ferror(f)) {
		err = errno;
		fclose(f);
		free(b);
		errno = err;
		return READALL_EREAD;
	}
	fclose(f);
	if (max && n > max) {
		free(b);
		return READALL_ETOOBIG;
	}
	b[n] = '\0';
	*buf = b;
	*len = n;
	return READALL_OK;
}
