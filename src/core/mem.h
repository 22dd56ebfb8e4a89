/* mem.h - overflow-checked allocation; the one place besides main that may end the process. */
#ifndef SR_MEM_H
#define SR_MEM_H

#include <stddef.h>

/* Allocate or die with a message on stderr (out of memory is not recoverable here). */
void *xmalloc(size_t n);
void *xcalloc(size_t n, size_t size);
void *xrealloc(void *p, size_t n);
char *xstrdup(const char *s);

/* n * size, ending the process on overflow. */
void *xmalloc_array(size_t n, size_t size);

/* Returns 0 and sets *out = a * b, or returns -1 when the product overflows size_t. */
int sr_mul_size(size_t a, size_t b, size_t *out);

#endif
