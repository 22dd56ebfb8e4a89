/* svg.c - the report's charts as inline SVG: bars with dots, FD traces, colour bar, design. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"
#include "../core/qc.h"
#include "chart.h"
#include "report.h"

/* Fill patterns so bars differ without colour: light solid, hatch, cross-hatch, dots, dark solid. */
static void patterns(sbuf *b, int id)
{
	sbuf_printf(b, "<defs>"
		  "<pattern id=\"p%d-1\" width=\"6\" height=\"6\" patternUnits=\"userSpaceOnUse\" patternTransform=\"rotate(45)\">"
		  "<rect width=\"6\" height=\"6\" fill=\"#f3e3d6\"/><line x1=\"0\" y1=\"0\" x2=\"0\" y2=\"6\" stroke=\"#8a3b12\" stroke-width=\"2\"/></pattern>"
		  "<pattern id=\"p%d-2\" width=\"6\" height=\"6\" patternUnits=\"userSpaceOnUse\">"
		  "<rect width=\"6\" height=\"6\" fill=\"#e4e9ef\"/><path d=\"M0 0L6 6M6 0L0 6\" stroke=\"#2f4a63\" stroke-width=\"1\"/></pattern>"
		  "<pattern id=\"p%d-3\" width=\"5\" height=\"5\" patternUnits=\"userSpaceOnUse\">"
		  "<rect width=\"5\" height=\"5\" fill=\"#eef0e2\"/><circle cx=\"2.5\" cy=\"2.5\" r=\"1.2\" fill=\"#4b5a1e\"/></pattern>"
		  "</defs>\n", id, id, id);
}

static const char *fill_of(int id, size_t i, char *buf, size_t n)
{
	static const char *solid[2] = { "#c9c2b2", "#39424e" };

	switch (i % 5) {
	case 0: return solid[0];
	case 4: return solid[1];
	default:
		snprintf(buf, n, "url(#p%d-%zu)", id, i % 5);
		return buf;
	}
}

/* Vertical axis with ticks and grid lines; returns the data-to-pixel mapping via lo/hi. */
static void yaxis(sbuf *b, double lo, double hi, double x0, double x1, double top, double bottom,
		  const char *label, double *tlo, double *thi, double *ystep)
{
	double ticks[32], step;
	size_t nt = chart_ticks(lo, hi, 5, ticks, 32, &step), i;

	*tlo = nt ? fmin(lo, ticks[0]) : lo;
	*thi = nt ? fmax(hi, ticks[nt - 1]) : hi;
	if (ystep)
		*ystep = step;
	for (i = 0; i < nt; i++) {
		double y = bottom - (ticks[i] - *tlo) / (*thi - *tlo) * (bottom - top);
		char t[32];

		chart_format(ticks[i], chart_decimals(step), t, sizeof t);
		sbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"%s\" stroke-width=\"%s\"/>"
			  "<text x=\"%.1f\" y=\"%.1f\" font-size=\"11\" text-anchor=\"end\">%s</text>\n",
			  x0, y, x1, y, fabs(ticks[i]) < 1e-9 * step ? "#1d232b" : "#e2ddd1",
			  fabs(ticks[i]) < 1e-9 * step ? "1" : "0.7",
			  x0 - 5, y + 4, t);
	}
	sbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#1d232b\"/>", x0, top, x0,
		  bottom);
	sbuf_printf(b, "<text transform=\"translate(%.1f %.1f) rotate(-90)\" font-size=\"11\" text-anchor=\"middle\">",
		  x0 - 40, (top + bottom) / 2);
	html_esc(b, label);
	sbuf_puts(b, "</text>\n");
}

