/* subpage.c - one subject's report page: fROI slices, t maps, overlap, design matrices, motion. */
#include <dirent.h>
#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"
#include "../core/strv.h"
#include "../core/qc.h"
#include "chart.h"
#include "../io/nii.h"
#include "../io/parcels.h"
#include "../io/png.h"
#include "../io/runrec.h"
#include "../io/table.h"
#include "report.h"

enum { NSLICES = 3, SLICE_PX = 180 };

/* A label map held in memory (fROIs of one split). */
typedef struct lmap {
	char *token;            /* e.g. "odd-even-A", "all-memory" */
	int32_t *lab;
	double *t;              /* localizer t on the same grid, NULL when absent */
} lmap;

typedef struct page {
	const char *out, *label;
	char dir[4096];
	runrec rec;
	nii_grid g;
	size_t nx, ny, nz, nvox;
	double *bold;           /* mean functional image, NULL when absent */
	int32_t *parcels;       /* parcel image on the data grid, NULL when absent or elsewhere */
	lmap *maps;
	size_t nmaps, ndefine;  /* the first ndefine maps are the localizer's splits */
	int *pidx;
	char **pname;
	size_t np;
	int uid;                /* unique ids within the page */
} page;

/* Sorted names in dir starting with prefix and ending with suffix (the middle part returned). */
static char **list_dir(const char *dir, const char *prefix, const char *suffix, size_t *n)
{
	DIR *d = opendir(dir);
	struct dirent *de;
	char **v = NULL;
	size_t lp = strlen(prefix), ls = strlen(suffix), cap = 0;

	*n = 0;
	if (!d)
		return NULL;
	while ((de = readdir(d))) {
		size_t l = strlen(de->d_name);

		if (l <= lp + ls || strncmp(de->d_name, prefix, lp) || strcmp(de->d_name + l - ls, suffix))
			continue;
		XGROW(v, *n, cap);
		v[*n] = xmalloc(l - lp - ls + 1);
		memcpy(v[*n], de->d_name + lp, l - lp - ls);
		v[*n][l - lp - ls] = 0;
		(*n)++;
	}
	closedir(d);
	if (*n)
		qsort(v, *n, sizeof *v, strv_cmp);
	return v;
}

/* Reads a 3-D image on the page's grid; NULL (with a note in e) when missing or elsewhere. */
static double *read_on_grid(page *pg, const char *path, sr_err *e)
{
	nii_info in;
	double *d;

	if (nii_read_3d(path, &in, &d, e))
		return NULL;
	if (!nii_same_grid(&in.grid, &pg->g, 1e-3, NULL, 0)) {
		free(d);
		sr_fail(e, SR_EDIM, "%s: not on the grid of the mean functional image", path);
		return NULL;
	}
	return d;
}

static int32_t *to_labels(const double *d, size_t n)
{
	int32_t *l = xmalloc_array(n, sizeof *l);
	size_t v;

	for (v = 0; v < n; v++)
		l[v] = isfinite(d[v]) ? (int32_t)lround(d[v]) : 0;
	return l;
}

/* Directory of a path ("." when none), malloc'ed. */
static char *dirname_of(const char *p)
{
	const char *s = strrchr(p, '/');
	char *d;

	if (!s)
		return xstrdup(".");
	d = xmalloc((size_t)(s - p) + 1);
	memcpy(d, p, (size_t)(s - p));
	d[s - p] = 0;
	return d;
}

/* Parcel indices and names: the names table of the study when readable, else the labels found. */
static void load_parcels(page *pg)
{
	char *names = runrec_ini_get(pg->rec.study_text, "parcels", "names");
	size_t i, v, k, capidx = 0, capname = 0;

	if (names && pg->rec.study_file) {
		char *base = dirname_of(pg->rec.study_file), path[8192];
		parcels_names t;
		sr_err quiet;

		if (names[0] == '/')
			snprintf(path, sizeof path, "%s", names);
		else
			snprintf(path, sizeof path, "%s/%s", base, names);
		free(base);
		sr_err_init(&quiet, NULL, NULL);
		if (parcels_names_read(path, &t, &quiet) == SR_OK) {
			pg->pidx = xmalloc_array(t.n ? t.n : 1, sizeof *pg->pidx);
			pg->pname = xmalloc_array(t.n ? t.n : 1, sizeof *pg->pname);
			for (i = 0; i < t.n; i++) {
				pg->pidx[pg->np] = t.index[i];
				pg->pname[pg->np++] = xstrdup(t.name[i]);
			}
			parcels_names_release(&t);
		}
	}
	free(names);
	if (pg->np)
		return;
	/* no table: the labels of the fROI maps, named by number as the tables do */
	for (k = 0; k < pg->nmaps; k++)
		for (v = 0; v < pg->nvox; v++) {
			int32_t l = pg->maps[k].lab[v];

			if (l <= 0)
				continue;
			for (i = 0; i < pg->np && pg->pidx[i] != l; i++)
				;
			if (i < pg->np)
				continue;
			XGROW(pg->pidx, pg->np, capidx);
			XGROW(pg->pname, pg->np, capname);
			pg->pidx[pg->np] = l;
			pg->pname[pg->np] = xmalloc(16);
			snprintf(pg->pname[pg->np++], 16, "%d", (int)l);
		}
}

/*
 * Loads the fROI label images (func/sub-<l>_task-<t>_desc-<split>_dseg.nii.gz)
 * and the t maps beside them (..._tstat.nii.gz): the localizer's splits
 * first, then the definitions of measured tasks (desc-all<task>). The token
 * shown is the desc entity's value.
 */
