/* report.c - the study page (charts, overlap, group table) and every subject page. */
#include <dirent.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../core/mem.h"
#include "../core/strv.h"
#include "../core/qc.h"
#include "../io/table.h"
#include "report.h"

/* Subject labels: sub-* folders of out holding a run record. */
static char **subject_dirs(const char *out, size_t *n)
{
	DIR *d = opendir(out);
	struct dirent *de;
	char **v = NULL, path[8192];
	struct stat sb;
	size_t cap = 0;

	*n = 0;
	if (!d)
		return NULL;
	while ((de = readdir(d))) {
		if (strncmp(de->d_name, "sub-", 4) || !de->d_name[4])
			continue;
		snprintf(path, sizeof path, "%s/%s/run.json", out, de->d_name);
		if (stat(path, &sb) != 0)
			continue;
		XGROW(v, *n, cap);
		v[(*n)++] = xstrdup(de->d_name + 4);
	}
	closedir(d);
	if (*n)
		qsort(v, *n, sizeof *v, strv_cmp);
	return v;
}

/* Index of s in v[0..n), or -1. */
static long find(char **v, size_t n, const char *s)
{
	size_t i;

	for (i = 0; i < n; i++)
		if (strcmp(v[i], s) == 0)
			return (long)i;
	return -1;
}

/* Appends a copy of s unless v holds it already (first appearance order). */
static void add_unique(strv *v, const char *s)
{
	if (!strv_contains(v, s))
		strv_push(v, s);
}

/* Prints a cell: numbers as %.4g (right aligned), text escaped. */
static void cell(sbuf *b, const char *s)
{
	char *end;
	double v = strtod(s, &end);

	if (*s && !*end && isfinite(v)) {
		sbuf_printf(b, "<td class=\"n\">%.4g</td>", v);
	} else {
		sbuf_puts(b, "<td>");
		html_esc(b, s);
		sbuf_puts(b, "</td>");
	}
}

typedef struct cols {
	int subject, parcel, split, task, effect, value;
} cols;

/* Is row r one of this chart's rows: cross-validated (":mean") or a measured task ("all")? */
static int row_kind(const table *t, const cols *c, size_t r, int measured)
{
	const char *sp = table_cell(t, r, (size_t)c->split);
	size_t l = strlen(sp);

	if (measured)
		return strcmp(sp, "all") == 0;
	return l > 5 && strcmp(sp + l - 5, ":mean") == 0;
}

/* One chart's data: the bars of one parcel. */
typedef struct chart {
	char *parcel, *split;
	strv effects;
	svg_bar *bars;
	double *dots;
} chart;

/*
 * One chart per (measure task, parcel): a bar per effect, mean and sem over
 * subjects, subjects as dots; the numbers also go into the summary table. The
 * charts of one task (a family) share one y-range, so a parcel without an
 * effect shows small bars instead of filling its box.
 */