void svg_bars(sbuf *b, int id, const char *title, const char *ylabel, const svg_bar *bars, size_t n,
	     double ylo, double yhi)
{
	const double left = 62, right = 14, top = 30, bottom = 74, bw = 50, gap = 58;
	double w = left + right + (double)n * (bw + gap), h = 250, lo = 0, hi = 0, tlo, thi, ystep = 1;
	size_t i, k;
	char fb[32], num[48];
	int vdec;

	if (w < 300)
		w = 300;
	for (i = 0; i < n; i++) {
		if (isfinite(bars[i].mean)) {
			double s = isfinite(bars[i].sem) ? bars[i].sem : 0;

			lo = fmin(lo, bars[i].mean - s);
			hi = fmax(hi, bars[i].mean + s);
		}
		for (k = 0; k < bars[i].ndots; k++)
			if (isfinite(bars[i].dots[k])) {
				lo = fmin(lo, bars[i].dots[k]);
				hi = fmax(hi, bars[i].dots[k]);
			}
	}
	/* a family's shared range, widened (never narrowed) to hold this chart's own values */
	if (isfinite(ylo))
		lo = fmin(lo, ylo);
	if (isfinite(yhi))
		hi = fmax(hi, yhi);
	sbuf_printf(b, "<svg xmlns=\"http://www.w3.org/2000/svg\" class=\"bars\" width=\"%.0f\" height=\"%.0f\" viewBox=\"0 0 %.0f %.0f\" role=\"img\" aria-label=\"",
		  w, h, w, h);
	html_esc(b, title);
	sbuf_puts(b, "\">\n");
	patterns(b, id);
	sbuf_printf(b, "<text x=\"%.1f\" y=\"17\" font-size=\"13\" font-weight=\"600\">", left - 50);
	html_esc(b, title);
	sbuf_puts(b, "</text>\n");
	yaxis(b, lo, hi, left, w - right, top, h - bottom, ylabel, &tlo, &thi, &ystep);
	/* bar values two digits finer than the axis steps (steps of 1 give 2.05), never 5.26e-05 */
	vdec = chart_decimals(ystep) + 2;
	sbuf_printf(b, "<desc class=\"yrange\">%.6g %.6g</desc>\n", tlo, thi);
#define YPIX(v) ((h - bottom) - ((v) - tlo) / (thi - tlo) * ((h - bottom) - top))
	for (i = 0; i < n; i++) {
		double x = left + gap / 2 + (double)i * (bw + gap), y0 = YPIX(0.0);

		if (isfinite(bars[i].mean)) {
			double y = YPIX(bars[i].mean);

			sbuf_printf(b, "<rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" fill=\"%s\" stroke=\"#1d232b\" stroke-width=\"1\"/>\n",
				  x, fmin(y, y0), bw, fabs(y0 - y), fill_of(id, i, fb, sizeof fb));
			if (isfinite(bars[i].sem)) {
				double ya = YPIX(bars[i].mean - bars[i].sem), yb = YPIX(bars[i].mean + bars[i].sem);

				sbuf_printf(b, "<path d=\"M%.1f %.1fV%.1fM%.1f %.1fh12M%.1f %.1fh12\" stroke=\"#1d232b\" stroke-width=\"1.6\" fill=\"none\"/>\n",
					  x + bw / 2, ya, yb, x + bw / 2 - 6, ya, x + bw / 2 - 6, yb);
			}
		}
		for (k = 0; k < bars[i].ndots; k++) {
			/* fixed spread by subject order, so the same subject sits at the same offset everywhere */
			double off = bars[i].ndots > 1 ? ((double)k / (double)(bars[i].ndots - 1) - 0.5) * (bw * 0.6) : 0;

			if (!isfinite(bars[i].dots[k]))
				continue;
			sbuf_printf(b, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"3.2\" fill=\"#fff\" stroke=\"#1d232b\" stroke-width=\"1.2\"/>\n",
				  x + bw / 2 + off, YPIX(bars[i].dots[k]));
		}
		sbuf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" font-size=\"11\" text-anchor=\"middle\">", x + bw / 2,
			  h - bottom + 16);
		html_esc(b, bars[i].label);
		sbuf_printf(b, "</text><text x=\"%.1f\" y=\"%.1f\" font-size=\"10\" text-anchor=\"middle\" fill=\"#5b6470\">",
			  x + bw / 2, h - bottom + 30);
		if (isfinite(bars[i].mean)) {
			chart_format(bars[i].mean, vdec, num, sizeof num);
			sbuf_puts(b, num);
		}
		sbuf_puts(b, "</text>\n");
	}
#undef YPIX
	sbuf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" font-size=\"10\" fill=\"#5b6470\">bar: mean; whiskers: &#177;1 sem over subjects</text>"
		  "<text x=\"%.1f\" y=\"%.1f\" font-size=\"10\" fill=\"#5b6470\">circles: one per subject</text>\n",
		  left - 50, h - 20, left - 50, h - 7);
	sbuf_puts(b, "</svg>\n");
}

