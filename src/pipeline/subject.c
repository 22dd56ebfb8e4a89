/* subject.c - one subject's analysis: fit every run once, form the splits, define fROIs, measure. */
#include "subject.h"

#include <fcntl.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>
#include <time.h>

#include "../core/fir.h"
#include "../core/mem.h"
#include "../core/strv.h"
#include "../core/resample.h"
#include "../core/roi.h"
#include "../io/afile.h"
#include "../io/bids.h"
#include "../io/csvout.h"
#include "../io/designcsv.h"
#include "../io/events.h"
#include "../io/jdoc.h"
#include "../io/table.h"
#include "../version.h"
#include "leftout.h"
#include "mapout.h"
#include "tabledict.h"
#include "runfit.h"
#include "tablekeys.h"

const char *const subject_columns[] = {
	"subject", "localizer", "parcel", "split", "split_kind", "part", "define_runs",
	"measure_task", "measure_runs", "effect", "value", "n_voxels", "n_candidates",
};
const size_t subject_ncolumns = sizeof subject_columns / sizeof subject_columns[0];

/* ---- parcels ---- */

sr_status subject_mask_intersection(char *const *paths, size_t n, unsigned char **mask, nii_grid *grid,
			    size_t *count, sr_err *e)
{
	unsigned char *m = NULL;
	size_t nvox = 0, v;
	char why[512];

	*mask = NULL;
	*count = 0;
	for (size_t i = 0; i < n; i++) {
		nii_info info;
		unsigned char *mi;
		sr_status rc = nii_read_mask(paths[i], &info, &mi, NULL, e);

		if (rc) {
			free(m);
			return rc;
		}
		if (i == 0) {
			*grid = info.grid;
			nvox = nii_nvox(&info.grid);
			m = mi;
			continue;
		}
		if (!nii_same_grid(grid, &info.grid, 1e-3, why, sizeof why)) {
			free(mi);
			free(m);
			return sr_fail(e, SR_EDIM, "%s: the mask is not on the grid of %s: %s", paths[i], paths[0], why);
		}
		for (v = 0; v < nvox; v++)
			m[v] &= mi[v];
		free(mi);
	}
	for (v = 0; v < nvox; v++)
		*count += m[v];
	if (*count == 0) {
		free(m);
		return sr_fail(e, SR_EFORMAT, n > 1 ? "%s and %zu other masks have no voxel in common" : "%s: the mask is empty",
			       paths[0], n - 1);
	}
	*mask = m;
	return SR_OK;
}

int subject_parcels_template_on_raw(const study *st, const nii_grid *g, const char *path)
{
	const char *b = strrchr(path, '/');
	int tpl;

	if (st->derivatives)
		return 0;
	b = b ? b + 1 : path;
	/* NIfTI xform codes 3 (Talairach), 4 (MNI-152), 5 (other template) */
	tpl = (g->sform_code >= 3 && g->sform_code <= 5) || (g->sform_code <= 0 && g->qform_code >= 3 && g->qform_code <= 5);
	return tpl || strstr(b, "space-") != NULL || strncmp(b, "tpl-", 4) == 0 || strstr(b, "_tpl-") != NULL;
}

/* ---- rows ---- */

static void add_row(subject_result *r, const char *loc, const char *parcel, const char *split, const char *def,
		    const char *task, const char *meas, const char *effect, double value,
		    double nvox, double ncand)
{
	response_row *w;

	XGROW(r->rows, r->nrows, r->cap);
	w = &r->rows[r->nrows++];
	w->localizer = xstrdup(loc);
	w->parcel = xstrdup(parcel);
	w->split = xstrdup(split);
	w->define_runs = xstrdup(def);
	w->measure_task = xstrdup(task);
	w->measure_runs = xstrdup(meas);
	w->effect = xstrdup(effect);
	w->value = value;
	w->n_voxels = nvox;
	w->n_candidates = ncand;
}

void subject_result_release(subject_result *r)
{
	size_t i;

	if (!r)
		return;
	for (i = 0; i < r->nrows; i++) {
		free(r->rows[i].localizer);
		free(r->rows[i].parcel);
		free(r->rows[i].split);
		free(r->rows[i].define_runs);
		free(r->rows[i].measure_task);
		free(r->rows[i].measure_runs);
		free(r->rows[i].effect);
	}
	free(r->rows);
	free(r->leftout);
	reliability_table_release(&r->rel);
	timecourse_table_release(&r->tc);
	memset(r, 0, sizeof *r);
}

/* Writes rows as a responses table (header + rows) atomically. */
static sr_status subject_write_rows(const char *path, const char *subject, const response_row *rows,
			     size_t n, sr_err *e)
{
	csvout c;
	sr_status rc;
	size_t i;
	char pid[512];

	rc = csvout_open(&c, path, subject_columns, subject_ncolumns, e);
	if (rc)
		return rc;
	/* the subject column is the BIDS participant_id, so that it stays text and joins participants.tsv */
	snprintf(pid, sizeof pid, "sub-%s", subject);
	for (i = 0; i < n; i++) {
		const response_row *w = &rows[i];

		csvout_str(&c, pid);
		tablekeys_put(&c, w->localizer, w->parcel, w->split);
		csvout_str(&c, w->define_runs);
		csvout_str(&c, w->measure_task);
		csvout_str(&c, w->measure_runs);
		csvout_str(&c, w->effect);
		csvout_num(&c, w->value);
		csvout_num(&c, w->n_voxels);
		csvout_num(&c, w->n_candidates);
		csvout_endrow(&c);
	}
	rc = csvout_commit(&c, e);
	return rc ? rc : tabledict_write(path, subject_columns, subject_ncolumns, NULL, 0, e);
}

/* ---- one task's runs, conditions and contrasts ---- */

typedef struct task_fit {
	const char *task;
	bids_run *runs;
	size_t nruns;
	char **conds;               /* sorted distinct conditions over the subject's runs */
	int ncond;
	const expr *effects;        /* ne effects */
	int ne;
	int coff;                   /* effect 0's place in the fit's contrasts (role_view), 0 for the task itself */
	double *C;                  /* ne x ncond weights */
	unsigned char *missing;     /* ne: names a condition this subject lacks */
	runfit_result *res;         /* nruns, after fitting */
	double *tr;
	nii_grid *grid;             /* nruns: each run's grid from its header, checked before fitting */
	char **confpath;
} task_fit;

static void task_release(task_fit *t)
{
	size_t i;
	int c;

	if (t->res)
		for (i = 0; i < t->nruns; i++)
			runfit_result_release(&t->res[i]);
	free(t->res);
	for (c = 0; c < t->ncond; c++)
		free(t->conds[c]);
	free(t->conds);
	if (t->confpath)
		for (i = 0; i < t->nruns; i++)
			free(t->confpath[i]);
	free(t->confpath);
	free(t->C);
	free(t->missing);
	free(t->tr);
	free(t->grid);
	bids_runs_release(t->runs, t->nruns);
	memset(t, 0, sizeof *t);
}

/*
 * The subject's own mask when the study's depends on the subject: mask =
 * auto (every run's desc-brain_mask, intersected) or a path with {subject}.
 */
static sr_status own_mask(const study *st, const char *label, const task_fit *tasks, size_t ntasks,
			  unsigned char **mask, nii_grid *grid, char **what, sr_err *e)
{
	char **paths = NULL;
	size_t n = 0, count, total = 0;
	sr_status rc;

	*mask = NULL;
	*what = NULL;
	if (!st->mask_auto) {
		char *p = study_subject_path(st->mask, label);

		rc = subject_mask_intersection(&p, 1, mask, grid, &count, e);
		*what = p;
		return rc;
	}
	for (size_t i = 0; i < ntasks; i++)
		total += tasks[i].nruns;
	paths = xmalloc_array(total ? total : 1, sizeof *paths);
	for (size_t i = 0; i < ntasks; i++)
		for (size_t r = 0; r < tasks[i].nruns; r++) {
			if (!tasks[i].runs[r].brain_mask) {
				rc = sr_fail(e, SR_EIO, "%s: no desc-brain_mask image beside it (mask = auto)",
					     tasks[i].runs[r].bold);
				free(paths);
				return rc;
			}
			paths[n++] = tasks[i].runs[r].brain_mask;
		}
	rc = subject_mask_intersection(paths, n, mask, grid, &count, e);
	if (!rc)
		*what = xstrdup(paths[0]);
	free(paths);
	return rc;
}

