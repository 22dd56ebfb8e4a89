/* check.c - the `check` command: validates a study and its data without fitting, listing every problem. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "../core/mem.h"
#include "../core/strv.h"
#include "../core/resample.h"
#include "../io/bids.h"
#include "../io/events.h"
#include "../io/nii.h"
#include "../io/parcels.h"
#include "../io/study.h"
#include "../io/table.h"
#include "cmd.h"
#include "cmdline.h"
#include "../pipeline/runfit.h"
#include "../pipeline/studycheck.h"
#include "../pipeline/subject.h"

enum { O_SUBJECTS, O_HEADERS_ONLY, O_NOPTS };

static const cmdline_opt opts[O_NOPTS + 1] = {
	[O_SUBJECTS] = { "subjects", "LIST", "check only these subjects (labels, space or comma separated)" },
	[O_HEADERS_ONLY] = { "headers-only", NULL, "read image headers only (faster; damaged image data goes unnoticed)" },
	[O_NOPTS] = { NULL, NULL, NULL },
};

static const cmdline_spec spec = {
	"check",
	"STUDY.ini [--subjects LIST]",
	"Loads the study file and everything it points to without fitting anything: "
	"subjects, runs (volumes, TR, conditions in the events), how the localizer runs "
	"will be split, the parcels with their voxel counts and the mask. Every image is "
	"read to its end so that damaged files show up now rather than during a fit. "
	"Every problem found is listed on standard error, each naming its file (and line "
	"and column where they apply); the exit status is then 1.",
	opts,
};

/* A growing list of strings (problems, warnings, condition names). */
typedef struct strlist {
	char **s;
	size_t n;
} strlist;

static void sl_push(strlist *l, const char *s)
{
	l->s = xrealloc(l->s, (l->n + 1) * sizeof *l->s);
	l->s[l->n++] = xstrdup(s);
}

static int sl_has(const strlist *l, const char *s)
{
	size_t i;

	for (i = 0; i < l->n; i++)
		if (strcmp(l->s[i], s) == 0)
			return 1;
	return 0;
}

static void sl_add_unique(strlist *l, const char *s)
{
	if (!sl_has(l, s))
		sl_push(l, s);
}

static void sl_free(strlist *l)
{
	size_t i;

	for (i = 0; i < l->n; i++)
		free(l->s[i]);
	free(l->s);
	l->s = NULL;
	l->n = 0;
}

/* The state of one check: what is wrong, what deserves a warning. */
typedef struct checker {
	const study *st;
	study_problems probs;
	strlist warns;
	int headers_only;
	int cosine_warned;   /* a cosine confound column met the model's own drift terms */
} checker;

static void on_warn(void *ctx, const char *msg)
{
	checker *c = ctx;

	sl_push(&c->warns, msg);
}

static void problem(checker *c, const char *msg)
{
	study_problems_add(&c->probs, NULL, 0, "%s", msg);
}

static const char *base(const char *path)
{
	const char *s = strrchr(path, '/');

	return s ? s + 1 : path;
}

/* ---- one run ---- */

/* Reads every volume so that a damaged file fails here; returns 0 when fine. */
static int read_through(checker *c, const char *path, nii_info *info)
{
	nii_stream *s;
	double *vol;
	sr_err e;
	int64_t t;
	int bad = 0;

	sr_err_init(&e, on_warn, c);
	if (nii_stream_open(path, &s, info, &e)) {
		problem(c, e.msg);
		return 1;
	}
	vol = xmalloc_array(nii_nvox(&info->grid), sizeof *vol);
	for (t = 0; t < info->nt; t++) {
		if (nii_stream_next(s, vol, &e)) {
			problem(c, e.msg);
			bad = 1;
			break;
		}
	}
	free(vol);
	nii_stream_close(s);
	return bad;
}

/* 1 when a confounds column is a cosine (drift) basis of a preprocessing pipeline. */
static int cosine_column(const char *name)
{
	return strncasecmp(name, "cosine", 6) == 0 || strncasecmp(name, "drift", 5) == 0;
}

/*
 * Confound and motion columns exist in the run's confounds table, with one
 * row per volume; prints the columns the patterns expand to, the n/a cells
 * replaced in each, and the volumes censored.
 */
