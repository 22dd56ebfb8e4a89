/* fit.c - `splitroi fit`: first-level GLM maps for BOLD runs given on the command line. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../core/expr.h"
#include "../core/mem.h"
#include "../core/strv.h"
#include "../core/pool.h"
#include "../io/bids.h"
#include "../io/bidsname.h"
#include "../io/afile.h"
#include "../io/designcsv.h"
#include "../io/events.h"
#include "../io/jdoc.h"
#include "../io/nii.h"
#include <nifti1.h>
#include "../io/study.h"
#include "../version.h"
#include "cmd.h"
#include "cmdline.h"
#include "../pipeline/runfit.h"

enum { O_OUT, O_EVENTS, O_CONDCOL, O_EFFECT, O_TR, O_CONF, O_CONFCOLS, O_MODEL, O_DRIFT, O_SLICE,
       O_SMOOTH, O_MASK, O_THREADS, O_QUIET, O_STUDY, O_SUBJECT, O_TASK,
       O_OLD_MODEL, O_OLD_VOLUME_TIME, O_N }; /* the renamed rows have slots too: cmdline_parse clears every row */

static const cmdline_opt opts[O_N + 1] = {
	[O_OUT] = { "out", "DIR", "write the maps, design tables and fit.json into DIR (required)" },
	[O_EVENTS] = { "events", "LIST", "events files, comma separated, one per run (default: _events.tsv beside each run)" },
	[O_CONDCOL] = { "condition-column", "NAME", "events column holding the condition (default trial_type)" },
	[O_EFFECT] = { "effect", "LIST", "extra effects, comma separated, e.g. \"melody - scrambled\" (each condition is always fitted)" },
	[O_TR] = { "tr", "S", "repetition time in seconds (default: the _bold.json sidecar, else the header)" },
	[O_CONF] = { "confounds", "LIST", "confounds TSV files, comma separated, one per run" },
	[O_CONFCOLS] = { "confound-columns", "NAMES", "confound columns to use, space or comma separated" },
	[O_MODEL] = { "autocorrelation", "M", "ar1-adjusted (default: AR(1) with bias-adjusted rho), ar1, or none (OLS), as in the study file" },
	[O_DRIFT] = { "drift-cutoff", "S", "cosine drift cutoff in seconds (default 128), or none" },
	[O_SLICE] = { "volume-time", "F", "fraction of the TR at which a volume counts as acquired (default 0.5)" },
	[O_SMOOTH] = { "smoothing-fwhm", "MM", "smooth each volume with a Gaussian of MM mm FWHM inside the data (default none)" },
	[O_MASK] = { "mask", "FILE", "optional 3-D brain mask on the data grid (non-zero = inside)" },
	[O_THREADS] = { "threads", "N", "threads (default: the CPU count); results do not depend on N" },
	[O_QUIET] = { "quiet", NULL, "no summary line (warnings still shown)" },
	[O_STUDY] = { "study", "STUDY.ini", "take runs, events, TR, confounds, model and effects from a study file" },
	[O_SUBJECT] = { "subject", "LABEL", "with --study: the subject (label without sub-)" },
	[O_TASK] = { "task", "TASK", "with --study: the task (default: the localizer task)" },
	[O_OLD_MODEL] = { "model", CMDLINE_RENAMED, "autocorrelation" },
	[O_OLD_VOLUME_TIME] = { "slice-reference", CMDLINE_RENAMED, "volume-time" },
	[O_N] = { NULL, NULL, NULL },
};

static const cmdline_spec spec = {
	"fit", "RUN_bold.nii[.gz]... --out DIR [options]\n"
	"       splitroi fit --study STUDY.ini --subject LABEL [--task TASK] --out DIR [options]",
	"Fits a first-level GLM to each BOLD run: one column per condition (events\n"
	"convolved with a two-gamma response), the named confounds, cosine drifts and\n"
	"a baseline; each voxel's series is scaled to percent of its mean, then fitted\n"
	"by AR(1) Prais-Winsten (rho adjusted for the bias the fit puts in the residuals\n"
	"unless --autocorrelation ar1; none for OLS) in one streamed pass over the volumes.\n"
	"Writes, per run and, with several runs, combined over them (fixed effects), an effect\n"
	"map (percent signal change) and a t map for every condition and effect:\n"
	"  DIR/<run entities>_desc-<effect>_effect.nii.gz and _tstat.nii.gz (with\n"
	"  JSON sidecars; <effect> in letters and digits: melody - scrambled gives\n"
	"  melodyMinusScrambled), the combination over runs under the entities the\n"
	"  runs share (no run-),\n"
	"each run's design matrix as DIR/<run>_design.csv, and DIR/fit.json recording\n"
	"inputs, options, rank and df. <run> is the file name without _bold.nii[.gz].\n"
	"With --study the subject's runs of the task are found in the study's BIDS\n"
	"dataset, with the study's model keys and effects (options given on the\n"
	"command line override the model keys).",
	opts,
};

static void warn_print(void *ctx, const char *msg)
{
	fprintf(stderr, "splitroi fit: warning: %s\n", msg);
}

