/* runfit.c - one BOLD run from files to fitted maps: events, confounds, design, streamed fit.
 *
 * The volumes are inflated by a reader thread into a small ring of buffers
 * while the fit consumes them, so a compressed run costs about
 * max(inflate, compute) rather than their sum, and only a few volumes are
 * ever held.
 */
#include "runfit.h"

#include <fnmatch.h>
#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"
#include "../core/pool.h"
#include "../core/smooth.h"
#include "../core/strv.h"
#include "../io/events.h"
#include "../io/rowfile.h"
#include "../io/table.h"

/* volumes the reader may hold ahead of the fit: enough that it does not wait
   while a batch of the sums is added (the bench run is no faster with 8), few
   because each is a whole volume of memory */
#define QUEUE_SLOTS 3

typedef struct vol_queue {
	nii_stream *s;
	smooth_plan *sm;       /* NULL = no smoothing; used by the fitting thread only */
	const unsigned char *mask;
	int T;
	size_t nvox;
	int f32;               /* the slots hold float32 (nii_stream_next_f32, glm_acc_add_f32) */
	void *slot[QUEUE_SLOTS];
	const size_t *keep;    /* voxels copied into series as volumes are fitted */
	size_t nkeep;
	double *series;
	float *series32;       /* instead of series when float32 is exact */
	rowfile *spill;        /* instead of both: each volume's kept values appended here */
	int spill32;           /* the spilled rows are float32 */
	void *row;             /* nkeep values, for the spill */
	const char *bold;      /* the run, for the spill's messages */
	int head, count, stop, failed;
	sr_err err;
	pthread_mutex_t mu;
	pthread_cond_t cv;
} vol_queue;

static void *reader_main(void *arg)
{
	vol_queue *q = arg;
	int k, tail = 0;

	for (k = 0; k < q->T; k++) {
		sr_status st;

		pthread_mutex_lock(&q->mu);
		while (q->count == QUEUE_SLOTS && !q->stop)
			pthread_cond_wait(&q->cv, &q->mu);
		if (q->stop) {
			pthread_mutex_unlock(&q->mu);
			break;
		}
		pthread_mutex_unlock(&q->mu);
		/* the slot at tail is free: only this thread writes it until count grows */
		if (q->f32)
			st = nii_stream_next_f32(q->s, q->slot[tail], &q->err);
		else
			st = nii_stream_next(q->s, q->slot[tail], &q->err);
		pthread_mutex_lock(&q->mu);
		if (st != SR_OK)
			q->failed = 1;
		else
			q->count++;
		pthread_cond_broadcast(&q->cv);
		pthread_mutex_unlock(&q->mu);
		if (st != SR_OK)
			break;
		tail = (tail + 1) % QUEUE_SLOTS;
	}
	return NULL;
}

/* Voxel v of a slot's volume. */
static inline double slot_value(const vol_queue *q, const void *slot, size_t v)
{
	return q->f32 ? (double)((const float *)slot)[v] : ((const double *)slot)[v];
}

/* Volume k's kept voxels (q->keep), from the slot that holds it, into the series or the spill. */
static sr_status keep_row(vol_queue *q, int k, const void *slot, sr_err *e)
{
	size_t i;
	sr_status st;

	if (q->spill) {
		if (q->spill32)
			for (i = 0; i < q->nkeep; i++)
				((float *)q->row)[i] = (float)slot_value(q, slot, q->keep[i]);
		else
			for (i = 0; i < q->nkeep; i++)
				((double *)q->row)[i] = slot_value(q, slot, q->keep[i]);
		st = rowfile_append(q->spill, q->row, e);
		if (st != SR_OK) {
			char msg[sizeof e->msg];

			memcpy(msg, e->msg, sizeof msg);
			sr_fail(e, st, "%s: %s", q->bold, msg);
		}
		return st;
	}
	if (q->series32)
		for (i = 0; i < q->nkeep; i++)
			q->series32[(size_t)k * q->nkeep + i] = (float)slot_value(q, slot, q->keep[i]);
	else
		for (i = 0; i < q->nkeep; i++)
			q->series[(size_t)k * q->nkeep + i] = slot_value(q, slot, q->keep[i]);
	return SR_OK;
}

