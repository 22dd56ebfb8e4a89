/* test_strv.c - the string vector, its split, the shared comparators and the XGROW macro. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "core/mem.h"
#include "core/strv.h"
#include "testlib.h"

static void test_push_sort(void)
{
	strv sv = {0};
	char buf[8] = "mel";
	size_t i;
	int sorted = 1;

	strv_push(&sv, buf);
	buf[0] = 'X';   /* push copies: the vector keeps "mel" */
	strv_push(&sv, "scrambled");
	strv_push(&sv, "Melody");
	strv_push(&sv, "familiar");
	strv_push(&sv, "");
	CHECK(sv.n == 5 && sv.cap >= 5, "five pushed (n %zu, cap %zu)", sv.n, sv.cap);
	CHECK(strcmp(sv.v[0], "mel") == 0, "push copies the string (got '%s')", sv.v[0]);
	CHECK(strv_contains(&sv, "Melody") && strv_contains(&sv, "") && !strv_contains(&sv, "melody"),
	      "contains is exact and case-sensitive");
	strv_sort(&sv);
	/* by bytes: "" < "Melody" (M = 0x4d) < "familiar" < "mel" < "scrambled" */
	CHECK(strcmp(sv.v[0], "") == 0 && strcmp(sv.v[1], "Melody") == 0 && strcmp(sv.v[2], "familiar") == 0 &&
		      strcmp(sv.v[3], "mel") == 0 && strcmp(sv.v[4], "scrambled") == 0,
	      "sorted by bytes: upper case before lower case");
	for (i = 1; i < sv.n; i++)
		sorted &= strcmp(sv.v[i - 1], sv.v[i]) <= 0;
	CHECK(sorted, "every neighbour pair in order");
	strv_free(&sv);
	CHECK(sv.v == NULL && sv.n == 0 && sv.cap == 0, "free zeroes the vector");
	strv_free(&sv);
	CHECK(1 + sv.n == 1, "freeing an empty vector again is allowed (n stays %zu)", sv.n);
}

static void test_many(void)
{
	strv sv = {0};
	char name[16];
	size_t i;
	int ok = 1;

	for (i = 0; i < 1000; i++) {
		snprintf(name, sizeof name, "p%04zu", 999 - i);
		strv_push(&sv, name);
	}
	strv_sort(&sv);
	for (i = 0; i < 1000; i++) {
		snprintf(name, sizeof name, "p%04zu", i);
		ok &= strcmp(sv.v[i], name) == 0;
	}
	CHECK(sv.n == 1000 && ok, "1000 pushed in reverse come out sorted");
	CHECK(sv.cap == 1024, "capacity doubled from 8 to 1024 (got %zu)", sv.cap);
	strv_free(&sv);
}

static void test_split(void)
{
	strv sv = {0};
	size_t k;

	k = strv_split(&sv, "01, 02 ,,07", ",", 0);
	CHECK(k == 3 && sv.n == 3, "three non-empty pieces (got %zu)", k);
	CHECK(k == 3 && strcmp(sv.v[0], "01") == 0 && strcmp(sv.v[1], "02") == 0 && strcmp(sv.v[2], "07") == 0,
	      "pieces trimmed of spaces");
	strv_free(&sv);
	k = strv_split(&sv, "a,,b,", ",", 1);
	CHECK(k == 4 && strcmp(sv.v[1], "") == 0 && strcmp(sv.v[3], "") == 0,
	      "keep_empty keeps the empty middle and trailing pieces (%zu)", k);
	strv_free(&sv);
	k = strv_split(&sv, "", ",", 0);
	CHECK(k == 0 && sv.n == 0, "an empty text gives nothing without keep_empty");
	k = strv_split(&sv, "\t 01 \t", ", \t", 0);
	CHECK(k == 1 && strcmp(sv.v[0], "01") == 0, "several separators: one piece '01'");
	k = strv_split(&sv, "x y", ",", 0);
	CHECK(k == 1 && sv.n == 2 && strcmp(sv.v[1], "x y") == 0, "split appends; inner spaces stay");
	strv_free(&sv);
}

static void test_cmp(void)
{
	int32_t iv[] = {7, -3, INT32_MAX, 0, INT32_MIN, 7};
	double dv[] = {2.5, -1e300, 0.0, -0.0, 1e-300, -7.25};
	const char *key = "novel";
	const char *names[] = {"familiar", "melody", "novel", "scrambled"};
	const char **hit;
	int32_t k32 = 0;
	size_t i;
	int ok = 1;

	qsort(iv, 6, sizeof *iv, strv_cmp_i32);
	for (i = 1; i < 6; i++)
		ok &= iv[i - 1] <= iv[i];
	CHECK(ok && iv[0] == INT32_MIN && iv[5] == INT32_MAX, "int32 sort, extremes without overflow");
	CHECK(bsearch(&k32, iv, 6, sizeof *iv, strv_cmp_i32) != NULL, "bsearch finds 0");
	qsort(dv, 6, sizeof *dv, strv_cmp_double);
	ok = 1;
	for (i = 1; i < 6; i++)
		ok &= dv[i - 1] <= dv[i];
	CHECK(ok && dv[0] == -1e300 && dv[5] == 2.5, "double sort ascending");
	CHECK(strv_cmp_double(&(double){NAN}, &(double){1.0}) == 0, "NaN ties with everything");
	hit = bsearch(&key, names, 4, sizeof *names, strv_cmp);
	CHECK(hit && hit - names == 2, "strv_cmp works for bsearch on char * arrays");
	CHECK(strv_cmp(&names[0], &names[1]) < 0 && strv_cmp(&names[1], &names[0]) > 0 &&
		      strv_cmp(&names[2], &names[2]) == 0,
	      "strv_cmp signs");
}

static void test_xgrow(void)
{
	int *v = NULL, n = 0, cap = 0, i, ok = 1;

	for (i = 0; i < 100; i++) {
		XGROW(v, n, cap);
		v[n++] = i * i;
	}
	for (i = 0; i < 100; i++)
		ok &= v[i] == i * i;
	CHECK(ok && n == 100 && cap == 128, "XGROW: 100 kept, capacity 128 (got %d)", cap);
	free(v);
}

/*
 * A bare array of owned strings (what bids_subjects and the study reader hand
 * out) is released by strv_free_array; a leak or double free here shows under
 * make check-asan and check-valgrind, and a NULL array with n > 0 must not be read.
 */
static void test_free_array(void)
{
	strv sv = {0};
	char **v;
	size_t n;

	strv_split(&sv, "tones, memory,familiar", ",", 0);
	v = sv.v;
	n = sv.n;
	CHECK(n == 3 && strcmp(v[1], "memory") == 0, "three pieces to hand over (n %zu)", n);
	sv.v = NULL;
	sv.n = sv.cap = 0;
	strv_free_array(v, n);
	strv_free_array(NULL, 3);
	strv_free_array(xmalloc(1), 0);
	strv_free(&sv);
	CHECK(sv.v == NULL && sv.n == 0, "the emptied vector stays empty after strv_free");
}

int main(void)
{
	test_push_sort();
	test_many();
	test_split();
	test_cmp();
	test_xgrow();
	test_free_array();
	return TEST_DONE();
}