/* Splits s at commas (and spaces when spaces = 1); empty items are dropped. */
static char **split_list(const char *s, int spaces, int *n)
{
	char **v = NULL, *copy = xstrdup(s), *p = copy, *tok;
	int k = 0;

	while ((tok = strsep(&p, spaces ? ", \t" : ",")) != NULL) {
		while (!spaces && (*tok == ' ' || *tok == '\t'))
			tok++;
		if (!*tok)
			continue;
		v = xrealloc(v, (size_t)(k + 1) * sizeof *v);
		v[k++] = xstrdup(tok);
	}
	free(copy);
	*n = k;
	return v;
}

static void free_list(char **v, int n)
{
	int i;

	for (i = 0; i < n; i++)
		free(v[i]);
	free(v);
}

/* The run's name without the _bold.nii[.gz] (or .nii[.gz]) ending and folders. */
static char *run_base(const char *bold)
{
	const char *slash = strrchr(bold, '/');
	char *b = xstrdup(slash ? slash + 1 : bold);
	const char *ends[] = { "_bold.nii.gz", "_bold.nii", ".nii.gz", ".nii" };
	size_t i, n = strlen(b);

	for (i = 0; i < sizeof ends / sizeof ends[0]; i++) {
		size_t m = strlen(ends[i]);

		if (n > m && strcmp(b + n - m, ends[i]) == 0) {
			b[n - m] = '\0';
			break;
		}
	}
	return b;
}

/* path with its _bold.nii[.gz] ending replaced by suffix (NULL when it has no such ending). */
static char *beside(const char *bold, const char *suffix)
{
	const char *ends[] = { "_bold.nii.gz", "_bold.nii" };
	size_t i, n = strlen(bold);

	for (i = 0; i < 2; i++) {
		size_t m = strlen(ends[i]);

		if (n > m && strcmp(bold + n - m, ends[i]) == 0) {
			char *r = xmalloc(n - m + strlen(suffix) + 1);

			memcpy(r, bold, n - m);
			strcpy(r + n - m, suffix);
			return r;
		}
	}
	return NULL;
}

/* An effect's name usable in a file name. */
/*
 * The map's path: the run's entities (kv, n; bids 0 when its name is not a
 * BIDS name, then base is used as it is) with desc-<effect> and the suffix
 * (effect or tstat).
 */
static char *map_path(const char *dir, const bidsname_kv *kv, size_t n, int bids, const char *base,
		      const char *effval, const char *kind)
{
	bidsname_kv all[40];
	char name[4096];
	char *path;
	size_t i, m = 0;

	for (i = 0; bids && i < n && m < 39; i++)
		if (strcmp(kv[i].key, "desc") != 0)
			all[m++] = kv[i];
	snprintf(all[m].key, sizeof all[m].key, "desc");
	snprintf(all[m].value, sizeof all[m].value, "%s", effval);
	m++;
	if (!bids || bidsname_build(all, m, kind, ".nii.gz", name, sizeof name))
		snprintf(name, sizeof name, "%s_desc-%s_%s.nii.gz", base, effval, kind);
	path = xmalloc(strlen(dir) + strlen(name) + 2);
	sprintf(path, "%s/%s", dir, name);
	return path;
}

/* The pairs every run shares (the run entity left out): the combined maps' entities. */
static size_t common_entities(bidsname_kv (*kv)[40], const size_t *n, int nrun, bidsname_kv *out)
{
	size_t i, j, m = 0;
	int r;

	for (i = 0; i < n[0]; i++) {
		int all = strcmp(kv[0][i].key, "run") != 0;

		for (r = 1; all && r < nrun; r++) {
			for (j = 0; j < n[r]; j++)
				if (strcmp(kv[r][j].key, kv[0][i].key) == 0 && strcmp(kv[r][j].value, kv[0][i].value) == 0)
					break;
			all = j < n[r];
		}
		if (all)
			out[m++] = kv[0][i];
	}
	return m;
}

/* Distinct conditions over all runs' events, sorted by bytes (METHODS.md section 2). */
static int gather_conditions(char **events, int nrun, const char *column, char ***out, int *nout)
{
	char **c = NULL;
	int n = 0, r, i;
	size_t j;

	for (r = 0; r < nrun; r++) {
		event_list el;
		sr_err e;

		sr_err_init(&e, NULL, NULL);
		if (events_read(events[r], column, &el, &e) != SR_OK) {
			cmdline_error("fit", "%s", e.msg);
			free_list(c, n);
			return 1;
		}
		for (j = 0; j < el.n; j++) {
			for (i = 0; i < n; i++)
				if (strcmp(c[i], el.ev[j].condition) == 0)
					break;
			if (i == n) {
				c = xrealloc(c, (size_t)(n + 1) * sizeof *c);
				c[n++] = xstrdup(el.ev[j].condition);
			}
		}
		events_release(&el);
	}
	if (n > 1)
		qsort(c, (size_t)n, sizeof *c, strv_cmp);
	*out = c;
	*nout = n;
	return 0;
}

/* One map to write: run r (or -1 for the fixed-effects combination), effect c, effect or t. */
typedef struct map_job {
	int run, c, is_t;
	char *path;
	sr_err err;
	int failed;
} map_job;

/* One worker's scratch: nvox doubles twice and nvox floats. */
typedef struct map_ws {
	double *x, *tmp;
	float *f;
} map_ws;

typedef struct map_ctx {
	map_job *jobs;
	int njobs, nrun;
	const runfit_result *res;
	size_t nvox;
	char *const *labels;   /* the effects' names */
	map_ws *ws;            /* one per pool worker */
} map_ctx;