/* Streams every volume of q->s through acc, reading ahead in a second thread. */
static sr_status stream_fit(vol_queue *q, glm_acc *acc, sr_err *e)
{
	pthread_t th;
	sr_status st = SR_OK;
	int k, i;

	for (i = 0; i < QUEUE_SLOTS; i++)
		q->slot[i] = xmalloc_array(q->nvox ? q->nvox : 1, q->f32 ? sizeof(float) : sizeof(double));
	pthread_mutex_init(&q->mu, NULL);
	pthread_cond_init(&q->cv, NULL);
	q->err.warn = e->warn;
	q->err.warn_ctx = e->warn_ctx;
	if (pthread_create(&th, NULL, reader_main, q) != 0) {
		st = sr_fail(e, SR_ENOMEM, "cannot start the reader thread");
		goto out;
	}
	for (k = 0; k < q->T; k++) {
		pthread_mutex_lock(&q->mu);
		while (q->count == 0 && !q->failed)
			pthread_cond_wait(&q->cv, &q->mu);
		if (q->count == 0) {
			pthread_mutex_unlock(&q->mu);
			*e = q->err;
			st = e->code ? e->code : SR_EIO;
			break;
		}
		pthread_mutex_unlock(&q->mu);
		/* smoothed here, while the reader inflates the next volumes: the fit and the
		   kept series see only the smoothed volumes */
		if (q->sm)
			smooth_support(q->sm, q->slot[q->head], q->mask);
		st = keep_row(q, k, q->slot[q->head], e);
		if (st == SR_OK)
			st = q->f32 ? glm_acc_add_f32(acc, q->slot[q->head], e) : glm_acc_add(acc, q->slot[q->head], e);
		pthread_mutex_lock(&q->mu);
		q->head = (q->head + 1) % QUEUE_SLOTS;
		q->count--;
		if (st != SR_OK)
			q->stop = 1;
		pthread_cond_broadcast(&q->cv);
		pthread_mutex_unlock(&q->mu);
		if (st != SR_OK)
			break;
	}
	pthread_join(th, NULL);
out:
	pthread_mutex_destroy(&q->mu);
	pthread_cond_destroy(&q->cv);
	for (i = 0; i < QUEUE_SLOTS; i++)
		free(q->slot[i]);
	return st;
}

/* Events of the run as design events; checks conditions and warns about late events and empty conditions. */
static sr_status load_events(const runfit_spec *spec, int T, design_event **out, size_t *nout,
			     int *nearly, sr_err *e)
{
	event_list el = { 0 };
	design_event *ev;
	size_t i, *count;
	sr_status st;
	double end = T * spec->tr, shift = spec->skip * spec->tr;
	int c;
	size_t k = 0, before = 0;

	*out = NULL;
	*nout = 0;
	*nearly = 0;
	st = events_read(spec->events, spec->condition_column, &el, e);
	if (st != SR_OK)
		return st;
	ev = xcalloc(el.n ? el.n : 1, sizeof *ev);
	count = xcalloc((size_t)spec->ncond + 1, sizeof *count);
	for (i = 0; i < el.n; i++) {
		const event *x = &el.ev[i];

		for (c = 0; c < spec->ncond; c++)
			if (strcmp(spec->conditions[c], x->condition) == 0)
				break;
		if (c == spec->ncond) {
			st = sr_fail(e, SR_ESTUDY, "%s: line %zu: condition '%s' is not one of the task's conditions",
				     spec->events, x->line, x->condition);
			goto out;
		}
		if (x->onset - shift >= end)
			sr_warnf(e, "%s: line %zu: event at %g s starts after the end of the run (%d volumes of %g s = %g s)",
				 spec->events, x->line, x->onset, T + spec->skip, spec->tr, end + shift);
		/* wholly before the first kept volume: nothing of it reaches the design */
		if (x->onset - shift < 0 && x->onset - shift + x->duration <= 0) {
			before++;
			continue;
		}
		ev[k].onset = x->onset - shift;
		ev[k].duration = x->duration;
		ev[k].cond = c;
		k++;
		count[c]++;
	}
	if (before)
		sr_warnf(e, "%s: %zu event%s wholly before %s (dropped)", spec->events, before,
			 before == 1 ? " lies" : "s lie", spec->skip ? "the first kept volume" : "0 s");
	*nearly = (int)before;
	for (c = 0; c < spec->ncond; c++)
		if (count[c] == 0)
			sr_warnf(e, "%s: condition '%s' has no event in this run: effects that need it are not estimable here",
				 spec->events, spec->conditions[c]);
	*out = ev;
	*nout = k;
	ev = NULL;
out:
	free(ev);
	free(count);
	events_release(&el);
	return st;
}

