/* studycheck.c - what check and analyze both validate before any fit, so that the two cannot drift. */
#include "studycheck.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "../core/mem.h"
#include "../core/strv.h"
#include "../core/resample.h"
#include "../io/bids.h"
#include "../io/events.h"
#include "../io/table.h"
#include "runfit.h"
#include "subject.h"

static int has_label(char *const *v, size_t n, const char *s)
{
	size_t i;

	for (i = 0; i < n; i++)
		if (strcmp(v[i], s) == 0)
			return 1;
	return 0;
}

int studycheck_subjects(const study *st, char ***out, size_t *n, study_problems *probs)
{
	char **found = NULL, **pick = NULL;
	size_t nfound = 0, npick = 0, i, before = probs->n;
	sr_err e;

	*out = NULL;
	*n = 0;
	sr_err_init(&e, NULL, NULL);
	if (bids_subjects(st->bids, &found, &nfound, &e) != SR_OK) {
		study_problems_add(probs, NULL, 0, "%s", e.msg);
		return 1;
	}
	if (st->subjects) {
		pick = xcalloc(st->nsubjects ? st->nsubjects : 1, sizeof *pick);
		for (i = 0; i < st->nsubjects; i++) {
			if (!has_label(found, nfound, st->subjects[i]))
				study_problems_add(probs, st->path, study_line(st, "study", "subjects"),
						   "subject '%s' is not in %s", st->subjects[i], st->bids);
			else
				pick[npick++] = xstrdup(st->subjects[i]);
		}
		strv_free_array(found, nfound);
	} else {
		pick = found;
		npick = nfound;
	}
	if (npick)
		qsort(pick, npick, sizeof *pick, strv_cmp);
	if (npick == 0 && probs->n == before)
		study_problems_add(probs, st->bids, 0, "no subjects (sub-* folders) found");
	*out = pick;
	*n = npick;
	return probs->n != before;
}

int studycheck_only(char *const *subs, size_t n, const char *only, char ***out, size_t *nout,
		    study_problems *probs)
{
	char *copy = xstrdup(only), *tok, *save = NULL;
	char **v = NULL, **bad = NULL;
	size_t k = 0, nbad = 0, cap = 0, capbad = 0, before = probs->n;

	for (tok = strtok_r(copy, ", \t", &save); tok; tok = strtok_r(NULL, ", \t", &save)) {
		if (strncmp(tok, "sub-", 4) == 0)
			tok += 4;
		if (!*tok || has_label(v, k, tok) || has_label(bad, nbad, tok))
			continue;
		if (!has_label(subs, n, tok)) {
			XGROW(bad, nbad, capbad);
			bad[nbad++] = xstrdup(tok);
			study_problems_add(probs, NULL, 0, "subject '%s' is not in the study (%zu subject%s%s%s%s)",
					   tok, n, n == 1 ? "" : "s", n ? ": " : "", n ? subs[0] : "",
					   n > 1 ? " ..." : "");
			continue;
		}
		XGROW(v, k, cap);
		v[k++] = xstrdup(tok);
	}
	free(copy);
	strv_free_array(bad, nbad);
	if (probs->n != before) {
		strv_free_array(v, k);
		return 2;
	}
	*out = v;
	*nout = k;
	return 0;
}

/* ---- one subject's runs ---- */