static void charts(sbuf *b, sbuf *sum, const table *t, const cols *c, int measured, char **subs,
		   size_t nsub, int *uid)
{
	strv tasks = { 0 }, parcels = { 0 };
	size_t r, ti, pi;

	for (r = 0; r < t->nrows; r++)
		if (row_kind(t, c, r, measured)) {
			add_unique(&tasks, table_cell(t, r, (size_t)c->task));
			add_unique(&parcels, table_cell(t, r, (size_t)c->parcel));
		}
	if (!tasks.n)
		sbuf_printf(b, "<p class=\"note\">No %s rows in responses.csv.</p>\n",
			  measured ? "measured-task (split all)" : "cross-validated (split :mean)");
	for (ti = 0; ti < tasks.n; ti++) {
		chart *ch = xcalloc(parcels.n ? parcels.n : 1, sizeof *ch);
		double lo = 0, hi = 0;

		for (pi = 0; pi < parcels.n; pi++) {
			chart *h = &ch[pi];
			size_t ei, k;

			h->parcel = parcels.v[pi];
			for (r = 0; r < t->nrows; r++)
				if (row_kind(t, c, r, measured) &&
				    !strcmp(table_cell(t, r, (size_t)c->task), tasks.v[ti]) &&
				    !strcmp(table_cell(t, r, (size_t)c->parcel), parcels.v[pi])) {
					add_unique(&h->effects, table_cell(t, r, (size_t)c->effect));
					if (!h->split)
						h->split = xstrdup(table_cell(t, r, (size_t)c->split));
				}
			if (!h->effects.n)
				continue;
			h->bars = xcalloc(h->effects.n, sizeof *h->bars);
			h->dots = xmalloc_array(h->effects.n * (nsub ? nsub : 1), sizeof *h->dots);
			for (ei = 0; ei < h->effects.n; ei++) {
				double s = 0, ss = 0, *d = h->dots + ei * nsub;
				size_t n = 0;

				for (k = 0; k < nsub; k++)
					d[k] = NAN;
				for (r = 0; r < t->nrows; r++) {
					long si;
					char *end;
					double v;

					if (!row_kind(t, c, r, measured) ||
					    strcmp(table_cell(t, r, (size_t)c->task), tasks.v[ti]) ||
					    strcmp(table_cell(t, r, (size_t)c->parcel), parcels.v[pi]) ||
					    strcmp(table_cell(t, r, (size_t)c->effect), h->effects.v[ei]))
						continue;
					si = find(subs, nsub, table_cell(t, r, (size_t)c->subject));
					v = strtod(table_cell(t, r, (size_t)c->value), &end);
					if (si < 0 || end == table_cell(t, r, (size_t)c->value) || !isfinite(v))
						continue;
					d[si] = v;
				}
				for (k = 0; k < nsub; k++)
					if (isfinite(d[k])) {
						s += d[k];
						n++;
						lo = fmin(lo, d[k]);
						hi = fmax(hi, d[k]);
					}
				h->bars[ei].label = h->effects.v[ei];
				h->bars[ei].mean = n ? s / (double)n : NAN;
				for (k = 0; k < nsub; k++)
					if (isfinite(d[k]))
						ss += (d[k] - h->bars[ei].mean) * (d[k] - h->bars[ei].mean);
				/* standard error of the mean: sample sd (n - 1) over sqrt(n) */
				h->bars[ei].sem = n > 1 ? sqrt(ss / (double)(n - 1)) / sqrt((double)n) : NAN;
				h->bars[ei].dots = d;
				h->bars[ei].ndots = nsub;
				if (isfinite(h->bars[ei].mean)) {
					double e = isfinite(h->bars[ei].sem) ? h->bars[ei].sem : 0;

					lo = fmin(lo, h->bars[ei].mean - e);
					hi = fmax(hi, h->bars[ei].mean + e);
				}
				sbuf_puts(sum, "<tr><td>");
				html_esc(sum, parcels.v[pi]);
				sbuf_puts(sum, "</td><td>");
				html_esc(sum, h->split);
				sbuf_puts(sum, "</td><td>");
				html_esc(sum, tasks.v[ti]);
				sbuf_puts(sum, "</td><td>");
				html_esc(sum, h->effects.v[ei]);
				sbuf_printf(sum, "</td><td class=\"n\">%zu</td><td class=\"n\">", n);
				html_num(sum, h->bars[ei].mean);
				sbuf_puts(sum, "</td><td class=\"n\">");
				html_num(sum, h->bars[ei].sem);
				sbuf_puts(sum, "</td></tr>\n");
			}
		}
		sbuf_puts(b, "<h3>Task ");
		html_esc(b, tasks.v[ti]);
		sbuf_puts(b, measured ? " (fROIs defined on all localizer runs)" : " (held-out runs, mean over splits)");
		sbuf_puts(b, "</h3>\n<p class=\"note\">One y-scale for every parcel of this task, so bar heights compare across parcels.</p>\n");
		sbuf_printf(b, "<div class=\"family\" data-task=\"");
		html_esc(b, tasks.v[ti]);
		sbuf_puts(b, "\">\n");
		for (pi = 0; pi < parcels.n; pi++) {
			chart *h = &ch[pi];
			char title[512];

			if (!h->effects.n)
				continue;
			snprintf(title, sizeof title, "%s \xe2\x80\x94 %s, %s", h->parcel, tasks.v[ti], h->split);
			sbuf_puts(b, "<figure>\n");
			svg_bars(b, ++*uid, title, "percent signal change", h->bars, h->effects.n, lo, hi);
			sbuf_puts(b, "</figure>\n");
		}
		sbuf_puts(b, "</div>\n");
		for (pi = 0; pi < parcels.n; pi++) {
			free(ch[pi].bars);
			free(ch[pi].dots);
			free(ch[pi].split);
			strv_free(&ch[pi].effects);
		}
		free(ch);
	}
	strv_free(&tasks);
	strv_free(&parcels);
}

/*
 * A CSV as an HTML table with the given id: the columns named in first
 * (NULL-terminated) lead in that order, so the key numbers stay in view of a
 * narrow window, then the others as in the file.
 */
