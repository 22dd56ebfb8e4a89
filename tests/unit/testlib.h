/* testlib.h - tiny test harness: each check prints "ok - name" or "not ok - name: detail". */
#ifndef SR_TESTLIB_H
#define SR_TESTLIB_H

#include <math.h>
#include <stdio.h>
#include <stdlib.h>

static int tl_failed;
static int tl_passed;

#define CHECK(cond, ...)                                                     \
	do {                                                                 \
		if (cond) {                                                  \
			tl_passed++;                                         \
			printf("ok - ");                                     \
		} else {                                                     \
			tl_failed++;                                         \
			printf("not ok - %s:%d: ", __FILE__, __LINE__);      \
		}                                                            \
		printf(__VA_ARGS__);                                         \
		printf("\n");                                                \
	} while (0)

/* Relative closeness: |a - b| <= rtol * max(|a|, |b|, floor). Prints both values. */
static inline int tl_close(double a, double b, double rtol, double floor_)
{
	double s = fabs(a) > fabs(b) ? fabs(a) : fabs(b);

	if (isnan(a) && isnan(b))
		return 1;
	if (s < floor_)
		s = floor_;
	return fabs(a - b) <= rtol * s;
}

#define CHECK_CLOSE(a, b, rtol, name)                                              \
	do {                                                                       \
		double tl_a = (a), tl_b = (b);                                     \
		CHECK(tl_close(tl_a, tl_b, (rtol), 1e-300), "%s (%.12g vs %.12g)", \
		      (name), tl_a, tl_b);                                         \
	} while (0)

/* Absolute closeness, for values near zero. */
#define CHECK_NEAR(a, b, atol, name)                                            \
	do {                                                                    \
		double tl_a = (a), tl_b = (b);                                  \
		CHECK(fabs(tl_a - tl_b) <= (atol), "%s (%.12g vs %.12g)", (name), \
		      tl_a, tl_b);                                              \
	} while (0)

#define TEST_DONE() (tl_failed ? 1 : 0)

#endif