static void check_confounds(checker *c, const bids_run *run, int64_t nt)
{
	const study *st = c->st;
	char *path;
	table t;
	sr_err e;
	size_t i, r;
	int *cols = NULL, ncols = 0, k;

	if (!st->nconfounds && !st->nmotion && !(st->censor_fd > 0))
		return;
	path = bids_confounds_path(run, st->confounds_suffix);
	sr_err_init(&e, on_warn, c);
	if (table_read(path, 0, &t, &e)) {
		problem(c, e.msg);
		free(path);
		return;
	}
	for (i = 0; i < st->nmotion; i++) {
		if (table_col(&t, st->motion[i]) < 0) {
			char msg[1024];

			snprintf(msg, sizeof msg, "%s: line %zu: no column '%s' (named in [model] motion)", path,
				 t.header_line, st->motion[i]);
			problem(c, msg);
		}
	}
	if (st->nconfounds &&
	    runfit_confound_columns(&t, path, (const char *const *)st->confounds, (int)st->nconfounds,
				    &cols, &ncols, &e) != SR_OK) {
		problem(c, e.msg);
	} else if (st->nconfounds) {
		size_t *na = xcalloc((size_t)ncols + 1, sizeof *na);
		int bad = 0, anyna = 0;

		printf("      confounds (%d column%s):", ncols, ncols == 1 ? "" : "s");
		for (k = 0; k < ncols; k++)
			printf(" %s", t.header[cols[k]]);
		printf("\n");
		/* the values analyze reads as regressors, by its rules (n/a and empty allowed) */
		for (k = 0; k < ncols && !bad; k++) {
			for (r = (size_t)st->skip_volumes; r < t.nrows; r++) {
				double x;
				int isna;

				if (table_number(&t, r, (size_t)cols[k], &x, &isna, 1, &e) != SR_OK) {
					problem(c, e.msg);
					bad = 1;
					break;
				}
				na[k] += isna;
			}
			anyna |= na[k] > 0;
			if (st->drift_cutoff > 0 && cosine_column(t.header[cols[k]]) && !c->cosine_warned) {
				char msg[1024];

				snprintf(msg, sizeof msg,
					 "%s: confound column '%s' is a cosine drift basis, and the model adds its own (drift_cutoff = %g s): drop the column or set drift_cutoff = none",
					 path, t.header[cols[k]], st->drift_cutoff);
				sl_push(&c->warns, msg);
				c->cosine_warned = 1;
			}
		}
		if (anyna && !bad) {
			printf("      n/a replaced by the column mean:");
			for (k = 0, i = 0; k < ncols; k++)
				if (na[k])
					printf("%s %s (%zu)", i++ ? "," : "", t.header[cols[k]], na[k]);
			printf("\n");
		}
		free(na);
	}
	free(cols);
	if (st->censor_fd > 0) {
		int fc = table_col(&t, "framewise_displacement");

		if (fc < 0) {
			char msg[1024];

			snprintf(msg, sizeof msg, "%s: line %zu: no column 'framewise_displacement' (needed by censor_fd)",
				 path, t.header_line);
			problem(c, msg);
		} else {
			size_t ncen = 0;

			for (r = (size_t)st->skip_volumes; r < t.nrows; r++) {
				double x;
				int isna;

				if (table_number(&t, r, (size_t)fc, &x, &isna, 1, &e) != SR_OK) {
					problem(c, e.msg);
					break;
				}
				ncen += !isna && x > st->censor_fd;
			}
			printf("      censored volumes (framewise_displacement > %g mm): %zu\n", st->censor_fd, ncen);
		}
	}
	if ((int64_t)t.nrows != nt) {
		char msg[1024];

		snprintf(msg, sizeof msg, "%s: %zu rows, but the run %s has %lld volumes", path, t.nrows,
			 base(run->bold), (long long)nt);
		problem(c, msg);
	}
	table_release(&t);
	free(path);
}

/* What the runs of one subject and task hold. */
typedef struct task_seen {
	bids_run *runs;
	size_t nruns;
	strlist conds;        /* conditions found in this subject's events */
} task_seen;