void report_table_html(sbuf *b, const table *t, const char *id, const char *const *first)
{
	size_t r, c, k, n = 0, *order = xmalloc_array(t->ncols ? t->ncols : 1, sizeof *order);
	unsigned char *used = xcalloc(t->ncols ? t->ncols : 1, 1);

	for (k = 0; first && first[k]; k++) {
		int j = table_col(t, first[k]);

		if (j >= 0 && !used[j]) {
			order[n++] = (size_t)j;
			used[j] = 1;
		}
	}
	for (c = 0; c < t->ncols; c++)
		if (!used[c])
			order[n++] = c;
	sbuf_printf(b, "<table id=\"%s\"><thead><tr>", id);
	for (c = 0; c < n; c++) {
		sbuf_puts(b, "<th>");
		html_esc(b, t->header[order[c]]);
		sbuf_puts(b, "</th>");
	}
	sbuf_puts(b, "</tr></thead><tbody>\n");
	for (r = 0; r < t->nrows; r++) {
		sbuf_puts(b, "<tr>");
		for (c = 0; c < n; c++)
			cell(b, table_cell(t, r, order[c]));
		sbuf_puts(b, "</tr>\n");
	}
	sbuf_puts(b, "</tbody></table>\n");
	free(order);
	free(used);
}

static void subjects_table(sbuf *b, const subpage_summary *subs, size_t n)
{
	size_t i, k;

	sbuf_puts(b, "<table id=\"subjects\"><thead><tr><th>subject</th><th>parcel</th><th>voxels, half A</th>"
		   "<th>voxels, half B</th><th>Dice</th><th>runs with FD</th><th>runs flagged</th><th>check</th>"
		   "</tr></thead><tbody>\n");
	for (i = 0; i < n; i++) {
		const subpage_summary *s = &subs[i];

		for (k = 0; k < s->nparcels; k++) {
			const subpage_parcel *p = &s->parcels[k];
			int bad = qc_overlap_flag(p->size_a, p->size_b, p->dice);

			sbuf_printf(b, "<tr%s><td><a href=\"sub-", bad ? " class=\"flag\"" : "");
			html_esc(b, s->label);
			sbuf_puts(b, "/report.html\">sub-");
			html_esc(b, s->label);
			sbuf_puts(b, "</a></td><td>");
			html_esc(b, p->name);
			sbuf_puts(b, "</td><td class=\"n\">");
			html_num(b, p->size_a);
			sbuf_puts(b, "</td><td class=\"n\">");
			html_num(b, p->size_b);
			sbuf_puts(b, "</td><td class=\"n\">");
			if (isfinite(p->dice))
				sbuf_printf(b, "%.3f", p->dice);
			else
				sbuf_puts(b, "&ndash;");
			sbuf_printf(b, "</td><td class=\"n\">%zu</td><td class=\"n\">%zu</td><td>%s%s</td></tr>\n",
				  s->nruns_fd, s->nruns_flagged,
				  bad ? "<span class=\"flag\">&#9873; overlap outlier</span>" : "ok",
				  s->nruns_flagged ? " <span class=\"flag\">&#9873; motion</span>" : "");
		}
	}
	sbuf_puts(b, "</tbody></table>\n");
}

/*
 * The banner at the top of the study page when the group step is incomplete:
 * the subjects group_subjects.csv lists as missing or unreadable, with why;
 * without that file, group.csv rows marked incomplete. Nothing when complete.
 */
static void incomplete_banner(sbuf *b, const char *out, const table *group, int have_group)
{
	char path[8192];
	table t;
	size_t r, nbad = 0, nall = 0;

	snprintf(path, sizeof path, "%s/group_subjects.csv", out);
	if (table_read(path, ',', &t, NULL) == SR_OK) {
		int cs = table_col(&t, "subject"), cst = table_col(&t, "status"), cr = table_col(&t, "reason");

		for (r = 0; cs >= 0 && cst >= 0 && r < t.nrows; r++) {
			const char *st = table_cell(&t, r, (size_t)cst);

			nall += strcmp(st, "excluded") != 0;
			nbad += strcmp(st, "missing") == 0 || strcmp(st, "unreadable") == 0;
		}
		if (nbad) {
			sbuf_printf(b, "<div class=\"banner\" id=\"incomplete\" role=\"alert\"><b>&#9873; Group step incomplete:</b> "
				  "%zu of %zu subjects are not in the group table or the charts:", nbad, nall);
			sbuf_puts(b, "<ul>");
			for (r = 0; r < t.nrows; r++) {
				const char *st = table_cell(&t, r, (size_t)cst);

				if (strcmp(st, "missing") && strcmp(st, "unreadable"))
					continue;
				const char *lab = table_cell(&t, r, (size_t)cs);

				/* the table holds participant_id (sub-<label>); older tables the bare label */
				sbuf_puts(b, "<li><b class=\"sub\">sub-");
				html_esc(b, strncmp(lab, "sub-", 4) == 0 ? lab + 4 : lab);
				sbuf_puts(b, "</b> ");
				html_esc(b, st);
				if (cr >= 0 && *table_cell(&t, r, (size_t)cr)) {
					sbuf_puts(b, ": ");
					html_esc(b, table_cell(&t, r, (size_t)cr));
				}
				sbuf_puts(b, "</li>");
			}
			sbuf_puts(b, "</ul>Rerun analyze for them (or list them under exclusions) before reading the group results.</div>\n");
		}
		table_release(&t);
		return;
	}
	if (have_group) {
		int cn = table_col(group, "note");

		for (r = 0; cn >= 0 && r < group->nrows; r++)
			nbad += strstr(table_cell(group, r, (size_t)cn), "incomplete") != NULL;
		if (nbad)
			sbuf_printf(b, "<div class=\"banner\" id=\"incomplete\" role=\"alert\"><b>&#9873; Group step incomplete:</b> "
				  "%zu rows of group.csv are marked incomplete (subjects missing); group_subjects.csv, which "
				  "names them, is not in this folder.</div>\n", nbad);
	}
}