void svg_fd(sbuf *b, int id, const double *fd, size_t n, double tr, double threshold)
{
	const double left = 56, right = 18, top = 14, bottom = 40, w = 620, h = 180;
	double hi = threshold, t_end, tlo, thi, step, ticks[32];
	size_t i, nt;
	int have_tr = isfinite(tr) && tr > 0;

	(void)id;
	for (i = 0; i < n; i++)
		if (isfinite(fd[i]) && fd[i] > hi)
			hi = fd[i];
	if (hi < 0.5)
		hi = 0.5;
	hi *= 1.1;
	t_end = n > 1 ? (double)(n - 1) * (have_tr ? tr : 1.0) : 1.0;
	sbuf_printf(b, "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"%.0f\" height=\"%.0f\" viewBox=\"0 0 %.0f %.0f\" role=\"img\" aria-label=\"framewise displacement\">\n",
		  w, h, w, h);
	yaxis(b, 0, hi, left, w - right, top, h - bottom, "FD (mm)", &tlo, &thi, NULL);
#define XPIX(t) (left + (t) / t_end * (w - left - right))
#define YPIX(v) ((h - bottom) - ((v) - tlo) / (thi - tlo) * ((h - bottom) - top))
	nt = chart_ticks(0, t_end, 6, ticks, 32, &step);
	for (i = 0; i < nt; i++) {
		if (ticks[i] > t_end + 1e-9)
			continue;
		char tl[32];

		chart_format(ticks[i], chart_decimals(step), tl, sizeof tl);
		sbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#1d232b\"/><text x=\"%.1f\" y=\"%.1f\" font-size=\"11\" text-anchor=\"middle\">%s</text>\n",
			  XPIX(ticks[i]), h - bottom, XPIX(ticks[i]), h - bottom + 4, XPIX(ticks[i]), h - bottom + 16, tl);
	}
	sbuf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" font-size=\"11\" text-anchor=\"middle\">%s</text>\n",
		  (left + w - right) / 2, h - 6, have_tr ? "time (s)" : "volume");
	sbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#9b1c1c\" stroke-dasharray=\"6 4\" stroke-width=\"1.4\"/>"
		  "<text x=\"%.1f\" y=\"%.1f\" font-size=\"11\" text-anchor=\"end\" fill=\"#9b1c1c\">0.5 mm</text>\n",
		  left, YPIX(0.5), w - right, YPIX(0.5), w - right - 2, YPIX(0.5) - 4);
	if (fabs(threshold - 0.5) > 1e-9)
		sbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#1d232b\" stroke-dasharray=\"2 3\"/>"
			  "<text x=\"%.1f\" y=\"%.1f\" font-size=\"11\">study threshold %g mm</text>\n",
			  left, YPIX(threshold), w - right, YPIX(threshold), left + 4, YPIX(threshold) - 4, threshold);
	sbuf_puts(b, "<polyline fill=\"none\" stroke=\"#2f4a63\" stroke-width=\"1.3\" points=\"");
	for (i = 0; i < n; i++)
		if (isfinite(fd[i]))
			sbuf_printf(b, "%.1f,%.1f ", XPIX((double)i * (have_tr ? tr : 1.0)), YPIX(fd[i]));
	sbuf_puts(b, "\"/>\n</svg>\n");
#undef XPIX
#undef YPIX
}

void svg_colorbar(sbuf *b, int gid, double lo, double hi, const char *label)
{
	const double x0 = 10, wbar = 240, w = 300, h = 52;
	double ticks[32], step;
	size_t i, nt;
	sbuf_printf(b, "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"%.0f\" height=\"%.0f\" viewBox=\"0 0 %.0f %.0f\" role=\"img\" aria-label=\"colour scale\">\n<defs><linearGradient id=\"cb%d\">",
		  w, h, w, h, gid);
	for (i = 0; i <= 16; i++) {
		unsigned char c[3];

		chart_viridis((double)i / 16.0, c);
		sbuf_printf(b, "<stop offset=\"%.4f\" stop-color=\"#%02x%02x%02x\"/>", (double)i / 16.0, c[0], c[1], c[2]);
	}
	sbuf_printf(b, "</linearGradient></defs>\n<rect x=\"%.1f\" y=\"4\" width=\"%.1f\" height=\"14\" fill=\"url(#cb%d)\" stroke=\"#1d232b\" stroke-width=\"0.8\"/>\n",
		  x0, wbar, gid);
	if (!(hi > lo))
		hi = lo + 1;
	nt = chart_ticks(lo, hi, 5, ticks, 32, &step);
	for (i = 0; i < nt; i++) {
		double x;
		char tl[32];

		if (ticks[i] < lo - 1e-9 * step || ticks[i] > hi + 1e-9 * step)
			continue;
		x = x0 + (ticks[i] - lo) / (hi - lo) * wbar;
		chart_format(ticks[i], chart_decimals(step), tl, sizeof tl);
		sbuf_printf(b, "<line x1=\"%.1f\" y1=\"18\" x2=\"%.1f\" y2=\"23\" stroke=\"#1d232b\"/><text x=\"%.1f\" y=\"34\" font-size=\"11\" text-anchor=\"middle\">%s</text>\n",
			  x, x, x, tl);
	}
	sbuf_printf(b, "<text x=\"%.1f\" y=\"48\" font-size=\"11\">", x0);
	html_esc(b, label);
	sbuf_puts(b, "</text>\n</svg>\n");
}