sr_status runfit_confound_columns(const table *t, const char *path, const char *const *names,
				  int n, int **cols, int *ncols, sr_err *e)
{
	int *out = xmalloc_array(t->ncols ? t->ncols + (size_t)n : (size_t)n + 1, sizeof *out);
	int k = 0;
	unsigned char *used = xcalloc(t->ncols ? t->ncols : 1, 1);

	*cols = NULL;
	*ncols = 0;
	for (int i = 0; i < n; i++) {
		const char *nm = names[i];

		if (strpbrk(nm, "*?[")) {
			int hit = 0;

			for (size_t c = 0; c < t->ncols; c++)
				if (fnmatch(nm, t->header[c], 0) == 0) {
					hit = 1;
					if (!used[c]) {
						used[c] = 1;
						out[k++] = (int)c;
					}
				}
			if (!hit)
				sr_warnf(e, "%s: no column matches '%s' ([model] confounds)", path, nm);
		} else {
			int c = table_col(t, nm);

			if (c < 0) {
				free(out);
				free(used);
				return sr_fail(e, SR_EFORMAT, "%s: line %zu: no column '%s' (named in [model] confounds)",
					       path, t->header_line, nm);
			}
			if (!used[c]) {
				used[c] = 1;
				out[k++] = c;
			}
		}
	}
	free(used);
	*cols = out;
	*ncols = k;
	return SR_OK;
}

/*
 * Confound columns (patterns expanded) of the kept volumes, then one impulse
 * per kept volume whose framewise displacement is over spec->censor_fd;
 * Tk x ncol column-major, n/a filled and demeaned. Names into res.
 */
static sr_status load_confounds(const runfit_spec *spec, int T, double **out, int *nout,
				runfit_result *res, sr_err *e)
{
	table t;
	double *conf = NULL;
	sr_status st;
	int c, *cols = NULL, ncols = 0, ncen = 0, Tk = T - spec->skip;
	size_t row;

	*out = NULL;
	*nout = 0;
	if (spec->nconf == 0 && !(spec->censor_fd > 0))
		return SR_OK;
	if (!spec->confounds)
		return sr_fail(e, SR_EINVAL, "%s: confound columns named but no confounds file", spec->bold);
	st = table_read(spec->confounds, 0, &t, e);
	if (st != SR_OK)
		return st;
	if (t.nrows != (size_t)T) {
		st = sr_fail(e, SR_EDIM, "%s: %zu rows, but the run %s has %d volumes", spec->confounds,
			     t.nrows, spec->bold, T);
		table_release(&t);
		return st;
	}
	st = runfit_confound_columns(&t, spec->confounds, spec->confound_names, spec->nconf, &cols,
				     &ncols, e);
	if (st != SR_OK)
		goto fail;
	if (spec->censor_fd > 0) {
		const char *fdn = spec->fd_column ? spec->fd_column : "framewise_displacement";
		int fc = table_col(&t, fdn);

		if (fc < 0) {
			st = sr_fail(e, SR_EFORMAT, "%s: line %zu: no column '%s' for censor_fd", spec->confounds,
				     t.header_line, fdn);
			goto fail;
		}
		res->censored = xmalloc_array((size_t)(Tk > 0 ? Tk : 1), sizeof *res->censored);
		for (row = (size_t)spec->skip; row < (size_t)T; row++) {
			double x;
			int na;

			st = table_number(&t, row, (size_t)fc, &x, &na, 1, e);
			if (st != SR_OK)
				goto fail;
			if (!na && x > spec->censor_fd)
				res->censored[ncen++] = (int)row;
		}
		res->ncensored = ncen;
	}
	conf = xmalloc_array((size_t)Tk * (size_t)(ncols + ncen ? ncols + ncen : 1), sizeof(double));
	res->conf_names = xcalloc((size_t)(ncols + ncen) + 1, sizeof *res->conf_names);
	for (c = 0; c < ncols; c++) {
		res->conf_names[c] = xstrdup(t.header[cols[c]]);
		for (row = 0; row < (size_t)Tk; row++) {
			int na;

			st = table_number(&t, row + (size_t)spec->skip, (size_t)cols[c],
					  &conf[(size_t)c * (size_t)Tk + row], &na, 1, e);
			if (st != SR_OK)
				goto fail;
		}
	}
	for (c = 0; c < ncen; c++) {
		char nm[32];
		double *col = conf + (size_t)(ncols + c) * (size_t)Tk;

		snprintf(nm, sizeof nm, "censor_%d", res->censored[c] + 1);
		res->conf_names[ncols + c] = xstrdup(nm);
		for (row = 0; row < (size_t)Tk; row++)
			col[row] = 0.0;
		col[res->censored[c] - spec->skip] = 1.0;
	}
	st = design_confounds(Tk, ncols + ncen, conf, e);
	if (st != SR_OK) {
		char msg[sizeof e->msg];

		memcpy(msg, e->msg, sizeof msg);
		sr_fail(e, st, "%s: %s", spec->confounds, msg);
		goto fail;
	}
	table_release(&t);
	free(cols);
	*out = conf;
	*nout = ncols + ncen;
	return SR_OK;
fail:
	free(conf);
	free(cols);
	table_release(&t);
	return st;
}