/* The map of one job into x (nvox doubles); tmp is scratch for the combination. */
static void map_values(const map_ctx *m, const map_job *j, double *x, double *tmp)
{
	size_t v, nvox = m->nvox;
	int r;

	if (j->run >= 0) {
		const glm_out *o = &m->res[j->run].out;
		const double *ef = o->effect + (size_t)j->c * nvox, *vr = o->var + (size_t)j->c * nvox;

		for (v = 0; v < nvox; v++)
			x[v] = j->is_t ? ef[v] / sqrt(vr[v]) : ef[v];
		return;
	}
	{
		const double **ef = xcalloc((size_t)m->nrun, sizeof *ef), **vr = xcalloc((size_t)m->nrun, sizeof *vr);
		int *df = xcalloc((size_t)m->nrun, sizeof *df);

		for (r = 0; r < m->nrun; r++) {
			ef[r] = m->res[r].out.effect + (size_t)j->c * nvox;
			vr[r] = m->res[r].out.var + (size_t)j->c * nvox;
			df[r] = m->res[r].out.df;
		}
		/* METHODS.md section 5 */
		glm_ffx(nvox, m->nrun, ef, vr, df, j->is_t ? tmp : x, NULL, j->is_t ? x : NULL, NULL);
		free(ef);
		free(vr);
		free(df);
	}
}

/* The df of job j's t map: its run's, or the sum over the runs where the effect is estimable. */
static double job_df(const map_ctx *m, const map_job *j)
{
	double df = 0;
	int r;

	if (j->run >= 0)
		return m->res[j->run].out.df;
	for (r = 0; r < m->nrun; r++)
		if (m->res[r].out.estimable[j->c])
			df += m->res[r].out.df;
	return df;
}

/* One map (t: NIFTI_INTENT_TTEST with its df) and its JSON sidecar; 1 on failure (j->err). */
static int write_one(const map_ctx *m, map_job *j, const float *f, char *desc, size_t n)
{
	double df = job_df(m, j);
	size_t len = strlen(j->path);
	char *side;
	jdoc *d;
	int bad;

	if (j->is_t)
		snprintf(desc, n, "splitroi t, df %g", df);
	else
		snprintf(desc, n, "splitroi effect (percent signal change)");
	if (nii_write_stat(j->path, &m->res[0].info.grid, f, 1, 0.0,
			   j->is_t ? NIFTI_INTENT_TTEST : NIFTI_INTENT_NONE, j->is_t ? df : 0.0, desc,
			   &j->err) != SR_OK)
		return 1;
	side = xmalloc(len + 8);
	snprintf(side, len + 8, "%.*s.json", (int)(len > 7 ? len - 7 : len), j->path);   /* .nii.gz -> .json */
	d = jdoc_object();
	jdoc_set_str(d, "Description", j->is_t ? "t map of the effect" : "effect map");
	jdoc_set_str(d, "Effect", m->labels[j->c]);
	jdoc_set_str(d, "Runs", j->run >= 0 ? "one run" : "fixed-effects combination of the runs");
	if (j->is_t) {
		jdoc_set_str(d, "Statistic", "t");
		jdoc_set_num(d, "DegreesOfFreedom", df);
	} else {
		jdoc_set_str(d, "Units", "percent signal change");
	}
	bad = jdoc_write(d, side, &j->err) != SR_OK;
	jdoc_free(d);
	free(side);
	return bad;
}

/* Pool job i: map jobs[i]; maps are independent, so the order does not matter. */
static void map_one(size_t i, int worker, void *arg)
{
	map_ctx *m = arg;
	map_job *j = &m->jobs[i];
	map_ws *ws = &m->ws[worker];
	size_t v;
	char desc[80];

	map_values(m, j, ws->x, ws->tmp);
	for (v = 0; v < m->nvox; v++)
		ws->f[v] = isfinite(ws->x[v]) ? (float)ws->x[v] : NAN;
	sr_err_init(&j->err, NULL, NULL);
	j->failed = write_one(m, j, ws->f, desc, sizeof desc);
}

/* Writes every map with up to nthreads threads; returns 0, or 1 after printing the failures. */
static int write_maps(map_job *jobs, int njobs, const runfit_result *res, int nrun, size_t nvox,
		      char *const *labels, int nthreads, jdoc *files)
{
	map_ctx m;
	size_t n = nvox ? nvox : 1;
	int i, nw = pool_workers(njobs > 0 ? (size_t)njobs : 0, nthreads), rc = 0;

	memset(&m, 0, sizeof m);
	m.jobs = jobs;
	m.njobs = njobs;
	m.nrun = nrun;
	m.res = res;
	m.nvox = nvox;
	m.labels = labels;
	m.ws = xcalloc(nw > 0 ? (size_t)nw : 1, sizeof *m.ws);
	for (i = 0; i < nw; i++) {
		m.ws[i].x = xmalloc_array(n, sizeof(double));
		m.ws[i].tmp = xmalloc_array(n, sizeof(double));
		m.ws[i].f = xmalloc_array(n, sizeof(float));
	}
	pool_run(njobs > 0 ? (size_t)njobs : 0, nthreads, map_one, &m);
	for (i = 0; i < nw; i++) {
		free(m.ws[i].x);
		free(m.ws[i].tmp);
		free(m.ws[i].f);
	}
	free(m.ws);
	for (i = 0; i < njobs; i++) {
		if (jobs[i].failed) {
			cmdline_error("fit", "%s", jobs[i].err.msg);
			rc = 1;
		} else {
			jdoc_push_str(files, jobs[i].path);
		}
	}
	return rc;
}