/* Tints per column kind (line, band), in the page's palette. */
static const char *const kind_line[4] = { "#8a3b12", "#2f4a63", "#4b5a1e", "#5b6470" };
static const char *const kind_band[4] = { "#f6ebe3", "#e8edf2", "#eef0e2", "#efede8" };
static const char *const kind_name[4] = { "conditions", "confounds", "drifts", "baseline" };

void svg_design(sbuf *b, char **names, const int *kind, size_t ncols, const double *val,
	       size_t nrows, double tr, double vt, const double *const *marks, const size_t *nmarks)
{
	const double left = 150, right = 16, top = 8, trace = 22, gap = 5, evh = 8, head = 16, w = 760;
	int have_tr = isfinite(tr) && tr > 0;
	double unit = have_tr ? tr : 1.0, t_end = (double)(nrows ? nrows : 1) * unit;
	double y = top, H, ticks[32], step;
	size_t c, r, i, nt;
	int prev = -1;

	/* height first: a heading per kind, a trace per column, event marks under conditions */
	H = top;
	for (c = 0; c < ncols; c++) {
		if (kind[c] != prev)
			H += head;
		prev = kind[c];
		H += trace + gap + (kind[c] == 0 ? evh : 0);
	}
	H += 40;
	sbuf_printf(b, "<svg xmlns=\"http://www.w3.org/2000/svg\" class=\"design\" width=\"%.0f\" height=\"%.0f\" viewBox=\"0 0 %.0f %.0f\" role=\"img\" aria-label=\"design matrix: one trace per column against time\">\n",
		  w, H, w, H);
#define XPIX(t) (left + (t) / t_end * (w - left - right))
	prev = -1;
	for (c = 0; c < ncols; c++) {
		double lo = INFINITY, hi = -INFINITY, y0, y1;
		int kc = kind[c] >= 0 && kind[c] < 4 ? kind[c] : 0;

		if (kind[c] != prev) {
			/* the kind's heading and a tinted band behind all its traces */
			size_t e = c;
			double hb = 0;

			while (e < ncols && kind[e] == kind[c]) {
				hb += trace + gap + (kind[e] == 0 ? evh : 0);
				e++;
			}
			sbuf_printf(b, "<rect x=\"4\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" fill=\"%s\"/>"
				  "<text class=\"kind\" x=\"8\" y=\"%.1f\" font-size=\"11\" font-weight=\"600\" fill=\"%s\">%s</text>\n",
				  y, w - 8, head + hb - gap / 2, kind_band[kc], y + 12, kind_line[kc], kind_name[kc]);
			y += head;
		}
		prev = kind[c];
		for (r = 0; r < nrows; r++) {
			double v = val[r * ncols + c];

			if (isfinite(v)) {
				lo = fmin(lo, v);
				hi = fmax(hi, v);
			}
		}
		y0 = y + trace;   /* bottom of the trace band */
		y1 = y + 2;       /* top */
		sbuf_printf(b, "<g class=\"trace\" data-kind=\"%s\" data-column=\"", kind_name[kc]);
		html_esc(b, names[c]);
		sbuf_printf(b, "\"><text x=\"%.1f\" y=\"%.1f\" font-size=\"11\" text-anchor=\"end\">", left - 8, y + trace / 2 + 4);
		html_esc(b, names[c]);
		sbuf_printf(b, "</text><line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#d9d4c7\" stroke-width=\"0.6\"/>",
			  left, y0, w - right, y0);
		sbuf_printf(b, "<polyline fill=\"none\" stroke=\"%s\" stroke-width=\"1.3\" points=\"", kind_line[kc]);
		for (r = 0; r < nrows; r++) {
			double v = val[r * ncols + c], py;

			if (!isfinite(v))
				continue;
			/* each trace scaled to its own range; a flat column sits mid-band */
			py = hi > lo ? y0 - (v - lo) / (hi - lo) * (y0 - y1) : (y0 + y1) / 2;
			/* row r is the volume sampled at (r + vt) TR after the run's start */
			sbuf_printf(b, "%.1f,%.1f ", XPIX(((double)r + vt) * unit), py);
		}
		sbuf_puts(b, "\"/>");
		if (kind[c] == 0 && marks) {
			for (i = 0; i < nmarks[c]; i++) {
				double x;

				if (!isfinite(marks[c][i]) || marks[c][i] < 0 || marks[c][i] > t_end)
					continue;
				x = XPIX(marks[c][i]);

				sbuf_printf(b, "<path class=\"ev\" d=\"M%.1f %.1fl-3.5 %.1fh7z\" fill=\"%s\"/>", x, y0 + 1.5,
					  evh - 2, kind_line[kc]);
			}
			y += evh;
		}
		sbuf_puts(b, "</g>\n");
		y += trace + gap;
	}
	/* the time axis */
	sbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#1d232b\"/>\n", left, y, w - right, y);
	nt = chart_ticks(0, t_end, 8, ticks, 32, &step);
	for (i = 0; i < nt; i++) {
		char t[32];

		if (ticks[i] > t_end + 1e-9 || ticks[i] < -1e-9)
			continue;
		chart_format(ticks[i], chart_decimals(step), t, sizeof t);
		sbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#1d232b\"/><text x=\"%.1f\" y=\"%.1f\" font-size=\"11\" text-anchor=\"middle\">%s</text>\n",
			  XPIX(ticks[i]), y, XPIX(ticks[i]), y + 4, XPIX(ticks[i]), y + 16, t);
	}
	sbuf_printf(b, "<text class=\"axis\" x=\"%.1f\" y=\"%.1f\" font-size=\"11\" text-anchor=\"middle\">%s</text>\n",
		  (left + w - right) / 2, y + 32, have_tr ? "time (s)" : "volume");
