/* fit.c - `splitroi fit`: first-level GLM maps for BOLD runs given on the command line. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../core/expr.h"
#include "../core/mem.h"
#include "../core/strv.h"
#include "../io/bids.h"
#include "../io/nii.h"
#include "../io/study.h"
#include "cmd.h"
#include "cmdline.h"
#include "../pipeline/fitjob.h"

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
	[O_MASK] = { "mask", "FILE", "optional 3-D brain mask on the data grid (finite, non-zero = inside)" },
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
	size_t k = 0, cap = 0;

	while ((tok = strsep(&p, spaces ? ", \t" : ",")) != NULL) {
		while (!spaces && (*tok == ' ' || *tok == '\t'))
			tok++;
		if (!*tok)
			continue;
		XGROW(v, k, cap);
		v[k++] = xstrdup(tok);
	}
	free(copy);
	*n = (int)k;
	return v;
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
	strv_free_array(in->bold, (size_t)in->nrun);
	strv_free_array(in->events, (size_t)in->nrun);
	strv_free_array(in->confs, (size_t)(in->confs ? in->nrun : 0));
	strv_free_array(in->ccols, (size_t)in->nccol);
	free(in->tr);
	free(in->condcol);
	free(in->mask);
	expr_list_free(in->fx, in->nfx);
	memset(in, 0, sizeof *in);
}


/* The command line once parsed: the runs, their files and the model options. Owned. */
typedef struct fit_args {
	const char *val[O_N + 1];
	const char **pos;             /* the runs */
	int npos;
	char **events, **confs, **ccols;
	int nev, nconf, nccol;
	double *tr;
	int model;
	long threads;
	double drift, sref, fwhm;
	expr *fx;
	size_t nfx;
	study_inputs si;
	const char *condcol, *maskpath;
} fit_args;

static void fit_error(void *ctx, const char *msg)
{
	cmdline_error("fit", "%s", msg);
}

/* Parses argv, takes the runs from --study; 0, or -1 after help (exit 0), or the exit code. */
static int parse_args(fit_args *a, int argc, char **argv)
{
	const char **val = a->val;
	int rc, r;

	a->pos = xcalloc((size_t)argc + 1, sizeof *a->pos);
	rc = cmdline_parse(&spec, argc, argv, val, a->pos, &a->npos);
	if (rc)
		return rc == 1 ? -1 : 2;
	a->condcol = val[O_CONDCOL];
	a->maskpath = val[O_MASK];
	if (val[O_STUDY]) {
		study_inputs *si = &a->si;

		if (a->npos || val[O_EVENTS] || val[O_CONF] || val[O_CONFCOLS]) {
			cmdline_error("fit", "--study finds the runs, events and confounds itself: give no runs, --events or --confounds");
			return 2;
		}
		if (!val[O_SUBJECT]) {
			cmdline_error("fit", "--study needs --subject");
			return 2;
		}
		if (load_study_inputs(val[O_STUDY], val[O_SUBJECT], val[O_TASK], si))
			return 1;
		free(a->pos);
		a->pos = xcalloc((size_t)si->nrun + 1, sizeof *a->pos);
		for (r = 0; r < si->nrun; r++)
			a->pos[r] = si->bold[r];
		a->npos = si->nrun;
		a->model = si->ar1 == 2 ? GLM_AR1_ADJUSTED : si->ar1 ? GLM_AR1 : GLM_OLS;
		a->drift = si->drift;
		a->sref = si->sref;
		a->fwhm = si->fwhm;
		if (!a->condcol)
			a->condcol = si->condcol;
		if (!a->maskpath)
			a->maskpath = si->mask;
	} else if (val[O_SUBJECT] || val[O_TASK]) {
		cmdline_error("fit", "--subject and --task go with --study");
		return 2;
	}
	if (a->npos == 0) {
		cmdline_error("fit", "give at least one BOLD run");
		return 2;
	}
	if (!val[O_OUT]) {
		cmdline_error("fit", "--out DIR is required");
		return 2;
	}
	return 0;
}