/*
 * Whether the kept series can be held as float32 without changing a value:
 * the values as read are float32-exact (nii_float32_exact) and smoothing does
 * not turn them into doubles. SPLITROI_SERIES_STORE=double (or =float) forces
 * one storage, a test hook for comparing the two.
 */
/* Whether every value the fit sees is a float32: read as one, and not smoothed into doubles. */
static int values_float32(const nii_info *info, double smoothing_fwhm)
{
	return !(smoothing_fwhm > 0) && nii_float32_exact(info);
}

static int series_as_float32(const nii_info *info, double smoothing_fwhm)
{
	const char *force = getenv("SPLITROI_SERIES_STORE");

	if (force && strcmp(force, "double") == 0)
		return 0;
	if (force && strcmp(force, "float") == 0)
		return 1;
	return values_float32(info, smoothing_fwhm);
}

/*
 * Whether the kept series go to a temporary file (rowfile.h) rather than
 * memory: they are most of a subject's memory (a standard-grid run keeps
 * ~50 MB for the parcels) and are read only by the time courses, after
 * every run is fitted. SPLITROI_SERIES_SPILL=0 keeps them in memory, a test
 * hook for comparing the two.
 */
static int spill_series(void)
{
	const char *v = getenv("SPLITROI_SERIES_SPILL");

	return !(v && strcmp(v, "0") == 0);
}

/*
 * Voxels dim in a run's first volume are fitted only if they turn out to
 * need it (glm_acc_defer_dim). SPLITROI_DEFER=0 fits every voxel: a test
 * hook for comparing the two (same outputs).
 */
static int defer_wanted(void)
{
	const char *v = getenv("SPLITROI_DEFER");

	return !(v && strcmp(v, "0") == 0);
}

sr_status runfit_series_row(const runfit_result *r, size_t k, double *out, void *scratch, sr_err *e)
{
	size_t j, n = r->nkeep;

	if (r->series_file) {
		sr_status st = rowfile_read(r->series_file, k, scratch, e);

		if (st != SR_OK)
			return st;
		if (r->series_f32)
			for (j = 0; j < n; j++)
				out[j] = (double)((const float *)scratch)[j];
		else
			memcpy(out, scratch, n * sizeof(double));
	} else if (r->series32) {
		for (j = 0; j < n; j++)
			out[j] = (double)r->series32[k * n + j];
	} else {
		memcpy(out, r->series + k * n, n * sizeof(double));
	}
	return SR_OK;
}