/* Finds runs, reads every events file for the condition list, resolves TR, builds contrasts. */
static sr_status task_prepare(const study *st, const char *label, task_fit *t, sr_err *e)
{
	size_t i, cap = 0;
	int j, ncap = 0;
	sr_status rc;

	rc = study_runs(st, label, t->task, &t->runs, &t->nruns, e);
	if (rc)
		return rc;
	if (t->nruns == 0)
		return sr_fail(e, SR_ESTUDY, "%s: subject %s has no runs of task '%s' under %s",
			       st->path, label, t->task, st->bids);
	t->tr = xcalloc(t->nruns, sizeof *t->tr);
	t->grid = xcalloc(t->nruns, sizeof *t->grid);
	t->confpath = xcalloc(t->nruns, sizeof *t->confpath);
	(void)cap;
	for (i = 0; i < t->nruns; i++) {
		event_list ev;
		nii_info info;
		size_t k;

		if (!t->runs[i].events_exist)
			return sr_fail(e, SR_EIO, "%s: missing events file for run %s", t->runs[i].events,
				       t->runs[i].bold);
		/* warnings about rows come once, from the fit that reads the file again */
		{
			sr_err quiet;

			sr_err_init(&quiet, NULL, NULL);
			rc = events_read(t->runs[i].events, st->condition_column, &ev, &quiet);
			if (rc)
				return sr_fail(e, rc, "%s", quiet.msg);
		}
		for (k = 0; k < ev.n; k++) {
			int c;

			for (c = 0; c < t->ncond; c++)
				if (strcmp(t->conds[c], ev.ev[k].condition) == 0)
					break;
			if (c < t->ncond)
				continue;
			XGROW(t->conds, t->ncond, ncap);
			t->conds[t->ncond++] = xstrdup(ev.ev[k].condition);
		}
		events_release(&ev);
		rc = nii_read_info(t->runs[i].bold, &info, e);
		if (rc)
			return rc;
		t->grid[i] = info.grid;
		rc = bids_run_tr(st->bids, &t->runs[i], info.tr, &t->tr[i], e);
		if (rc)
			return rc;
		if (st->nconfounds || st->censor_fd > 0)
			t->confpath[i] = bids_confounds_path(&t->runs[i], st->confounds_suffix);
	}
	if (t->ncond)
		qsort(t->conds, (size_t)t->ncond, sizeof *t->conds, strv_cmp);
	t->C = xcalloc((size_t)t->ne * (size_t)(t->ncond ? t->ncond : 1), sizeof *t->C);
	t->missing = xcalloc((size_t)(t->ne ? t->ne : 1), 1);
	for (j = 0; j < t->ne; j++) {
		size_t k;

		for (k = 0; k < t->effects[j].nterms; k++) {
			int c;

			for (c = 0; c < t->ncond; c++)
				if (strcmp(t->conds[c], t->effects[j].terms[k].name) == 0)
					break;
			if (c == t->ncond) {
				if (!t->missing[j])
					sr_warnf(e, "subject %s has no condition '%s' in task '%s'; effect %s is left empty",
						 label, t->effects[j].terms[k].name, t->task, t->effects[j].text);
				t->missing[j] = 1;
				continue;
			}
			t->C[(size_t)j * (size_t)t->ncond + (size_t)c] += t->effects[j].terms[k].weight;
		}
	}
	return SR_OK;
}

static void task_specs(const study *st, const task_fit *t, const unsigned char *mask,
		       runfit_spec *specs)
{
	size_t i;

	for (i = 0; i < t->nruns; i++) {
		runfit_spec *s = &specs[i];

		memset(s, 0, sizeof *s);
		s->bold = t->runs[i].bold;
		s->events = t->runs[i].events;
		s->condition_column = st->condition_column;
		s->conditions = (const char *const *)t->conds;
		s->ncond = t->ncond;
		s->confounds = t->confpath[i];
		s->confound_names = (const char *const *)st->confounds;
		s->nconf = (int)st->nconfounds;
		s->skip = st->skip_volumes;
		s->censor_fd = st->censor_fd;
		s->fd_column = "framewise_displacement";
		s->tr = t->tr[i];
		s->volume_time = st->volume_time;
		s->drift_cutoff = st->drift_cutoff;
		s->ar1 = st->ar1;
		s->C = t->C;
		s->ncon = t->ne;
		s->mask = mask;
		s->smoothing_fwhm = st->smoothing_fwhm;
	}
}

/* ---- splits ---- */

typedef struct split {
	char name[96];     /* table label, e.g. "odd-even:A" */
	int ndef, nmeas;
	int *def, *meas;   /* run positions */
} split;

static void run_list(const task_fit *t, const int *pos, int n, char *buf, size_t len)
{
	size_t used = 0;
	int i;

	buf[0] = '\0';
	for (i = 0; i < n && used < len; i++)
		used += (size_t)snprintf(buf + used, len - used, "%s%s", i ? "+" : "",
					 t->runs[pos[i]].label);
}

static void all_runs_list(const task_fit *t, char *buf, size_t len)
{
	int *pos = xmalloc_array(t->nruns ? t->nruns : 1, sizeof *pos);
	size_t i;

	for (i = 0; i < t->nruns; i++)
		pos[i] = (int)i;
	run_list(t, pos, (int)t->nruns, buf, len);
	free(pos);
}

/*
 * Fixed-effects map of contrast c over the given runs of t: on the whole
 * grid (E and tmap nvox) when grid is 1, which slim runs keep only for the
 * selection contrasts; else at the voxels the runs hold (E[runfit_at]).
 */
static void ffx_map(const task_fit *t, const int *pos, int n, int c, int grid, size_t nvox, double *E,
		    double *tmap)
{
	const double **ef = xmalloc_array((size_t)(n ? n : 1), sizeof *ef);
	const double **va = xmalloc_array((size_t)(n ? n : 1), sizeof *va);
	int *df = xmalloc_array((size_t)(n ? n : 1), sizeof *df);
	int i;

	for (i = 0; i < n; i++) {
		const runfit_result *r = &t->res[pos[i]];
		const glm_out *o = &r->out;
		int k = c + t->coff;

		if (grid && r->slim) {
			ef[i] = r->grid_effect[k];
			va[i] = r->grid_var[k];
		} else {
			ef[i] = o->effect + (size_t)k * o->nvox;
			va[i] = o->var + (size_t)k * o->nvox;
		}
		df[i] = o->df;
		if (!grid)
			nvox = o->nvox;
	}
	glm_ffx(nvox, n, ef, va, df, E, NULL, tmap, NULL);
	free(ef);
	free(va);
	free(df);
}

/* okall[v] &= run r's analyzable flag; a voxel r does not hold (slim) is not analyzable. */
static void ok_and(unsigned char *okall, const runfit_result *r, const int32_t *keep_pos, size_t nvox)
{
	for (size_t v = 0; v < nvox; v++) {
		ptrdiff_t at = runfit_at(r, v, keep_pos);

		okall[v] &= at >= 0 && r->out.ok[at];
	}
}

/* Everything one definition needs: define t, candidates analyzable in all runs used. */
typedef struct froi_set {
	double *t;            /* nvox define t */
	int32_t *froi;        /* nvox: parcel label of chosen voxels, 0 elsewhere */
	size_t *chosen;       /* concatenated chosen voxels, parcel by parcel */
	size_t *start, *count, *ncand;   /* per parcel */
} froi_set;

static void froi_release(froi_set *f)
{
	free(f->t);
	free(f->froi);
	free(f->chosen);
	free(f->start);
	free(f->count);
	free(f->ncand);
	memset(f, 0, sizeof *f);
}

/*
 * Defines the fROIs of every parcel for one split: candidates are parcel
 * voxels analyzable in every run used (loc runs dpos/mpos, plus all runs of
 * an optional measured task), with finite define t; then the selection rule.
 */
static void define_frois(const study *st, const task_fit *loc, const int *dpos, int nd,
			 const int *mpos, int nm, const task_fit *meas, const int32_t *labels,
			 const int32_t *keep_pos, const parcels_set *ps, size_t nvox, froi_set *f)
{
	unsigned char *okall = xmalloc(nvox);
	size_t *cand = xmalloc_array(nvox ? nvox : 1, sizeof *cand);
	double *ct = xmalloc_array(nvox ? nvox : 1, sizeof *ct);
	double *E = xmalloc_array(nvox ? nvox : 1, sizeof *E);
	size_t v, used = 0;
	int i, p;
	enum roi_rule rule = st->select == SELECT_TOP_VOXELS ? ROI_TOP_VOXELS :
			     st->select == SELECT_MIN_T ? ROI_MIN_T : ROI_TOP_PERCENT;

	memset(f, 0, sizeof *f);
	f->t = xmalloc_array(nvox, sizeof *f->t);
	f->froi = xcalloc(nvox, sizeof *f->froi);
	f->chosen = xmalloc_array(nvox ? nvox : 1, sizeof *f->chosen);
	f->start = xcalloc((size_t)ps->n + 1, sizeof *f->start);
	f->count = xcalloc((size_t)ps->n + 1, sizeof *f->count);
	f->ncand = xcalloc((size_t)ps->n + 1, sizeof *f->ncand);
	ffx_map(loc, dpos, nd, 0, 1, nvox, E, f->t);
	if (loc->missing[0])   /* the selection contrast needs a condition this subject lacks */
		for (v = 0; v < nvox; v++)
			f->t[v] = NAN;
	for (v = 0; v < nvox; v++)
		okall[v] = 1;
	for (i = 0; i < nd; i++)
		ok_and(okall, &loc->res[dpos[i]], keep_pos, nvox);
	for (i = 0; i < nm; i++)
		ok_and(okall, &loc->res[mpos[i]], keep_pos, nvox);
	if (meas)
		for (i = 0; i < (int)meas->nruns; i++)
			ok_and(okall, &meas->res[i], keep_pos, nvox);
	for (p = 0; p < ps->n; p++) {
		size_t n = 0, k;

		for (v = 0; v < nvox; v++) {
			if (labels[v] != ps->index[p] || !okall[v] || !isfinite(f->t[v]))
				continue;
			cand[n] = v;
			ct[n] = f->t[v];
			n++;
		}
		f->ncand[p] = n;
		f->start[p] = used;
		k = roi_select(cand, ct, n, rule, st->select_value, st->top_percent_text, f->chosen + used);
		f->count[p] = k;
		for (v = 0; v < k; v++)
			f->froi[f->chosen[used + v]] = ps->index[p];
		used += k;
	}
	free(okall);
	free(cand);
	free(ct);
	free(E);
}