/* The design matrix with named columns (io/designcsv: full precision, refittable exactly). */
static int write_design(const char *dir, const char *base, const design *d, char **conds,
			char *const *cnames, jdoc *files)
{
	char *path = xmalloc(strlen(dir) + strlen(base) + 32);
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	sprintf(path, "%s/%s_design.csv", dir, base);
	if (designcsv_write(path, d, (const char *const *)conds, (const char *const *)cnames, &e) != SR_OK) {
		cmdline_error("fit", "%s", e.msg);
		free(path);
		return 1;
	}
	jdoc_push_str(files, path);
	free(path);
	return 0;
}

/* The run's TR: --tr, else the sidecar beside it / the header (bids_run_tr rules). */
static int resolve_tr(const char *bold, const char *opt, double *tr)
{
	nii_info info;
	bids_run run;
	sr_err e;
	char *dir, *slash, *json;
	int rc = 0;

	if (opt)
		return cmdline_double("fit", "--tr", opt, 1e-3, 1e4, tr) ? 2 : 0;
	sr_err_init(&e, NULL, NULL);
	if (nii_read_info(bold, &info, &e) != SR_OK) {
		cmdline_error("fit", "%s", e.msg);
		return 1;
	}
	memset(&run, 0, sizeof run);
	run.bold = (char *)bold;
	json = beside(bold, "_bold.json");
	run.sidecar = json && access(json, R_OK) == 0 ? json : NULL;
	run.run_index = -1;
	dir = xstrdup(bold);
	slash = strrchr(dir, '/');
	if (slash)
		*slash = '\0';
	else
		strcpy(dir, ".");
	if (bids_run_tr(dir, &run, info.tr, tr, &e) != SR_OK) {
		cmdline_error("fit", "%s (give --tr)", e.msg);
		rc = 1;
	}
	free(dir);
	free(json);
	return rc;
}

/* What --study supplies: runs and their files, TR, model keys and effects. Owned arrays. */
typedef struct study_inputs {
	char **bold, **events, **confs, **ccols;
	int nrun, nccol;
	double *tr;
	int ar1;
	double drift, sref, fwhm;
	int skip;          /* skip_volumes */
	double censor;     /* censor_fd, 0 = off */
	char *condcol, *mask;
	expr *fx;
	size_t nfx;
} study_inputs;

static int load_study_inputs(const char *path, const char *subject, const char *task_opt,
			     study_inputs *in)
{
	study st;
	study_problems pr = { 0 };
	bids_run *runs = NULL;
	size_t n = 0, i, k;
	const char *task;
	const expr *fx = NULL;
	size_t nfx = 0;
	sr_err e;
	int rc = 1;

	memset(in, 0, sizeof *in);
	if (study_load(path, &st, &pr) != SR_OK) {
		for (i = 0; i < pr.n; i++)
			fprintf(stderr, "splitroi fit: %s\n", pr.msg[i]);
		study_problems_release(&pr);
		return 1;
	}
	study_problems_release(&pr);
	task = task_opt ? task_opt : st.loc_task;
	if (strcmp(task, st.loc_task) == 0) {
		fx = st.loc_effects;
		nfx = st.nloc_effects;
	} else {
		for (i = 0; i < st.nmeasures; i++)
			if (strcmp(st.measures[i].task, task) == 0) {
				fx = st.measures[i].effects;
				nfx = st.measures[i].neffects;
			}
		/* a later localizer's task (several localizers): its effects */
		for (i = 1; !fx && i < st.nlocs; i++)
			if (strcmp(st.locs[i].task, task) == 0) {
				fx = st.locs[i].effects;
				nfx = st.locs[i].neffects;
			}
	}
	if (strncmp(subject, "sub-", 4) == 0)
		subject += 4;
	sr_err_init(&e, NULL, NULL);
	if (study_runs(&st, subject, task, &runs, &n, &e) != SR_OK) {
		cmdline_error("fit", "%s", e.msg);
		goto out;
	}
	if (n == 0) {
		cmdline_error("fit", "%s: no runs of task '%s' for subject '%s' under %s", path, task, subject, st.bids);
		goto out;
	}
	in->nrun = (int)n;
	in->bold = xcalloc(n, sizeof *in->bold);
	in->events = xcalloc(n, sizeof *in->events);
	in->tr = xcalloc(n, sizeof *in->tr);
	if (st.nconfounds || st.censor_fd > 0)
		in->confs = xcalloc(n, sizeof *in->confs);
	in->skip = st.skip_volumes;
	in->censor = st.censor_fd;
	for (i = 0; i < n; i++) {
		nii_info info;

		in->bold[i] = xstrdup(runs[i].bold);
		in->events[i] = xstrdup(runs[i].events);
		if (!runs[i].events_exist) {
			cmdline_error("fit", "%s: no events file beside the run (%s)", runs[i].bold, runs[i].events);
			goto out;
		}
		if (nii_read_info(runs[i].bold, &info, &e) != SR_OK ||
		    bids_run_tr(st.bids, &runs[i], info.tr, &in->tr[i], &e) != SR_OK) {
			cmdline_error("fit", "%s", e.msg);
			goto out;
		}
		if (in->confs)
			in->confs[i] = bids_confounds_path(&runs[i], st.confounds_suffix);
	}
	in->nccol = (int)st.nconfounds;
	in->ccols = xcalloc(st.nconfounds ? st.nconfounds : 1, sizeof *in->ccols);
	for (i = 0; i < st.nconfounds; i++)
		in->ccols[i] = xstrdup(st.confounds[i]);
	in->ar1 = st.ar1;
	in->drift = st.drift_cutoff;
	in->sref = st.volume_time;
	in->fwhm = st.smoothing_fwhm;
	in->condcol = xstrdup(st.condition_column ? st.condition_column : "trial_type");
	in->mask = st.mask ? study_subject_path(st.mask, subject) : NULL;
	/* conditions are always fitted: keep the effects that are combinations */
	in->fx = xcalloc(nfx ? nfx : 1, sizeof *in->fx);
	for (i = 0; i < nfx; i++) {
		char msg[256];

		if (fx[i].nterms == 1 && fx[i].terms[0].weight == 1.0)
			continue;
		for (k = 0; k < in->nfx; k++)
			if (strcmp(in->fx[k].text, fx[i].text) == 0)
				break;
		if (k == in->nfx && expr_parse(fx[i].text, &in->fx[in->nfx], msg, sizeof msg) == 0)
			in->nfx++;
	}
	rc = 0;
out:
	bids_runs_release(runs, n);
	study_release(&st);
	return rc;
}

