/* mem.c - allocation wrappers that check sizes and never return NULL. */
#include "mem.h"

#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static void die_nomem(size_t n)
{
	fprintf(stderr, "splitroi: out of memory (asked for %zu bytes)\n", n);
	exit(1);
}

void *xmalloc(size_t n)
{
	void *p = malloc(n ? n : 1);

	if (!p)
		die_nomem(n);
	return p;
}

void *xcalloc(size_t n, size_t size)
{
	void *p;

	if (size && n > SIZE_MAX / size)
		die_nomem(SIZE_MAX);
	p = calloc(n ? n : 1, size ? size : 1);
	if (!p)
		die_nomem(n * size);
	return p;
}

void *xrealloc(void *p, size_t n)
{
	void *q = realloc(p, n ? n : 1);

	if (!q)
		die_nomem(n);
	return q;
}

char *xstrdup(const char *s)
{
	size_t n = strlen(s) + 1;
	char *p = xmalloc(n);

	memcpy(p, s, n);
	return p;
}

int sr_mul_size(size_t a, size_t b, size_t *out)
{
	if (b && a > SIZE_MAX / b)
		return -1;
	*out = a * b;
	return 0;
}

void *xmalloc_array(size_t n, size_t size)
{
	size_t total;

	if (sr_mul_size(n, size, &total))
		die_nomem(SIZE_MAX);
	return xmalloc(total);
}

size_t xmul_size(size_t a, size_t b)
{
	size_t total;

	if (sr_mul_size(a, b, &total))
		die_nomem(SIZE_MAX);
	return total;
}