/* Checks one run and prints its line; ref is the subject's data grid (set by the first run). */
static void check_run(checker *c, const bids_run *run, task_seen *ts, nii_grid *ref, int *have_ref,
		      char *ref_path, size_t ref_len)
{
	const study *st = c->st;
	nii_info info;
	sr_err e;
	double tr = 0;
	int tr_ok = 0;
	char why[1024];

	sr_err_init(&e, on_warn, c);
	printf("    run %s: %s", run->label, base(run->bold));
	if (c->headers_only ? nii_read_info(run->bold, &info, &e) != SR_OK
			    : read_through(c, run->bold, &info) != 0) {
		if (c->headers_only)
			problem(c, e.msg);
		printf("  (unreadable)\n");
		goto events;
	}
	if (info.ndim != 4) {
		snprintf(why, sizeof why, "%s: a BOLD run must be a 4-D image; this one is %d-D", run->bold,
			 info.ndim);
		problem(c, why);
	}
	if (bids_run_tr(st->bids, run, info.tr, &tr, &e) != SR_OK)
		problem(c, e.msg);
	else
		tr_ok = 1;
	printf("  %lld volumes", (long long)info.nt);
	if (st->skip_volumes)
		printf(" (first %d skipped)", st->skip_volumes);
	if (st->skip_volumes && (int64_t)st->skip_volumes > info.nt - 2) {
		snprintf(why, sizeof why, "%s: skip_volumes = %d leaves fewer than 2 of its %lld volumes",
			 run->bold, st->skip_volumes, (long long)info.nt);
		problem(c, why);
	}
	if (tr_ok)
		printf(", TR %g s", tr);
	printf(", %lld x %lld x %lld voxels of %g x %g x %g mm\n", (long long)info.grid.nx,
	       (long long)info.grid.ny, (long long)info.grid.nz, info.grid.dx, info.grid.dy,
	       info.grid.dz);
	if (!*have_ref) {
		*ref = info.grid;
		*have_ref = 1;
		snprintf(ref_path, ref_len, "%s", run->bold);
	} else if (!nii_same_grid(ref, &info.grid, 1e-3, why, sizeof why)) {
		char msg[2048];

		snprintf(msg, sizeof msg, "%s: not on the grid of %s: %s", run->bold, ref_path, why);
		problem(c, msg);
	}
	check_confounds(c, run, info.nt);
events:
	if (!run->events_exist) {
		snprintf(why, sizeof why, "%s: events file missing (needed beside %s)", run->events,
			 base(run->bold));
		problem(c, why);
		return;
	}
	{
		event_list ev;
		strlist names = { 0 };
		size_t k, i;
		int late = 0;

		if (events_read(run->events, st->condition_column, &ev, &e) != SR_OK) {
			problem(c, e.msg);
			return;
		}
		printf("      conditions:");
		for (k = 0; k < ev.n; k++)
			sl_add_unique(&names, ev.ev[k].condition);
		if (names.n)
			qsort(names.s, names.n, sizeof *names.s, strv_cmp);
		for (i = 0; i < names.n; i++) {
			size_t count = 0;

			for (k = 0; k < ev.n; k++)
				count += strcmp(ev.ev[k].condition, names.s[i]) == 0;
			printf("%s %s (%zu)", i ? "," : "", names.s[i], count);
			sl_add_unique(&ts->conds, names.s[i]);
		}
		printf("%s\n", names.n ? "" : " none");
		if (tr_ok) {
			double end = (double)info.nt * tr;

			/* the first such event only: one warning per run is enough to act on */
			for (k = 0; k < ev.n && !late; k++) {
				if (ev.ev[k].onset >= end) {
					char msg[1024];

					snprintf(msg, sizeof msg,
						 "%s: line %zu: onset %g s is at or after the end of the run (%lld volumes x %g s = %g s)",
						 run->events, ev.ev[k].line, ev.ev[k].onset,
						 (long long)info.nt, tr, end);
					sl_push(&c->warns, msg);
					late = 1;
				}
			}
		}
		sl_free(&names);
		events_release(&ev);
	}
}

/* ---- splits ---- */

static void print_runs(const bids_run *runs, const size_t *idx, size_t n)
{
	size_t i;

	for (i = 0; i < n; i++)
		printf("%s%s", i ? "+" : "", runs[idx[i]].label);
}

static void print_splits(checker *c, const char *label, const task_seen *ts)
{
	size_t n = ts->nruns, i, j, *a, *b, na = 0, nb = 0;

	if (n == 0) {
		printf("    sub-%s: no localizer runs\n", label);
		return;  /* already a problem */
	}
	if (n < 2) {
		char msg[512];

		snprintf(msg, sizeof msg,
			 "sub-%s has %zu run%s of the localizer task %s: no cross-validated rows (measured tasks still get rows)",
			 label, n, n == 1 ? "" : "s", c->st->loc_task);
		sl_push(&c->warns, msg);
		printf("    sub-%s: fewer than 2 localizer runs, no cross-validated splits\n", label);
		return;
	}
	a = xmalloc_array(n, sizeof *a);
	b = xmalloc_array(n, sizeof *b);
	if (c->st->split == SPLIT_ODD_EVEN) {
		for (i = 0; i < n; i++) {
			if (i % 2 == 0)
				a[na++] = i;
			else
				b[nb++] = i;
		}
		printf("    sub-%s odd-even:A: define on runs ", label);
		print_runs(ts->runs, a, na);
		printf(", measure on ");
		print_runs(ts->runs, b, nb);
		printf("\n    sub-%s odd-even:B: define on runs ", label);
		print_runs(ts->runs, b, nb);
		printf(", measure on ");
		print_runs(ts->runs, a, na);
		printf("\n");
	} else {
		for (i = 0; i < n; i++) {
			na = 0;
			for (j = 0; j < n; j++)
				if (j != i)
					a[na++] = j;
			printf("    sub-%s leave-one-out:%s: define on runs ", label, ts->runs[i].label);
			print_runs(ts->runs, a, na);
			printf(", measure on %s\n", ts->runs[i].label);
		}
	}
	free(a);
	free(b);
}