/* Mean over the fROI's voxels with a finite value; E at the places pos gives (NULL: E on the grid). */
static double froi_mean(const froi_set *f, int p, const double *E, const int32_t *pos)
{
	double s = 0;
	size_t k, n = 0;

	for (k = 0; k < f->count[p]; k++) {
		size_t v = f->chosen[f->start[p] + k];
		double x = pos ? (pos[v] >= 0 ? E[pos[v]] : NAN) : E[v];

		if (isfinite(x)) {
			s += x;
			n++;
		}
	}
	return n ? s / (double)n : NAN;
}

/* The fixed-effects df of a map over the runs at pos (METHODS.md 5): the sum of the runs' df. */
static double ffx_df(const task_fit *t, const int *pos, int n)
{
	double df = 0;
	int i;

	for (i = 0; i < n; i++)
		df += t->res[pos[i]].out.df;
	return df;
}

/* The selection rule in words, for the label image's sidecar. */
static void rule_text(const study *st, char *buf, size_t n)
{
	if (st->select == SELECT_TOP_VOXELS)
		snprintf(buf, n, "top %g voxels by localizer t", st->select_value);
	else if (st->select == SELECT_MIN_T)
		snprintf(buf, n, "voxels with localizer t of at least %g", st->select_value);
	else
		snprintf(buf, n, "top %s percent of the parcel's candidate voxels by localizer t",
			 st->top_percent_text ? st->top_percent_text : "10");
}

/* Writes the define t map and fROI labels of one split under dir/func/ (mapout.h). */
static sr_status write_maps(const char *dir, const study *st, const char *lname, const char *label,
			    const task_fit *loc, const char *split_name, const char *mtask, const char *def,
			    const char *meas, double df, const nii_grid *g, size_t nvox,
			    const parcels_set *ps, const froi_set *f, sr_err *e)
{
	mapout_info m;
	char rule[256];

	rule_text(st, rule, sizeof rule);
	memset(&m, 0, sizeof m);
	m.subject = label;
	m.localizer = lname;
	m.task = loc->task;
	m.space = loc->nruns ? loc->runs[0].space : NULL;
	m.res = st->derivatives ? st->res : NULL;
	m.split = split_name;
	m.measure_task = mtask;
	m.define_runs = def;
	m.measure_runs = meas;
	m.contrast = st->contrast.text;
	m.df = df;
	m.rule = rule;
	return mapout_split(dir, &m, g, nvox, f->t, f->froi, ps->n, ps->index, ps->name, e);
}

/*
 * The voxels whose series the fit keeps for the time courses: every parcel
 * voxel on the data grid g (the parcels resampled when the study says so).
 * *pos (nvox) gets each voxel's place in the list, -1 elsewhere.
 */
static size_t *keep_voxels(const study *st, const parcels_set *ps, const nii_grid *g, size_t *nkeep,
			   int32_t **pos)
{
	size_t nvox = nii_nvox(g), v, n = 0;
	int32_t *lab = NULL;
	const int32_t *use = NULL;
	size_t *keep;
	char buf[256];

	*pos = xmalloc_array(nvox ? nvox : 1, sizeof **pos);
	for (v = 0; v < nvox; v++)
		(*pos)[v] = -1;
	if (nii_same_grid(g, &ps->grid, 1e-3, buf, sizeof buf)) {
		use = ps->labels;
	} else if (st->resample_parcels) {
		int64_t sn[3] = { ps->grid.nx, ps->grid.ny, ps->grid.nz };
		int64_t tn[3] = { g->nx, g->ny, g->nz };

		lab = xmalloc_array(nvox ? nvox : 1, sizeof *lab);
		if (resample_nearest(ps->labels, sn, ps->grid.affine, lab, tn, g->affine) == 0)
			use = lab;
	}
	keep = xmalloc_array(nvox ? nvox : 1, sizeof *keep);
	for (v = 0; use && v < nvox; v++)
		if (use[v] != 0 && n < INT32_MAX) {
			(*pos)[v] = (int32_t)n;
			keep[n++] = v;
		}
	free(lab);
	*nkeep = n;
	return keep;
}

/* The conditions of t named by effects first..ne-1 (weight non-zero), as flags over t's conditions. */
static unsigned char *tc_conditions(const task_fit *t, int first)
{
	unsigned char *use = xcalloc((size_t)(t->ncond ? t->ncond : 1), 1);
	int j, c;

	for (j = first; j < t->ne; j++)
		for (c = 0; c < t->ncond; c++)
			if (t->C[(size_t)j * (size_t)t->ncond + (size_t)c] != 0)
				use[c] = 1;
	return use;
}

/* FIR time courses of every parcel's fROI f over runs mpos of t: out[p][c][b] (np * ncond * nbins). */
static sr_status tc_split(const study *st, const task_fit *t, const int *mpos, int nm, const froi_set *f,
			  int np, const int32_t *pos, int nbins, double *out, sr_err *e)
{
	const runfit_result **runs = xmalloc_array((size_t)(nm ? nm : 1), sizeof *runs);
	double *tr = xmalloc_array((size_t)(nm ? nm : 1), sizeof *tr);
	size_t per = (size_t)t->ncond * (size_t)nbins;
	sr_status rc;
	int i;

	for (i = 0; i < nm; i++) {
		runs[i] = &t->res[mpos[i]];
		tr[i] = t->tr[mpos[i]];
		if (fabs(tr[i] - tr[0]) > 1e-6) {
			/* bins of one TR: runs of other TRs would mix bin widths */
			sr_warnf(e, "%s: TR %g s differs from %g s of %s; the time courses of task '%s' over these runs are left empty",
				 t->runs[mpos[i]].bold, tr[i], tr[0], t->runs[mpos[0]].bold, t->task);
			for (size_t j = 0; j < (size_t)np * per; j++)
				out[j] = NAN;
			free(runs);
			free(tr);
			return SR_OK;
		}
	}
	for (i = 0; i < nm; i++) {
		int cols = t->ncond * nbins + runs[i]->d.p - runs[i]->d.ncond;

		if (runs[i]->d.T <= cols) {
			/* said once per split here, rather than once per parcel by the fit */
			sr_warnf(e, "%s: %d volumes cannot fit the %d columns of the time-course model (timecourse_window = %g s); the time courses of task '%s' over these runs are left empty",
				 t->runs[mpos[i]].bold, runs[i]->d.T, cols, st->timecourse_window, t->task);
			for (size_t j = 0; j < (size_t)np * per; j++)
				out[j] = NAN;
			free(runs);
			free(tr);
			return SR_OK;
		}
	}
	rc = timecourse_frois(runs, tr, nm, f->chosen, f->start, f->count, np, pos, t->ncond, nbins, st->volume_time,
		      out, e);
	free(runs);
	free(tr);
	return rc;
}

/* Adds the rows of one split's time courses (tc_split's out) for the conditions flagged in use. */
static void tc_rows(subject_result *res, const char *loc, const parcels_set *ps, const char *sname,
		    const task_fit *t, const unsigned char *use, int nbins, double tr, const double *v)
{
	int p, c, b;

	for (p = 0; p < ps->n; p++)
		for (c = 0; c < t->ncond; c++) {
			if (!use[c])
				continue;
			for (b = 0; b < nbins; b++)
				timecourse_table_add(&res->tc, loc, ps->name[p], sname, t->task, t->conds[c], b * tr,
					     v[((size_t)p * (size_t)t->ncond + (size_t)c) * (size_t)nbins + (size_t)b]);
		}
}

/*
 * Copies a split's define t, rounded to float32 as the map file holds it (so
 * reliability.csv can be recomputed from the maps), and its fROI labels.
 */
static void keep_split(const froi_set *f, size_t nvox, double **t, int32_t **froi)
{
	size_t v;

	*t = xmalloc_array(nvox ? nvox : 1, sizeof **t);
	*froi = xmalloc_array(nvox ? nvox : 1, sizeof **froi);
	for (v = 0; v < nvox; v++) {
		float x = isfinite(f->t[v]) ? (float)f->t[v] : NAN;

		(*t)[v] = isfinite(x) ? (double)x : NAN;
	}
	memcpy(*froi, f->froi, nvox * sizeof **froi);
}