/*
 * The first of several named localizers of a study text ([localizer NAME])
 * into buf, or "" with one localizer (named or not). With several, their
 * maps' desc- starts with the name (mapout.h).
 */
static void first_named_localizer(const char *text, char *buf, size_t len)
{
	const char *p = text;
	int seen = 0;

	buf[0] = '\0';
	while (p && *p) {
		const char *q = p + strspn(p, " \t");

		if (strncmp(q, "[localizer", 10) == 0 && (q[10] == ' ' || q[10] == '\t')) {
			size_t k = 0;

			q += 10;
			q += strspn(q, " \t");
			while (k + 1 < len && (isalnum((unsigned char)q[k])))
				k++;
			if (seen++ == 0) {
				memcpy(buf, q, k);
				buf[k] = '\0';
			}
		}
		p = strchr(p, '\n');
		if (p)
			p++;
	}
	if (seen < 2)
		buf[0] = '\0';
}

static void load_maps(page *pg, sr_err *e)
{
	char mdir[4200], path[8400], prefix[256], loc0[64];
	char **tok;
	size_t n, i, pass, l0, cap = 0;

	snprintf(mdir, sizeof mdir, "%s/func", pg->dir);
	snprintf(prefix, sizeof prefix, "sub-%s_", pg->label);
	/* several localizers: the splits of the first one are the halves compared here */
	first_named_localizer(pg->rec.study_text, loc0, sizeof loc0);
	l0 = strlen(loc0);
	tok = list_dir(mdir, prefix, "_dseg.nii.gz", &n);
	for (pass = 0; pass < 2; pass++)
		for (i = 0; i < n; i++) {
			const char *desc = strstr(tok[i], "desc-");
			int is_all;
			double *d;
			lmap *m;

			desc = desc ? desc + 5 : tok[i];
			if (l0)
				is_all = strncmp(desc, loc0, l0) != 0 || strncmp(desc + l0, "all", 3) == 0;
			else
				is_all = strncmp(desc, "all", 3) == 0;
			if (is_all != (int)pass)
				continue;
			snprintf(path, sizeof path, "%s/%s%s_dseg.nii.gz", mdir, prefix, tok[i]);
			d = read_on_grid(pg, path, e);
			if (!d)
				continue;
			XGROW(pg->maps, pg->nmaps, cap);
			m = &pg->maps[pg->nmaps++];
			m->token = xstrdup(desc);
			m->lab = to_labels(d, pg->nvox);
			free(d);
			snprintf(path, sizeof path, "%s/%s%s_tstat.nii.gz", mdir, prefix, tok[i]);
			m->t = read_on_grid(pg, path, e);
			if (!is_all)
				pg->ndefine = pg->nmaps;
		}
	strv_free_array(tok, n);
}

/* The mean image: the first func/sub-<l>_*_boldref.nii.gz in name order, into path; 0 if none. */
static int boldref_path(const page *pg, char *path, size_t len)
{
	char mdir[4200], prefix[256];
	char **tok;
	size_t n;

	snprintf(mdir, sizeof mdir, "%s/func", pg->dir);
	snprintf(prefix, sizeof prefix, "sub-%s_", pg->label);
	tok = list_dir(mdir, prefix, "_boldref.nii.gz", &n);
	if (n)
		snprintf(path, len, "%s/%s%s_boldref.nii.gz", mdir, prefix, tok[0]);
	strv_free_array(tok, n);
	return n > 0;
}

/* Upscaled RGB rendering of slice k: gray background, then overlays chosen by mode. */
enum { DRAW_FROI, DRAW_T };

static int scale_for(size_t nx, size_t ny)
{
	size_t m = nx > ny ? nx : ny;
	int s = (int)lround((double)SLICE_PX / (double)(m ? m : 1));

	return s < 1 ? 1 : s > 12 ? 12 : s;
}

