/* mem.h - overflow-checked allocation; the one place besides main that may end the process. */
#ifndef SR_MEM_H
#define SR_MEM_H

#include <stddef.h>

/* Allocate or die with a message on stderr (out of memory is not recoverable here). */
void *xmalloc(size_t n);
void *xcalloc(size_t n, size_t size);
void *xrealloc(void *p, size_t n);
char *xstrdup(const char *s);

/*
 * Makes room for one more element at ptr[n]: when n == cap, cap doubles (8 at
 * first) and ptr is reallocated (xrealloc: overflow-checked, never NULL).
 * ptr, n and cap are evaluated more than once: pass plain lvalues.
 */
#define XGROW(ptr, n, cap)                                                             \
	do {                                                                           \
		if ((n) >= (cap)) {                                                    \
			(cap) = (cap) ? 2 * (cap) : 8;                                 \
			(ptr) = xrealloc((ptr), xmul_size((size_t)(cap), sizeof *(ptr))); \
		}                                                                      \
	} while (0)

/* a * b, ending the process on overflow (used by XGROW). */
size_t xmul_size(size_t a, size_t b);

/* n * size, ending the process on overflow. */
void *xmalloc_array(size_t n, size_t size);

/* Returns 0 and sets *out = a * b, or returns -1 when the product overflows size_t. */
int sr_mul_size(size_t a, size_t b, size_t *out);

#endif