/* Index of s in v[0..n) sorted by strv_cmp, or -1. */
static long find_sorted(char **v, size_t n, const char *s)
{
	char **hit = n ? bsearch(&s, v, n, sizeof *v, strv_cmp) : NULL;

	return hit ? (long)(hit - v) : -1;
}

/*
 * The localizers of a table's localizer column in row order, or none (*n = 0)
 * when it has no such column or only one localizer: then the report draws the
 * table as one, as with a single localizer.
 */
static char **table_localizers(const table *t, size_t *n)
{
	strv v = { 0 };
	int c = table_col(t, "localizer");
	size_t r;

	*n = 0;
	for (r = 0; c >= 0 && r < t->nrows; r++)
		add_unique(&v, table_cell(t, r, (size_t)c));
	if (v.n < 2) {
		strv_free(&v);
		return NULL;
	}
	*n = v.n;
	return v.v;
}

/* The rows of t whose localizer is loc, as a view borrowing t's cells (table_view_release). */
static void table_where_localizer(const table *t, const char *loc, table *view)
{
	int c = table_col(t, "localizer");
	size_t r, n = 0;

	*view = *t;
	view->cells = xmalloc_array(t->nrows * t->ncols + 1, sizeof *view->cells);
	view->line = xmalloc_array(t->nrows + 1, sizeof *view->line);
	for (r = 0; r < t->nrows; r++) {
		if (c >= 0 && strcmp(table_cell(t, r, (size_t)c), loc) != 0)
			continue;
		memcpy(view->cells + n * t->ncols, t->cells + r * t->ncols, t->ncols * sizeof *view->cells);
		view->line[n++] = t->line[r];
	}
	view->nrows = n;
}

static void table_view_release(table *view)
{
	free(view->cells);
	free(view->line);
	memset(view, 0, sizeof *view);
}

/* A heading per localizer, for a report of several. */
static void localizer_heading(sbuf *b, const char *loc)
{
	sbuf_puts(b, "<h3 class=\"localizer\">Localizer ");
	html_esc(b, loc);
	sbuf_puts(b, "</h3>\n");
}

/* One chart of the time courses: a parcel, split kind and task, with its conditions. */
typedef struct tc_chart {
	char *parcel, *split, *task;
	strv cond;
} tc_chart;

/* The charts of timecourses_group.csv, in its row order. */
static tc_chart *tc_charts(const table *g, const int *col, size_t *n)
{
	tc_chart *ch = NULL;
	size_t r, k, cap = 0;

	*n = 0;
	for (r = 0; r < g->nrows; r++) {
		const char *p = table_cell(g, r, (size_t)col[0]), *s = table_cell(g, r, (size_t)col[1]);
		const char *t = table_cell(g, r, (size_t)col[2]), *c = table_cell(g, r, (size_t)col[3]);

		for (k = 0; k < *n; k++)
			if (!strcmp(ch[k].parcel, p) && !strcmp(ch[k].split, s) && !strcmp(ch[k].task, t))
				break;
		if (k == *n) {
			XGROW(ch, *n, cap);
			memset(&ch[*n], 0, sizeof *ch);
			ch[*n].parcel = xstrdup(p);
			ch[*n].split = xstrdup(s);
			ch[*n].task = xstrdup(t);
			(*n)++;
		}
		add_unique(&ch[k].cond, c);
	}
	return ch;
}