/* ---- conditions named by effects ---- */

static void check_names(checker *c, const char *section, const char *key, const char *task,
			const expr *fx, size_t nfx, const strlist *known, char **subs, size_t nsub,
			task_seen *seen, size_t stride, strlist *reported)
{
	size_t i, k, j, s, nruns = 0;

	for (s = 0; s < nsub; s++)
		nruns += seen[s * stride].nruns;
	if (nruns == 0)
		return;  /* "has no runs of task" is said for every subject; the names cannot be known */
	for (i = 0; i < nfx; i++) {
		for (k = 0; k < fx[i].nterms; k++) {
			const char *name = fx[i].terms[k].name;
			char msg[2048];
			size_t used;

			size_t line = study_line(c->st, section, key);
			char where[64] = "";

			if (sl_has(reported, name))
				continue;  /* one message per condition and task */
			sl_push(reported, name);
			if (line)
				snprintf(where, sizeof where, " line %zu:", line);
			if (!sl_has(known, name)) {
				used = (size_t)snprintf(msg, sizeof msg,
							"%s:%s %s '%s' names condition '%s', unknown to every subject of task %s (known:",
							c->st->path, where, line ? key : "default effect",
							fx[i].text, name, task);
				for (j = 0; j < known->n && used < sizeof msg; j++)
					used += (size_t)snprintf(msg + used, sizeof msg - used, "%s %s",
								 j ? "," : "", known->s[j]);
				if (used < sizeof msg)
					snprintf(msg + used, sizeof msg - used, "%s)", known->n ? "" : " none");
				problem(c, msg);
				continue;
			}
			for (s = 0; s < nsub; s++) {
				const task_seen *ts = &seen[s * stride];

				if (ts->nruns && !sl_has(&ts->conds, name)) {
					snprintf(msg, sizeof msg,
						 "sub-%s has no '%s' events in task %s: %s is not estimable for this subject",
						 subs[s], name, task, fx[i].text);
					sl_push(&c->warns, msg);
				}
			}
		}
	}
}

/* ---- parcels and mask ---- */

/* A distinct data grid and the first run found on it. */
typedef struct data_grid {
	nii_grid g;
	char path[1024];
} data_grid;

static void on_problem(void *ctx, const char *msg)
{
	problem(ctx, msg);
}

static void check_parcels(checker *c, const data_grid *grids, size_t ngrids)
{
	const study *st = c->st;
	parcels_set ps;
	sr_err e;
	char why[1024], msg[2048];
	int32_t *on_data = NULL;
	size_t nv = 0, g;
	int i;

	/* read the way a fit reads them, but listing every bad row */
	sr_err_init(&e, on_warn, c);
	if (parcels_load_listing(st->parcels, st->parcel_names, on_problem, c, &ps, &e) != SR_OK) {
		problem(c, e.msg);
		return;
	}
	printf("parcels: %s (%lld x %lld x %lld), %d parcel%s\n", st->parcels, (long long)ps.grid.nx,
	       (long long)ps.grid.ny, (long long)ps.grid.nz, ps.n, ps.n == 1 ? "" : "s");
	if (parcels_template_on_raw(st, &ps.grid, st->parcels)) {
		snprintf(msg, sizeof msg, "%s: " PARCELS_RAW_NOTE, st->parcels);
		sl_push(&c->warns, msg);
	}
	for (g = 0; g < ngrids; g++) {
		const nii_grid *data = &grids[g].g;

		if (nii_same_grid(data, &ps.grid, 1e-3, why, sizeof why))
			continue;
		if (parcels_template_on_raw(st, &ps.grid, st->parcels)) {
			snprintf(msg, sizeof msg, "%s: the parcels are not on the data grid of %s (%s)",
				 st->parcels, grids[g].path, why);
			problem(c, msg);
		} else if (!st->resample_parcels) {
			snprintf(msg, sizeof msg,
				 "%s: the parcels are not on the data grid of %s (%s); set 'resample = nearest' in [parcels] to resample them",
				 st->parcels, grids[g].path, why);
			problem(c, msg);
		} else if (!on_data) {
			/* voxel counts are shown on the first grid that needs resampling */
			int64_t sn[3] = { ps.grid.nx, ps.grid.ny, ps.grid.nz };
			int64_t tn[3] = { data->nx, data->ny, data->nz };

			nv = nii_nvox(data);
			on_data = xmalloc_array(nv ? nv : 1, sizeof *on_data);
			if (resample_nearest(ps.labels, sn, ps.grid.affine, on_data, tn, data->affine)) {
				snprintf(msg, sizeof msg, "%s: the parcel image's affine is singular", st->parcels);
				problem(c, msg);
				free(on_data);
				on_data = NULL;
				break;
			}
			printf("  resampled (nearest neighbour) onto the data grid of %s\n",
			       base(grids[g].path));
		}
	}
	printf("  %6s  %-24s %8s%s\n", "index", "name", "voxels", on_data ? "  on data grid" : "");
	for (i = 0; i < ps.n; i++) {
		size_t v, count2 = 0;

		for (v = 0; on_data && v < nv; v++)
			count2 += on_data[v] == ps.index[i];
		printf("  %6d  %-24s %8zu", (int)ps.index[i], ps.name[i], ps.count[i]);
		if (on_data)
			printf("  %12zu", count2);
		printf("\n");
		if (on_data && !count2) {
			snprintf(msg, sizeof msg, "%s: parcel %s has no voxels once resampled onto the data grid",
				 st->parcels, ps.name[i]);
			sl_push(&c->warns, msg);
		}
	}
	free(on_data);
	parcels_release(&ps);
}