static void emit_slice(page *pg, sbuf *b, size_t k, const lmap *m, int32_t label, int mode,
		       double tlo, double thi, double glo, double ghi)
{
	int s = scale_for(pg->nx, pg->ny);
	int W = (int)pg->nx * s, H = (int)pg->ny * s, X, Y;
	unsigned char *px = xmalloc_array((size_t)W * (size_t)H, 3), *png;
	size_t npng, base = k * pg->nx * pg->ny;
	sr_err e;

	for (Y = 0; Y < H; Y++)
		for (X = 0; X < W; X++) {
			/* rows drawn top-down with y increasing upwards (anterior at the top for RAS data) */
			size_t i = (size_t)(X / s), j = pg->ny - 1 - (size_t)(Y / s), v = base + j * pg->nx + i;
			unsigned char *o = px + 3 * ((size_t)Y * (size_t)W + (size_t)X);
			double g = pg->bold ? pg->bold[v] : 0;
			int in_f = m->lab[v] == label, c, edge_p = 0, edge_f = 0, dx, dy;

			g = ghi > glo ? (g - glo) / (ghi - glo) : 0.5;
			g = g < 0 ? 0 : g > 1 ? 1 : g;
			o[0] = o[1] = o[2] = (unsigned char)lround(40 + 200 * g);
			/* outline pixels: a neighbouring pixel lies in a voxel outside the region */
			for (dy = -1; dy <= 1; dy++)
				for (dx = -1; dx <= 1; dx++) {
					int X2 = X + dx, Y2 = Y + dy;
					size_t v2;

					if ((dx && dy) || (!dx && !dy))
						continue;
					if (X2 < 0 || Y2 < 0 || X2 >= W || Y2 >= H) {
						v2 = (size_t)-1;
					} else {
						size_t i2 = (size_t)(X2 / s), j2 = pg->ny - 1 - (size_t)(Y2 / s);

						v2 = base + j2 * pg->nx + i2;
					}
					if (pg->parcels && pg->parcels[v] == label &&
					    (v2 == (size_t)-1 || pg->parcels[v2] != label))
						edge_p = 1;
					if (in_f && (v2 == (size_t)-1 || m->lab[v2] != label))
						edge_f = 1;
				}
			if (mode == DRAW_T && m->t && isfinite(m->t[v]) && m->t[v] != 0) {
				unsigned char rgb[3];

				chart_viridis(thi > tlo ? (m->t[v] - tlo) / (thi - tlo) : 0.5, rgb);
				for (c = 0; c < 3; c++)
					o[c] = rgb[c];
			}
			if (mode == DRAW_FROI && in_f) {
				/* hatching as well as a hue, so the fROI reads in gray too */
				int dark = (X + Y) % 4 == 0;

				o[0] = dark ? 0x3a : 0xe0;
				o[1] = dark ? 0x12 : 0x6a;
				o[2] = dark ? 0x00 : 0x1a;
			}
			if (mode == DRAW_T && edge_f)
				o[0] = o[1] = o[2] = 255;
			if (edge_p) {
				/* parcel outline: dashed white/black */
				int on = ((X + Y) / 2) % 2;

				o[0] = o[1] = o[2] = on ? 255 : 0;
			}
		}
	sr_err_init(&e, NULL, NULL);
	if (srpng_encode(px, W, H, 3, &png, &npng, &e) == SR_OK) {
		/* screen right is +i, screen up is +j (rows drawn top-down from the last j) */
		const double(*A)[4] = (const double(*)[4])pg->g.affine;

		sbuf_printf(b, "<div class=\"slice\"><span></span><span class=\"o t\">%c</span><span></span>"
			  "<span class=\"o l\">%c</span><img width=\"%d\" height=\"%d\" alt=\"slice k=%zu\" src=\"",
			  qc_axis_letter(A, 1, 1, NULL), qc_axis_letter(A, 0, -1, NULL), W, H, k);
		html_data_uri(b, png, npng);
		sbuf_printf(b, "\"><span class=\"o r\">%c</span><span></span><span class=\"o b\">%c</span><span></span>"
			  "<span class=\"z\">k = %zu</span></div>\n",
			  qc_axis_letter(A, 0, 1, NULL), qc_axis_letter(A, 1, -1, NULL), k);
		free(png);
	}
	free(px);
}

/* The t range shared by all of the subject's t panels: 1st to 99th percentile of finite values. */
static void t_range(const page *pg, double *lo, double *hi)
{
	size_t k, v, n = 0;
	double *all = xmalloc_array(pg->nmaps * pg->nvox + 1, sizeof *all), a, bq;

	for (k = 0; k < pg->nmaps; k++)
		for (v = 0; pg->maps[k].t && v < pg->nvox; v++)
			if (isfinite(pg->maps[k].t[v]))
				all[n++] = pg->maps[k].t[v];
	qc_window(all, n, 0.01, 0.99, &a, &bq);
	free(all);
	*lo = a;
	*hi = bq;
}

static void section_parcel(page *pg, sbuf *b, size_t pi, double tlo, double thi, double glo,
			   double ghi)
{
	int32_t label = pg->pidx[pi];
	int32_t *uni = xcalloc(pg->nvox ? pg->nvox : 1, sizeof *uni);
	size_t sl[NSLICES], ns, k, v, j;

	for (k = 0; k < pg->nmaps; k++)
		for (v = 0; v < pg->nvox; v++)
			if (pg->maps[k].lab[v] == label)
				uni[v] = label;
	ns = qc_pick_slices(uni, pg->nx, pg->ny, pg->nz, label, NSLICES, sl);
	free(uni);
	sbuf_puts(b, "<h3 id=\"parcel-");
	sbuf_printf(b, "%d\">Parcel ", (int)label);
	html_esc(b, pg->pname[pi]);
	sbuf_puts(b, "</h3>\n");
	if (!ns) {
		sbuf_puts(b, "<p class=\"note\">No fROI voxels in any split.</p>\n");
		return;
	}
	for (k = 0; k < pg->nmaps; k++) {
		size_t cnt = 0;

		for (v = 0; v < pg->nvox; v++)
			cnt += pg->maps[k].lab[v] == label;
		sbuf_puts(b, "<figure><figcaption><b>");
		html_esc(b, pg->maps[k].token);
		sbuf_printf(b, "</b>: fROI (hatched), %zu voxels%s</figcaption>\n<div class=\"strip\">\n", cnt,
			  pg->parcels ? "; parcel outline dashed" : "");
		for (j = 0; j < ns; j++)
			emit_slice(pg, b, sl[j], &pg->maps[k], label, DRAW_FROI, tlo, thi, glo, ghi);
		sbuf_puts(b, "</div></figure>\n");
		if (pg->maps[k].t) {
			sbuf_puts(b, "<figure><figcaption><b>");
			html_esc(b, pg->maps[k].token);
			sbuf_puts(b, "</b>: localizer t (fROI outlined white)</figcaption>\n<div class=\"strip\">\n");
			for (j = 0; j < ns; j++)
				emit_slice(pg, b, sl[j], &pg->maps[k], label, DRAW_T, tlo, thi, glo, ghi);
			sbuf_puts(b, "</div></figure>\n");
		}
	}
}