/* The curves of one chart's condition: group mean and sem, and each subject's values. */
static void tc_fill(const table *g, const int *gc, const table *all, const int *ac, const tc_chart *ch,
		    const char *cond, char **times, size_t nb, char **subs, size_t ns, double *mean,
		    double *sem, double *subj)
{
	size_t r, i;

	for (i = 0; i < nb; i++)
		mean[i] = sem[i] = NAN;
	for (i = 0; i < nb * ns; i++)
		subj[i] = NAN;
	for (r = 0; r < g->nrows; r++) {
		long ti;

		if (strcmp(table_cell(g, r, (size_t)gc[0]), ch->parcel) || strcmp(table_cell(g, r, (size_t)gc[1]), ch->split) ||
		    strcmp(table_cell(g, r, (size_t)gc[2]), ch->task) || strcmp(table_cell(g, r, (size_t)gc[3]), cond) ||
		    (ti = find(times, nb, table_cell(g, r, (size_t)gc[4]))) < 0)
			continue;
		mean[ti] = strtod(table_cell(g, r, (size_t)gc[5]), NULL);
		sem[ti] = *table_cell(g, r, (size_t)gc[6]) ? strtod(table_cell(g, r, (size_t)gc[6]), NULL) : NAN;
		if (!*table_cell(g, r, (size_t)gc[5]))
			mean[ti] = NAN;
	}
	for (r = 0; all && r < all->nrows; r++) {
		long ti, si;
		const char *v;

		if (strcmp(table_cell(all, r, (size_t)ac[0]), ch->parcel) || strcmp(table_cell(all, r, (size_t)ac[1]), ch->split) ||
		    strcmp(table_cell(all, r, (size_t)ac[2]), ch->task) || strcmp(table_cell(all, r, (size_t)ac[3]), cond) ||
		    (ti = find(times, nb, table_cell(all, r, (size_t)ac[4]))) < 0 ||
		    (si = find_sorted(subs, ns, table_cell(all, r, (size_t)ac[6]))) < 0)
			continue;
		v = table_cell(all, r, (size_t)ac[5]);
		subj[(size_t)si * nb + (size_t)ti] = *v ? strtod(v, NULL) : NAN;
	}
}

static void tc_draw(sbuf *b, const table *g, const table *allp, const int *gc, const int *ac, int *uid);

/* Response time courses: one chart per parcel, split kind and task (timecourses_group.csv, timecourses.csv). */
static void timecourse_section(sbuf *b, const char *out, int *uid)
{
	static const char *const gn[] = { "parcel", "split", "measure_task", "condition", "time", "mean", "sem" };
	static const char *const an[] = { "parcel", "split", "measure_task", "condition", "time", "value", "subject" };
	char path[8192], **locs;
	size_t nl, l;
	int gc[7], ac[7], have_all, i;
	table g, all;

	sbuf_puts(b, "<h2 id=\"timecourses-h\">Response time courses</h2>\n<p class=\"note\">Finite-impulse-response "
		   "estimates per bin of one TR after each event's onset, in percent signal change, on the measure runs of each "
		   "split (cross-validated: the mean of the splits; measured tasks: fROIs from all localizer runs). Thick line: "
		   "mean over subjects; band: &#177;1 standard error; thin lines: one per subject.</p>\n");
	snprintf(path, sizeof path, "%s/timecourses_group.csv", out);
	if (table_read(path, ',', &g, NULL) != SR_OK) {
		sbuf_puts(b, "<p class=\"note\">No timecourses_group.csv in this folder (run the group step).</p>\n");
		return;
	}
	snprintf(path, sizeof path, "%s/timecourses.csv", out);
	have_all = table_read(path, ',', &all, NULL) == SR_OK;
	for (i = 0; i < 7; i++) {
		gc[i] = table_col(&g, gn[i]);
		ac[i] = have_all ? table_col(&all, an[i]) : 0;
		if (gc[i] < 0 || ac[i] < 0) {
			sbuf_puts(b, "<p class=\"note\">The time-course tables lack columns; nothing drawn.</p>\n");
			table_release(&g);
			if (have_all)
				table_release(&all);
			return;
		}
	}
	locs = table_localizers(&g, &nl);
	if (nl == 0)
		tc_draw(b, &g, have_all ? &all : NULL, gc, ac, uid);
	for (l = 0; l < nl; l++) {
		table gv, av;

		localizer_heading(b, locs[l]);
		table_where_localizer(&g, locs[l], &gv);
		if (have_all)
			table_where_localizer(&all, locs[l], &av);
		tc_draw(b, &gv, have_all ? &av : NULL, gc, ac, uid);
		table_view_release(&gv);
		if (have_all)
			table_view_release(&av);
	}
	strv_free_array(locs, nl);
	table_release(&g);
	if (have_all)
		table_release(&all);
}