/* A copy of the nk entries of a (n per block, nb blocks) at keep, block by block. */
static void *gather(const void *a, size_t size, size_t n, int nb, const size_t *keep, size_t nk)
{
	unsigned char *out;
	const unsigned char *in = a;
	int b;

	if (!a)
		return NULL;
	out = xmalloc_array((size_t)(nb > 0 ? nb : 1) * (nk ? nk : 1), size);
	for (b = 0; b < nb; b++)
		for (size_t i = 0; i < nk; i++)
			memcpy(out + ((size_t)b * nk + i) * size, in + ((size_t)b * n + keep[i]) * size, size);
	return out;
}

/* 1 when spec keeps a contrast on the whole grid (spec->grid_con). */
static int grid_con_any(const runfit_spec *spec)
{
	int c;

	for (c = 0; spec->grid_con && c < spec->ncon; c++)
		if (spec->grid_con[c])
			return 1;
	return 0;
}

/*
 * Slims res->out to the kept voxels: a subject keeps every run's results
 * until its fROIs are measured, and only the parcel voxels are read after
 * the fit, besides the contrasts and means spec names for the whole grid.
 */
static void slim(const runfit_spec *spec, runfit_result *res)
{
	glm_out *o = &res->out;
	size_t n = o->nvox, nk = spec->nkeep;
	void *p;
	int c;

	res->grid_nvox = n;
	res->grid_effect = xcalloc((size_t)(o->ncon > 0 ? o->ncon : 1), sizeof *res->grid_effect);
	res->grid_var = xcalloc((size_t)(o->ncon > 0 ? o->ncon : 1), sizeof *res->grid_var);
	for (c = 0; spec->grid_con && c < o->ncon; c++)
		if (spec->grid_con[c]) {
			res->grid_effect[c] = xmalloc_array(n ? n : 1, sizeof(double));
			res->grid_var[c] = xmalloc_array(n ? n : 1, sizeof(double));
			memcpy(res->grid_effect[c], o->effect + (size_t)c * n, n * sizeof(double));
			memcpy(res->grid_var[c], o->var + (size_t)c * n, n * sizeof(double));
		}
	if (spec->grid_mean) {
		res->grid_mean = o->mean;
		o->mean = NULL;
	}
	p = gather(o->effect, sizeof(double), n, o->ncon, spec->keep, nk);
	free(o->effect);
	o->effect = p;
	p = gather(o->var, sizeof(double), n, o->ncon, spec->keep, nk);
	free(o->var);
	o->var = p;
	p = gather(o->rho, sizeof(double), n, 1, spec->keep, nk);
	free(o->rho);
	o->rho = p;
	p = gather(res->grid_mean ? res->grid_mean : o->mean, sizeof(double), n, 1, spec->keep, nk);
	free(o->mean);
	o->mean = p;
	p = gather(o->ok, 1, n, 1, spec->keep, nk);
	free(o->ok);
	o->ok = p;
	p = gather(o->rule, 1, n, 1, spec->keep, nk);
	free(o->rule);
	o->rule = p;
	o->nvox = nk;
	res->slim = 1;
}

/*
 * Where the kept voxels' series go while the run streams: a temporary file
 * (spill_series), else memory, as float32 when that is exact.
 */
static sr_status keep_setup(const runfit_spec *spec, int T, size_t nvox, runfit_result *res, vol_queue *q,
			    sr_err *e)
{
	int f32 = series_as_float32(&res->info, spec->smoothing_fwhm);
	size_t i, width = f32 ? sizeof(float) : sizeof(double);

	for (i = 0; i < spec->nkeep; i++)
		if (spec->keep[i] >= nvox)
			return sr_fail(e, SR_EINVAL, "%s: a kept voxel lies outside the run's grid", spec->bold);
	res->series_f32 = f32;
	if (spill_series())
		res->series_file = rowfile_new(spec->nkeep * width);
	if (res->series_file) {
		q->spill = res->series_file;
		q->bold = spec->bold;
		q->spill32 = f32;
		q->row = xmalloc_array(spec->nkeep, width);
	} else if (f32) {
		res->series32 = xmalloc_array((size_t)T * spec->nkeep, sizeof *res->series32);
	} else {
		res->series = xmalloc_array((size_t)T * spec->nkeep, sizeof *res->series);
	}
	res->nkeep = spec->nkeep;
	q->keep = spec->keep;
	q->nkeep = spec->nkeep;
	q->series = res->series;
	q->series32 = res->series32;
	return SR_OK;
}