static void check_mask(checker *c, const data_grid *grids, size_t ngrids)
{
	const study *st = c->st;
	nii_info info;
	double *d;
	sr_err e;
	size_t v, n, g, count = 0;
	char why[1024], msg[2048];

	if (!st->mask)
		return;
	sr_err_init(&e, on_warn, c);
	if (nii_read_3d(st->mask, &info, &d, &e) != SR_OK) {
		problem(c, e.msg);
		return;
	}
	n = nii_nvox(&info.grid);
	for (v = 0; v < n; v++)
		count += isfinite(d[v]) && d[v] != 0;
	free(d);
	printf("mask: %s: %zu voxels in the mask\n", st->mask, count);
	if (count == 0) {
		snprintf(msg, sizeof msg, "%s: the mask is empty", st->mask);
		problem(c, msg);
	}
	for (g = 0; g < ngrids; g++) {
		if (!nii_same_grid(&grids[g].g, &info.grid, 1e-3, why, sizeof why)) {
			snprintf(msg, sizeof msg, "%s: the mask is not on the data grid of %s: %s",
				 st->mask, grids[g].path, why);
			problem(c, msg);
		}
	}
}

/*
 * A localizer after the first (several localizers): its task's runs (checked
 * here when no earlier localizer or measure has that task), its splits, the
 * conditions its contrast and effects name, and its parcels.
 */