/* Sizes per split and the overlap of the two halves (mean over fold pairs for leave-one-out). */
static void overlap(page *pg, subpage_summary *s, sbuf *b)
{
	size_t pi, k, q;

	s->parcels = xcalloc(pg->np ? pg->np : 1, sizeof *s->parcels);
	s->nparcels = pg->np;
	sbuf_puts(b, "<table id=\"overlap\"><thead><tr><th>parcel</th>");
	for (k = 0; k < pg->nmaps; k++) {
		sbuf_puts(b, "<th>voxels ");
		html_esc(b, pg->maps[k].token);
		sbuf_puts(b, "</th>");
	}
	sbuf_puts(b, "<th>Dice</th><th>check</th></tr></thead><tbody>\n");
	for (pi = 0; pi < pg->np; pi++) {
		subpage_parcel *rp = &s->parcels[pi];
		double dsum = 0, sa = 0, sbsz = 0;
		size_t npair = 0;
		int bad;

		rp->name = xstrdup(pg->pname[pi]);
		rp->index = pg->pidx[pi];
		for (k = 0; k < pg->ndefine; k++)
			for (q = k + 1; q < pg->ndefine; q++) {
				size_t na, nb;
				double d = qc_dice(pg->maps[k].lab, pg->maps[q].lab, pg->nvox, rp->index, &na, &nb, NULL);

				if (isfinite(d)) {
					dsum += d;
					npair++;
				}
			}
		for (k = 0; k < pg->ndefine; k++) {
			size_t v, c = 0;

			for (v = 0; v < pg->nvox; v++)
				c += pg->maps[k].lab[v] == rp->index;
			if (k % 2 == 0 || pg->ndefine != 2)
				sa += (double)c;
			else
				sbsz += (double)c;
		}
		if (pg->ndefine == 2) {
			rp->size_a = sa;
			rp->size_b = sbsz;
		} else {
			rp->size_a = rp->size_b = pg->ndefine ? sa / (double)pg->ndefine : NAN;
		}
		rp->dice = npair ? dsum / (double)npair : NAN;
		bad = qc_overlap_flag(rp->size_a, rp->size_b, rp->dice);
		sbuf_printf(b, "<tr%s><td>", bad ? " class=\"flag\"" : "");
		html_esc(b, rp->name);
		sbuf_puts(b, "</td>");
		for (k = 0; k < pg->nmaps; k++) {
			size_t v, c = 0;

			for (v = 0; v < pg->nvox; v++)
				c += pg->maps[k].lab[v] == rp->index;
			sbuf_printf(b, "<td class=\"n\">%zu</td>", c);
		}
		sbuf_puts(b, "<td class=\"n\">");
		if (isfinite(rp->dice))
			sbuf_printf(b, "%.3f", rp->dice);
		else
			sbuf_puts(b, "&ndash;");
		sbuf_printf(b, "</td><td>%s</td></tr>\n", bad ? "<span class=\"flag\">&#9873; outlier</span>" : "ok");
	}
	sbuf_puts(b, "</tbody></table>\n");
}

static char **words(const char *s, size_t *n);

/* The run a design file (task-<task>_run-<run>) belongs to; NULL when unknown. */
static const runrec_run *design_run(const page *pg, const char *name)
{
	size_t r;
	char want[512];

	for (r = 0; r < pg->rec.nruns; r++) {
		snprintf(want, sizeof want, "task-%s_run-%s", pg->rec.runs[r].task ? pg->rec.runs[r].task : "",
			 pg->rec.runs[r].run ? pg->rec.runs[r].run : "");
		if (!strcmp(want, name))
			return &pg->rec.runs[r];
	}
	return NULL;
}

/*
 * Onsets (s) of each condition column from the run's events file; returns 1
 * when the file was read, 0 (nothing filled) when it is missing or unreadable.
 */
static int design_onsets(const page *pg, const runrec_run *run, const table *d, const int *kind,
			 double **on, size_t *non)
{
	char *col = runrec_ini_get(pg->rec.study_text, "localizer", "condition_column");
	table ev;
	int co, cc;
	size_t r, c;

	if (!run || !run->events || table_read(run->events, 0, &ev, NULL)) {
		free(col);
		return 0;
	}
	co = table_col(&ev, "onset");
	cc = table_col(&ev, col ? col : "trial_type");
	free(col);
	if (co < 0 || cc < 0) {
		table_release(&ev);
		return 0;
	}
	for (c = 0; c < d->ncols; c++) {
		if (kind[c] != QC_COL_CONDITION)
			continue;
		on[c] = xmalloc_array(ev.nrows + 1, sizeof **on);
		for (r = 0; r < ev.nrows; r++) {
			char *end;
			const char *cell = table_cell(&ev, r, (size_t)co);
			double v = strtod(cell, &end);

			if (!strcmp(table_cell(&ev, r, (size_t)cc), d->header[c]) && end != cell && !*end && isfinite(v))
				on[c][non[c]++] = v;
		}
	}
	table_release(&ev);
	return 1;
}

/* Reads a table (sep as table_read); when it cannot be read, its message goes into b as a note and -1 is returned. */
static int read_or_note(const char *path, char sep, table *t, sbuf *b)
{
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	if (table_read(path, sep, t, &e) == SR_OK)
		return 0;
	sbuf_puts(b, "<p class=\"note\">");
	html_esc(b, e.msg);
	sbuf_puts(b, "</p>\n");
	return -1;
}