static void study_inputs_release(study_inputs *in)
{
	free_list(in->bold, in->nrun);
	free_list(in->events, in->nrun);
	free_list(in->confs, in->confs ? in->nrun : 0);
	free_list(in->ccols, in->nccol);
	free(in->tr);
	free(in->condcol);
	free(in->mask);
	expr_list_free(in->fx, in->nfx);
	memset(in, 0, sizeof *in);
}

int cmd_fit(int argc, char **argv)
{
	const char *val[O_N + 1], **pos = xcalloc((size_t)argc + 1, sizeof *pos);
	char **events = NULL, **confs = NULL, **ccols = NULL, **conds = NULL;
	int k, npos = 0, nev = 0, nconf = 0, nccol = 0, ncond = 0, nrun, r, c, j, rc, model = GLM_AR1_ADJUSTED;
	long threads;
	double drift = 128.0, sref = 0.5, fwhm = 0.0, *tr = NULL, *C = NULL;
	expr *fx = NULL;
	size_t nfx = 0, nvox = 0, v;
	int neff = 0;
	char **labels = NULL, msg[512];
	unsigned char *mask = NULL;
	runfit_spec *specs = NULL;
	runfit_result *res = NULL;
	sr_err *errs = NULL, e;
	jdoc *doc = NULL, *files = NULL, *runs = NULL;
	map_job *jobs = NULL;
	int njobs = 0;
	study_inputs si;
	const char *condcol, *maskpath;

	memset(&si, 0, sizeof si);
	rc = cmdline_parse(&spec, argc, argv, val, pos, &npos);
	if (rc) {
		free(pos);
		return rc == 1 ? 0 : 2;
	}
	rc = 2;
	condcol = val[O_CONDCOL];
	maskpath = val[O_MASK];
	if (val[O_STUDY]) {
		if (npos || val[O_EVENTS] || val[O_CONF] || val[O_CONFCOLS]) {
			cmdline_error("fit", "--study finds the runs, events and confounds itself: give no runs, --events or --confounds");
			goto out;
		}
		if (!val[O_SUBJECT]) {
			cmdline_error("fit", "--study needs --subject");
			goto out;
		}
		if (load_study_inputs(val[O_STUDY], val[O_SUBJECT], val[O_TASK], &si)) {
			rc = 1;
			goto out;
		}
		free(pos);
		pos = xcalloc((size_t)si.nrun + 1, sizeof *pos);
		for (r = 0; r < si.nrun; r++)
			pos[r] = si.bold[r];
		npos = si.nrun;
		model = si.ar1 == 2 ? GLM_AR1_ADJUSTED : si.ar1 ? GLM_AR1 : GLM_OLS;
		drift = si.drift;
		sref = si.sref;
		fwhm = si.fwhm;
		if (!condcol)
			condcol = si.condcol;
		if (!maskpath)
			maskpath = si.mask;
	} else if (val[O_SUBJECT] || val[O_TASK]) {
		cmdline_error("fit", "--subject and --task go with --study");
		goto out;
	}
	nrun = npos;
	if (nrun == 0) {
		cmdline_error("fit", "give at least one BOLD run");
		goto out;
	}
	if (!val[O_OUT]) {
		cmdline_error("fit", "--out DIR is required");
		goto out;
	}
	if (val[O_MODEL]) {
		if (strcmp(val[O_MODEL], "ar1") == 0)
			model = GLM_AR1;
		else if (strcmp(val[O_MODEL], "ar1-adjusted") == 0)
			model = GLM_AR1_ADJUSTED;
		else if (strcmp(val[O_MODEL], "none") == 0)
			model = GLM_OLS;
		else if (strcmp(val[O_MODEL], "ols") == 0) {
			cmdline_error("fit", "--autocorrelation: 'ols' is now called 'none' (no autocorrelation model: ordinary least squares)");
			goto out;
		} else {
			cmdline_error("fit", "--autocorrelation must be ar1, ar1-adjusted or none, not '%s'", val[O_MODEL]);
			goto out;
		}
	}
	if (val[O_DRIFT]) {
		if (strcmp(val[O_DRIFT], "none") == 0)
			drift = 0.0;
		else if (cmdline_double("fit", "--drift-cutoff", val[O_DRIFT], 1e-3, 1e9, &drift))
			goto out;
	}
	if (val[O_SLICE] && cmdline_double("fit", "--volume-time", val[O_SLICE], 0.0, 1.0, &sref))
		goto out;
	if (val[O_SMOOTH]) {
		if (strcmp(val[O_SMOOTH], "none") == 0)
			fwhm = 0.0;
		else if (cmdline_double("fit", "--smoothing-fwhm", val[O_SMOOTH], 0.0, 1000.0, &fwhm))
			goto out;
	}
	threads = sysconf(_SC_NPROCESSORS_ONLN);
	if (threads < 1)
		threads = 1;
	if (val[O_THREADS] && cmdline_int("fit", "--threads", val[O_THREADS], 1, 1024, &threads))
		goto out;
	if (si.nrun) {
		events = xcalloc((size_t)nrun, sizeof *events);
		nev = nrun;
		for (r = 0; r < nrun; r++)
			events[r] = xstrdup(si.events[r]);
		if (si.confs) {
			confs = xcalloc((size_t)nrun, sizeof *confs);
			nconf = nrun;
			for (r = 0; r < nrun; r++)
				confs[r] = xstrdup(si.confs[r]);
			ccols = xcalloc((size_t)(si.nccol ? si.nccol : 1), sizeof *ccols);
			nccol = si.nccol;
			for (j = 0; j < nccol; j++)
				ccols[j] = xstrdup(si.ccols[j]);
		}
	} else if (val[O_EVENTS]) {
		events = split_list(val[O_EVENTS], 0, &nev);
		if (nev != nrun) {
			cmdline_error("fit", "--events names %d files for %d runs", nev, nrun);
			goto out;
		}
	} else {
		events = xcalloc((size_t)nrun, sizeof *events);
		nev = nrun;
		for (r = 0; r < nrun; r++) {
			events[r] = beside(pos[r], "_events.tsv");
			if (!events[r]) {
				cmdline_error("fit", "%s: not named *_bold.nii[.gz]: give --events", pos[r]);
				goto out;
			}
		}
	}
	if (val[O_CONFCOLS])
		ccols = split_list(val[O_CONFCOLS], 1, &nccol);
	if (si.nrun) {
		/* set above */
	} else if (val[O_CONF]) {
		confs = split_list(val[O_CONF], 0, &nconf);
		if (nconf != nrun) {
			cmdline_error("fit", "--confounds names %d files for %d runs", nconf, nrun);
			goto out;
		}
		if (nccol == 0) {
			cmdline_error("fit", "--confounds needs --confound-columns");
			goto out;
		}
	} else if (nccol > 0) {
		cmdline_error("fit", "--confound-columns needs --confounds");
		goto out;
	}
	rc = 1;
	tr = xcalloc((size_t)nrun, sizeof *tr);
	for (r = 0; r < nrun; r++) {
		int t = 0;

		if (si.nrun && !val[O_TR])
			tr[r] = si.tr[r];
		else
			t = resolve_tr(pos[r], val[O_TR], &tr[r]);
		if (t) {
			rc = t;
			goto out;
		}
	}
	if (gather_conditions(events, nrun, condcol, &conds, &ncond))
		goto out;
	if (ncond == 0) {
		cmdline_error("fit", "the events files hold no events");
		goto out;
	}
	if (val[O_EFFECT] && expr_parse_list(val[O_EFFECT], &fx, &nfx, msg, sizeof msg) < 0) {
		cmdline_error("fit", "--effect: %s", msg);
		rc = 2;
		goto out;
	}
	if (!val[O_EFFECT] && si.nfx) {
		/* the study's effects (hand the list over) */
		fx = si.fx;
		nfx = si.nfx;
		si.fx = NULL;
		si.nfx = 0;
	}
	/* contrasts: every condition, then the extra effects */
	neff = ncond + (int)nfx;
	C = xcalloc((size_t)neff * ncond, sizeof *C);
	labels = xcalloc((size_t)neff, sizeof *labels);
	for (c = 0; c < ncond; c++) {
		C[(size_t)c * ncond + c] = 1.0;
		labels[c] = xstrdup(conds[c]);
	}
	for (c = 0; c < (int)nfx; c++) {
		size_t t;

		for (t = 0; t < fx[c].nterms; t++) {
			for (j = 0; j < ncond; j++)
				if (strcmp(conds[j], fx[c].terms[t].name) == 0)
					break;
			if (j == ncond) {
				char known[1024] = "";

				for (j = 0; j < ncond; j++)
					snprintf(known + strlen(known), sizeof known - strlen(known), "%s%s",
						 j ? ", " : "", conds[j]);
				cmdline_error("fit", "effect '%s' names condition '%s', which no events file has (known: %s)",
					      fx[c].text, fx[c].terms[t].name, known);
				goto out;
			}
			C[(size_t)(ncond + c) * ncond + j] += fx[c].terms[t].weight;
		}
		labels[ncond + c] = xstrdup(fx[c].text);
	}
	if (maskpath) {
		nii_info mi;
		double *md;

		sr_err_init(&e, NULL, NULL);
		if (nii_read_3d(maskpath, &mi, &md, &e) != SR_OK) {
			cmdline_error("fit", "%s", e.msg);
			goto out;
		}
		nvox = nii_nvox(&mi.grid);
		mask = xmalloc(nvox ? nvox : 1);
		for (v = 0; v < nvox; v++)
			mask[v] = md[v] != 0.0 && !isnan(md[v]);
		free(md);
		for (r = 0; r < nrun; r++) {
			nii_info bi;
			char why[512];

			if (nii_read_info(pos[r], &bi, &e) != SR_OK) {
				cmdline_error("fit", "%s", e.msg);
				goto out;
			}
			if (!nii_same_grid(&mi.grid, &bi.grid, 1e-3, why, sizeof why)) {
				cmdline_error("fit", "%s and %s are not on the same grid: %s", maskpath, pos[r], why);
				goto out;
			}
		}
	}

	specs = xcalloc((size_t)nrun, sizeof *specs);
	res = xcalloc((size_t)nrun, sizeof *res);
	errs = xcalloc((size_t)nrun, sizeof *errs);
	for (r = 0; r < nrun; r++) {
		runfit_spec *s = &specs[r];

		s->bold = pos[r];
		s->events = events[r];
		s->condition_column = condcol;
		s->conditions = (const char *const *)conds;
		s->ncond = ncond;
		s->confounds = confs ? confs[r] : NULL;
		s->confound_names = (const char *const *)ccols;
		s->nconf = confs ? nccol : 0;
		s->skip = si.skip;
		s->censor_fd = si.censor;
		s->fd_column = "framewise_displacement";
		s->tr = tr[r];
		s->volume_time = sref;
		s->drift_cutoff = drift;
		s->ar1 = model;
		s->C = C;
		s->ncon = neff;
		s->mask = mask;
		s->smoothing_fwhm = fwhm;
		sr_err_init(&errs[r], warn_print, NULL);
	}
	if (runfit_many(specs, nrun, (int)threads, res, errs) != SR_OK) {
		for (r = 0; r < nrun; r++)
			if (errs[r].code != SR_OK)
				cmdline_error("fit", "%s", errs[r].msg);
		goto out;
	}
	nvox = res[0].out.nvox;
	for (r = 1; r < nrun; r++) {
		char why[512];

		if (!nii_same_grid(&res[0].info.grid, &res[r].info.grid, 1e-3, why, sizeof why)) {
			cmdline_error("fit", "%s and %s are not on the same grid: %s", pos[0], pos[r], why);
			goto out;
		}
	}
	if (mask && res[0].out.nvox != nvox) {
		cmdline_error("fit", "mask and runs differ in size");
		goto out;
	}

	/* outputs */
	sr_err_init(&e, NULL, NULL);
	if (afile_mkdirs(val[O_OUT], &e) != SR_OK) {
		cmdline_error("fit", "%s", e.msg);
		goto out;
	}
	doc = jdoc_object();
	files = jdoc_array();
	runs = jdoc_array();
	/* with one run the combination is that run: its maps are not written twice */
	njobs = 2 * neff * (nrun > 1 ? nrun + 1 : 1);
	jobs = xcalloc((size_t)njobs, sizeof *jobs);
	{
		/* names: each run's entities with desc-<effect>; the combination has those all runs share */
		bidsname_kv (*kv)[40] = xcalloc((size_t)nrun + 1, sizeof *kv);
		size_t *nkv = xcalloc((size_t)nrun + 1, sizeof *nkv);
		char (*effval)[128] = xcalloc((size_t)neff, sizeof *effval);
		int bids = 1;

		for (c = 0; c < neff; c++) {
			bidsname_value(labels[c], effval[c], sizeof effval[c]);
			for (k = 0; k < c; k++)
				if (strcmp(effval[c], effval[k]) == 0) {
					cmdline_error("fit", "effects '%s' and '%s' would have the same file name (desc-%s)",
						      labels[k], labels[c], effval[c]);
					free(kv);
					free(nkv);
					free(effval);
					goto out;
				}
		}
		for (r = 0; r < nrun; r++) {
			char *base = run_base(pos[r]);

			if (bidsname_parse(base, kv[r], 39, &nkv[r]))
				bids = 0;
			free(base);
		}
		if (bids && nrun > 1)
			nkv[nrun] = common_entities(kv, nkv, nrun, kv[nrun]);
		for (r = 0; r < (nrun > 1 ? nrun + 1 : 1); r++) {
			char *base = r < nrun ? run_base(pos[r]) : xstrdup("combined");
			int rb = bids && (r < nrun || nkv[nrun] > 0);

			for (c = 0; c < neff; c++)
				for (k = 0; k < 2; k++) {
					map_job *jb = &jobs[(r * neff + c) * 2 + k];

					jb->run = r < nrun ? r : -1;
					jb->c = c;
					jb->is_t = k;
					jb->path = map_path(val[O_OUT], kv[r], nkv[r], rb, base, effval[c],
							    k ? "tstat" : "effect");
				}
			free(base);
		}
		free(kv);
		free(nkv);
		free(effval);
	}
	for (r = 0; r < nrun; r++) {
		char *base = run_base(pos[r]);
		jdoc *rj = jdoc_object(), *est = jdoc_object();
		size_t nok = 0;
		glm_model *m;

		for (v = 0; v < nvox; v++)
			nok += res[r].out.ok[v];
		jdoc_set_str(rj, "bold", pos[r]);
		jdoc_set_str(rj, "events", events[r]);
		jdoc_set_str(rj, "confounds", confs ? confs[r] : NULL);
		jdoc_set_num(rj, "tr", tr[r]);
		jdoc_set_int(rj, "volumes", res[r].d.T);
		jdoc_set_int(rj, "columns", res[r].d.p);
		jdoc_set_int(rj, "drift_columns", res[r].d.ndrift);
		if (glm_model_make(res[r].d.X, res[r].d.T, res[r].d.p, &m, &e) == SR_OK) {
			jdoc_set_int(rj, "rank", glm_model_rank(m));
			glm_model_free(m);
		}
		jdoc_set_int(rj, "df", res[r].out.df);
		jdoc_set_int(rj, "analyzable_voxels", (long long)nok);
		for (c = 0; c < neff; c++) {
			jdoc_set_bool(est, labels[c], res[r].out.estimable[c]);
			if (!res[r].out.estimable[c])
				fprintf(stderr, "splitroi fit: warning: %s: effect '%s' is not estimable in this run%s\n",
					pos[r], labels[c], nrun > 1 ? ": left out of the combined maps" : "");
		}
		jdoc_set(rj, "estimable", est);
		jdoc_push(runs, rj);
		c = write_design(val[O_OUT], base, &res[r].d, conds, res[r].conf_names, files);
		free(base);
		if (c)
			goto out;
	}
	if (write_maps(jobs, njobs, res, nrun, nvox, labels, (int)threads, files))
		goto out;
	{
		jdoc *opt = jdoc_object(), *cl = jdoc_array(), *el = jdoc_array(), *cc = jdoc_array();
		char libs[512], *path = xmalloc(strlen(val[O_OUT]) + 16);
		int dsum = 0;

		jdoc_set_str(doc, "program", "splitroi fit");
		jdoc_set_str(doc, "version", SPLITROI_VERSION);
		jdoc_library_versions(libs, sizeof libs);
		jdoc_set_str(doc, "libraries", libs);
		jdoc_set_str(opt, "autocorrelation", model == GLM_OLS ? "none" : model == GLM_AR1 ? "ar1" : "ar1-adjusted");
		if (drift > 0)
			jdoc_set_num(opt, "drift_cutoff", drift);
		else
			jdoc_set_str(opt, "drift_cutoff", "none");
		jdoc_set_num(opt, "volume_time", sref);
		if (fwhm > 0)
			jdoc_set_num(opt, "smoothing_fwhm", fwhm);
		else
			jdoc_set_str(opt, "smoothing_fwhm", "none");
		jdoc_set_str(opt, "condition_column", condcol ? condcol : "trial_type");
		jdoc_set_str(opt, "mask", maskpath);
		jdoc_set_str(opt, "study", val[O_STUDY]);
		jdoc_set_str(opt, "subject", val[O_SUBJECT]);
		for (j = 0; j < nccol; j++)
			jdoc_push_str(cc, ccols[j]);
		jdoc_set(opt, "confound_columns", cc);
		jdoc_set(doc, "options", opt);
		for (c = 0; c < ncond; c++)
			jdoc_push_str(cl, conds[c]);
		jdoc_set(doc, "conditions", cl);
		for (c = 0; c < neff; c++)
			jdoc_push_str(el, labels[c]);
		jdoc_set(doc, "effects", el);
		jdoc_set(doc, "runs", runs);
		runs = NULL;
		for (r = 0; r < nrun; r++)
			dsum += res[r].out.df;
		jdoc_set_int(doc, "combined_df", dsum);
		jdoc_set(doc, "files", files);
		files = NULL;
		sprintf(path, "%s/fit.json", val[O_OUT]);
		if (jdoc_write(doc, path, &e) != SR_OK) {
			cmdline_error("fit", "%s", e.msg);
			free(path);
			goto out;
		}
		free(path);
	}
	if (!val[O_QUIET])
		fprintf(stderr, "splitroi fit: %d run%s, %d effect%s, maps in %s\n", nrun, nrun == 1 ? "" : "s",
			neff, neff == 1 ? "" : "s", val[O_OUT]);
	rc = 0;
out:
	if (res)
		for (r = 0; r < nrun; r++)
			runfit_result_release(&res[r]);
	free(res);
	free(specs);
	free(errs);
	for (r = 0; r < njobs; r++)
		free(jobs[r].path);
	free(jobs);
	jdoc_free(doc);
	jdoc_free(files);
	jdoc_free(runs);
	free(mask);
	free(C);
	if (labels)
		free_list(labels, neff);
	expr_list_free(fx, nfx);
	free_list(conds, ncond);
	free_list(events, nev);
	free_list(confs, nconf);
	free_list(ccols, nccol);
	free(tr);
	free(pos);
	study_inputs_release(&si);
	return rc;
}