/* The charts of one set of time-course rows (all of them, or one localizer's). */
static void tc_draw(sbuf *b, const table *gp, const table *allp, const int *gc, const int *ac, int *uid)
{
	strv times = { 0 }, subs = { 0 };
	size_t nb, ns, nch, k, r, q;
	int have_all = allp != NULL;
	const table g = *gp, all = allp ? *allp : *gp;
	tc_chart *ch;
	svg_curve **cvs;
	double *tv;

	for (r = 0; r < g.nrows; r++)
		add_unique(&times, table_cell(&g, r, (size_t)gc[4]));
	for (r = 0; have_all && r < all.nrows; r++)   /* rows come subject by subject */
		if (!subs.n || strcmp(subs.v[subs.n - 1], table_cell(&all, r, (size_t)ac[6])) != 0)
			add_unique(&subs, table_cell(&all, r, (size_t)ac[6]));
	strv_sort(&subs);
	nb = times.n;
	ns = subs.n;
	ch = tc_charts(&g, gc, &nch);
	cvs = xcalloc(nch ? nch : 1, sizeof *cvs);
	tv = xmalloc_array(nb ? nb : 1, sizeof *tv);
	for (q = 0; q < nb; q++)
		tv[q] = strtod(times.v[q], NULL);
	for (k = 0; k < nch; k++) {
		svg_curve *cv = cvs[k] = xcalloc(ch[k].cond.n ? ch[k].cond.n : 1, sizeof *cv);

		for (q = 0; q < ch[k].cond.n; q++) {
			double *mean = xmalloc_array(nb ? nb : 1, sizeof *mean);
			double *sem = xmalloc_array(nb ? nb : 1, sizeof *sem);
			double *subj = xmalloc_array((nb * ns) > 0 ? nb * ns : 1, sizeof *subj);

			tc_fill(&g, gc, have_all ? &all : NULL, ac, &ch[k], ch[k].cond.v[q], times.v, nb, subs.v, ns, mean,
				sem, subj);
			cv[q].label = ch[k].cond.v[q];
			cv[q].mean = mean;
			cv[q].sem = sem;
			cv[q].subj = subj;
			cv[q].nsubj = ns;
		}
	}
	sbuf_puts(b, "<div class=\"charts\">\n");
	for (k = 0; k < nch; k++) {
		svg_curve *cv = cvs[k];
		double lo = 0, hi = 0;
		char title[1024];
		size_t o;

		/* one y-range per task and split kind, so a flat parcel looks flat */
		for (o = 0; o < nch; o++)
			if (!strcmp(ch[o].task, ch[k].task) && !strcmp(ch[o].split, ch[k].split))
				svg_curves_range(cvs[o], ch[o].cond.n, nb, &lo, &hi);
		snprintf(title, sizeof title, "%s, %s (%s)", ch[k].parcel, ch[k].task, ch[k].split);
		svg_curves(b, ++*uid, title, tv, nb, cv, ch[k].cond.n, lo, hi);
	}
	for (k = 0; k < nch; k++) {
		svg_curve *cv = cvs[k];

		for (q = 0; q < ch[k].cond.n; q++) {
			free((double *)cv[q].mean);
			free((double *)cv[q].sem);
			free((double *)cv[q].subj);
		}
		free(cv);
		free(ch[k].parcel);
		free(ch[k].split);
		free(ch[k].task);
		strv_free(&ch[k].cond);
	}
	sbuf_puts(b, "</div>\n");
	free(ch);
	free(cvs);
	free(tv);
	strv_free(&times);
	strv_free(&subs);
}

/* The group summary of reliability.csv (reliability_group.csv) as a table. */
static void reliability_section(sbuf *b, const char *out)
{
	static const char *const lead[] = { "localizer", "parcel", "split", "measure", "n", "median", "min",
					    "max", NULL };
	char path[8192];
	table t;

	sbuf_puts(b, "<h2 id=\"reliability-h\">Reliability of the fROIs</h2>\n<p class=\"note\">" RELIABILITY_NOTE
		   " Per parcel over subjects: median, minimum and maximum (reliability_group.csv).</p>\n");
	snprintf(path, sizeof path, "%s/reliability_group.csv", out);
	if (table_read(path, ',', &t, NULL) != SR_OK) {
		sbuf_puts(b, "<p class=\"note\">No reliability_group.csv in this folder (run the group step).</p>\n");
		return;
	}
	sbuf_puts(b, "<div class=\"wide\">");
	report_table_html(b, &t, "reliability", lead);
	sbuf_puts(b, "</div>\n");
	table_release(&t);
}