/* One run's design matrix: a trace per column against time, grouped by kind. */
static void design_figure(page *pg, sbuf *b, const char *path, const char *name)
{
	table t;
	size_t r, c, nconf, ncond = 0;
	double *val, **marks, tr, vt = 0.5;
	int *kind, from_events;
	size_t *nmarks;
	char **conf;
	char *text;
	const runrec_run *run;

	if (read_or_note(path, ',', &t, b) != 0)
		return;
	if (!t.nrows || !t.ncols) {
		sbuf_puts(b, "<p class=\"note\">");
		html_esc(b, path);
		sbuf_puts(b, ": no rows, so no figure.</p>\n");
		table_release(&t);
		return;
	}
	text = runrec_ini_get(pg->rec.study_text, "model", "confounds");
	conf = words(text, &nconf);
	free(text);
	/* when in the volume the model samples: volume_time */
	text = runrec_ini_get(pg->rec.study_text, "model", "volume_time");
	if (text && strtod(text, NULL) >= 0 && strtod(text, NULL) <= 1)
		vt = strtod(text, NULL);
	free(text);
	val = xmalloc_array(t.nrows * t.ncols, sizeof *val);
	kind = xmalloc_array(t.ncols, sizeof *kind);
	marks = xcalloc(t.ncols, sizeof *marks);
	nmarks = xcalloc(t.ncols, sizeof *nmarks);
	for (r = 0; r < t.nrows; r++)
		for (c = 0; c < t.ncols; c++) {
			char *end;
			const char *cell = table_cell(&t, r, c);
			double v = strtod(cell, &end);

			val[r * t.ncols + c] = end != cell && !*end ? v : NAN;
		}
	for (c = 0; c < t.ncols; c++) {
		kind[c] = (int)qc_column_kind(t.header[c], conf, nconf);
		ncond += kind[c] == QC_COL_CONDITION;
	}
	run = design_run(pg, name);
	tr = run ? run->tr : NAN;
	from_events = design_onsets(pg, run, &t, kind, marks, nmarks);
	if (!from_events)
		for (c = 0; c < t.ncols; c++) {
			size_t *rows, k;

			if (kind[c] != QC_COL_CONDITION)
				continue;
			/* no events file at hand: mark where the regressor rises above a tenth of its
			   range (the response lags each onset by a second or two) */
			rows = xmalloc_array(t.nrows, sizeof *rows);
			nmarks[c] = qc_rises(val + c, t.nrows, t.ncols, 0.1, rows, t.nrows);
			marks[c] = xmalloc_array(nmarks[c] + 1, sizeof **marks);
			for (k = 0; k < nmarks[c]; k++)
				marks[c][k] = ((double)rows[k] + vt) * (isfinite(tr) && tr > 0 ? tr : 1.0);
			free(rows);
		}
	sbuf_puts(b, "<figure class=\"design\"><figcaption><b>");
	html_esc(b, name);
	sbuf_printf(b, "</b>: %zu volumes &times; %zu columns%s; each trace scaled to its own range", t.nrows, t.ncols,
		  isfinite(tr) && tr > 0 ? "" : " (TR unknown: x in volumes)");
	if (ncond && from_events)
		sbuf_puts(b, "; &#9650; an event's onset (from the run's events file)");
	else if (ncond)
		sbuf_puts(b, "; &#9650; where a condition's regressor rises (the events file is not at hand)");
	sbuf_puts(b, "</figcaption>\n");
	svg_design(b, t.header, kind, t.ncols, val, t.nrows, tr, vt, (const double *const *)marks, nmarks);
	sbuf_puts(b, "</figure>\n");
	for (c = 0; c < t.ncols; c++)
		free(marks[c]);
	free(marks);
	free(nmarks);
	free(kind);
	free(val);
	strv_free_array(conf, nconf);
	table_release(&t);
}

static void designs(page *pg, sbuf *b)
{
	char ddir[4200], path[8400];
	char **names;
	size_t n, i;

	snprintf(ddir, sizeof ddir, "%s/design", pg->dir);
	names = list_dir(ddir, "", ".csv", &n);
	if (!n)
		sbuf_puts(b, "<p class=\"note\">No design matrices in design/.</p>\n");
	for (i = 0; i < n; i++) {
		snprintf(path, sizeof path, "%s/%s.csv", ddir, names[i]);
		design_figure(pg, b, path, names[i]);
	}
	strv_free_array(names, n);
}

/* Splits a space/comma separated list (empty pieces dropped); free with strv_free_array. */
static char **words(const char *s, size_t *n)
{
	strv v = { 0 };

	strv_split(&v, s ? s : "", " ,\t", 0);
	*n = v.n;
	return v.v;
}

