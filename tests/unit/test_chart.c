/* test_chart.c - the report's colour map (published viridis entries), nice axis ticks and tick labels. */
#include <math.h>
#include <string.h>

#include "report/chart.h"
#include "testlib.h"

static void test_viridis(void)
{
	unsigned char c[3];

	/*
	 * Published table values (matplotlib's _cm_listed.py, van der Walt & Smith 2015):
	 * entry 0 = (0.267004, 0.004874, 0.329415), entry 128 = (0.127568, 0.566949, 0.550556),
	 * entry 255 = (0.993248, 0.906157, 0.143936). Compared after 8-bit rounding (+-1).
	 */
	chart_viridis(0.0, c);
	CHECK(abs(c[0] - 68) <= 1 && abs(c[1] - 1) <= 1 && abs(c[2] - 84) <= 1,
	      "viridis(0) = 255 * (0.267004, 0.004874, 0.329415) (got %d %d %d)", c[0], c[1], c[2]);
	chart_viridis(1.0, c);
	CHECK(abs(c[0] - 253) <= 1 && abs(c[1] - 231) <= 1 && abs(c[2] - 37) <= 1,
	      "viridis(1) = 255 * (0.993248, 0.906157, 0.143936) (got %d %d %d)", c[0], c[1], c[2]);
	chart_viridis(128.0 / 255.0, c);
	CHECK(abs(c[0] - 33) <= 2 && abs(c[1] - 145) <= 2 && abs(c[2] - 140) <= 2,
	      "viridis(128/255) = 255 * (0.127568, 0.566949, 0.550556) (got %d %d %d)", c[0], c[1], c[2]);
	chart_viridis(-3, c);
	CHECK(c[0] == 68 && c[2] == 84, "below 0 clamps to the first colour");
	chart_viridis(NAN, c);
	CHECK(c[0] == 68 && c[2] == 84, "NaN gives the first colour");
	{
		/* perceived lightness rises monotonically along viridis (its design goal);
		 * Rec. 709 luma as a proxy (common practice) */
		int i, mono = 1;
		double prev = -1;

		for (i = 0; i <= 64; i++) {
			double y;

			chart_viridis(i / 64.0, c);
			y = 0.2126 * c[0] + 0.7152 * c[1] + 0.0722 * c[2];
			if (y < prev - 0.5)
				mono = 0;
			prev = y;
		}
		CHECK(mono, "luma increases along the map");
	}
}

static void test_ticks(void)
{
	double t[32], step;
	size_t n;

	/* Heckbert 1990 "nice numbers": [0, 1] with ~5 intervals -> step 0.2, 0 .. 1 */
	n = chart_ticks(0, 1, 6, t, 32, &step);
	CHECK(n == 6 && fabs(step - 0.2) < 1e-12 && t[0] == 0 && fabs(t[5] - 1) < 1e-12,
	      "ticks for [0, 1]: 0, 0.2, ..., 1 (n %zu, step %g)", n, step);
	/* by hand, Heckbert's steps: range nice(2.77) = 5, step nice(5 / 4, rounded) = 1,
	 * graph from floor(-0.37) = -1 to ceil(2.4) = 3 */
	n = chart_ticks(-0.37, 2.4, 5, t, 32, &step);
	CHECK(n == 5 && step == 1 && t[0] == -1 && t[4] == 3, "ticks for [-0.37, 2.4]: -1, 0, 1, 2, 3 (n %zu, step %g, %g..%g)",
	      n, step, t[0], t[n - 1]);
	n = chart_ticks(3, 3, 5, t, 32, &step);
	CHECK(n >= 2 && t[0] <= 3 && t[n - 1] >= 3, "a single value still gets an axis");
	n = chart_ticks(-0.3, 0.3, 5, t, 32, &step);
	{
		size_t i, zero = 0;

		for (i = 0; i < n; i++)
			zero += t[i] == 0 && !signbit(t[i]);
		CHECK(zero == 1, "0 is a tick and printed as 0, not -0 or 1e-17");
	}
	CHECK(chart_ticks(NAN, 1, 5, t, 32, &step) == 0, "no ticks for a NaN range");
}

static void test_format(void)
{
	char buf[32];

	CHECK(chart_decimals(1) == 0 && chart_decimals(20) == 0, "steps >= 1: no decimals");
	CHECK(chart_decimals(0.5) == 1 && chart_decimals(0.2) == 1 && chart_decimals(0.1) == 1, "0.5 0.2 0.1: one decimal");
	CHECK(chart_decimals(0.25) == 2 && chart_decimals(0.02) == 2, "0.25 and 0.02: two decimals (got %d %d)",
	      chart_decimals(0.25), chart_decimals(0.02));
	CHECK(chart_decimals(0.05 / 10) == 3, "a tenth of 0.05: three decimals (got %d)", chart_decimals(0.005));
	chart_format(-5.26e-05, 2, buf, sizeof buf);
	CHECK(strcmp(buf, "0.00") == 0, "-5.26e-05 at two decimals is 0.00, not -0.00 or 5e-05 (got %s)", buf);
	chart_format(-0.0349, 2, buf, sizeof buf);
	CHECK(strcmp(buf, "-0.03") == 0, "-0.0349 at two decimals (got %s)", buf);
	chart_format(1.5e-17, 1, buf, sizeof buf);
	CHECK(strcmp(buf, "0.0") == 0, "a tick of 1.5e-17 prints 0.0 (got %s)", buf);
	chart_format(2.046, 0, buf, sizeof buf);
	CHECK(strcmp(buf, "2") == 0, "no decimals (got %s)", buf);
}

int main(void)
{
	test_viridis();
	test_ticks();
	test_format();
	return TEST_DONE();
}