#undef XPIX
	sbuf_puts(b, "</svg>\n");
}

/* The path of one curve (gaps at NaN). */
static void curve_path(sbuf *b, const double *y, size_t nb, const double *time, double tx0, double tx1,
		       double x0, double x1, double lo, double hi, double top, double bottom)
{
	size_t i;
	int pen = 0;

	for (i = 0; i < nb; i++) {
		double x, yy;

		if (!isfinite(y[i])) {
			pen = 0;
			continue;
		}
		x = x0 + (time[i] - tx0) / (tx1 > tx0 ? tx1 - tx0 : 1) * (x1 - x0);
		yy = bottom - (y[i] - lo) / (hi - lo) * (bottom - top);
		sbuf_printf(b, "%s%.1f %.1f", pen ? " L" : " M", x, yy);
		pen = 1;
	}
}

void svg_curves_range(const svg_curve *c, size_t nc, size_t nb, double *lo, double *hi)
{
	size_t k, i, s;

	for (k = 0; k < nc; k++)
		for (i = 0; i < nb; i++) {
			double m = c[k].mean[i], e = isfinite(c[k].sem[i]) ? c[k].sem[i] : 0;

			if (isfinite(m)) {
				*lo = fmin(*lo, m - e);
				*hi = fmax(*hi, m + e);
			}
			for (s = 0; s < c[k].nsubj; s++)
				if (isfinite(c[k].subj[s * nb + i])) {
					*lo = fmin(*lo, c[k].subj[s * nb + i]);
					*hi = fmax(*hi, c[k].subj[s * nb + i]);
				}
		}
}