static void check_localizer(checker *c, size_t l, char **subs, size_t nsub, const data_grid *grids,
			    size_t ngrids)
{
	const study *whole = c->st;
	study v;
	task_seen *seen = xcalloc(nsub ? nsub : 1, sizeof *seen);
	strlist known = { 0 }, reported = { 0 };
	char section[512];
	size_t s, k;
	int done = strcmp(whole->locs[l].task, whole->loc_task) == 0;

	for (k = 0; k < whole->nmeasures && !done; k++)
		done = strcmp(whole->measures[k].task, whole->locs[l].task) == 0;
	for (k = 1; k < l && !done; k++)
		done = strcmp(whole->locs[k].task, whole->locs[l].task) == 0;
	study_use_localizer(whole, l, &v);
	c->st = &v;
	for (s = 0; s < nsub; s++) {
		task_seen *ts = &seen[s];
		nii_grid ref;
		int have_ref = 0;
		char ref_path[1024] = "";
		sr_err e;

		sr_err_init(&e, on_warn, c);
		if (study_runs(&v, subs[s], v.loc_task, &ts->runs, &ts->nruns, &e) != SR_OK) {
			problem(c, e.msg);
			continue;
		}
		if (!done) {
			printf("sub-%s\n  task %s (localizer %s): %zu run%s\n", subs[s], v.loc_task,
			       study_loc_label(whole, l), ts->nruns, ts->nruns == 1 ? "" : "s");
			if (ts->nruns == 0) {
				char msg[1024];

				snprintf(msg, sizeof msg, "%s: sub-%s has no runs of task %s (localizer %s)",
					 v.derivatives ? v.derivatives : v.bids, subs[s], v.loc_task,
					 study_loc_label(whole, l));
				problem(c, msg);
			}
		}
		/* a task not seen yet gets each run's checks; else only its events' conditions */
		for (size_t r = 0; r < ts->nruns; r++) {
			event_list ev;
			sr_err quiet;

			if (!done) {
				check_run(c, &ts->runs[r], ts, &ref, &have_ref, ref_path, sizeof ref_path);
				continue;
			}
			sr_err_init(&quiet, NULL, NULL);   /* the earlier check of these runs said it */
			if (ts->runs[r].events_exist &&
			    events_read(ts->runs[r].events, v.condition_column, &ev, &quiet) == SR_OK) {
				for (size_t q = 0; q < ev.n; q++)
					sl_add_unique(&ts->conds, ev.ev[q].condition);
				events_release(&ev);
			}
		}
	}
	printf("localizer %s splits (%s)\n", study_loc_label(whole, l),
	       v.split == SPLIT_ODD_EVEN ? "odd-even" : "leave-one-out");
	for (s = 0; s < nsub; s++) {
		print_splits(c, subs[s], &seen[s]);
		for (k = 0; k < seen[s].conds.n; k++)
			sl_add_unique(&known, seen[s].conds.s[k]);
	}
	if (known.n)
		qsort(known.s, known.n, sizeof *known.s, strv_cmp);
	snprintf(section, sizeof section, "localizer %s", study_loc_label(whole, l));
	check_names(c, section, "contrast", v.loc_task, &v.contrast, 1, &known, subs, nsub, seen, 1, &reported);
	check_names(c, section, "effects", v.loc_task, v.loc_effects, v.nloc_effects, &known, subs, nsub, seen, 1,
		    &reported);
	if (study_per_subject(v.parcels) || study_per_subject(v.parcel_names)) {
		for (s = 0; s < nsub; s++) {
			study one = v;

			one.parcels = study_subject_path(v.parcels, subs[s]);
			one.parcel_names = study_subject_path(v.parcel_names, subs[s]);
			c->st = &one;
			check_parcels(c, grids, ngrids);
			free(one.parcels);
			free(one.parcel_names);
		}
	} else {
		check_parcels(c, grids, ngrids);
	}
	c->st = whole;
	study_view_release(&v);
	sl_free(&known);
	sl_free(&reported);
	for (s = 0; s < nsub; s++) {
		bids_runs_release(seen[s].runs, seen[s].nruns);
		sl_free(&seen[s].conds);
	}
	free(seen);
}

/* ---- the command ---- */

