/* chart.c - the report's colour map and axis ticks (numbers to pixels and labels; no I/O). */
#include "chart.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

/*
 * viridis at nine evenly spaced positions (entries 0, 32, 64, 96, 128, 159,
 * 191, 223, 255 of the 256-entry table published with matplotlib 1.5 by
 * van der Walt & Smith, 2015; entry 0 = (0.267004, 0.004874, 0.329415),
 * entry 255 = (0.993248, 0.906157, 0.143936)), as 8-bit sRGB. Linear
 * interpolation between them stays within a few units of the full table,
 * which is below what a screen shows.
 */
static const unsigned char viridis9[9][3] = {
	{ 0x44, 0x01, 0x54 }, { 0x47, 0x2d, 0x7b }, { 0x3b, 0x52, 0x8b }, { 0x2c, 0x72, 0x8e },
	{ 0x21, 0x91, 0x8c }, { 0x28, 0xae, 0x80 }, { 0x5e, 0xc9, 0x62 }, { 0xad, 0xdc, 0x30 },
	{ 0xfd, 0xe7, 0x25 },
};

void chart_viridis(double t, unsigned char rgb[3])
{
	double x;
	int i, c;

	if (!(t > 0))
		t = 0;
	if (t > 1)
		t = 1;
	x = t * 8.0;
	i = (int)floor(x);
	if (i >= 8)
		i = 7;
	x -= i;
	for (c = 0; c < 3; c++)
		rgb[c] = (unsigned char)lround(viridis9[i][c] + x * (viridis9[i + 1][c] - viridis9[i][c]));
}

/* Heckbert's nice number: 1, 2, 5 or 10 times a power of ten near x (rounded or not below). */
static double nicenum(double x, int round_it)
{
	double ex = floor(log10(x)), f = x / pow(10, ex), nf;

	if (round_it)
		nf = f < 1.5 ? 1 : f < 3 ? 2 : f < 7 ? 5 : 10;
	else
		nf = f <= 1 ? 1 : f <= 2 ? 2 : f <= 5 ? 5 : 10;
	return nf * pow(10, ex);
}

size_t chart_ticks(double lo, double hi, int target, double *ticks, size_t max, double *step)
{
	double range, d, t0, t1, t;
	size_t n = 0;

	if (!isfinite(lo) || !isfinite(hi)) {
		*step = 0;
		return 0;
	}
	if (hi < lo) {
		d = lo;
		lo = hi;
		hi = d;
	}
	if (hi == lo) {
		lo -= 0.5;
		hi += 0.5;
	}
	if (target < 2)
		target = 2;
	range = nicenum(hi - lo, 0);
	d = nicenum(range / (target - 1), 1);
	/* Heckbert's graph range: floor(lo / d) * d to ceil(hi / d) * d */
	t0 = floor(lo / d) * d;
	t1 = ceil(hi / d) * d;
	*step = d;
	for (t = t0; t <= t1 + 1e-9 * d && n < max; t = t0 + (double)n * d) {
		/* snap -0 and rounding dust to the tick grid */
		double v = round(t / d) * d;

		ticks[n++] = fabs(v) < 1e-12 * d ? 0.0 : v;
	}
	return n;
}

int chart_decimals(double step)
{
	int d;

	step = fabs(step);
	if (!(step > 0) || !isfinite(step) || step >= 1)
		return 0;
	/* the first significant digit of step: 10^-d <= step (with a little slack for 0.1 - 1e-17) */
	d = (int)ceil(-log10(step) - 1e-9);
	/* 0.25 needs 2: keep adding while rounding to d decimals loses the step's digits */
	while (d < 10 && fabs(step * pow(10, d) - round(step * pow(10, d))) > 1e-6 * step * pow(10, d))
		d++;
	return d < 10 ? d : 10;
}

void chart_format(double v, int d, char *buf, size_t n)
{
	if (d < 0)
		d = 0;
	if (!isfinite(v)) {
		snprintf(buf, n, "%s", isnan(v) ? "" : v > 0 ? "inf" : "-inf");
		return;
	}
	if (fabs(v) * pow(10, d) < 0.5)
		v = 0;
	snprintf(buf, n, "%.*f", d, v + 0.0);
	if (buf[0] == '-') {
		/* "-0.000" after rounding: print zero without a sign */
		const char *p = buf + 1;

		while (*p == '0' || *p == '.')
			p++;
		if (!*p)
			memmove(buf, buf + 1, strlen(buf));
	}
}