/* --autocorrelation, --drift-cutoff, --volume-time, --smoothing-fwhm, --threads; 0 or 2. */
static int parse_model(fit_args *a)
{
	const char **val = a->val;

	if (val[O_MODEL]) {
		if (strcmp(val[O_MODEL], "ar1") == 0)
			a->model = GLM_AR1;
		else if (strcmp(val[O_MODEL], "ar1-adjusted") == 0)
			a->model = GLM_AR1_ADJUSTED;
		else if (strcmp(val[O_MODEL], "none") == 0)
			a->model = GLM_OLS;
		else if (strcmp(val[O_MODEL], "ols") == 0) {
			cmdline_error("fit", "--autocorrelation: 'ols' is now called 'none' (no autocorrelation model: ordinary least squares)");
			return 2;
		} else {
			cmdline_error("fit", "--autocorrelation must be ar1, ar1-adjusted or none, not '%s'", val[O_MODEL]);
			return 2;
		}
	}
	if (val[O_DRIFT]) {
		if (strcmp(val[O_DRIFT], "none") == 0)
			a->drift = 0.0;
		else if (cmdline_double("fit", "--drift-cutoff", val[O_DRIFT], 1e-3, 1e9, &a->drift))
			return 2;
	}
	if (val[O_SLICE] && cmdline_double("fit", "--volume-time", val[O_SLICE], 0.0, 1.0, &a->sref))
		return 2;
	if (val[O_SMOOTH]) {
		if (strcmp(val[O_SMOOTH], "none") == 0)
			a->fwhm = 0.0;
		else if (cmdline_double("fit", "--smoothing-fwhm", val[O_SMOOTH], 0.0, 1000.0, &a->fwhm))
			return 2;
	}
	a->threads = sysconf(_SC_NPROCESSORS_ONLN);
	if (a->threads < 1)
		a->threads = 1;
	if (val[O_THREADS] && cmdline_int("fit", "--threads", val[O_THREADS], 1, 1024, &a->threads))
		return 2;
	return 0;
}

/* n copies of v[0..n-1]. */
static char **copy_list(char *const *v, int n)
{
	char **c = xcalloc((size_t)(n ? n : 1), sizeof *c);
	int i;

	for (i = 0; i < n; i++)
		c[i] = xstrdup(v[i]);
	return c;
}

/* The events, confounds and confound-column lists, one file per run; 0 or 2. */
static int input_lists(fit_args *a)
{
	const char **val = a->val;
	int r, nrun = a->npos;

	if (a->si.nrun) {
		a->events = copy_list(a->si.events, nrun);
		a->nev = nrun;
		if (a->si.confs) {
			a->confs = copy_list(a->si.confs, nrun);
			a->nconf = nrun;
			a->ccols = copy_list(a->si.ccols, a->si.nccol);
			a->nccol = a->si.nccol;
		}
	} else if (val[O_EVENTS]) {
		a->events = split_list(val[O_EVENTS], 0, &a->nev);
		if (a->nev != nrun) {
			cmdline_error("fit", "--events names %d files for %d runs", a->nev, nrun);
			return 2;
		}
	} else {
		a->events = xcalloc((size_t)nrun, sizeof *a->events);
		a->nev = nrun;
		for (r = 0; r < nrun; r++) {
			a->events[r] = beside(a->pos[r], "_events.tsv");
			if (!a->events[r]) {
				cmdline_error("fit", "%s: not named *_bold.nii[.gz]: give --events", a->pos[r]);
				return 2;
			}
		}
	}
	if (val[O_CONFCOLS])
		a->ccols = split_list(val[O_CONFCOLS], 1, &a->nccol);
	if (a->si.nrun) {
		/* set above */
	} else if (val[O_CONF]) {
		a->confs = split_list(val[O_CONF], 0, &a->nconf);
		if (a->nconf != nrun) {
			cmdline_error("fit", "--confounds names %d files for %d runs", a->nconf, nrun);
			return 2;
		}
		if (a->nccol == 0) {
			cmdline_error("fit", "--confounds needs --confound-columns");
			return 2;
		}
	} else if (a->nccol > 0) {
		cmdline_error("fit", "--confound-columns needs --confounds");
		return 2;
	}
	return 0;
}

