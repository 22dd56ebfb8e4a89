/* strv.h - a growing vector of owned strings, and the shared comparators for qsort/bsearch. */
#ifndef SR_STRV_H
#define SR_STRV_H

#include <stddef.h>

/*
 * v[0..n) are heap strings the vector owns (strv_push copies); cap is the
 * allocated length. A zeroed strv ({0}) is a valid empty vector. Not thread
 * safe: one vector per thread, or a lock around it.
 */
typedef struct strv {
	char **v;
	size_t n, cap;
} strv;

/* Appends a copy of s. */
void strv_push(strv *sv, const char *s);
/* 1 when some element equals s (a linear scan; strv_find after strv_sort is faster). */
int strv_contains(const strv *sv, const char *s);
/* Sorts by bytes (strcmp). */
void strv_sort(strv *sv);
/* Frees every string and the array, and zeroes sv (a zeroed sv does nothing). */
void strv_free(strv *sv);
/*
 * Frees v[0..n) and v itself: the one release of a bare array of n owned
 * strings (such as a strv's v and n, or the lists io and pipeline hand out).
 * v == NULL does nothing.
 */
void strv_free_array(char **v, size_t n);
/*
 * Appends the pieces of s between any of the bytes in seps, each trimmed of
 * spaces and tabs at both ends; empty pieces are kept when keep_empty, else
 * dropped. Returns the number of pieces appended.
 */
size_t strv_split(strv *sv, const char *s, const char *seps, int keep_empty);

/* qsort/bsearch comparators: char * by strcmp, int32_t and double ascending ((x > y) - (x < y): NaN ties). */
int strv_cmp(const void *a, const void *b);
int strv_cmp_i32(const void *a, const void *b);
int strv_cmp_double(const void *a, const void *b);

#endif