static void motion(page *pg, subpage_summary *s, sbuf *b)
{
	char *mtext = runrec_ini_get(pg->rec.study_text, "model", "motion");
	char *units = runrec_ini_get(pg->rec.study_text, "model", "motion_units");
	char *thr = runrec_ini_get(pg->rec.study_text, "model", "fd_threshold");
	double threshold = thr ? strtod(thr, NULL) : 0.5;
	int deg = units && strcmp(units, "mm_deg") == 0;
	char **cols;
	size_t ncols, r;

	cols = words(mtext, &ncols);
	if (!(threshold > 0))
		threshold = 0.5;
	sbuf_printf(b, "<p class=\"note\">Framewise displacement (Power et al. 2012): the sum of the absolute "
		  "volume-to-volume changes of the six motion parameters, rotations (%s) as arc length on a "
		  "50 mm sphere. A run is flagged when its <b>mean</b> FD exceeds the study's fd_threshold "
		  "(%g mm): the mean measures sustained motion, while the maximum flags almost any run with a "
		  "single jerk; both are listed.</p>\n", deg ? "degrees" : "radians", threshold);
	if (ncols != 6) {
		sbuf_puts(b, "<p class=\"note\">The study names no six motion columns ([model] motion), so no FD is shown.</p>\n");
		goto out;
	}
	sbuf_puts(b, "<table id=\"motion\"><thead><tr><th>task</th><th>run</th><th>volumes</th><th>mean FD (mm)</th>"
		   "<th>max FD (mm)</th><th>volumes &gt; threshold</th><th>check</th></tr></thead><tbody>\n");
	{
		sbuf charts;

		sbuf_init(&charts);
		for (r = 0; r < pg->rec.nruns; r++) {
			const runrec_run *run = &pg->rec.runs[r];
			table t;
			int ci[6], ok = 1;
			size_t j, i, nabove = 0;
			double *mp, *fd, mean, max;

			if (!run->confounds)
				continue;
			if (read_or_note(run->confounds, 0, &t, &charts) != 0)
				continue;
			for (j = 0; j < 6; j++)
				if ((ci[j] = table_col(&t, cols[j])) < 0 && ok) {
					ok = 0;
					sbuf_puts(&charts, "<p class=\"note\"><span class=\"flag\">&#9873;</span> ");
					html_esc(&charts, run->confounds);
					sbuf_puts(&charts, ": no column ");
					html_esc(&charts, cols[j]);
					sbuf_puts(&charts, " ([model] motion), so no FD for this run.</p>\n");
				}
			if (!ok || !t.nrows) {
				table_release(&t);
				continue;
			}
			mp = xmalloc_array(t.nrows * 6, sizeof *mp);
			fd = xmalloc_array(t.nrows, sizeof *fd);
			for (i = 0; i < t.nrows; i++)
				for (j = 0; j < 6; j++) {
					int na;

					if (table_number(&t, i, (size_t)ci[j], &mp[6 * i + j], &na, 1, NULL))
						mp[6 * i + j] = NAN;
				}
			qc_fd(mp, t.nrows, deg, 50.0, fd, NULL);
			qc_mean_max(fd, t.nrows, &mean, &max);
			for (i = 0; i < t.nrows; i++)
				nabove += isfinite(fd[i]) && fd[i] > threshold;
			s->nruns_fd++;
			if (mean > threshold)
				s->nruns_flagged++;
			sbuf_printf(b, "<tr%s><td>", mean > threshold ? " class=\"flag\"" : "");
			html_esc(b, run->task);
			sbuf_puts(b, "</td><td>");
			html_esc(b, run->run);
			sbuf_printf(b, "</td><td class=\"n\">%zu</td><td class=\"n\">%.3f</td><td class=\"n\">%.3f</td><td class=\"n\">%zu</td><td>%s</td></tr>\n",
				  t.nrows, mean, max, nabove,
				  mean > threshold ? "<span class=\"flag\">&#9873; mean FD above threshold</span>" : "ok");
			sbuf_puts(&charts, "<figure><figcaption><b>task ");
			html_esc(&charts, run->task);
			sbuf_puts(&charts, ", run ");
			html_esc(&charts, run->run);
			sbuf_printf(&charts, "</b>: mean FD %.3f mm, max %.3f mm%s</figcaption>\n", mean, max,
				  mean > threshold ? " &mdash; <span class=\"flag\">&#9873; flagged</span>" : "");
			svg_fd(&charts, ++pg->uid, fd, t.nrows, run->tr, threshold);
			sbuf_puts(&charts, "</figure>\n");
			free(mp);
			free(fd);
			table_release(&t);
		}
		sbuf_puts(b, "</tbody></table>\n");
		sbuf_puts(b, charts.p);
		sbuf_release(&charts);
	}
out:
	strv_free_array(cols, ncols);
	free(mtext);
	free(units);
	free(thr);
}

/* The subject's own responses.csv, as a table (numbers as %.4g). */
static void responses(page *pg, sbuf *b)
{
	char path[4200];
	table t;
	size_t r, c;

	snprintf(path, sizeof path, "%s/responses.csv", pg->dir);
	if (read_or_note(path, ',', &t, b) != 0)
		return;
	sbuf_puts(b, "<div class=\"wide\"><table id=\"responses\"><thead><tr>");
	for (c = 0; c < t.ncols; c++) {
		sbuf_puts(b, "<th>");
		html_esc(b, t.header[c]);
		sbuf_puts(b, "</th>");
	}
	sbuf_puts(b, "</tr></thead><tbody>\n");
	for (r = 0; r < t.nrows; r++) {
		sbuf_puts(b, "<tr>");
		for (c = 0; c < t.ncols; c++) {
			const char *cell = table_cell(&t, r, c);
			char *end;
			double v = strtod(cell, &end);
			/* labels stay as written: subject 01 is not the number 1 */
			int label = !strcmp(t.header[c], "subject") || !strcmp(t.header[c], "define_runs") ||
				    !strcmp(t.header[c], "measure_runs");
			int num = !label && *cell && !*end && isfinite(v);

			sbuf_puts(b, num ? "<td class=\"n\">" : "<td>");
			if (num)
				sbuf_printf(b, "%.4g", v);
			else
				html_esc(b, cell);
			sbuf_puts(b, "</td>");
		}
		sbuf_puts(b, "</tr>\n");
	}
	sbuf_puts(b, "</tbody></table></div>\n");
	table_release(&t);
}

