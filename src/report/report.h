/* report.h - the HTML report of a study's results: shared between report*.c and analyze. */
#ifndef SR_REPORT_H
#define SR_REPORT_H

#include <stddef.h>

#include "../core/err.h"
#include "../core/sbuf.h"

/*
 * Writes OUT/report.html and OUT/sub-<label>/report.html for every subject
 * folder with a run record. Prints problems on stderr (prefix "splitroi
 * report:"), a summary line on stdout unless quiet. Returns 0, or 1 when a
 * page could not be written or OUT holds no results.
 */
int report_write(const char *out, int quiet);

/* What reliability.csv holds, in the words of the report pages. */
#define RELIABILITY_NOTE "t_correlation: Pearson's r of the define t of the localizer's halves over the parcel's " \
	"voxels with finite t in both (leave-one-out: the mean over all pairs of folds); dice: the overlap of the " \
	"halves' fROIs, likewise; n_above: parcel voxels with define t above 3.1 (a mean over the splits on :mean rows)."


/* ---- html.c (html_): escaping, base64 data URIs, numbers and the page frame ---- */

/* the buffer itself (sbuf, sbuf_init, sbuf_puts, sbuf_printf ...) is core/sbuf.h */
/* Appends s with &, <, >, " and ' escaped (safe in text and attribute values). */
void html_esc(sbuf *b, const char *s);
/* Appends "data:image/png;base64,..." for n bytes of PNG data. */
void html_data_uri(sbuf *b, const unsigned char *png, size_t n);
/* Appends a number as %.4g, or an en dash for NaN. */
void html_num(sbuf *b, double v);

/* Opens a page: doctype, title, the embedded style sheet, header with a back link (NULL for none). */
void html_begin(sbuf *b, const char *title, const char *subtitle, const char *back_href,
	      const char *back_text);
/* Closes a page with its footer: the study file, splitroi's version and the date (UTC). */
void html_end(sbuf *b, const char *study_file);
/* Writes the buffer to path atomically. */
sr_status html_write(const char *path, const sbuf *b, sr_err *e);

/* ---- svg.c (svg_): charts as inline SVG (self-contained, patterns as well as hues) ---- */

/* One bar: mean and standard error over subjects, and each subject's value as a dot. */
typedef struct svg_bar {
	const char *label;
	double mean, sem;
	const double *dots;
	size_t ndots;
} svg_bar;

/*
 * A bar chart with error bars (mean +- sem) and dots; id keeps pattern ids
 * unique in a page. ylo..yhi (NaN for none) is the range its family shares;
 * the axis covers it and this chart's own values.
 */
void svg_bars(sbuf *b, int id, const char *title, const char *ylabel, const svg_bar *bars,
	     size_t n, double ylo, double yhi);
/* One condition's time course: group mean +- sem per bin, and each subject's curve (NaN = gap). */
typedef struct svg_curve {
	const char *label;
	const double *mean, *sem;   /* nb values */
	const double *subj;         /* nsubj x nb, row by row */
	size_t nsubj;
} svg_curve;

/*
 * Time courses against time after onset (s): per condition a band of mean
 * +- sem, the mean as a thick line (solid, dashed, dotted: they differ without
 * colour) and every subject as a thin line of the same hue. ylo..yhi (NaN
 * for none) is the range its family shares (one task's charts).
 */
void svg_curves(sbuf *b, int id, const char *title, const double *time, size_t nb, const svg_curve *c,
	       size_t nc, double ylo, double yhi);
/* Widens lo..hi to hold the curves (bands and subjects); ylo..yhi of svg_curves share it in a family. */
void svg_curves_range(const svg_curve *c, size_t nc, size_t nb, double *lo, double *hi);
/* Framewise displacement per volume against time, with the threshold line. */
void svg_fd(sbuf *b, int id, const double *fd, size_t n, double tr, double threshold);
/* A horizontal colour bar for viridis from lo to hi with labelled ticks. */
void svg_colorbar(sbuf *b, int id, double lo, double hi, const char *label);
/*
 * A design matrix drawn as traces: time along x, one line per column (nrows x
 * ncols values, row-major) stacked top to bottom with its name at the left,
 * each scaled to its own range, grouped and tinted by kind (qc_col_kind, the
 * columns of one kind adjacent); row r drawn at (r + vt) TR, the time the
 * model samples it; under each condition a mark at each of the nmarks[c]
 * times in marks[c] (seconds from the run's start; marks may be NULL).
 * tr <= 0 or NaN: x in volumes.
 */
void svg_design(sbuf *b, char **names, const int *kind, size_t ncols, const double *val,
	       size_t nrows, double tr, double vt, const double *const *marks, const size_t *nmarks);

/* ---- subpage.c (subpage_): one subject's page ---- */

/* A subject's overlap and motion summary for the study page. */
typedef struct subpage_parcel {
	char *name;
	int index;
	double size_a, size_b;   /* fROI voxels in the two halves (mean over folds for leave-one-out) */
	double dice;             /* NaN when both are empty */
} subpage_parcel;

typedef struct subpage_summary {
	char *label;
	subpage_parcel *parcels;
	size_t nparcels;
	size_t nruns_fd, nruns_flagged;
	char *split_kind;        /* "odd-even" or "leave-one-out" */
	char *study_file;        /* as the run record names it, NULL when absent */
	int ok;                  /* page written */
} subpage_summary;

struct table;
/* A CSV as an HTML table with the given id; the columns in first (NULL-terminated) lead. */
void report_table_html(sbuf *b, const struct table *t, const char *id, const char *const *first);

/* Writes OUT/sub-<label>/report.html and fills s. Problems go to e (returns nonzero). */
sr_status subpage_write(const char *out, const char *label, subpage_summary *s, sr_err *e);
void subpage_release(subpage_summary *s);

#endif