void svg_curves(sbuf *b, int id, const char *title, const double *time, size_t nb, const svg_curve *c,
	       size_t nc, double ylo, double yhi)
{
	static const char *const hue[] = { "#8a3b12", "#2f4a63", "#4b5a1e", "#6b3d7a", "#39424e" };
	static const char *const dash[] = { "", "6 3", "2 3", "8 3 2 3", "1 1" };
	const double left = 62, right = 130, top = 30, bottom = 50, w = 460, h = 240;
	double lo = 0, hi = 0, tlo, thi, tx0 = nb ? time[0] : 0, tx1 = nb ? time[nb - 1] : 1;
	size_t k, i, s;

	svg_curves_range(c, nc, nb, &lo, &hi);
	if (isfinite(ylo))
		lo = fmin(lo, ylo);
	if (isfinite(yhi))
		hi = fmax(hi, yhi);
	if (hi - lo < 1e-9)
		hi = lo + 1;
	sbuf_printf(b, "<svg class=\"chart\" id=\"tc%d\" xmlns=\"http://www.w3.org/2000/svg\" width=\"%.0f\" height=\"%.0f\" "
		  "viewBox=\"0 0 %.0f %.0f\" role=\"img\"><title>", id, w, h, w, h);
	html_esc(b, title);
	sbuf_printf(b, "</title><text x=\"%.0f\" y=\"18\" font-size=\"13\" font-weight=\"bold\">", left);
	html_esc(b, title);
	sbuf_puts(b, "</text>\n");
	yaxis(b, lo, hi, left, w - right, top, h - bottom, "percent signal change", &tlo, &thi, NULL);
	sbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#1d232b\"/>\n", left,
		  h - bottom, w - right, h - bottom);
	for (i = 0; i < nb; i++) {
		double x = left + (time[i] - tx0) / (tx1 > tx0 ? tx1 - tx0 : 1) * (w - right - left);
		char t[32];

		chart_format(time[i], time[i] == floor(time[i]) ? 0 : 1, t, sizeof t);
		sbuf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" font-size=\"11\" text-anchor=\"middle\">%s</text>", x,
			  h - bottom + 15, t);
	}
	sbuf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" font-size=\"11\" text-anchor=\"middle\">time after onset (s)</text>\n",
		  (left + w - right) / 2, h - bottom + 32);
	for (k = 0; k < nc; k++) {
		const char *col = hue[k % 5];
		double *up = xmalloc_array(nb ? nb : 1, sizeof *up), *dn = xmalloc_array(nb ? nb : 1, sizeof *dn);

		for (s = 0; s < c[k].nsubj; s++) {
			sbuf_printf(b, "<path class=\"subject\" fill=\"none\" stroke=\"%s\" stroke-width=\"0.8\" stroke-opacity=\"0.35\" d=\"", col);
			curve_path(b, c[k].subj + s * nb, nb, time, tx0, tx1, left, w - right, tlo, thi, top, h - bottom);
			sbuf_puts(b, "\"/>\n");
		}
		/* the band: up the upper edge, back along the lower one (bins with a mean and a sem) */
		for (i = 0; i < nb; i++) {
			int have = isfinite(c[k].mean[i]) && isfinite(c[k].sem[i]);

			up[i] = have ? c[k].mean[i] + c[k].sem[i] : NAN;
			dn[i] = have ? c[k].mean[i] - c[k].sem[i] : NAN;
		}
		sbuf_printf(b, "<path class=\"band\" fill=\"%s\" fill-opacity=\"0.18\" stroke=\"none\" d=\"", col);
		curve_path(b, up, nb, time, tx0, tx1, left, w - right, tlo, thi, top, h - bottom);
		for (i = nb; i-- > 0;)
			if (isfinite(dn[i]))
				sbuf_printf(b, " L%.1f %.1f",
					  left + (time[i] - tx0) / (tx1 > tx0 ? tx1 - tx0 : 1) * (w - right - left),
					  h - bottom - (dn[i] - tlo) / (thi - tlo) * (h - bottom - top));
		sbuf_puts(b, " Z\"/>\n");
		sbuf_printf(b, "<path class=\"mean\" fill=\"none\" stroke=\"%s\" stroke-width=\"2.4\"%s%s%s d=\"", col,
			  dash[k % 5][0] ? " stroke-dasharray=\"" : "", dash[k % 5], dash[k % 5][0] ? "\"" : "");
		curve_path(b, c[k].mean, nb, time, tx0, tx1, left, w - right, tlo, thi, top, h - bottom);
		sbuf_puts(b, "\"/>\n");
		sbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"%s\" stroke-width=\"2.4\"%s%s%s/>"
			  "<text x=\"%.1f\" y=\"%.1f\" font-size=\"11\">", w - right + 10, top + 10 + 18.0 * k,
			  w - right + 34, top + 10 + 18.0 * k, col, dash[k % 5][0] ? " stroke-dasharray=\"" : "",
			  dash[k % 5], dash[k % 5][0] ? "\"" : "", w - right + 38, top + 14 + 18.0 * k);
		html_esc(b, c[k].label);
		sbuf_puts(b, "</text>\n");
		free(up);
		free(dn);
	}
	sbuf_puts(b, "</svg>\n");
}