static void sc_problem(studycheck_ctx *c, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static void sc_warning(studycheck_ctx *c, const char *fmt, ...) __attribute__((format(printf, 2, 3)));

static void sc_problem(studycheck_ctx *c, const char *fmt, ...)
{
	char msg[2048];
	va_list ap;

	va_start(ap, fmt);
	vsnprintf(msg, sizeof msg, fmt, ap);
	va_end(ap);
	study_problems_add(c->probs, NULL, 0, "%s", msg);
}

static void sc_warning(studycheck_ctx *c, const char *fmt, ...)
{
	char msg[2048];
	va_list ap;

	if (!c->warns)
		return;
	va_start(ap, fmt);
	vsnprintf(msg, sizeof msg, fmt, ap);
	va_end(ap);
	study_problems_add(c->warns, NULL, 0, "%s", msg);
}

static void on_warn(void *ctx, const char *msg)
{
	sc_warning(ctx, "%s", msg);
}

static const char *base(const char *path)
{
	const char *s = strrchr(path, '/');

	return s ? s + 1 : path;
}

/* Appends a copy of s unless v holds it already (first appearance order). */
static void add_unique(strv *v, const char *s)
{
	if (!strv_contains(v, s))
		strv_push(v, s);
}

/* Reads every volume so that a damaged file fails here; returns 0 when fine. */
static int read_through(studycheck_ctx *c, const char *path, nii_info *info)
{
	nii_stream *s;
	double *vol;
	sr_err e;
	int64_t t;
	int bad = 0;

	sr_err_init(&e, on_warn, c);
	if (nii_stream_open(path, &s, info, &e)) {
		sc_problem(c, "%s", e.msg);
		return 1;
	}
	vol = xmalloc_array(nii_nvox(&info->grid), sizeof *vol);
	for (t = 0; t < info->nt; t++) {
		if (nii_stream_next(s, vol, &e)) {
			sc_problem(c, "%s", e.msg);
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

/* The values analyze reads as regressors, by its rules (n/a and empty allowed): n/a counted per column. */
static void confound_values(studycheck_ctx *c, const table *t, const char *path, const int *cols, studycheck_run *f)
{
	const study *st = c->st;
	sr_err e;
	int k, bad = 0, anyna = 0;
	size_t r;

	sr_err_init(&e, on_warn, c);
	f->conf_cols = xcalloc((size_t)f->nconf + 1, sizeof *f->conf_cols);
	f->conf_na = xcalloc((size_t)f->nconf + 1, sizeof *f->conf_na);
	for (k = 0; k < f->nconf; k++)
		f->conf_cols[k] = xstrdup(t->header[cols[k]]);
	for (k = 0; k < f->nconf && !bad; k++) {
		for (r = (size_t)st->skip_volumes; r < t->nrows; r++) {
			double x;
			int isna;

			if (table_number(t, r, (size_t)cols[k], &x, &isna, 1, &e) != SR_OK) {
				sc_problem(c, "%s", e.msg);
				bad = 1;
				break;
			}
			f->conf_na[k] += isna;
		}
		anyna |= f->conf_na[k] > 0;
		if (st->drift_cutoff > 0 && cosine_column(t->header[cols[k]]) && !c->cosine_warned) {
			sc_warning(c, "%s: confound column '%s' is a cosine drift basis, and the model adds its own (drift_cutoff = %g s): drop the column or set drift_cutoff = none",
				   path, t->header[cols[k]], st->drift_cutoff);
			c->cosine_warned = 1;
		}
	}
	f->na_listed = anyna && !bad;
}

/* The volumes framewise_displacement censors (censor_fd > 0). */
static void censored(studycheck_ctx *c, const table *t, const char *path, studycheck_run *f)
{
	const study *st = c->st;
	int fc = table_col(t, "framewise_displacement");
	sr_err e;
	size_t r;

	sr_err_init(&e, on_warn, c);
	if (fc < 0) {
		sc_problem(c, "%s: line %zu: no column 'framewise_displacement' (needed by censor_fd)", path,
			   t->header_line);
		return;
	}
	for (r = (size_t)st->skip_volumes; r < t->nrows; r++) {
		double x;
		int isna;

		if (table_number(t, r, (size_t)fc, &x, &isna, 1, &e) != SR_OK) {
			sc_problem(c, "%s", e.msg);
			break;
		}
		f->ncensored += !isna && x > st->censor_fd;
	}
	f->censor_listed = 1;
}

/* Confound and motion columns exist in the run's confounds table, with one row per volume. */
static void check_confounds(studycheck_ctx *c, const bids_run *run, studycheck_run *f)
{
	const study *st = c->st;
	char *path;
	table t;
	sr_err e;
	size_t i;
	int *cols = NULL, ncols = 0;

	if (!st->nconfounds && !st->nmotion && !(st->censor_fd > 0))
		return;
	path = bids_confounds_path(run, st->confounds_suffix);
	sr_err_init(&e, on_warn, c);
	if (table_read(path, 0, &t, &e)) {
		sc_problem(c, "%s", e.msg);
		free(path);
		return;
	}
	for (i = 0; i < st->nmotion; i++)
		if (table_col(&t, st->motion[i]) < 0)
			sc_problem(c, "%s: line %zu: no column '%s' (named in [model] motion)", path, t.header_line,
				   st->motion[i]);
	if (st->nconfounds &&
	    runfit_confound_columns(&t, path, (const char *const *)st->confounds, (int)st->nconfounds,
				    &cols, &ncols, &e) != SR_OK) {
		sc_problem(c, "%s", e.msg);
	} else if (st->nconfounds) {
		f->conf_listed = 1;
		f->nconf = ncols;
		confound_values(c, &t, path, cols, f);
	}
	free(cols);
	if (st->censor_fd > 0)
		censored(c, &t, path, f);
	if ((int64_t)t.nrows != f->nt)
		sc_problem(c, "%s: %zu rows, but the run %s has %lld volumes", path, t.nrows, base(run->bold),
			   (long long)f->nt);
	table_release(&t);
	free(path);
}

/* The run's events: its conditions with their counts, and the first onset past the run's end. */
static void check_events(studycheck_ctx *c, const bids_run *run, studycheck_run *f, strv *task_conds)
{
	event_list ev;
	sr_err e;
	size_t k, i;

	sr_err_init(&e, on_warn, c);
	if (!run->events_exist) {
		sc_problem(c, "%s: events file missing (needed beside %s)", run->events, base(run->bold));
		return;
	}
	if (events_read(run->events, c->st->condition_column, &ev, &e) != SR_OK) {
		sc_problem(c, "%s", e.msg);
		return;
	}
	f->events_ok = 1;
	for (k = 0; k < ev.n; k++)
		add_unique(&f->conds, ev.ev[k].condition);
	strv_sort(&f->conds);
	f->cond_count = xcalloc(f->conds.n + 1, sizeof *f->cond_count);
	for (i = 0; i < f->conds.n; i++) {
		for (k = 0; k < ev.n; k++)
			f->cond_count[i] += strcmp(ev.ev[k].condition, f->conds.v[i]) == 0;
		add_unique(task_conds, f->conds.v[i]);
	}
	/* the first such event only: one warning per run is enough to act on */
	for (k = 0; f->tr_ok && k < ev.n; k++) {
		double end = (double)f->nt * f->tr;

		if (ev.ev[k].onset >= end) {
			sc_warning(c, "%s: line %zu: onset %g s is at or after the end of the run (%lld volumes x %g s = %g s)",
				   run->events, ev.ev[k].line, ev.ev[k].onset, (long long)f->nt, f->tr, end);
			break;
		}
	}
	events_release(&ev);
}

void studycheck_run_validate(studycheck_ctx *c, const bids_run *run, studycheck_grid *ref, studycheck_run *f,
			     strv *task_conds)
{
	const study *st = c->st;
	nii_info info;
	sr_err e;
	char why[1024];

	memset(f, 0, sizeof *f);
	sr_err_init(&e, on_warn, c);
	if (c->headers_only ? nii_read_info(run->bold, &info, &e) != SR_OK : read_through(c, run->bold, &info) != 0) {
		if (c->headers_only)
			sc_problem(c, "%s", e.msg);
		check_events(c, run, f, task_conds);
		return;
	}
	f->readable = 1;
	f->nt = info.nt;
	f->grid = info.grid;
	if (info.ndim != 4)
		sc_problem(c, "%s: a BOLD run must be a 4-D image; this one is %d-D", run->bold, info.ndim);
	if (bids_run_tr(st->bids, run, info.tr, &f->tr, &e) != SR_OK)
		sc_problem(c, "%s", e.msg);
	else
		f->tr_ok = 1;
	if (st->skip_volumes && (int64_t)st->skip_volumes > info.nt - 2)
		sc_problem(c, "%s: skip_volumes = %d leaves fewer than 2 of its %lld volumes", run->bold,
			   st->skip_volumes, (long long)info.nt);
	if (!ref->have) {
		ref->g = info.grid;
		ref->have = 1;
		snprintf(ref->path, sizeof ref->path, "%s", run->bold);
	} else if (!nii_same_grid(&ref->g, &info.grid, 1e-3, why, sizeof why)) {
		sc_problem(c, "%s: not on the grid of %s: %s", run->bold, ref->path, why);
	}
	check_confounds(c, run, f);
	check_events(c, run, f, task_conds);
}

static void run_release(studycheck_run *f)
{
	strv_free_array(f->conf_cols, f->conf_cols ? (size_t)f->nconf : 0);
	free(f->conf_na);
	strv_free(&f->conds);
	free(f->cond_count);
}

int studycheck_task_find(studycheck_ctx *c, const char *label, const char *task, studycheck_task *t)
{
	sr_err e;

	memset(t, 0, sizeof *t);
	t->task = task;
	sr_err_init(&e, on_warn, c);
	if (study_runs(c->st, label, task, &t->runs, &t->nruns, &e) != SR_OK) {
		sc_problem(c, "%s", e.msg);
		return 1;
	}
	t->listed = 1;
	return 0;
}

void studycheck_task_runs(studycheck_ctx *c, studycheck_task *t, studycheck_grid *ref)
{
	size_t r;

	t->info = xcalloc(t->nruns + 1, sizeof *t->info);
	for (r = 0; r < t->nruns; r++)
		studycheck_run_validate(c, &t->runs[r], ref, &t->info[r], &t->conds);
}

void studycheck_task_conds(const study *st, studycheck_task *t)
{
	size_t r, q;

	for (r = 0; r < t->nruns; r++) {
		event_list ev;
		sr_err quiet;

		sr_err_init(&quiet, NULL, NULL);
		if (t->runs[r].events_exist && events_read(t->runs[r].events, st->condition_column, &ev, &quiet) == SR_OK) {
			for (q = 0; q < ev.n; q++)
				add_unique(&t->conds, ev.ev[q].condition);
			events_release(&ev);
		}
	}
}

void studycheck_task_release(studycheck_task *t)
{
	size_t r;

	if (t->info)
		for (r = 0; r < t->nruns; r++)
			run_release(&t->info[r]);
	free(t->info);
	bids_runs_release(t->runs, t->nruns);
	strv_free(&t->conds);
	memset(t, 0, sizeof *t);
}

void studycheck_subject(studycheck_ctx *c, const char *label, studycheck_task *tasks, studycheck_grid *ref)
{
	const study *st = c->st;
	size_t t, ntasks = 1 + st->nmeasures;

	for (t = 0; t < ntasks; t++) {
		const char *task = t ? st->measures[t - 1].task : st->loc_task;
		studycheck_task *ts = &tasks[t];

		if (studycheck_task_find(c, label, task, ts))
			continue;
		if (ts->nruns == 0) {
			sc_problem(c, "%s: sub-%s has no runs of task %s (looked for sub-%s/[ses-*/]func/sub-%s_*task-%s*_bold.nii[.gz])",
				   st->derivatives ? st->derivatives : st->bids, label, task, label, label, task);
			continue;
		}
		studycheck_task_runs(c, ts, ref);
	}
}

void studycheck_subject_mask(studycheck_ctx *c, const char *label, const studycheck_task *tasks, size_t ntasks,
			     const studycheck_grid *ref, char ***paths, size_t *npaths, size_t *count, int *read)
{
	const study *st = c->st;
	size_t n = 0, cap = 0, t, r;
	unsigned char *m;
	nii_grid mg;
	sr_err e;
	char why[1024];

	*paths = NULL;
	*read = 0;
	sr_err_init(&e, on_warn, c);
	if (st->mask_auto) {
		for (t = 0; t < ntasks; t++)
			for (r = 0; r < tasks[t].nruns; r++) {
				if (!tasks[t].runs[r].brain_mask) {
					sc_problem(c, "%s: no desc-brain_mask image beside it (mask = auto)", tasks[t].runs[r].bold);
					continue;
				}
				XGROW(*paths, n, cap);
				(*paths)[n++] = xstrdup(tasks[t].runs[r].brain_mask);
			}
	} else {
		*paths = xmalloc(sizeof **paths);
		(*paths)[n++] = study_subject_path(st->mask, label);
	}
	*npaths = n;
	if (n && subject_mask_intersection(*paths, n, &m, &mg, count, &e) != SR_OK) {
		sc_problem(c, "%s", e.msg);
	} else if (n) {
		*read = 1;
		if (ref->have && !nii_same_grid(&ref->g, &mg, 1e-3, why, sizeof why))
			sc_problem(c, "%s: the mask is not on the data grid of %s: %s", (*paths)[0], ref->path, why);
		free(m);
	}
}

/* ---- conditions named by effects (METHODS.md section 11) ---- */

/* The problem for a condition no subject has, naming the study file's line of key. */
static void unknown_name(studycheck_ctx *c, const char *section, const char *key, const char *task, const expr *fx,
			 const char *name, char *const *known, size_t nknown)
{
	size_t line = study_line(c->st, section, key), used, j;
	char where[64] = "", msg[2048];

	if (line)
		snprintf(where, sizeof where, " line %zu:", line);
	used = (size_t)snprintf(msg, sizeof msg,
				"%s:%s %s '%s' names condition '%s', unknown to every subject of task %s (known:",
				c->st->path, where, line ? key : "default effect", fx->text, name, task);
	for (j = 0; j < nknown && used < sizeof msg; j++)
		used += (size_t)snprintf(msg + used, sizeof msg - used, "%s %s", j ? "," : "", known[j]);
	if (used < sizeof msg)
		snprintf(msg + used, sizeof msg - used, "%s)", nknown ? "" : " none");
	sc_problem(c, "%s", msg);
}

void studycheck_names(studycheck_ctx *c, const char *section, const char *key, const char *task, const expr *fx,
		      size_t nfx, char *const *known, size_t nknown, char **subs, size_t nsub,
		      const studycheck_task *seen, size_t stride, study_problems *reported)
{
	size_t i, k, s, nruns = 0;

	for (s = 0; s < nsub; s++)
		nruns += seen[s * stride].nruns;
	if (nruns == 0)
		return;  /* "has no runs of task" is said for every subject; the names cannot be known */
	for (i = 0; i < nfx; i++) {
		for (k = 0; k < fx[i].nterms; k++) {
			const char *name = fx[i].terms[k].name;

			if (has_label(reported->msg, reported->n, name))
				continue;  /* one message per condition and task */
			study_problems_add(reported, NULL, 0, "%s", name);
			if (!has_label(known, nknown, name)) {
				unknown_name(c, section, key, task, &fx[i], name, known, nknown);
				continue;
			}
			for (s = 0; s < nsub; s++) {
				const studycheck_task *ts = &seen[s * stride];

				if (ts->nruns && !strv_contains(&ts->conds, name))
					sc_warning(c, "sub-%s has no '%s' events in task %s: %s is not estimable for this subject",
						   subs[s], name, task, fx[i].text);
			}
		}
	}
}

/* The conditions of one task over the subjects' events, by studycheck_names; 1 when runs could not be listed. */
static int task_names(studycheck_ctx *c, size_t t, char **subs, size_t nsub)
{
	const study *st = c->st;
	const char *task = t ? st->measures[t - 1].task : st->loc_task;
	studycheck_task *seen = xcalloc(nsub + 1, sizeof *seen);
	study_problems reported = { 0 };
	strv known = { 0 };
	char section[512];
	size_t s, k, nruns = 0;
	int failed = 0;

	for (s = 0; s < nsub && !failed; s++) {
		failed = studycheck_task_find(c, subs[s], task, &seen[s]);
		studycheck_task_conds(st, &seen[s]);
		nruns += seen[s].nruns;
		for (k = 0; k < seen[s].conds.n; k++)
			add_unique(&known, seen[s].conds.v[k]);
	}
	if (failed) {
		/* nothing more: the runs of this task cannot be known */
	} else if (nruns == 0) {
		/* what check says of each subject first, then what it means for the study */
		for (s = 0; s < nsub; s++)
			sc_problem(c, "%s: sub-%s has no runs of task %s (looked for sub-%s/[ses-*/]func/sub-%s_*task-%s*_bold.nii[.gz])",
				   st->derivatives ? st->derivatives : st->bids, subs[s], task, subs[s], subs[s], task);
		study_problems_add(c->probs, st->path, 0,
				   "no subject has runs of task '%s' under %s (files named sub-<label>_task-%s_..._bold.nii[.gz])",
				   task, st->bids, task);
	} else {
		strv_sort(&known);
		if (t == 0) {
			studycheck_names(c, "localizer", "contrast", task, &st->contrast, 1, known.v, known.n, subs, nsub,
					 seen, 1, &reported);
			studycheck_names(c, "localizer", "effects", task, st->loc_effects, st->nloc_effects, known.v, known.n,
					 subs, nsub, seen, 1, &reported);
		} else {
			snprintf(section, sizeof section, "measure %s", st->measures[t - 1].name);
			studycheck_names(c, section, "effects", task, st->measures[t - 1].effects,
					 st->measures[t - 1].neffects, known.v, known.n, subs, nsub, seen, 1, &reported);
		}
	}
	for (s = 0; s < nsub; s++)
		studycheck_task_release(&seen[s]);
	free(seen);
	strv_free(&known);
	study_problems_release(&reported);
	return failed;
}

int studycheck_effects(const study *st, char **subs, size_t nsub, study_problems *probs)
{
	studycheck_ctx c = { .st = st, .probs = probs };
	size_t t, before = probs->n;

	for (t = 0; t < 1 + st->nmeasures; t++)
		if (task_names(&c, t, subs, nsub))
			return 1;
	return (int)(probs->n - before);
}

/* ---- several localizers ---- */

int studycheck_localizer_task_new(const study *st, size_t l)
{
	size_t k;
	int done = strcmp(st->locs[l].task, st->loc_task) == 0;

	for (k = 0; k < st->nmeasures && !done; k++)
		done = strcmp(st->measures[k].task, st->locs[l].task) == 0;
	for (k = 1; k < l && !done; k++)
		done = strcmp(st->locs[k].task, st->locs[l].task) == 0;
	return !done;
}

/* ---- parcels ---- */

static void on_parcel_problem(void *ctx, const char *msg)
{
	sc_problem(ctx, "%s", msg);
}

/* The parcels resampled onto data grid g: voxel counts per parcel in f->on_data (0 on a singular affine). */
static int resample_counts(studycheck_ctx *c, studycheck_parcels *f, const studycheck_grid *g)
{
	const parcels_set *ps = &f->ps;
	int64_t sn[3] = { ps->grid.nx, ps->grid.ny, ps->grid.nz };
	int64_t tn[3] = { g->g.nx, g->g.ny, g->g.nz };
	size_t nv = nii_nvox(&g->g), v;
	int32_t *lab = xmalloc_array(nv ? nv : 1, sizeof *lab);
	int i;

	if (resample_nearest(ps->labels, sn, ps->grid.affine, lab, tn, g->g.affine)) {
		sc_problem(c, "%s: the parcel image's affine is singular", c->st->parcels);
		free(lab);
		return 0;
	}
	f->on_data = xcalloc((size_t)ps->n + 1, sizeof *f->on_data);
	for (v = 0; v < nv; v++) {
		i = lab[v] ? parcels_find(ps, lab[v]) : -1;
		if (i >= 0)
			f->on_data[i]++;
	}
	free(lab);
	f->resampled_onto = g->path;
	for (i = 0; i < ps->n; i++)
		if (!f->on_data[i])
			sc_warning(c, "%s: parcel %s has no voxels once resampled onto the data grid", c->st->parcels,
				   ps->name[i]);
	return 1;
}

int studycheck_parcels_validate(studycheck_ctx *c, const studycheck_grid *grids, size_t ngrids, studycheck_parcels *f)
{
	const study *st = c->st;
	sr_err e;
	char why[1024];
	size_t g;
	int raw;

	memset(f, 0, sizeof *f);
	/* read the way a fit reads them, but listing every bad row */
	sr_err_init(&e, on_warn, c);
	if (parcels_load_listing(st->parcels, st->parcel_names, on_parcel_problem, c, &f->ps, &e) != SR_OK) {
		sc_problem(c, "%s", e.msg);
		return 1;
	}
	f->loaded = 1;
	raw = subject_parcels_template_on_raw(st, &f->ps.grid, st->parcels);
	if (raw)
		sc_warning(c, "%s: " PARCELS_RAW_NOTE, st->parcels);
	for (g = 0; g < ngrids; g++) {
		if (nii_same_grid(&grids[g].g, &f->ps.grid, 1e-3, why, sizeof why))
			continue;
		if (raw) {
			sc_problem(c, "%s: the parcels are not on the data grid of %s (%s)", st->parcels, grids[g].path,
				   why);
		} else if (!st->resample_parcels) {
			sc_problem(c, "%s: the parcels are not on the data grid of %s (%s); set 'resample = nearest' in [parcels] to resample them",
				   st->parcels, grids[g].path, why);
		} else if (!f->resampled_onto) {
			/* voxel counts are shown on the first grid that needs resampling */
			if (!resample_counts(c, f, &grids[g]))
				break;
		}
	}
	return 0;
}

void studycheck_parcels_release(studycheck_parcels *f)
{
	if (f->loaded)
		parcels_release(&f->ps);
	free(f->on_data);
	memset(f, 0, sizeof *f);
}

/* ---- the study's one mask ---- */

int studycheck_mask_validate(studycheck_ctx *c, const studycheck_grid *grids, size_t ngrids, size_t *count)
{
	const study *st = c->st;
	nii_info info;
	unsigned char *m;
	sr_err e;
	size_t g;
	char why[1024];

	*count = 0;
	if (!st->mask)
		return 0;
	sr_err_init(&e, on_warn, c);
	if (nii_read_mask(st->mask, &info, &m, count, &e) != SR_OK) {
		sc_problem(c, "%s", e.msg);
		return 0;
	}
	free(m);
	if (*count == 0)
		sc_problem(c, "%s: the mask is empty", st->mask);
	for (g = 0; g < ngrids; g++)
		if (!nii_same_grid(&grids[g].g, &info.grid, 1e-3, why, sizeof why))
			sc_problem(c, "%s: the mask is not on the data grid of %s: %s", st->mask, grids[g].path, why);
	return 1;
}

/* ---- before analyze fits a subject ---- */

/* The parcels c->st names for subject label (its own when the paths hold {subject}) against its grid. */
static void subject_parcels(studycheck_ctx *c, const char *label, const studycheck_grid *ref)
{
	const study *st = c->st;
	study one = *st;
	studycheck_parcels f;

	one.parcels = study_subject_path(st->parcels, label);
	one.parcel_names = study_subject_path(st->parcel_names, label);
	c->st = &one;
	studycheck_parcels_validate(c, ref, ref->have ? 1 : 0, &f);
	studycheck_parcels_release(&f);
	c->st = st;
	free(one.parcels);
	free(one.parcel_names);
}

/* Each further localizer: the runs of its own task (a grid of their own, as check has it), its parcels. */
static void further_localizers(studycheck_ctx *c, const char *label, const studycheck_grid *subject_grid)
{
	const study *whole = c->st;

	for (size_t l = 1; l < whole->nlocs; l++) {
		studycheck_task ts = { 0 };
		studycheck_grid ref = { .have = 0 };
		study v;

		study_use_localizer(whole, l, &v);
		c->st = &v;
		if (studycheck_localizer_task_new(whole, l) && !studycheck_task_find(c, label, v.loc_task, &ts)) {
			if (ts.nruns == 0)
				sc_problem(c, "%s: sub-%s has no runs of task %s (localizer %s)",
					   v.derivatives ? v.derivatives : v.bids, label, v.loc_task, study_loc_label(whole, l));
			studycheck_task_runs(c, &ts, &ref);
		}
		subject_parcels(c, label, subject_grid);
		studycheck_task_release(&ts);
		c->st = whole;
		study_view_release(&v);
	}
}

sr_status studycheck_analyzable(const study *st, const char *label, sr_err *e)
{
	study_problems probs = { 0 };
	studycheck_ctx c = { .st = st, .probs = &probs, .headers_only = 1 };
	size_t t, ntasks = 1 + st->nmeasures;
	studycheck_task *tasks = xcalloc(ntasks, sizeof *tasks);
	studycheck_grid ref = { .have = 0 };
	sr_status rc = SR_OK;

	studycheck_subject(&c, label, tasks, &ref);
	subject_parcels(&c, label, &ref);
	further_localizers(&c, label, &ref);
	if (study_mask_per_subject(st)) {
		char **paths;
		size_t n = 0, count = 0;
		int read;

		studycheck_subject_mask(&c, label, tasks, ntasks, &ref, &paths, &n, &count, &read);
		strv_free_array(paths, n);
	} else {
		size_t count;

		studycheck_mask_validate(&c, &ref, ref.have ? 1 : 0, &count);
	}
	if (probs.n)
		rc = sr_fail(e, SR_ESTUDY, "%s", probs.msg[0]);
	for (t = 0; t < ntasks; t++)
		studycheck_task_release(&tasks[t]);
	free(tasks);
	study_problems_release(&probs);
	return rc;
}