/* Each run's TR: the study's, or resolve_tr; 0 or the exit code. */
static int resolve_trs(fit_args *a)
{
	int r;

	a->tr = xcalloc((size_t)a->npos, sizeof *a->tr);
	for (r = 0; r < a->npos; r++) {
		int t = 0;

		if (a->si.nrun && !a->val[O_TR])
			a->tr[r] = a->si.tr[r];
		else
			t = resolve_tr(a->pos[r], a->val[O_TR], &a->tr[r]);
		if (t)
			return t;
	}
	return 0;
}

/* --effect, else the study's effects (handed over); 0 or 2. */
static int parse_effects(fit_args *a)
{
	char msg[512];

	if (a->val[O_EFFECT] && expr_parse_list(a->val[O_EFFECT], &a->fx, &a->nfx, msg, sizeof msg) < 0) {
		cmdline_error("fit", "--effect: %s", msg);
		return 2;
	}
	if (!a->val[O_EFFECT] && a->si.nfx) {
		/* the study's effects (hand the list over) */
		a->fx = a->si.fx;
		a->nfx = a->si.nfx;
		a->si.fx = NULL;
		a->si.nfx = 0;
	}
	return 0;
}

static void fit_args_release(fit_args *a)
{
	expr_list_free(a->fx, a->nfx);
	strv_free_array(a->events, (size_t)a->nev);
	strv_free_array(a->confs, (size_t)a->nconf);
	strv_free_array(a->ccols, (size_t)a->nccol);
	free(a->tr);
	free(a->pos);
	study_inputs_release(&a->si);
}

/* The fitting job of the parsed command line (pipeline/fitjob). */
static void job_from_args(fitjob *j, const fit_args *a)
{
	memset(j, 0, sizeof *j);
	j->out = a->val[O_OUT];
	j->bold = a->pos;
	j->nrun = a->npos;
	j->events = a->events;
	j->confs = a->confs;
	j->ccols = a->ccols;
	j->nccol = a->nccol;
	j->tr = a->tr;
	j->condcol = a->condcol;
	j->maskpath = a->maskpath;
	j->model = a->model;
	j->drift = a->drift;
	j->sref = a->sref;
	j->fwhm = a->fwhm;
	j->skip = a->si.skip;
	j->censor = a->si.censor;
	j->threads = (int)a->threads;
	j->study = a->val[O_STUDY];
	j->subject = a->val[O_SUBJECT];
	j->warn = warn_print;
	j->error = fit_error;
}

int cmd_fit(int argc, char **argv)
{
	fit_args a;
	fitjob job;
	int rc;

	memset(&a, 0, sizeof a);
	memset(&job, 0, sizeof job);
	a.model = GLM_AR1_ADJUSTED;
	a.drift = 128.0;
	a.sref = 0.5;
	rc = parse_args(&a, argc, argv);
	if (rc == 0)
		rc = parse_model(&a);
	if (rc == 0)
		rc = input_lists(&a);
	if (rc == 0)
		rc = resolve_trs(&a);
	if (rc == 0) {
		job_from_args(&job, &a);
		rc = fitjob_conditions(&job) != SR_OK ? 1 : parse_effects(&a);
	}
	if (rc == 0) {
		job.fx = a.fx;
		job.nfx = a.nfx;
		rc = fitjob_run(&job) != SR_OK;
	}
	if (rc == 0 && !a.val[O_QUIET])
		fprintf(stderr, "splitroi fit: %d run%s, %d effect%s, maps in %s\n", a.npos, a.npos == 1 ? "" : "s",
			job.neff, job.neff == 1 ? "" : "s", a.val[O_OUT]);
	fitjob_release(&job);
	fit_args_release(&a);
	return rc < 0 ? 0 : rc;
}