static int run_check(checker *c, char **subs, size_t nsub)
{
	const study *st = c->st;
	size_t ntasks = 1 + st->nmeasures, s, t;
	task_seen *seen = xcalloc(nsub > 0 ? nsub * ntasks : 1, sizeof *seen);
	data_grid *grids = xcalloc(nsub ? nsub : 1, sizeof *grids);
	data_grid *own = xcalloc(nsub ? nsub : 1, sizeof *own);   /* each subject's data grid */
	unsigned char *have_own = xcalloc(nsub ? nsub : 1, 1);
	size_t ngrids = 0;

	for (s = 0; s < nsub; s++) {
		nii_grid ref;
		int have_ref = 0;
		char ref_path[1024] = "";

		printf("sub-%s\n", subs[s]);
		for (t = 0; t < ntasks; t++) {
			const char *task = t ? st->measures[t - 1].task : st->loc_task;
			task_seen *ts = &seen[s * ntasks + t];
			sr_err e;
			size_t r;

			sr_err_init(&e, on_warn, c);
			if (study_runs(st, subs[s], task, &ts->runs, &ts->nruns, &e) != SR_OK) {
				problem(c, e.msg);
				continue;
			}
			printf("  task %s (%s): %zu run%s", task, t ? "measured" : "localizer", ts->nruns,
			       ts->nruns == 1 ? "" : "s");
			if (st->derivatives) {
				size_t nsp, k;
				char **sp = bids_spaces(st->derivatives, subs[s], task, &nsp);

				printf(" (spaces found:");
				for (k = 0; k < nsp; k++)
					printf("%s %s", k ? "," : "", sp[k]);
				printf("%s)", nsp ? "" : " none");
				bids_strings_free(sp, nsp);
			}
			printf("\n");
			if (ts->nruns == 0) {
				char msg[1024];

				snprintf(msg, sizeof msg,
					 "%s: sub-%s has no runs of task %s (looked for sub-%s/[ses-*/]func/sub-%s_*task-%s*_bold.nii[.gz])",
					 st->derivatives ? st->derivatives : st->bids, subs[s], task, subs[s], subs[s], task);
				problem(c, msg);
				continue;
			}
			for (r = 0; r < ts->nruns; r++)
				check_run(c, &ts->runs[r], ts, &ref, &have_ref, ref_path, sizeof ref_path);
		}
		if (have_ref) {
			size_t g;
			char why[8];

			own[s].g = ref;
			snprintf(own[s].path, sizeof own[s].path, "%s", ref_path);
			have_own[s] = 1;

			for (g = 0; g < ngrids; g++)
				if (nii_same_grid(&grids[g].g, &ref, 1e-3, why, sizeof why))
					break;
			if (g == ngrids) {
				grids[ngrids].g = ref;
				snprintf(grids[ngrids].path, sizeof grids[ngrids].path, "%s", ref_path);
				ngrids++;
			}
		}
	}
	if (st->nlocs > 1)
		printf("localizer %s splits (%s); time courses: bins of one TR from 0 to %g s after onset\n",
		       study_loc_label(st, 0), st->split == SPLIT_ODD_EVEN ? "odd-even" : "leave-one-out",
		       st->timecourse_window);
	else
		printf("localizer splits (%s); time courses: bins of one TR from 0 to %g s after onset\n",
		       st->split == SPLIT_ODD_EVEN ? "odd-even" : "leave-one-out", st->timecourse_window);
	for (s = 0; s < nsub; s++)
		print_splits(c, subs[s], &seen[s * ntasks]);
	for (t = 0; t < ntasks; t++) {
		strlist known = { 0 }, reported = { 0 };
		const char *task = t ? st->measures[t - 1].task : st->loc_task;

		for (s = 0; s < nsub; s++) {
			task_seen *ts = &seen[s * ntasks + t];
			size_t k;

			for (k = 0; k < ts->conds.n; k++)
				sl_add_unique(&known, ts->conds.s[k]);
		}
		if (known.n)
			qsort(known.s, known.n, sizeof *known.s, strv_cmp);
		if (t == 0) {
			check_names(c, "localizer", "contrast", task, &st->contrast, 1, &known, subs, nsub,
				    seen, ntasks, &reported);
			check_names(c, "localizer", "effects", task, st->loc_effects, st->nloc_effects,
				    &known, subs, nsub, seen, ntasks, &reported);
		} else {
			char section[512];

			snprintf(section, sizeof section, "measure %s", st->measures[t - 1].name);
			check_names(c, section, "effects", task, st->measures[t - 1].effects,
				    st->measures[t - 1].neffects, &known, subs, nsub, seen + t, ntasks,
				    &reported);
		}
		sl_free(&known);
		sl_free(&reported);
	}
	if (study_per_subject(st->parcels) || study_per_subject(st->parcel_names)) {
		/* each subject's own parcels (made without its data): check every one */
		const study *whole = c->st;

		for (s = 0; s < nsub; s++) {
			study one = *whole;

			one.parcels = study_subject_path(whole->parcels, subs[s]);
			one.parcel_names = study_subject_path(whole->parcel_names, subs[s]);
			c->st = &one;
			check_parcels(c, grids, ngrids);
			c->st = whole;
			free(one.parcels);
			free(one.parcel_names);
		}
	} else {
		check_parcels(c, grids, ngrids);
	}
	for (size_t l = 1; l < st->nlocs; l++)
		check_localizer(c, l, subs, nsub, grids, ngrids);
	if (study_mask_per_subject(st)) {
		for (s = 0; s < nsub; s++) {
			char **paths = NULL;
			size_t n = 0, count;
			unsigned char *m;
			nii_grid mg;
			sr_err e;
			char why[1024], msg[2048];

			sr_err_init(&e, on_warn, c);
			if (st->mask_auto) {
				for (t = 0; t < ntasks; t++) {
					task_seen *ts = &seen[s * ntasks + t];

					for (size_t r = 0; r < ts->nruns; r++) {
						if (!ts->runs[r].brain_mask) {
							snprintf(msg, sizeof msg, "%s: no desc-brain_mask image beside it (mask = auto)",
								 ts->runs[r].bold);
							problem(c, msg);
							continue;
						}
						paths = xrealloc(paths, (n + 1) * sizeof *paths);
						paths[n++] = xstrdup(ts->runs[r].brain_mask);
					}
				}
			} else {
				paths = xmalloc(sizeof *paths);
				paths[n++] = study_subject_path(st->mask, subs[s]);
			}
			if (n && mask_intersection(paths, n, &m, &mg, &count, &e) != SR_OK) {
				problem(c, e.msg);
			} else if (n) {
				printf("mask sub-%s: %s%s: %zu voxels%s\n", subs[s], paths[0],
				       n > 1 ? " and the other runs' brain masks" : "", count,
				       n > 1 ? " in all of them" : "");
				if (have_own[s] && !nii_same_grid(&own[s].g, &mg, 1e-3, why, sizeof why)) {
					snprintf(msg, sizeof msg, "%s: the mask is not on the data grid of %s: %s",
						 paths[0], own[s].path, why);
					problem(c, msg);
				}
				free(m);
			}
			bids_strings_free(paths, n);
		}
	} else {
		check_mask(c, grids, ngrids);
	}
	free(own);
	free(have_own);
	free(grids);
	for (s = 0; s < nsub * ntasks; s++) {
		bids_runs_release(seen[s].runs, seen[s].nruns);
		sl_free(&seen[s].conds);
	}
	free(seen);
	return 0;
}

