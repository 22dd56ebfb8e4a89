/* sbuf.c - a growing text buffer: doubling capacity, always NUL-terminated. */
#include "sbuf.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "mem.h"

void sbuf_init(sbuf *b)
{
	b->cap = 4096;
	b->p = xmalloc(b->cap);
	b->p[0] = 0;
	b->n = 0;
}

void sbuf_release(sbuf *b)
{
	free(b->p);
	memset(b, 0, sizeof *b);
}

void sbuf_room(sbuf *b, size_t more)
{
	if (b->p && b->n + more + 1 <= b->cap)
		return;
	if (b->cap == 0)
		b->cap = 64;
	while (b->n + more + 1 > b->cap)
		b->cap *= 2;
	b->p = xrealloc(b->p, b->cap);
}

void sbuf_puts(sbuf *b, const char *s)
{
	size_t k = strlen(s);

	sbuf_room(b, k);
	memcpy(b->p + b->n, s, k + 1);
	b->n += k;
}

void sbuf_printf(sbuf *b, const char *fmt, ...)
{
	va_list ap;
	int k;

	va_start(ap, fmt);
	k = vsnprintf(b->p ? b->p + b->n : NULL, b->p ? b->cap - b->n : 0, fmt, ap);
	va_end(ap);
	if (k < 0)
		return;
	if (!b->p || (size_t)k >= b->cap - b->n) {
		sbuf_room(b, (size_t)k);
		va_start(ap, fmt);
		vsnprintf(b->p + b->n, b->cap - b->n, fmt, ap);
		va_end(ap);
	}
	b->n += (size_t)k;
}