/*
 * One fit of the run; defer: glm_acc_defer_dim, or with spec->grid_mean
 * glm_acc_defer_zero (every voxel's mean is kept, so only voxels whose mean
 * is +0 either way may wait); either may end in SR_EREDO.
 */
static sr_status fit_once(const runfit_spec *spec, int nthreads, int defer, runfit_result *res, sr_err *e)
{
	vol_queue q;
	design_event *ev = NULL;
	size_t nev = 0, nvox;
	double *conf = NULL, *Cp = NULL;
	glm_model *m = NULL;
	glm_acc *acc = NULL;
	nii_stream *s = NULL;
	sr_status st;
	int T, c, j, nconf = 0;

	memset(res, 0, sizeof *res);
	memset(&q, 0, sizeof q);
	if (!(spec->tr > 0.0))
		return sr_fail(e, SR_EINVAL, "%s: repetition time %g s is not positive", spec->bold, spec->tr);
	st = nii_stream_open(spec->bold, &s, &res->info, e);
	if (st != SR_OK)
		return st;
	if (res->info.nt < 2 || res->info.nt > 1000000) {
		st = sr_fail(e, SR_EDIM, "%s: %lld volumes: a run needs a 4-D image", spec->bold,
			     (long long)res->info.nt);
		goto out;
	}
	nvox = nii_nvox(&res->info.grid);
	if (spec->skip < 0 || (int64_t)spec->skip > res->info.nt - 2) {
		st = sr_fail(e, SR_EDIM, "%s: skip_volumes = %d leaves fewer than 2 of its %lld volumes",
			     spec->bold, spec->skip, (long long)res->info.nt);
		goto out;
	}
	/* the first skip volumes are read past and nothing of them is used */
	if (spec->skip) {
		double *junk = xmalloc_array(nvox ? nvox : 1, sizeof *junk);

		for (j = 0; j < spec->skip && st == SR_OK; j++)
			st = nii_stream_next(s, junk, e);
		free(junk);
		if (st != SR_OK)
			goto out;
	}
	res->nskip = spec->skip;
	T = (int)res->info.nt - spec->skip;
	st = load_events(spec, T, &ev, &nev, &res->nearly_events, e);
	if (st != SR_OK)
		goto out;
	st = load_confounds(spec, (int)res->info.nt, &conf, &nconf, res, e);
	if (st != SR_OK)
		goto out;
	st = design_build(T, spec->tr, spec->volume_time, ev, nev, spec->ncond, conf, nconf,
			  spec->drift_cutoff, &res->d, e);
	if (st != SR_OK) {
		/* the core knows no file names: say which run's design failed */
		char msg[sizeof e->msg];

		memcpy(msg, e->msg, sizeof msg);
		sr_fail(e, st, "%s: %s", spec->bold, msg);
		goto out;
	}
	st = glm_model_make(res->d.X, T, res->d.p, &m, e);
	if (st != SR_OK) {
		char msg[sizeof e->msg];

		memcpy(msg, e->msg, sizeof msg);
		sr_fail(e, st, "%s: %s", spec->bold, msg);
		goto out;
	}
	/* contrast weights over conditions, zero on confounds, drifts and the constant */
	Cp = xcalloc((size_t)(spec->ncon ? spec->ncon : 1) * res->d.p, sizeof(double));
	for (c = 0; c < spec->ncon; c++)
		for (j = 0; j < spec->ncond; j++)
			Cp[(size_t)c * res->d.p + j] = spec->C[(size_t)c * spec->ncond + j];
	if (spec->smoothing_fwhm > 0) {
		const nii_grid *g = &res->info.grid;
		double sig[3];

		if (!(g->dx > 0 && g->dy > 0 && g->dz > 0 && isfinite(g->dx) && isfinite(g->dy) &&
		      isfinite(g->dz))) {
			st = sr_fail(e, SR_EFORMAT, "%s: smoothing needs positive voxel sizes, the header has "
				     "%g x %g x %g mm", spec->bold, g->dx, g->dy, g->dz);
			goto out;
		}
		sig[0] = smooth_fwhm_sigma(spec->smoothing_fwhm, g->dx);
		sig[1] = smooth_fwhm_sigma(spec->smoothing_fwhm, g->dy);
		sig[2] = smooth_fwhm_sigma(spec->smoothing_fwhm, g->dz);
		st = smooth_plan_alloc(g->nx, g->ny, g->nz, sig, &q.sm, e);
		if (st != SR_OK) {
			char msg[sizeof e->msg];

			memcpy(msg, e->msg, sizeof msg);
			sr_fail(e, st, "%s: %s", spec->bold, msg);
			goto out;
		}
		q.mask = spec->mask;
	}
	acc = glm_acc_alloc(m, nvox);
	glm_acc_threads(acc, nthreads);
	/* values read from float32 or small integers, unsmoothed, are float32 exactly:
	   read, held and summed as such (the same numbers in half the memory) */
	q.f32 = values_float32(&res->info, spec->smoothing_fwhm);
	if (q.f32)
		glm_acc_float32(acc);
	/* a slim run with nothing kept on the whole grid is read only at the kept voxels */
	if (spec->slim && spec->keep && spec->nkeep && !spec->grid_mean && !grid_con_any(spec))
		glm_acc_fit_only(acc, spec->keep, spec->nkeep);
	if (defer && spec->grid_mean)
		glm_acc_defer_zero(acc);
	else if (defer)
		glm_acc_defer_dim(acc);
	q.s = s;
	q.T = T;
	q.nvox = nvox;
	if (spec->keep && spec->nkeep) {
		st = keep_setup(spec, T, nvox, res, &q, e);
		if (st != SR_OK)
			goto out;
	}
	st = stream_fit(&q, acc, e);
	if (st != SR_OK)
		goto out;
	st = glm_acc_finish(acc, spec->ar1, Cp, spec->ncon, spec->mask, nthreads, &res->out, e);
	if (st == SR_OK) {
		size_t v, bad = 0;

		/* a voxel with a NaN or infinite value in any volume is not analyzable: say how many */
		for (v = 0; v < nvox; v++)
			bad += (!spec->mask || spec->mask[v]) && !isfinite(res->out.mean[v]);
		res->nnonfinite = bad;
		if (bad)
			sr_warnf(e, "%s: %zu voxel%s hold NaN or infinite values and are left out", spec->bold,
				 bad, bad == 1 ? "" : "s");
		if (spec->slim && spec->keep)
			slim(spec, res);
	}
out:
	free(q.row);
	nii_stream_close(s);
	smooth_plan_free(q.sm);
	glm_acc_free(acc);
	glm_model_free(m);
	if (st == SR_OK) {
		res->ev = ev;   /* the time courses build their own columns from the same events */
		res->nev = nev;
	} else {
		free(ev);
	}
	free(conf);
	free(Cp);
	if (st != SR_OK)
		runfit_result_release(res);
	return st;
}