/* Every subject's page; 1 when one could not be written (its stale page removed). */
static int subject_pages(const char *out, char **labels, size_t nsub, subpage_summary *subs, size_t *nok)
{
	char path[8192];
	size_t i;
	int rc = 0;
	sr_err e;

	*nok = 0;
	for (i = 0; i < nsub; i++) {
		sr_err_init(&e, NULL, NULL);
		if (subpage_write(out, labels[i], &subs[i], &e)) {
			fprintf(stderr, "splitroi report: sub-%s: %s\n", labels[i], e.msg);
			/* a page left from an earlier run would show results that are no longer there */
			snprintf(path, sizeof path, "%s/sub-%s/report.html", out, labels[i]);
			unlink(path);
			rc = 1;
		} else {
			(*nok)++;
		}
	}
	return rc;
}

/* The contents line with a link to each subject page that was written. */
static void contents_nav(sbuf *b, char **labels, const subpage_summary *subs, size_t nsub)
{
	size_t i;

	sbuf_puts(b, "<nav class=\"toc\"><a href=\"#cv\">cross-validated responses</a> &middot; "
		   "<a href=\"#measured\">measured tasks</a> &middot; <a href=\"#overlap\">fROI sizes and overlap</a> &middot; "
		   "<a href=\"#timecourses-h\">time courses</a> &middot; <a href=\"#reliability-h\">reliability</a> &middot; <a href=\"#group-h\">group table</a> &middot; <a href=\"#summary-h\">chart values</a><br>subjects:");
	for (i = 0; i < nsub; i++) {
		if (!subs[i].ok) {
			/* no link to a page that was not written (or is stale) */
			sbuf_puts(b, " sub-");
			html_esc(b, labels[i]);
			sbuf_puts(b, " <span class=\"flag\">(no page: see the command's messages)</span>");
			continue;
		}
		sbuf_puts(b, " <a href=\"sub-");
		html_esc(b, labels[i]);
		sbuf_puts(b, "/report.html\">sub-");
		html_esc(b, labels[i]);
		sbuf_puts(b, "</a>");
	}
	sbuf_puts(b, "</nav>\n");
}

/* The columns of responses.csv the charts need; 1 (said) when one is missing. */
static int response_columns(const table *resp, cols *c)
{
	c->subject = table_col(resp, "subject");
	c->parcel = table_col(resp, "parcel");
	c->split = table_col(resp, "split");
	c->task = table_col(resp, "measure_task");
	c->effect = table_col(resp, "effect");
	c->value = table_col(resp, "value");
	if (c->subject < 0 || c->parcel < 0 || c->split < 0 || c->task < 0 || c->effect < 0 || c->value < 0) {
		fprintf(stderr, "splitroi report: %s: missing columns (need subject, parcel, split, measure_task, effect, value)\n",
			resp->path);
		return 1;
	}
	return 0;
}

/* The cross-validated and measured-task charts, each localizer apart; their numbers into sum. */
static void response_charts(sbuf *b, sbuf *sum, const table *resp, const cols *c, int *uid)
{
	strv sl = { 0 };
	char **locs;
	size_t r, nl;

	for (r = 0; r < resp->nrows; r++)
		add_unique(&sl, table_cell(resp, r, (size_t)c->subject));
	strv_sort(&sl);
	locs = table_localizers(resp, &nl);
	for (int measured = 0; measured < 2; measured++) {
		if (measured)
			sbuf_puts(b, "<h2 id=\"measured\">Measured tasks</h2>\n<p class=\"note\">fROIs defined on all localizer runs, "
				   "responses in the other task's runs (split all).</p>\n");
		if (nl == 0)
			charts(b, sum, resp, c, measured, sl.v, sl.n, uid);
		for (size_t l = 0; l < nl; l++) {
			table v;

			/* several localizers: each one's fROIs apart (their parcels may share names) */
			localizer_heading(b, locs[l]);
			table_where_localizer(resp, locs[l], &v);
			charts(b, sum, &v, c, measured, sl.v, sl.n, uid);
			table_view_release(&v);
		}
	}
	strv_free_array(locs, nl);
	strv_free(&sl);
}

/* group.csv as a table, or a note that there is none. */
static void group_section(sbuf *b, table *group, int have_group)
{
	/* the note (e.g. incomplete) leads with the key numbers, so it is never scrolled away */
	static const char *const lead[] = { "localizer", "parcel", "split", "measure_task", "effect", "note", "n", "mean",
					    "sem", "t", "df", "p", "q_fdr", "cohen_d", NULL };
	size_t ngl;
	char **gl;

	sbuf_puts(b, "<h2 id=\"group-h\">Group table</h2>\n");
	if (!have_group) {
		sbuf_puts(b, "<p class=\"note\">No group.csv in this folder (run the group step).</p>\n");
		return;
	}
	sbuf_puts(b, "<p class=\"note\">From group.csv: one-sample tests over subjects; q_fdr is the Benjamini&ndash;Hochberg "
		   "adjusted p value.</p>\n");
	sbuf_puts(b, "<div class=\"wide\" id=\"group-box\">");
	gl = table_localizers(group, &ngl);
	/* the localizer leads only when there are several (else it follows the numbers) */
	report_table_html(b, group, "group", ngl ? lead : lead + 1);
	strv_free_array(gl, ngl);
	sbuf_puts(b, "</div>\n");
}