static void page_release(page *pg)
{
	size_t i;

	runrec_release(&pg->rec);
	free(pg->bold);
	free(pg->parcels);
	for (i = 0; i < pg->nmaps; i++) {
		free(pg->maps[i].token);
		free(pg->maps[i].lab);
		free(pg->maps[i].t);
	}
	free(pg->maps);
	for (i = 0; i < pg->np; i++)
		free(pg->pname[i]);
	free(pg->pname);
	free(pg->pidx);
}

/*
 * Which way the slices face, in one sentence: the letters at each slice's
 * edges come from the image's affine; say which side the subject's left is on.
 */
static void orientation_note(const page *pg, sbuf *b)
{
	const double(*A)[4] = (const double(*)[4])pg->g.affine;
	double c0, c1, c2, cmin;
	char right = qc_axis_letter(A, 0, 1, &c0), up = qc_axis_letter(A, 1, 1, &c1);
	char through = qc_axis_letter(A, 2, 1, &c2);
	const char *plane = through == 'S' || through == 'I' ? "Axial" : through == 'A' || through == 'P' ? "Coronal" : "Sagittal";

	cmin = fmin(c0, fmin(c1, c2));
	sbuf_printf(b, "<p class=\"note\" id=\"orientation\">%s slices (along the image's third voxel axis k, counted from 0), "
		  "evenly spaced through the fROI's extent, drawn in the image's own voxel order (not resampled): the letters at "
		  "each slice's edges come from its affine (%s; R/L right/left, A/P anterior/posterior, S/I superior/inferior). ",
		  plane, pg->g.sform_code > 0 ? "sform" : pg->g.qform_code > 0 ? "qform" : "neither sform nor qform is set, so the NIfTI default is assumed and the letters may be wrong");
	if (right == 'R' || right == 'L')
		sbuf_printf(b, "<b>The subject's left is shown on the %s</b> (%s convention), %c at the top.",
			  right == 'R' ? "left" : "right", right == 'R' ? "neurological" : "radiological", up);
	else
		sbuf_printf(b, "Left to right on the page runs from %c to %c, bottom to top from %c to %c.",
			  qc_axis_letter(A, 0, -1, NULL), right, qc_axis_letter(A, 1, -1, NULL), up);
	if (cmin < 0.999)
		sbuf_printf(b, " The image is oblique (an axis up to %.0f&deg; from the nearest direction): the letters name the nearest one.",
			  acos(cmin) * 180.0 / 3.14159265358979323846);
	sbuf_puts(b, "</p>\n");
}