/* Warnings held back while a fit may yet be redone, so that they are said once. */
typedef struct held_warnings {
	pthread_mutex_t lock;
	strv msgs;
} held_warnings;

static void hold_warning(void *ctx, const char *msg)
{
	held_warnings *h = ctx;

	pthread_mutex_lock(&h->lock);
	strv_push(&h->msgs, msg);
	pthread_mutex_unlock(&h->lock);
}

/*
 * The run's fit, with the voxels dim in the first volume deferred (only
 * those at +0 where every voxel's mean is kept): when the finish finds that
 * one of them may matter after all (SR_EREDO, rare), the run is read and
 * fitted again without deferral. Either way the results are the same. The per-voxel
 * finish is split over nthreads (same results for any count).
 */
static sr_status runfit_run_threads(const runfit_spec *spec, int nthreads, runfit_result *res, sr_err *e)
{
	held_warnings h;
	sr_err first;
	sr_status st;
	size_t i;

	if (!defer_wanted())
		return fit_once(spec, nthreads, 0, res, e);
	memset(&h, 0, sizeof h);
	pthread_mutex_init(&h.lock, NULL);
	sr_err_init(&first, hold_warning, &h);
	st = fit_once(spec, nthreads, 1, res, &first);
	if (st == SR_EREDO) {
		st = fit_once(spec, nthreads, 0, res, e);
	} else {
		for (i = 0; i < h.msgs.n; i++)
			sr_warnf(e, "%s", h.msgs.v[i]);
		if (st != SR_OK) {
			e->code = first.code;
			memcpy(e->msg, first.msg, sizeof e->msg);
		}
	}
	strv_free(&h.msgs);
	pthread_mutex_destroy(&h.lock);
	return st;
}