int report_write(const char *out, int quiet)
{
	char **labels, path[8192];
	size_t nsub, i, nok = 0;
	subpage_summary *subs;
	table resp, group;
	int have_resp, have_group, uid = 0, rc = 0;
	cols c;
	sbuf b, sum;
	sr_err e;
	const char *sf = NULL;

	labels = subject_dirs(out, &nsub);
	snprintf(path, sizeof path, "%s/responses.csv", out);
	sr_err_init(&e, NULL, NULL);
	have_resp = table_read(path, ',', &resp, &e) == SR_OK;
	if (!have_resp && !nsub) {
		fprintf(stderr, "splitroi report: %s holds no results (no responses.csv, no sub-*/run.json)\n", out);
		strv_free_array(labels, nsub);
		return 1;
	}
	if (!have_resp)
		fprintf(stderr, "splitroi report: %s\n", e.msg);
	subs = xcalloc(nsub ? nsub : 1, sizeof *subs);
	rc = subject_pages(out, labels, nsub, subs, &nok);
	snprintf(path, sizeof path, "%s/group.csv", out);
	have_group = table_read(path, ',', &group, NULL) == SR_OK;

	sbuf_init(&b);
	sbuf_init(&sum);
	html_begin(&b, "Study report", out, NULL, NULL);
	incomplete_banner(&b, out, &group, have_group);
	contents_nav(&b, labels, subs, nsub);
	sbuf_puts(&sum, "<table id=\"summary\"><thead><tr><th>parcel</th><th>split</th><th>measure_task</th>"
		      "<th>effect</th><th>n</th><th>mean</th><th>sem</th></tr></thead><tbody>\n");
	if (have_resp && response_columns(&resp, &c)) {
		table_release(&resp);
		have_resp = 0;
		rc = 1;
	}
	sbuf_puts(&b, "<h2 id=\"cv\">Cross-validated responses</h2>\n<p class=\"note\">fROIs defined on one part of the localizer runs, "
		    "responses measured in the others, averaged over the splits. Bars: mean over subjects; whiskers: &#177;1 standard "
		    "error of the mean; circles: one per subject, in subject order from left to right.</p>\n");
	if (have_resp)
		response_charts(&b, &sum, &resp, &c, &uid);
	sbuf_puts(&sum, "</tbody></table>\n");
	sbuf_puts(&b, "<h2 id=\"overlap\">fROI sizes and overlap of the halves</h2>\n<p class=\"note\">Dice = 2|A&cap;B| / (|A| + |B|) "
		    "of the fROIs defined on the two halves of the localizer runs (leave-one-out: the mean over all pairs of folds, "
		    "sizes the mean over folds).</p>\n<p class=\"note\" id=\"overlap-rule\"><b>Overlap flag:</b> " QC_OVERLAP_RULE "</p>\n"
		    "<p class=\"note\">A run is flagged for motion when its mean framewise displacement exceeds the study's fd_threshold.</p>\n");
	subjects_table(&b, subs, nsub);
	timecourse_section(&b, out, &uid);
	reliability_section(&b, out);
	group_section(&b, &group, have_group);
	if (have_group)
		table_release(&group);
	sbuf_puts(&b, "<h2 id=\"summary-h\">Chart values</h2>\n<p class=\"note\">The numbers behind the bars above, computed "
		    "here from responses.csv.</p>\n");
	sbuf_puts(&b, sum.p);
	for (i = 0; i < nsub && !sf; i++)
		sf = subs[i].study_file;
	html_end(&b, sf);
	snprintf(path, sizeof path, "%s/report.html", out);
	sr_err_init(&e, NULL, NULL);
	if (html_write(path, &b, &e)) {
		fprintf(stderr, "splitroi report: %s\n", e.msg);
		rc = 1;
	} else if (!quiet) {
		printf("report: %s (%zu of %zu subject pages)\n", path, nok, nsub);
	}
	sbuf_release(&b);
	sbuf_release(&sum);
	if (have_resp)
		table_release(&resp);
	for (i = 0; i < nsub; i++)
		subpage_release(&subs[i]);
	free(subs);
	strv_free_array(labels, nsub);
	return rc;
}
