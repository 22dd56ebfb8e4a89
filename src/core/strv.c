/* strv.c - a growing vector of owned strings; the comparators every sort of names and labels uses. */
#include "strv.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "mem.h"

void strv_push(strv *sv, const char *s)
{
	XGROW(sv->v, sv->n, sv->cap);
	sv->v[sv->n++] = xstrdup(s);
}

int strv_contains(const strv *sv, const char *s)
{
	size_t i;

	for (i = 0; i < sv->n; i++)
		if (strcmp(sv->v[i], s) == 0)
			return 1;
	return 0;
}

void strv_sort(strv *sv)
{
	if (sv->n > 1)
		qsort(sv->v, sv->n, sizeof *sv->v, strv_cmp);
}

void strv_free_array(char **v, size_t n)
{
	size_t i;

	if (!v)
		return;
	for (i = 0; i < n; i++)
		free(v[i]);
	free(v);
}

void strv_free(strv *sv)
{
	strv_free_array(sv->v, sv->n);
	memset(sv, 0, sizeof *sv);
}

size_t strv_split(strv *sv, const char *s, const char *seps, int keep_empty)
{
	size_t added = 0;

	for (;;) {
		size_t len = strcspn(s, seps), a = 0, b = len;

		while (a < b && (s[a] == ' ' || s[a] == '\t'))
			a++;
		while (b > a && (s[b - 1] == ' ' || s[b - 1] == '\t'))
			b--;
		if (b > a || keep_empty) {
			char *piece = xmalloc(b - a + 1);

			memcpy(piece, s + a, b - a);
			piece[b - a] = '\0';
			XGROW(sv->v, sv->n, sv->cap);
			sv->v[sv->n++] = piece;
			added++;
		}
		if (!s[len])
			return added;
		s += len + 1;
	}
}

int strv_cmp(const void *a, const void *b)
{
	return strcmp(*(char *const *)a, *(char *const *)b);
}

int strv_cmp_i32(const void *a, const void *b)
{
	int32_t x = *(const int32_t *)a, y = *(const int32_t *)b;

	return (x > y) - (x < y);
}

int strv_cmp_double(const void *a, const void *b)
{
	double x = *(const double *)a, y = *(const double *)b;

	return (x > y) - (x < y);
}