/* The subjects to check: the study's list (or all found), narrowed by --subjects (studycheck.h). */
static int pick_subjects(checker *c, const char *only, char ***out, size_t *n)
{
	char **all = NULL;
	size_t nall = 0, i;
	study_problems bad = { 0 };

	*out = NULL;
	*n = 0;
	studycheck_subjects(c->st, &all, &nall, &c->probs);
	if (!only) {
		*out = all;
		*n = nall;
		return 0;
	}
	if (studycheck_only(all, nall, only, out, n, &bad)) {
		for (i = 0; i < bad.n; i++)
			cmdline_error("check", "%s", bad.msg[i]);
		study_problems_release(&bad);
		bids_strings_free(all, nall);
		return 2;
	}
	bids_strings_free(all, nall);
	if (*n)
		qsort(*out, *n, sizeof **out, strv_cmp);
	else if (!c->probs.n)
		study_problems_add(&c->probs, c->st->bids, 0, "no subjects (sub-* folders) found");
	return 0;
}

int cmd_check(int argc, char **argv)
{
	const char *val[O_NOPTS + 1] = { NULL }, **pos = xcalloc((size_t)argc + 1, sizeof *pos);
	int npos, rc;
	study st;
	checker c;
	char **subs = NULL;
	size_t nsub = 0, i;

	rc = cmdline_parse(&spec, argc, argv, val, pos, &npos);
	if (rc) {
		free(pos);
		return rc == 1 ? 0 : 2;
	}
	if (npos != 1) {
		cmdline_error("check", npos ? "give one study file" : "which study? usage: splitroi check STUDY.ini");
		free(pos);
		return 2;
	}
	memset(&c, 0, sizeof c);
	c.headers_only = val[O_HEADERS_ONLY] != NULL;
	if (study_load(pos[0], &st, &c.probs) != SR_OK) {
		for (i = 0; i < c.probs.n; i++)
			fprintf(stderr, "splitroi check: %s\n", c.probs.msg[i]);
		fprintf(stderr, "splitroi check: %zu problem%s in the study file\n", c.probs.n,
			c.probs.n == 1 ? "" : "s");
		study_problems_release(&c.probs);
		free(pos);
		return 1;
	}
	free(pos);
	c.st = &st;
	printf("study: %s\nbids: %s\n", st.path, st.bids);
	if (st.derivatives) {
		printf("derivatives: %s\n  space %s, desc %s, res %s\n", st.derivatives,
		       st.space ? st.space : "(any; required when the runs come in several)",
		       st.desc ? st.desc : "preproc", st.res ? st.res : "(any)");
		if (!bids_is_derivative(st.derivatives)) {
			char msg[1024];

			snprintf(msg, sizeof msg,
				 "%s: its dataset_description.json does not say \"DatasetType\": \"derivative\"; is this the preprocessed dataset?",
				 st.derivatives);
			sl_push(&c.warns, msg);
		}
	}
	printf("out: %s\n", st.out);
	rc = pick_subjects(&c, val[O_SUBJECTS], &subs, &nsub);
	if (rc == 2)
		goto out;
	printf("subjects (%zu):", nsub);
	for (i = 0; i < nsub; i++)
		printf(" %s", subs[i]);
	printf("\n");
	run_check(&c, subs, nsub);
	fflush(stdout);
	for (i = 0; i < c.warns.n; i++)
		fprintf(stderr, "splitroi check: warning: %s\n", c.warns.s[i]);
	for (i = 0; i < c.probs.n; i++)
		fprintf(stderr, "splitroi check: %s\n", c.probs.msg[i]);
	if (c.probs.n) {
		fprintf(stderr, "splitroi check: %zu problem%s found\n", c.probs.n,
			c.probs.n == 1 ? "" : "s");
		rc = 1;
	} else {
		printf("no problems found%s\n", c.warns.n ? " (see the warnings)" : "");
		rc = 0;
	}
out:
	bids_strings_free(subs, nsub);
	sl_free(&c.warns);
	study_problems_release(&c.probs);
	study_release(&st);
	return rc;
}