static double now_seconds(void)
{
	struct timespec ts;

	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void progress(const subject_ctx *ctx, const char *label, const char *stage)
{
	if (ctx->progress)
		ctx->progress(ctx->progress_ctx, label, stage);
}

/* Warns once per run and effect that is not estimable there. */
static void warn_estimability(const task_fit *t, sr_err *e)
{
	size_t r;
	int j;

	for (r = 0; r < t->nruns; r++)
		for (j = 0; j < t->ne; j++)
			if (!t->missing[j] && !t->res[r].out.estimable[j])
				sr_warnf(e, "%s: effect %s is not estimable in this run (a condition it needs has no events, or the design is collinear); the run is left out of it",
					 t->runs[r].bold, t->effects[j].text);
}

static jdoc *inputs_record(const task_fit *t)
{
	jdoc *a = jdoc_array();
	size_t r;

	for (r = 0; r < t->nruns; r++) {
		jdoc *o = jdoc_object();
		struct stat sb;
		const nii_info *in = &t->res[r].info;
		jdoc *dims = jdoc_array();

		jdoc_set_str(o, "bold", t->runs[r].bold);
		jdoc_set_int(o, "bytes", stat(t->runs[r].bold, &sb) == 0 ? (long long)sb.st_size : -1);
		jdoc_push_num(dims, (double)in->grid.nx);
		jdoc_push_num(dims, (double)in->grid.ny);
		jdoc_push_num(dims, (double)in->grid.nz);
		jdoc_push_num(dims, (double)in->nt);
		jdoc_set(o, "dims", dims);
		jdoc_set_num(o, "tr", t->tr[r]);
		jdoc_set_str(o, "events", t->runs[r].events);
		jdoc_set_str(o, "confounds", t->confpath[r]);
		jdoc_set_str(o, "run", t->runs[r].label);
		jdoc_set_int(o, "rank", (long long)t->res[r].d.T - t->res[r].out.df);
		jdoc_set_int(o, "df", t->res[r].out.df);
		jdoc_set_int(o, "skipped_volumes", t->res[r].nskip);
		jdoc_set_int(o, "censored_volumes", t->res[r].ncensored);
		if (t->res[r].ncensored) {
			jdoc *cv = jdoc_array();

			/* 1-based volume numbers of the stored run */
			for (int k = 0; k < t->res[r].ncensored; k++)
				jdoc_push_num(cv, (double)t->res[r].censored[k] + 1);
			jdoc_set(o, "censored", cv);
		}
		jdoc_set_int(o, "events_before_start", t->res[r].nearly_events);
		jdoc_set_int(o, "nonfinite_voxels", (long long)t->res[r].nnonfinite);
		{
			jdoc *cn = jdoc_array();

			for (int k = 0; k < t->res[r].d.nconf; k++)
				jdoc_push_str(cn, t->res[r].conf_names[k]);
			jdoc_set(o, "confound_columns", cn);
		}
		jdoc_set(o, "voxels", leftout_record(&t->res[r].out));
		jdoc_push(a, o);
	}
	return a;
}

/* The first localizer run's temporal mean (the report's background) and every run's design. */
static sr_status write_run_files(const char *dir, const char *label, const task_fit *tasks,
				 size_t ntasks, const study *st, const nii_grid *g, size_t nvox, sr_err *e)
{
	char path[4096 + 256];
	float *m = xmalloc_array(nvox, sizeof *m);
	const runfit_result *r0 = &tasks[0].res[0];
	const double *mean0 = r0->slim ? r0->grid_mean : r0->out.mean;
	size_t i, v;
	sr_status rc;

	mapout_info mi;

	for (v = 0; v < nvox; v++)
		m[v] = isfinite(mean0[v]) ? (float)mean0[v] : 0.0f;
	memset(&mi, 0, sizeof mi);
	mi.subject = label;
	mi.task = tasks[0].task;
	mi.space = tasks[0].runs[0].space;
	mi.res = st->derivatives ? st->res : NULL;
	if (tasks[0].runs[0].run_index >= 0)
		snprintf(path, sizeof path, "%d", tasks[0].runs[0].run_index);
	rc = mapout_boldref(dir, &mi, tasks[0].runs[0].session,
			    tasks[0].runs[0].run_index >= 0 ? path : NULL, tasks[0].runs[0].bold, g, m, e);
	free(m);
	for (i = 0; !rc && i < ntasks; i++) {
		size_t r;

		for (r = 0; !rc && r < tasks[i].nruns; r++) {
			snprintf(path, sizeof path, "%s/design/task-%s_run-%s.csv", dir, tasks[i].task,
				 tasks[i].runs[r].label);
			rc = designcsv_write(path, &tasks[i].res[r].d, (const char *const *)tasks[i].conds,
					     (const char *const *)tasks[i].res[r].conf_names, e);
		}
	}
	return rc;
}

/* Per parcel: 1 when no voxel of labels (nvox, on the data grid) carries its label. */
static unsigned char *lost_parcels(const parcels_set *ps, const int32_t *labels, size_t nvox)
{
	unsigned char *lost = xmalloc((size_t)ps->n + 1);
	size_t v;

	memset(lost, 1, (size_t)ps->n + 1);
	for (v = 0; v < nvox; v++) {
		const int32_t *hit;

		if (labels[v] == 0)
			continue;
		hit = bsearch(&labels[v], ps->index, (size_t)ps->n, sizeof *ps->index, strv_cmp_i32);
		if (hit)
			lost[hit - ps->index] = 0;
	}
	return lost;
}

/*
 * Every run on the grid of the first localizer run, and the mask on it too,
 * from the headers: before fitting, because the fit reads the mask with the
 * run's voxel count (a smaller mask would be read past its end).
 */
static sr_status check_grids(const task_fit *tasks, size_t ntasks, const char *mask_path,
			     const nii_grid *mask_grid, sr_err *e)
{
	const nii_grid *g = &tasks[0].grid[0];
	char buf[1024];
	size_t i, r;

	for (i = 0; i < ntasks; i++)
		for (r = 0; r < tasks[i].nruns; r++)
			if (!nii_same_grid(g, &tasks[i].grid[r], 1e-3, buf, sizeof buf))
				return sr_fail(e, SR_EDIM, "%s: not on the grid of %s: %s", tasks[i].runs[r].bold,
					       tasks[0].runs[0].bold, buf);
	if (mask_grid && !nii_same_grid(g, mask_grid, 1e-3, buf, sizeof buf))
		return sr_fail(e, SR_EDIM, "%s: the mask is not on the data grid of %s: %s", mask_path,
			       tasks[0].runs[0].bold, buf);
	return SR_OK;
}

static void free_splits(split *splits, int n)
{
	for (int s = 0; s < n; s++) {
		free(splits[s].def);
		free(splits[s].meas);
	}
	free(splits);
}

/* The splits of the localizer runs (METHODS.md section 6); *nsplits 0 with fewer than 2 runs. */
static split *make_splits(const study *st, const task_fit *loc, size_t nmeas, const char *label, int *nsplits,
			  sr_err *e)
{
	split *splits = NULL;
	int s;

	int nl = (int)loc->nruns;

		if (nl < 2) {
		sr_warnf(e, "subject %s has %d run of task '%s': no cross-validated rows%s",
			 label, nl, st->loc_task,
			 nmeas > 0 ? "; measured-task rows are still made" :
			 " and the study measures no other task, so the subject's table is empty");
	} else if (st->split == SPLIT_ODD_EVEN) {
		*nsplits = 2;
		splits = xcalloc(2, sizeof *splits);
		for (s = 0; s < 2; s++) {
			int r, nodd = (nl + 1) / 2, neven = nl / 2;

			snprintf(splits[s].name, sizeof splits[s].name, "odd-even:%c", 'A' + s);
			splits[s].def = xcalloc((size_t)nl, sizeof(int));
			splits[s].meas = xcalloc((size_t)nl, sizeof(int));
			for (r = 0; r < nl; r++) {
				int odd = (r % 2) == 0;   /* 1st, 3rd, ... in run order */

				if (odd == (s == 0))
					splits[s].def[splits[s].ndef++] = r;
				else
					splits[s].meas[splits[s].nmeas++] = r;
			}
			(void)nodd;
			(void)neven;
		}
	} else {
		*nsplits = nl;
		splits = xcalloc((size_t)nl, sizeof *splits);
		for (s = 0; s < nl; s++) {
			int r;

			snprintf(splits[s].name, sizeof splits[s].name, "leave-one-out:%s",
				 loc->runs[s].label);
			splits[s].def = xcalloc((size_t)nl, sizeof(int));
			splits[s].meas = xcalloc(1, sizeof(int));
			for (r = 0; r < nl; r++)
				if (r != s)
					splits[s].def[splits[s].ndef++] = r;
			splits[s].meas[splits[s].nmeas++] = s;
		}
	}
	return splits;
}

/* Measured tasks: fROIs from all localizer runs (and a map of that definition), rows split all. */
static sr_status measured_rows(const study *st, const char *lname, const char *mapname, const task_fit *loc,
			       const task_fit *mts, size_t nmeas, const parcels_set *ps, const int32_t *labels,
			       const unsigned char *lost, const int32_t *keep_pos, const nii_grid *gp, size_t nvox,
			       const char *dir, const char *label, subject_result *res, sr_err *e)
{
	double *E = xmalloc_array(nvox, sizeof *E);
	char meas[1024], all[1024];
	nii_grid grid = *gp;
	sr_status rc = SR_OK;
	size_t i;
	int p, j;

	all_runs_list(loc, all, sizeof all);
	for (i = 0; !rc && i < nmeas; i++) {
		const task_fit *mt = &mts[i];
		int *lpos = xmalloc_array(loc->nruns, sizeof *lpos);
		int *mpos = xmalloc_array(mt->nruns, sizeof *mpos);
		froi_set f;
		size_t r;

		for (r = 0; r < loc->nruns; r++)
			lpos[r] = (int)r;
		for (r = 0; r < mt->nruns; r++)
			mpos[r] = (int)r;
		define_frois(st, loc, lpos, (int)loc->nruns, NULL, 0, mt, labels, keep_pos, ps, nvox, &f);
		all_runs_list(mt, meas, sizeof meas);
		for (p = 0; p < ps->n; p++) {
			if (f.count[p] == 0 && !(lost && lost[p]))
				sr_warnf(e, "subject %s, parcel %s, task %s: the fROI defined on all localizer runs is empty",
					 label, ps->name[p], mt->task);
		}
		for (j = 0; j < mt->ne; j++) {
			ffx_map(mt, mpos, (int)mt->nruns, j, 0, nvox, E, NULL);
			for (p = 0; p < ps->n; p++)
				add_row(res, lname, ps->name[p], "all", all, mt->task, meas, mt->effects[j].text,
					mt->missing[j] ? NAN : froi_mean(&f, p, E, mt->res[0].slim ? keep_pos : NULL),
					(double)f.count[p],
					(double)f.ncand[p]);
		}
		{
			int nb = fir_nbins(st->timecourse_window, mt->tr[0]);
			double *tv = xmalloc_array((size_t)(ps->n ? ps->n : 1) * (size_t)(mt->ncond ? mt->ncond : 1) *
						   (size_t)nb, sizeof *tv);
			unsigned char *use = tc_conditions(mt, 0);

			rc = tc_split(st, mt, mpos, (int)mt->nruns, &f, ps->n, keep_pos, nb, tv, e);
			if (!rc)
				tc_rows(res, lname, ps, "all", mt, use, nb, mt->tr[0], tv);
			free(tv);
			free(use);
		}
		if (!rc)
			rc = write_maps(dir, st, mapname, label, loc, "all", mt->task, all, meas,
					ffx_df(loc, lpos, (int)loc->nruns), &grid, nvox, ps, &f, e);
		froi_release(&f);
		free(lpos);
		free(mpos);
	}
	free(E);
	return rc;
}

/*
 * The :mean response rows of one localizer: per parcel and effect 1..ne-1 the
 * splits' mean of value, n_voxels and n_candidates (cells split, parcel,
 * effect as loc_pass fills them); the value is NaN when any split's is not finite.
 */
static void mean_rows(subject_result *res, const char *lname, const parcels_set *ps, const task_fit *loc,
		      const char *kind, const char *mdef, const char *mmeas, const double *val, const double *nv,
		      const double *nc, int nsplits)
{
	int ne = loc->ne, s, p, j;

	for (p = 0; p < ps->n; p++) {
		for (j = 1; j < ne; j++) {
			double sv = 0, sn = 0, sc = 0;
			int bad = 0;

			for (s = 0; s < nsplits; s++) {
				size_t cell = ((size_t)s * (size_t)ps->n + (size_t)p) * (size_t)ne + (size_t)j;

				if (!isfinite(val[cell]))
					bad = 1;
				sv += val[cell];
				sn += nv[cell];
				sc += nc[cell];
			}
			add_row(res, lname, ps->name[p], kind, mdef, loc->task, mmeas, loc->effects[j].text,
				bad ? NAN : sv / nsplits, sn / nsplits, sc / nsplits);
		}
	}
}

/*
 * One localizer's part of a subject (METHODS.md 6-8): its splits, define t,
 * fROIs, cross-validated rows, reliability and time courses, then its
 * measured tasks in fROIs from all its runs; rows carry lname, maps the
 * localizer name mapname (NULL with one localizer).
 */
static sr_status loc_pass(const study *st, const char *lname, const char *mapname, const task_fit *loc,
			  const task_fit *mts, size_t nmeas, const parcels_set *ps, const int32_t *labels,
			  const unsigned char *lost, const int32_t *keep_pos, const nii_grid *gridp, size_t nvox,
			  const char *dir, const char *label, int *nloc_runs, subject_result *res, sr_err *e)
{
	split *splits = NULL;
	int nsplits = 0, s, p, j;
	nii_grid grid = *gridp;
	sr_status rc = SR_OK;

	*nloc_runs = (int)loc->nruns;
	splits = make_splits(st, loc, nmeas, label, &nsplits, e);
	{
		int ne = loc->ne;
		/* per split, parcel and effect: value, n_voxels, n_candidates for the :mean rows */
		size_t cells = (size_t)(nsplits ? nsplits : 1) * (size_t)(ps->n ? ps->n : 1) * (size_t)ne;
		double *val = xcalloc(cells, sizeof *val);
		double *nv = xcalloc(cells, sizeof *nv);
		double *nc = xcalloc(cells, sizeof *nc);
		double *E = xmalloc_array(nvox, sizeof *E);
		char def[1024], meas[1024], mdef[4096] = "", mmeas[4096] = "";
		/* per split, for reliability.csv: the define t as written (float32) and the fROI */
		size_t nsk = (size_t)(nsplits ? nsplits : 1);
		double **keep_t = xcalloc(nsk, sizeof *keep_t);
		int32_t **keep_f = xcalloc(nsk, sizeof *keep_f);
		char **keep_name = xcalloc(nsk, sizeof *keep_name), **keep_def = xcalloc(nsk, sizeof *keep_def);
		/* per split, parcel, condition and bin: the time courses, for the :mean rows */
		int tcb = fir_nbins(st->timecourse_window, loc->tr[0]);
		size_t tcper = (size_t)(ps->n ? ps->n : 1) * (size_t)(loc->ncond ? loc->ncond : 1) * (size_t)tcb;
		double *tcv = xcalloc(nsk * tcper, sizeof *tcv);
		unsigned char *tcuse = tc_conditions(loc, 1);

		for (s = 0; s < nsplits; s++) {
			froi_set f;

			define_frois(st, loc, splits[s].def, splits[s].ndef, splits[s].meas, splits[s].nmeas,
				     NULL, labels, keep_pos, ps, nvox, &f);
			run_list(loc, splits[s].def, splits[s].ndef, def, sizeof def);
			keep_split(&f, nvox, &keep_t[s], &keep_f[s]);
			keep_name[s] = xstrdup(splits[s].name);
			keep_def[s] = xstrdup(def);
			rc = tc_split(st, loc, splits[s].meas, splits[s].nmeas, &f, ps->n, keep_pos, tcb,
				      tcv + (size_t)s * tcper, e);
			if (rc) {
				froi_release(&f);
				break;
			}
			tc_rows(res, lname, ps, splits[s].name, loc, tcuse, tcb, loc->tr[0],
				tcv + (size_t)s * tcper);
			run_list(loc, splits[s].meas, splits[s].nmeas, meas, sizeof meas);
			/* the :mean rows name what they average: the splits' run lists joined by '|' */
			snprintf(mdef + strlen(mdef), sizeof mdef - strlen(mdef), "%s%s", s ? "|" : "", def);
			snprintf(mmeas + strlen(mmeas), sizeof mmeas - strlen(mmeas), "%s%s", s ? "|" : "", meas);
			/* effect 0 is the selection contrast; report effects 1..ne-1 */
			for (j = 1; j < ne; j++) {
				ffx_map(loc, splits[s].meas, splits[s].nmeas, j, 0, nvox, E, NULL);
				for (p = 0; p < ps->n; p++) {
					size_t cell = ((size_t)s * (size_t)ps->n + (size_t)p) * (size_t)ne + (size_t)j;
					double x = loc->missing[j] ? NAN :
						   froi_mean(&f, p, E, loc->res[0].slim ? keep_pos : NULL);

					val[cell] = x;
					nv[cell] = (double)f.count[p];
					nc[cell] = (double)f.ncand[p];
				}
			}
			for (p = 0; p < ps->n; p++) {
				if (lost && lost[p])
					;   /* said once above */
				else if (f.ncand[p] == 0)
					sr_warnf(e, "subject %s, parcel %s, split %s: no candidate voxels; the fROI is empty",
						 label, ps->name[p], splits[s].name);
				else if (f.count[p] == 0)
					sr_warnf(e, "subject %s, parcel %s, split %s: no voxel passes the selection; the fROI is empty",
						 label, ps->name[p], splits[s].name);
				for (j = 1; j < ne; j++) {
					size_t cell = ((size_t)s * (size_t)ps->n + (size_t)p) * (size_t)ne + (size_t)j;

					add_row(res, lname, ps->name[p], splits[s].name, def, loc->task, meas,
						loc->effects[j].text, val[cell], nv[cell], nc[cell]);
				}
			}
			rc = write_maps(dir, st, mapname, label, loc, splits[s].name, NULL, def, meas,
					ffx_df(loc, splits[s].def, splits[s].ndef), &grid, nvox, ps, &f, e);
			froi_release(&f);
			if (rc)
				break;
		}
		if (!rc && nsplits > 0)
			mean_rows(res, lname, ps, loc, st->split == SPLIT_ODD_EVEN ? "odd-even:mean" : "leave-one-out:mean",
				  mdef, mmeas, val, nv, nc, nsplits);
		if (!rc && nsplits > 0) {
			/* the :mean time course: the splits' mean, empty where any split's is */
			double *mv = xmalloc_array(tcper, sizeof *mv);

			for (size_t q = 0; q < tcper; q++) {
				double sv = 0;

				for (s = 0; s < nsplits; s++)
					sv += tcv[(size_t)s * tcper + q];
				mv[q] = sv / nsplits;   /* NaN when any split's is */
			}
			tc_rows(res, lname, ps,
				st->split == SPLIT_ODD_EVEN ? "odd-even:mean" : "leave-one-out:mean", loc, tcuse, tcb,
				loc->tr[0], mv);
			free(mv);
		}
		free(tcv);
		free(tcuse);
		if (!rc && nsplits > 0)
			reliability_add_splits(&res->rel, lname, (const char *const *)keep_name,
					  (const char *const *)keep_def,
					  st->split == SPLIT_ODD_EVEN ? "odd-even:mean" : "leave-one-out:mean", mdef,
					  (const double *const *)keep_t, (const int32_t *const *)keep_f,
					  (size_t)nsplits, labels, nvox, ps->index, ps->name, ps->n, lost);
		for (s = 0; s < nsplits; s++) {
			free(keep_t[s]);
			free(keep_f[s]);
			free(keep_name[s]);
			free(keep_def[s]);
		}
		free(keep_t);
		free(keep_f);
		free(keep_name);
		free(keep_def);
		if (!rc)
			rc = measured_rows(st, lname, mapname, loc, mts, nmeas, ps, labels, lost, keep_pos, &grid, nvox,
					   dir, label, res, e);
		free(val);
		free(nv);
		free(nc);
		free(E);
	}
	free_splits(splits, nsplits);
	return rc;
}

/* What one localizer needs in a subject: its study view, parcels on the data grid, its tasks' roles. */
typedef struct loc_setup {
	study view;                /* study_use_localizer */
	parcels_set own_ps;         /* parcels made for this subject ({subject}), or not read here */
	const parcels_set *ps;
	char *own_image, *own_names;
	int32_t *labels_owned;
	const int32_t *labels;     /* on the data grid */
	unsigned char *lost;       /* per parcel: no voxel left after resampling */
	size_t task;               /* its task in the subject's task list */
	int off;                   /* its effects' place in that task's effect list */
	size_t *mtask;             /* per measure of the view: task index and effect offset */
	int *moff;
} loc_setup;

static void loc_setup_release(loc_setup *L)
{
	study_view_release(&L->view);
	parcels_release(&L->own_ps);
	free(L->own_image);
	free(L->own_names);
	free(L->labels_owned);
	free(L->lost);
	free(L->mtask);
	free(L->moff);
	memset(L, 0, sizeof *L);
}

/*
 * Appends n effects for task to the subject's task list (a task appears
 * once; *tasks and *eff have room for every role's task); returns its offset.
 */
static int task_role(task_fit **tasks, size_t *ntasks, expr ***eff, const char *task, const expr *e, int n,
		     size_t *which)
{
	size_t i;
	int off;

	for (i = 0; i < *ntasks; i++)
		if (strcmp((*tasks)[i].task, task) == 0)
			break;
	if (i == *ntasks) {
		(*tasks)[i].task = task;
		(*ntasks)++;
	}
	off = (*tasks)[i].ne;
	(*eff)[i] = xrealloc((*eff)[i], (size_t)(off + n + 1) * sizeof ***eff);
	memcpy((*eff)[i] + off, e, (size_t)n * sizeof *e);
	(*tasks)[i].ne = off + n;
	(*tasks)[i].effects = (*eff)[i];
	*which = i;
	return off;
}

/*
 * The subject's tasks, each once however many localizers and measures use
 * it: the first localizer's task, the measured tasks, the other localizers'
 * tasks; each task's effects are its roles' effects one after another (a
 * localizer's selection contrast, then its effects). locef holds each
 * localizer's [contrast, effects...] list; eff each task's (both freed by the caller).
 */
static void build_tasks(const study *st, loc_setup *L, expr **locef, task_fit **tasks, size_t *ntasks,
			expr ***eff)
{
	size_t i, j, k, *mt = xcalloc(st->nmeasures + 1, sizeof *mt);
	int *mo = xcalloc(st->nmeasures + 1, sizeof *mo);

	/* at most one task per role: the localizers' and the measures' */
	*tasks = xcalloc(st->nlocs + st->nmeasures, sizeof **tasks);
	*eff = xcalloc(st->nlocs + st->nmeasures, sizeof **eff);
	*ntasks = 0;
	for (i = 0; i < st->nlocs; i++) {
		const study_localizer *l = &st->locs[i];

		locef[i] = xcalloc(l->neffects + 1, sizeof **locef);
		locef[i][0] = l->contrast;
		for (j = 0; j < l->neffects; j++)
			locef[i][j + 1] = l->effects[j];
	}
	L[0].off = task_role(tasks, ntasks, eff, st->locs[0].task, locef[0], (int)st->locs[0].neffects + 1,
			     &L[0].task);
	for (j = 0; j < st->nmeasures; j++)
		mo[j] = task_role(tasks, ntasks, eff, st->measures[j].task, st->measures[j].effects,
				  (int)st->measures[j].neffects, &mt[j]);
	for (i = 1; i < st->nlocs; i++)
		L[i].off = task_role(tasks, ntasks, eff, st->locs[i].task, locef[i],
				     (int)st->locs[i].neffects + 1, &L[i].task);
	for (i = 0; i < st->nlocs; i++) {
		L[i].mtask = xcalloc(L[i].view.nmeasures + 1, sizeof *L[i].mtask);
		L[i].moff = xcalloc(L[i].view.nmeasures + 1, sizeof *L[i].moff);
		for (k = 0; k < L[i].view.nmeasures; k++)
			for (j = 0; j < st->nmeasures; j++)
				if (strcmp(st->measures[j].name, L[i].view.measures[k].name) == 0) {
					L[i].mtask[k] = mt[j];
					L[i].moff[k] = mo[j];
				}
	}
	free(mt);
	free(mo);
}

/* A task seen through one role: its effects off..off+n-1 as effects 0..n-1. */
static task_fit role_view(const task_fit *t, int off, int n)
{
	task_fit v = *t;

	v.coff = t->coff + off;
	v.effects = t->effects + off;
	v.ne = n;
	v.C = t->C + (size_t)off * (size_t)(t->ncond ? t->ncond : 1);
	v.missing = t->missing + off;
	return v;
}

/* The voxels whose series the fit keeps: every localizer's parcel voxels (keep_voxels over the union). */
static size_t *keep_all(const loc_setup *L, size_t nl, const nii_grid *g, size_t *nkeep, int32_t **pos)
{
	size_t nvox = nii_nvox(g), v, n = 0, i;
	size_t *keep;

	if (nl == 1)
		return keep_voxels(&L[0].view, L[0].ps, g, nkeep, pos);
	*pos = xmalloc_array(nvox ? nvox : 1, sizeof **pos);
	for (v = 0; v < nvox; v++)
		(*pos)[v] = -1;
	for (i = 0; i < nl; i++) {
		int32_t *p1;
		size_t k, nk, *kv = keep_voxels(&L[i].view, L[i].ps, g, &nk, &p1);

		for (k = 0; k < nk; k++)
			(*pos)[kv[k]] = 0;
		free(kv);
		free(p1);
	}
	keep = xmalloc_array(nvox ? nvox : 1, sizeof *keep);
	for (v = 0; v < nvox; v++)
		if ((*pos)[v] == 0 && n < INT32_MAX) {
			(*pos)[v] = (int32_t)n;
			keep[n++] = v;
		} else {
			(*pos)[v] = -1;
		}
	*nkeep = n;
	return keep;
}

/* The localizer's parcels on the data grid (resampled when the study says so), with the lost ones. */
static sr_status loc_labels(loc_setup *L, const nii_grid *grid, size_t nvox, const char *label,
			    const char *first_bold, sr_err *e)
{
	const study *st = &L->view;
	const parcels_set *ps = L->ps;
	const char *img = L->own_image ? L->own_image : st->parcels;
	char buf[1024];
	int p;

	if (nii_same_grid(grid, &ps->grid, 1e-3, buf, sizeof buf)) {
		L->labels = ps->labels;
		return SR_OK;
	}
	if (st->resample_parcels) {
		int64_t sn[3] = { ps->grid.nx, ps->grid.ny, ps->grid.nz };
		int64_t tn[3] = { grid->nx, grid->ny, grid->nz };

		L->labels_owned = xmalloc_array(nvox, sizeof *L->labels_owned);
		if (resample_nearest(ps->labels, sn, ps->grid.affine, L->labels_owned, tn, grid->affine))
			return sr_fail(e, SR_EDIM, "%s: the parcel grid's affine is singular", img);
		L->labels = L->labels_owned;
		L->lost = lost_parcels(ps, L->labels, nvox);
		for (p = 0; p < ps->n; p++)
			if (L->lost[p])
				sr_warnf(e, "subject %s: parcel %s (label %d) has no voxel on the data grid after nearest-neighbour resampling of %s; its rows are empty",
					 label, ps->name[p], (int)ps->index[p], img);
		return SR_OK;
	}
	if (subject_parcels_template_on_raw(st, &ps->grid, img))
		return sr_fail(e, SR_EDIM, "%s: the parcels are not on the data grid of %s (%s): " PARCELS_RAW_NOTE,
			       img, first_bold, buf);
	return sr_fail(e, SR_EDIM,
		       "%s: the parcels are not on the data grid of %s (%s); set 'resample = nearest' in [parcels] to resample them",
		       img, first_bold, buf);
}

/* Each localizer's view and parcels (ctx->parcels for the first unless per subject; else read here). */
static sr_status loc_setups(const subject_ctx *ctx, const char *label, loc_setup *L, sr_err *e)
{
	const study *st = ctx->st;
	size_t i;
	sr_status rc;

	for (i = 0; i < st->nlocs; i++) {
		study_use_localizer(st, i, &L[i].view);
		if (i == 0 && ctx->parcels) {
			L[i].ps = ctx->parcels;
			continue;
		}
		/* parcels made for each subject, e.g. without that subject's own data */
		L[i].own_image = study_subject_path(L[i].view.parcels, label);
		L[i].own_names = study_subject_path(L[i].view.parcel_names, label);
		if (!study_per_subject(L[i].view.parcels) && !study_per_subject(L[i].view.parcel_names)) {
			free(L[i].own_image);
			L[i].own_image = NULL;
		}
		rc = parcels_load(L[i].own_image ? L[i].own_image : L[i].view.parcels,
				     L[i].own_names, &L[i].own_ps, e);
		if (rc)
			return rc;
		L[i].ps = &L[i].own_ps;
	}
	return SR_OK;
}

/*
 * Fits every run of every task once, in parallel, keeping the parcels' series
 * for the time courses. Each run is slimmed as it ends to what later steps
 * read: the parcel voxels, the selection contrasts of the localizers L on the
 * whole grid (their t maps) and the first run's means (the reference image).
 */
static sr_status fit_all(const subject_ctx *ctx, const char *label, task_fit *tasks, size_t ntasks,
			 size_t nruns_all, const loc_setup *L, size_t nl, const unsigned char *mask,
			 const size_t *keep, size_t nkeep, sr_err *e)
{
	const study *st = ctx->st;
	runfit_spec *specs = xcalloc(nruns_all, sizeof *specs);
	runfit_result *results = xcalloc(nruns_all, sizeof *results);
	sr_err *errs = xcalloc(nruns_all, sizeof *errs);
	size_t i, at = 0;
	char buf[128];
	sr_status rc;

	unsigned char **grid_con = xcalloc(ntasks ? ntasks : 1, sizeof *grid_con);
	/* SPLITROI_SLIM=0 keeps every result on the whole grid: a test hook (same outputs) */
	const char *hook = getenv("SPLITROI_SLIM");
	int slim = !(hook && strcmp(hook, "0") == 0);

	for (i = 0; i < ntasks; i++) {
		task_specs(st, &tasks[i], mask, specs + at);
		grid_con[i] = xcalloc((size_t)(tasks[i].ne > 0 ? tasks[i].ne : 1), 1);
		for (size_t l = 0; l < nl; l++)
			if (L[l].task == i)
				grid_con[i][L[l].off] = 1;
		for (size_t r = 0; r < tasks[i].nruns; r++)
			specs[at + r].grid_con = grid_con[i];
		at += tasks[i].nruns;
	}
	for (i = 0; i < nruns_all; i++) {
		specs[i].keep = keep;
		specs[i].nkeep = nkeep;
		specs[i].slim = slim;
		specs[i].grid_mean = i == 0;
		sr_err_init(&errs[i], e->warn, e->warn_ctx);
	}
	snprintf(buf, sizeof buf, "fitting %zu runs", nruns_all);
	progress(ctx, label, buf);
	rc = runfit_many(specs, (int)nruns_all, ctx->nthreads, results, errs);
	if (rc) {
		for (i = 0; i < nruns_all; i++)
			if (errs[i].code) {
				sr_fail(e, errs[i].code, "%s", errs[i].msg);
				break;
			}
		for (i = 0; i < nruns_all; i++)
			runfit_result_release(&results[i]);
	} else {
		/* no later step of a subject reads the AR(1) coefficients: drop them (8 bytes a voxel a run) */
		for (i = 0; i < nruns_all; i++) {
			free(results[i].out.rho);
			results[i].out.rho = NULL;
		}
		for (i = 0, at = 0; i < ntasks; i++) {
			tasks[i].res = xcalloc(tasks[i].nruns, sizeof *tasks[i].res);
			memcpy(tasks[i].res, results + at, tasks[i].nruns * sizeof *results);
			at += tasks[i].nruns;
		}
	}
	free(results);
	free(specs);
	free(errs);
	for (i = 0; i < ntasks; i++)
		free(grid_con[i]);
	free(grid_con);
	return rc;
}

/* A warning when a confound column is a cosine drift basis next to the model's own. */
static void warn_drift(const study *st, const char *label, const task_fit *tasks, size_t ntasks, sr_err *e)
{
	size_t i, r;

	if (st->drift_cutoff <= 0)
		return;
	for (i = 0; i < ntasks; i++)
		for (r = 0; r < tasks[i].nruns; r++)
			for (int k = 0; k < tasks[i].res[r].d.nconf; k++) {
				const char *nm = tasks[i].res[r].conf_names[k];

				if (strncasecmp(nm, "cosine", 6) == 0 || strncasecmp(nm, "drift", 5) == 0) {
					sr_warnf(e, "subject %s: confound column '%s' of %s is a cosine drift basis, and the model adds its own (drift_cutoff = %g s): drop the column or set drift_cutoff = none",
						 label, nm, tasks[i].confpath[r], st->drift_cutoff);
					return;
				}
			}
}

/* Withdraws the subject's completion record and tables (before a redo, and after a failure). */
static void withdraw(const char *dir)
{
	static const char *const files[] = { "run.json", "responses.csv", "reliability.csv",
					      "timecourses.csv" };
	char path[4096];
	size_t i;

	for (i = 0; i < sizeof files / sizeof *files; i++) {
		snprintf(path, sizeof path, "%s/%s", dir, files[i]);
		remove(path);
	}
}

/* The tables and run.json (written last: its presence marks the subject complete). */
static sr_status write_outputs(const subject_ctx *ctx, const char *dir, const char *label,
			       const task_fit *tasks, size_t ntasks, const loc_setup *L,
			       const nii_grid *grid, size_t nvox, struct timespec started, double t0,
			       subject_result *res, sr_err *e)
{
	const study *st = ctx->st;
	char path[4096], buf[1024];
	jdoc *rec;
	size_t i;
	sr_status rc;

	progress(ctx, label, "writing tables");
	rc = write_run_files(dir, label, tasks, ntasks, st, grid, nvox, e);
	if (rc)
		return rc;
	snprintf(path, sizeof path, "%s/responses.csv", dir);
	rc = subject_write_rows(path, label, res->rows, res->nrows, e);
	if (rc)
		return rc;
	snprintf(path, sizeof path, "%s/reliability.csv", dir);
	rc = reliability_table_write(path, label, &res->rel, e);
	if (rc)
		return rc;
	snprintf(path, sizeof path, "%s/timecourses.csv", dir);
	rc = timecourse_table_write(path, label, &res->tc, e);
	if (rc)
		return rc;
	res->seconds = now_seconds() - t0;
	rec = jdoc_object();
	jdoc_set_str(rec, "subject", label);
	jdoc_set_str(rec, "splitroi_version", SPLITROI_VERSION);
	jdoc_library_versions(buf, sizeof buf);
	jdoc_set_str(rec, "libraries", buf);
	jdoc_set_str(rec, "study_file", st->path);
	jdoc_set_str(rec, "study_text", st->text);
	if (st->smoothing_fwhm > 0)
		jdoc_set_num(rec, "smoothing_fwhm_mm", st->smoothing_fwhm);
	else
		jdoc_set_str(rec, "smoothing_fwhm_mm", "none");
	/* the fit's noise model, spelled as the study key (the default applies when the key is absent) */
	jdoc_set_str(rec, "model", st->ar1 == 2 ? "ar1-adjusted" : st->ar1 == 1 ? "ar1" : "none");
	if (ctx->fingerprints)
		jdoc_set(rec, "fingerprints", jdoc_copy(ctx->fingerprints));
	{
		/* every run fitted, once: by task, however many localizers use it */
		jdoc *in = jdoc_object();

		for (i = 0; i < ntasks; i++)
			jdoc_set(in, tasks[i].task, inputs_record(&tasks[i]));
		jdoc_set(rec, "inputs", in);
	}
	jdoc_set_str(rec, "parcels", L[0].own_image ? L[0].own_image : st->parcels);
	if (st->nlocs > 1) {
		jdoc *lp = jdoc_object();

		for (i = 0; i < st->nlocs; i++)
			jdoc_set_str(lp, study_loc_label(st, i), L[i].own_image ? L[i].own_image : st->locs[i].parcels);
		jdoc_set(rec, "localizer_parcels", lp);
	}
	jdoc_set_int(rec, "rows", (long long)res->nrows);
	jdoc_set_num(rec, "seconds", res->seconds);
	snprintf(path, sizeof path, "%s/run.json", dir);
	rc = jdoc_write(rec, path, e);
	jdoc_free(rec);
	if (!rc) {
		/* the skip rule compares this time with the inputs': an input changed while
		   this subject ran (after it was read) must count as newer than the results */
		struct timespec when[2] = { started, started };

		utimensat(AT_FDCWD, path, when, 0);
	}
	return rc;
}

/* Voxels each rule left out, per run fitted, and the parcels they emptied (leftout.h). */
static void record_leftout(const char *label, const task_fit *tasks, size_t ntasks, size_t nruns_all,
			   const loc_setup *L, size_t nl, size_t nvox, const int32_t *keep_pos,
			   subject_result *res, sr_err *e)
{
	const glm_out **outs = xcalloc(nruns_all ? nruns_all : 1, sizeof *outs);
	size_t n = 0, r, i;

	res->leftout = xcalloc(nruns_all ? nruns_all : 1, sizeof *res->leftout);
	for (i = 0; i < ntasks; i++)
		for (r = 0; r < tasks[i].nruns; r++) {
			const runfit_result *rr = &tasks[i].res[r];

			leftout_from_fit(&res->leftout[n], tasks[i].task, tasks[i].runs[r].label, &rr->out,
					 rr->slim ? rr->grid_nvox : rr->out.nvox);
			outs[n++] = &tasks[i].res[r].out;
		}
	res->nleftout = n;
	for (i = 0; i < nl; i++)
		leftout_warn_parcels(label, L[i].labels, nvox, L[i].ps->n, L[i].ps->index, L[i].ps->name,
				     outs, n, tasks[0].res[0].slim ? keep_pos : NULL, e);
	free(outs);
}

sr_status subject_analyze(const subject_ctx *ctx, const char *label, subject_result *res,
			  sr_err *e)
{
	const study *st = ctx->st;
	size_t nl = st->nlocs, ntasks = 0, i, k, nvox = 0, nruns_all = 0, nkeep = 0;
	loc_setup *L = xcalloc(nl, sizeof *L);
	expr **locef = xcalloc(nl, sizeof *locef), **eff = NULL;
	task_fit *tasks = NULL;
	unsigned char *mask_owned = NULL;
	nii_grid mask_grid_own, grid;
	char *mask_path_own = NULL;
	char dir[2048], buf[1024];
	double t0 = now_seconds();
	struct timespec started;
	sr_status rc = SR_OK;
	size_t *keep = NULL;
	int32_t *keep_pos = NULL;

	memset(res, 0, sizeof *res);
	clock_gettime(CLOCK_REALTIME, &started);
	if (strlen(st->out) + strlen(label) + 8 > sizeof dir) {
		rc = sr_fail(e, SR_EINVAL, "%s: the output folder name is too long", st->out);
		goto out;
	}
	if (ctx->dir)
		snprintf(dir, sizeof dir, "%s", ctx->dir);
	else
		snprintf(dir, sizeof dir, "%s/sub-%s", st->out, label);
	/* a redo starts by withdrawing the old completion record and table, so that an
	   interrupted or failed redo never leaves results that look current */
	withdraw(dir);
	rc = loc_setups(ctx, label, L, e);
	if (rc)
		goto out;
	build_tasks(st, L, locef, &tasks, &ntasks, &eff);
	progress(ctx, label, "finding runs");
	for (i = 0; i < ntasks; i++) {
		rc = task_prepare(st, label, &tasks[i], e);
		if (rc)
			goto out;
		nruns_all += tasks[i].nruns;
	}
	if (!ctx->mask && study_mask_per_subject(st)) {
		rc = own_mask(st, label, tasks, ntasks, &mask_owned, &mask_grid_own, &mask_path_own, e);
		if (rc)
			goto out;
	}
	rc = check_grids(tasks, ntasks, mask_owned ? mask_path_own : st->mask,
			 mask_owned ? &mask_grid_own : ctx->mask_grid, e);
	if (rc)
		goto out;
	/* the parcels too, before any run is fitted (headers only) */
	for (i = 0; i < nl; i++)
		if (!L[i].view.resample_parcels &&
		    !nii_same_grid(&tasks[0].grid[0], &L[i].ps->grid, 1e-3, buf, sizeof buf)) {
			rc = sr_fail(e, SR_EDIM,
				     "%s: the parcels are not on the data grid of %s (%s); set 'resample = nearest' in [parcels] to resample them",
				     L[i].own_image ? L[i].own_image : L[i].view.parcels, tasks[0].runs[0].bold, buf);
			goto out;
		}
	keep = keep_all(L, nl, &tasks[0].grid[0], &nkeep, &keep_pos);
	rc = fit_all(ctx, label, tasks, ntasks, nruns_all, L, nl, mask_owned ? mask_owned : ctx->mask, keep, nkeep,
		     e);
	if (rc)
		goto out;
	/* one grid for all of the subject's runs */
	grid = tasks[0].res[0].info.grid;
	nvox = nii_nvox(&grid);
	for (i = 0; i < ntasks; i++)
		warn_estimability(&tasks[i], e);
	warn_drift(st, label, tasks, ntasks, e);
	for (i = 0; i < nl; i++) {
		rc = loc_labels(&L[i], &grid, nvox, label, tasks[0].runs[0].bold, e);
		if (rc)
			goto out;
	}
	record_leftout(label, tasks, ntasks, nruns_all, L, nl, nvox, keep_pos, res, e);
	/* the per-voxel rules were last read by record_leftout */
	for (i = 0; i < ntasks; i++)
		for (size_t r = 0; r < tasks[i].nruns; r++) {
			free(tasks[i].res[r].out.rule);
			tasks[i].res[r].out.rule = NULL;
		}
	progress(ctx, label, "defining fROIs");
	for (i = 0; !rc && i < nl; i++) {
		const study_localizer *sl = &st->locs[i];
		task_fit loc = role_view(&tasks[L[i].task], L[i].off, (int)sl->neffects + 1);
		task_fit *meas = xcalloc(L[i].view.nmeasures + 1, sizeof *meas);
		int nlr = 0;

		for (k = 0; k < L[i].view.nmeasures; k++)
			meas[k] = role_view(&tasks[L[i].mtask[k]], L[i].moff[k], (int)L[i].view.measures[k].neffects);
		rc = loc_pass(&L[i].view, sl->label, nl > 1 ? sl->label : NULL, &loc, meas, L[i].view.nmeasures,
			      L[i].ps, L[i].labels, L[i].lost, keep_pos, &grid, nvox, dir, label, &nlr, res, e);
		if (i == 0)
			res->nloc_runs = nlr;
		free(meas);
	}
	if (!rc)
		rc = write_outputs(ctx, dir, label, tasks, ntasks, L, &grid, nvox, started, t0, res, e);
out:
	for (i = 0; i < ntasks; i++) {
		task_release(&tasks[i]);
		free(eff[i]);
	}
	free(tasks);
	free(eff);
	for (i = 0; i < nl; i++) {
		free(locef[i]);
		loc_setup_release(&L[i]);
	}
	free(locef);
	free(L);
	free(keep);
	free(keep_pos);
	free(mask_owned);
	free(mask_path_own);
	if (rc)
		withdraw(dir);   /* the table may already be written when the completion record fails */
	return rc;
}

sr_status subject_localizer_t(const study *st, const char *label, const unsigned char *mask,
			      const nii_grid *mask_grid, int nthreads, nii_grid *grid, double **t, int **df, int *nruns,
			      sr_err *e)
{
	task_fit loc;
	runfit_spec *specs = NULL;
	runfit_result *results = NULL;
	sr_err *errs = NULL;
	int *pos = NULL;
	size_t i, nvox;
	sr_status rc;
	unsigned char *mask_owned = NULL;
	nii_grid mask_grid_own;
	char *mask_path_own = NULL;

	*t = NULL;
	*df = NULL;
	*nruns = 0;
	memset(&loc, 0, sizeof loc);
	loc.task = st->loc_task;
	loc.effects = &st->contrast;
	loc.ne = 1;
	rc = task_prepare(st, label, &loc, e);
	if (rc)
		goto out;
	if (!mask && study_mask_per_subject(st)) {
		rc = own_mask(st, label, &loc, 1, &mask_owned, &mask_grid_own, &mask_path_own, e);
		if (rc)
			goto out;
		mask = mask_owned;
		mask_grid = &mask_grid_own;
	}
	rc = check_grids(&loc, 1, mask_owned ? mask_path_own : st->mask, mask_grid, e);
	if (rc)
		goto out;
	specs = xcalloc(loc.nruns, sizeof *specs);
	results = xcalloc(loc.nruns, sizeof *results);
	errs = xcalloc(loc.nruns, sizeof *errs);
	task_specs(st, &loc, mask, specs);
	for (i = 0; i < loc.nruns; i++)
		sr_err_init(&errs[i], e->warn, e->warn_ctx);
	rc = runfit_many(specs, (int)loc.nruns, nthreads, results, errs);
	loc.res = results;   /* released with loc, fitted or not */
	results = NULL;
	if (rc) {
		for (i = 0; i < loc.nruns; i++)
			if (errs[i].code) {
				sr_fail(e, errs[i].code, "%s", errs[i].msg);
				break;
			}
		goto out;
	}
	*grid = loc.res[0].info.grid;
	nvox = nii_nvox(grid);
	warn_estimability(&loc, e);
	pos = xmalloc_array(loc.nruns, sizeof *pos);
	for (i = 0; i < loc.nruns; i++)
		pos[i] = (int)i;
	*t = xmalloc_array(nvox, sizeof **t);
	*df = xmalloc_array(nvox, sizeof **df);
	{
		const double **ef = xmalloc_array(loc.nruns, sizeof *ef);
		const double **va = xmalloc_array(loc.nruns, sizeof *va);
		int *rdf = xmalloc_array(loc.nruns, sizeof *rdf);
		double *E = xmalloc_array(nvox, sizeof *E);

		for (i = 0; i < loc.nruns; i++) {
			ef[i] = loc.res[i].out.effect;
			va[i] = loc.res[i].out.var;
			rdf[i] = loc.res[i].out.df;
		}
		glm_ffx(nvox, (int)loc.nruns, ef, va, rdf, E, NULL, *t, *df);
		free(ef);
		free(va);
		free(rdf);
		free(E);
	}
	if (loc.missing[0])
		for (i = 0; i < nvox; i++) {
			(*t)[i] = NAN;
			(*df)[i] = 0;
		}
	*nruns = (int)loc.nruns;
out:
	free(pos);
	free(specs);
	free(results);
	free(errs);
	task_release(&loc);
	free(mask_owned);
	free(mask_path_own);
	return rc;
}
