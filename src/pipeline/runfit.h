/* runfit.h - fitting BOLD runs from their files: events, confounds, design, one streamed pass.
 *
 * Glue between io (nii, events, table) and core (design, glm); it prints
 * nothing: warnings go through the sr_err callback.
 */
#ifndef SR_RUNFIT_H
#define SR_RUNFIT_H

#include "../core/design.h"
#include "../core/err.h"
#include "../core/glm.h"
#include "../io/nii.h"
#include "../io/rowfile.h"
#include "../io/table.h"

#include <stddef.h>
#include <stdint.h>

typedef struct runfit_spec {
	const char *bold;              /* _bold.nii[.gz] */
	const char *events;            /* _events.tsv */
	const char *condition_column;  /* NULL = trial_type */
	const char *const *conditions; /* the task's conditions for this subject, sorted (byte order) */
	int ncond;
	const char *confounds;         /* confounds TSV, or NULL when nconf = 0 and censor_fd = 0 */
	const char *const *confound_names; /* column names or shell-style patterns (runfit_confound_columns) */
	int nconf;
	int skip;                      /* initial volumes dropped before everything (events shift by skip x TR) */
	double censor_fd;              /* > 0: one impulse regressor per kept volume whose FD exceeds it */
	const char *fd_column;         /* the confounds column holding framewise displacement */
	double tr;                     /* seconds, already resolved (bids_run_tr) */
	double volume_time;              /* METHODS.md section 2 */
	double drift_cutoff;           /* seconds; 0 = no drift basis */
	int ar1;                       /* GLM_AR1 (1) = AR(1) Prais-Winsten, GLM_OLS (0), GLM_AR1_ADJUSTED (2) */
	const double *C;               /* ncon x ncond, row-major: contrast weights over conditions */
	int ncon;
	const unsigned char *mask;     /* nvox, optional brain mask on the data grid */
	double smoothing_fwhm;         /* mm; 0 = no smoothing (METHODS.md section 2b) */
	const size_t *keep;            /* nkeep voxels whose series are kept (res->series), or NULL */
	size_t nkeep;
	int slim;                      /* with keep: res->out holds only the keep voxels (runfit_slim) */
	const unsigned char *grid_con; /* slim: ncon flags, or NULL: contrasts also kept on the whole grid */
	int grid_mean;                 /* slim: the whole-grid means are kept too */
} runfit_spec;

typedef struct runfit_result {
	nii_info info;                 /* header of the BOLD run */
	design d;                      /* the design used (for CSV export and the report) */
	glm_out out;                   /* per-voxel effects, variances, analyzable flags */
	char **conf_names;             /* d.nconf names of the confound columns used (censor_<k> for impulses) */
	int nskip;                     /* volumes dropped at the start */
	int ncensored;                 /* impulse regressors (volumes over censor_fd) */
	int *censored;                 /* their volume indices in the stored run (0-based) */
	int nearly_events;             /* events wholly before the first kept volume, dropped */
	size_t nnonfinite;             /* voxels (in the mask) with a NaN or infinite value, left out */
	double *series;                /* T x nkeep (volume k at k * nkeep): the kept voxels' values as fitted
					  (after skipping and smoothing, before scaling), or NULL; read them
					  through runfit_series_row */
	float *series32;               /* the same as float32 instead of series when that is exact
					  (nii_float32_exact: no smoothing); one of the two is NULL */
	rowfile *series_file;          /* instead of both (NULL then): the rows in a temporary file */
	int series_f32;                /* the kept values are float32-exact (series32 or the file's rows) */
	size_t nkeep;
	design_event *ev;              /* the events the design used (onsets shifted by skip_volumes) */
	size_t nev;
	/* slim (spec->slim): out's per-voxel arrays hold only the kept voxels, in
	   spec->keep's order (out.nvox = nkeep), and these the whole grid */
	int slim;
	size_t grid_nvox;
	double **grid_effect, **grid_var; /* out.ncon entries, NULL where spec->grid_con is 0 */
	double *grid_mean;             /* NULL unless spec->grid_mean */
} runfit_result;

/*
 * The columns of t named by names (n entries): a plain name is that column
 * (absent: an error naming path, header line and the name); a shell-style
 * pattern (holding *, ? or [) is every matching column in file order (none:
 * a warning). A column named twice is used once. *cols (xmalloc'ed) gets the
 * column indices, *ncols their count.
 */
sr_status runfit_confound_columns(const table *t, const char *path, const char *const *names,
				  int n, int **cols, int *ncols, sr_err *e);

/*
 * Fits one run: reads events (warning for events past the end of the run),
 * confounds, builds the design, streams the volumes through the fit. Events
 * of conditions not in spec->conditions are an error. A condition with no
 * event in this run gives a warning and NaN for every contrast that needs it.
 */

/*
 * Fits n runs with up to nthreads threads; res[i], errs[i] belong to run i.
 * Runs are fitted side by side while together they hold at most
 * RUNFIT_SIDE_VOXELS voxels (each needs ~2 rank doubles of sums a voxel
 * while it is fitted), and the threads left over work inside each run (its
 * volumes' sums and its finish): a standard-grid subject is fitted one run
 * at a time on every thread, small runs several at once. Returns SR_OK when
 * all succeeded, else the first failure's status (each errs[i] says what
 * happened to run i). Results do not depend on nthreads.
 */
#define RUNFIT_SIDE_VOXELS ((size_t)1 << 20)

sr_status runfit_many(const runfit_spec *specs, int n, int nthreads, runfit_result *res,
		      sr_err *errs);

void runfit_result_release(runfit_result *r);

/*
 * Volume k of the kept series, the nkeep values as fitted, into out as
 * doubles, whichever way they are stored; scratch holds nkeep doubles.
 * SR_EIO when the temporary file cannot be read back.
 */
sr_status runfit_series_row(const runfit_result *r, size_t k, double *out, void *scratch, sr_err *e);

/*
 * Where voxel v of the grid sits in r->out: pos[v] (the place in the keep
 * list, -1 for a voxel not kept) when r is slim, else v itself. -1: not held.
 */
static inline ptrdiff_t runfit_at(const runfit_result *r, size_t v, const int32_t *pos)
{
	return r->slim ? (ptrdiff_t)pos[v] : (ptrdiff_t)v;
}

/* Whether r holds kept series (any storage). */
static inline int runfit_has_series(const runfit_result *r)
{
	return r->series != NULL || r->series32 != NULL || r->series_file != NULL;
}

#endif