typedef struct many_ctx {
	const runfit_spec *specs;
	runfit_result *res;
	sr_err *errs;
	sr_status *st;
	int finish_threads;
} many_ctx;

/* Pool job i: run i, with its share of the threads for the per-voxel finish. */
static void many_one(size_t i, int worker, void *arg)
{
	many_ctx *c = arg;

	c->st[i] = runfit_run_threads(&c->specs[i], c->finish_threads, &c->res[i], &c->errs[i]);
}

/*
 * How many of the runs to fit at once: up to nthreads, while together they
 * hold at most RUNFIT_SIDE_VOXELS voxels (by the largest run's header; a
 * header that cannot be read counts as small, its fit will say why).
 */
static int side_by_side(const runfit_spec *specs, int n, int nthreads)
{
	size_t most = 1, k;
	int i;

	for (i = 0; i < n; i++) {
		nii_info info;
		sr_err e;

		sr_err_init(&e, NULL, NULL);
		if (nii_read_info(specs[i].bold, &info, &e) == SR_OK && nii_nvox(&info.grid) > most)
			most = nii_nvox(&info.grid);
	}
	k = RUNFIT_SIDE_VOXELS / most;
	if (k < 1)
		k = 1;
	return (size_t)(nthreads < 1 ? 1 : nthreads) < k ? (nthreads < 1 ? 1 : nthreads) : (int)k;
}

sr_status runfit_many(const runfit_spec *specs, int n, int nthreads, runfit_result *res,
		      sr_err *errs)
{
	many_ctx c;
	int i, side;
	sr_status st = SR_OK;

	if (n <= 0)
		return SR_OK;
	memset(&c, 0, sizeof c);
	c.specs = specs;
	c.res = res;
	c.errs = errs;
	side = side_by_side(specs, n, nthreads);
	/* spare threads go inside the runs; results do not depend on them */
	c.finish_threads = (nthreads < 1 ? 1 : nthreads) / pool_workers((size_t)n, side);
	c.st = xcalloc((size_t)n, sizeof *c.st);
	pool_run((size_t)n, side, many_one, &c);
	for (i = 0; i < n; i++)
		if (c.st[i] != SR_OK && st == SR_OK)
			st = c.st[i];
	free(c.st);
	return st;
}

void runfit_result_release(runfit_result *r)
{
	if (!r)
		return;
	design_release(&r->d);
	/* before glm_out_release: it clears out.ncon */
	if (r->grid_effect)
		for (int c = 0; c < r->out.ncon; c++) {
			free(r->grid_effect[c]);
			free(r->grid_var[c]);
		}
	free(r->grid_effect);
	free(r->grid_var);
	free(r->grid_mean);
	r->grid_effect = r->grid_var = NULL;
	r->grid_mean = NULL;
	r->slim = 0;
	r->grid_nvox = 0;
	glm_out_release(&r->out);
	memset(&r->d, 0, sizeof r->d);
	if (r->conf_names)
		for (char **p = r->conf_names; *p; p++)
			free(*p);
	free(r->conf_names);
	free(r->censored);
	free(r->series);
	free(r->series32);
	rowfile_free(r->series_file);
	r->series_file = NULL;
	free(r->ev);
	r->conf_names = NULL;
	r->censored = NULL;
	r->series = NULL;
	r->series32 = NULL;
	r->ev = NULL;
	r->nkeep = r->nev = 0;
}