sr_status subpage_write(const char *out, const char *label, subpage_summary *s, sr_err *e)
{
	page pg;
	sbuf b;
	char path[8400], title[256];
	nii_info in;
	sr_err note;
	double tlo = 0, thi = 1, glo = 0, ghi = 1;
	size_t i;
	sr_status rc;
	char *split;

	memset(&pg, 0, sizeof pg);
	memset(s, 0, sizeof *s);
	s->label = xstrdup(label);
	pg.out = out;
	pg.label = label;
	snprintf(pg.dir, sizeof pg.dir, "%s/sub-%s", out, label);
	snprintf(path, sizeof path, "%s/run.json", pg.dir);
	rc = runrec_read(path, &pg.rec, e);
	if (rc)
		return rc;
	{
		/* several localizers: the first one's split (its splits are the page's halves) */
		char loc0[64], sec[96];

		first_named_localizer(pg.rec.study_text, loc0, sizeof loc0);
		snprintf(sec, sizeof sec, "localizer%s%s", loc0[0] ? " " : "", loc0);
		split = runrec_ini_get(pg.rec.study_text, sec, "split");
	}
	s->split_kind = split ? split : xstrdup("odd-even");
	s->study_file = pg.rec.study_file ? xstrdup(pg.rec.study_file) : NULL;
	sr_err_init(&note, NULL, NULL);
	if (!boldref_path(&pg, path, sizeof path) || nii_read_3d(path, &in, &pg.bold, &note)) {
		/* no background: take the grid from the first fROI map */
		char **tok;
		size_t n;
		char mdir[4200], prefix[256];

		snprintf(mdir, sizeof mdir, "%s/func", pg.dir);
		snprintf(prefix, sizeof prefix, "sub-%s_", label);
		tok = list_dir(mdir, prefix, "_dseg.nii.gz", &n);
		if (!n || (snprintf(path, sizeof path, "%s/%s%s_dseg.nii.gz", mdir, prefix, tok[0]),
			   nii_read_info(path, &in, NULL))) {
			strv_free_array(tok, n);
			page_release(&pg);
			return sr_fail(e, SR_EIO, "%s: no maps to show (the _boldref.nii.gz and _dseg.nii.gz images are missing)",
				       mdir);
		}
		strv_free_array(tok, n);
	}
	pg.g = in.grid;
	pg.nx = (size_t)in.grid.nx;
	pg.ny = (size_t)in.grid.ny;
	pg.nz = (size_t)in.grid.nz;
	pg.nvox = nii_nvox(&in.grid);
	if (pg.rec.parcels) {
		/* the one parcel reader: labels validated as analyze validated them; elsewhere on the grid, no outline */
		parcels_set ps;

		if (parcels_load(pg.rec.parcels, NULL, &ps, &note) == SR_OK) {
			if (nii_same_grid(&ps.grid, &pg.g, 1e-3, NULL, 0)) {
				pg.parcels = ps.labels;
				ps.labels = NULL;
			}
			parcels_release(&ps);
		}
	}
	load_maps(&pg, &note);
	load_parcels(&pg);
	if (pg.bold)
		qc_window(pg.bold, pg.nvox, 0.02, 0.98, &glo, &ghi);
	t_range(&pg, &tlo, &thi);

	sbuf_init(&b);
	snprintf(title, sizeof title, "sub-%s", label);
	html_begin(&b, title, "Subject report: fROIs, overlap of the halves, design matrices and motion",
		 "../report.html", "study report");
	sbuf_puts(&b, "<nav class=\"toc\"><a href=\"#frois\">fROIs</a> &middot; <a href=\"#overlap-h\">sizes and overlap</a> &middot; "
		    "<a href=\"#design\">design matrices</a> &middot; <a href=\"#motion-h\">motion</a> &middot; "
		    "<a href=\"#responses-h\">responses</a></nav>\n");
	{
		/* the study file decided the smoothing for every run (METHODS.md 2b); run.json keeps its text */
		char *fw = runrec_ini_get(pg.rec.study_text, "model", "smoothing_fwhm");
		char *end = NULL;
		double v = fw ? strtod(fw, &end) : 0.0;

		if (fw && end != fw && *end == '\0' && v > 0)
			sbuf_printf(&b, "<p class=\"note\">Runs smoothed before the fit: Gaussian of %g mm FWHM inside "
				  "each volume's data (normalised convolution).</p>\n", v);
		else
			sbuf_puts(&b, "<p class=\"note\">Runs fitted unsmoothed (no smoothing_fwhm in the study).</p>\n");
		free(fw);
	}
	sbuf_puts(&b, "<h2 id=\"overlap-h\">fROI sizes and overlap of the halves</h2>\n");
	sbuf_puts(&b, "<p class=\"note\">Voxels per split; Dice = 2|A&cap;B| / (|A| + |B|) between the localizer's "
		    "halves (for leave-one-out: the mean over all pairs of folds).</p>\n<p class=\"note\" id=\"overlap-rule\">"
		    "<b>Overlap flag:</b> " QC_OVERLAP_RULE "</p>\n");
	overlap(&pg, s, &b);
	{
		static const char *const lead[] = { "localizer", "parcel", "split", "t_correlation", "dice", "n_above",
						    "n_voxels", "froi_voxels", NULL };
		table rt;
		char rpath[8192];

		sbuf_puts(&b, "<h2 id=\"reliability-h\">Reliability of the fROIs</h2>\n<p class=\"note\">" RELIABILITY_NOTE
			    " From reliability.csv.</p>\n");
		snprintf(rpath, sizeof rpath, "%s/sub-%s/reliability.csv", out, label);
		if (table_read(rpath, ',', &rt, NULL) == SR_OK) {
			sbuf_puts(&b, "<div class=\"wide\">");
			report_table_html(&b, &rt, "reliability", lead);
			sbuf_puts(&b, "</div>\n");
			table_release(&rt);
		} else {
			sbuf_puts(&b, "<p class=\"note\">No reliability.csv for this subject (analyze it again).</p>\n");
		}
	}
	sbuf_puts(&b, "<h2 id=\"frois\">fROIs on the mean functional image</h2>\n");
	if (!pg.bold)
		sbuf_puts(&b, "<p class=\"note\">The mean image (func/*_boldref.nii.gz) is missing: slices drawn on a gray field.</p>\n");
	if (!pg.parcels)
		sbuf_puts(&b, "<p class=\"note\">The parcel image is missing or on another grid: no parcel outline.</p>\n");
	orientation_note(&pg, &b);
	sbuf_puts(&b, "<p class=\"note\">Localizer t uses the viridis scale below (1st to 99th percentile of this "
		    "subject's t maps).</p>\n");
	svg_colorbar(&b, ++pg.uid, tlo, thi, "localizer t");
	for (i = 0; i < pg.np; i++)
		section_parcel(&pg, &b, i, tlo, thi, glo, ghi);
	sbuf_puts(&b, "<h2 id=\"design\">Design matrices</h2>\n");
	designs(&pg, &b);
	sbuf_puts(&b, "<h2 id=\"motion-h\">Motion</h2>\n");
	motion(&pg, s, &b);
	sbuf_puts(&b, "<h2 id=\"responses-h\">Responses</h2>\n<p class=\"note\">A <code>:mean</code> row averages "
		    "the splits above it; its define_runs and measure_runs list each split's runs, splits separated by "
		    "<code>|</code> (<code>1+3|2+4</code>: defined on 1+3 then on 2+4), so no run both defines and "
		    "measures one fROI.</p>\n");
	responses(&pg, &b);
	html_end(&b, pg.rec.study_file);
	snprintf(path, sizeof path, "%s/report.html", pg.dir);
	rc = html_write(path, &b, e);
	s->ok = rc == SR_OK;
	sbuf_release(&b);
	page_release(&pg);
	return rc;
}

void subpage_release(subpage_summary *s)
{
	size_t i;

	for (i = 0; i < s->nparcels; i++)
		free(s->parcels[i].name);
	free(s->parcels);
	free(s->label);
	free(s->split_kind);
	free(s->study_file);
	memset(s, 0, sizeof *s);
}
