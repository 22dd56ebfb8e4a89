/* sbuf.h - the one growing text buffer (HTML report pages, slurm scripts, captured command output, PNG bytes). */
#ifndef SR_SBUF_H
#define SR_SBUF_H

#include <stddef.h>

/*
 * p[0..n) is the text, always NUL-terminated once anything was added or
 * sbuf_init ran; cap is the allocated size. A zeroed sbuf ({0}) is a valid empty
 * buffer (p NULL until the first append). Bytes that are not text (the PNG
 * encoder's output) go in with sbuf_room and a copy to p + n, then n grows
 * by their count (no NUL follows them). The functions carry the module's
 * name, sbuf_, as their prefix. Not thread safe: one buffer per thread.
 */
typedef struct sbuf {
	char *p;
	size_t n, cap;
} sbuf;

/* An empty buffer with room for 4 KiB. */
void sbuf_init(sbuf *b);
/* Frees the text and zeroes b (a zeroed b does nothing). */
void sbuf_release(sbuf *b);
/* Makes room for more bytes after n plus the NUL. */
void sbuf_room(sbuf *b, size_t more);
void sbuf_puts(sbuf *b, const char *s);
void sbuf_printf(sbuf *b, const char *fmt, ...) __attribute__((format(printf, 2, 3)));

#endif
