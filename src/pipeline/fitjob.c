/* fitjob.c - `splitroi fit`'s job: contrasts, mask, the runs' fits, the maps, design tables and fit.json. */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"
#include "../core/strv.h"
#include "../core/pool.h"
#include "../io/bidsname.h"
#include "../io/afile.h"
#include "../io/designcsv.h"
#include "../io/events.h"
#include "../io/jdoc.h"
#include "../io/nii.h"
#include "../version.h"
#include "fitjob.h"

/* One map to write: run r (or -1 for the fixed-effects combination), effect c, effect or t. */
typedef struct fitjob_map {
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

/* vprintf into a new string. */
static char *vfmt_alloc(const char *fmt, va_list ap)
{
	va_list aq;
	char *msg;
	int n;

	va_copy(aq, ap);
	n = vsnprintf(NULL, 0, fmt, aq);
	va_end(aq);
	if (n < 0)
		n = 0;
	msg = xmalloc((size_t)n + 1);
	vsnprintf(msg, (size_t)n + 1, fmt, ap);
	return msg;
}

/* Hands one warning or error message to cb. */
static void say(sr_warn_fn cb, void *ctx, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static void say(sr_warn_fn cb, void *ctx, const char *fmt, ...)
{
	va_list ap;
	char *msg;

	va_start(ap, fmt);
	msg = vfmt_alloc(fmt, ap);
	va_end(ap);
	if (cb)
		cb(ctx, msg);
	free(msg);
}

#define fail(j, ...) say((j)->error, (j)->ctx, __VA_ARGS__)

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
static int gather_conditions(const fitjob *fj, char *const *events, int nrun, const char *column,
			     char ***out, int *nout)
{
	strv c = { 0 };
	int r;
	size_t j;

	for (r = 0; r < nrun; r++) {
		event_list el;
		sr_err e;

		sr_err_init(&e, NULL, NULL);
		if (events_read(events[r], column, &el, &e) != SR_OK) {
			fail(fj, "%s", e.msg);
			strv_free(&c);
			return 1;
		}
		for (j = 0; j < el.n; j++)
			if (!strv_contains(&c, el.ev[j].condition))
				strv_push(&c, el.ev[j].condition);
		events_release(&el);
	}
	strv_sort(&c);
	*out = c.v;
	*nout = (int)c.n;
	return 0;
}

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

/* One map (t: NII_INTENT_TTEST with its df) and its JSON sidecar; 1 on failure (j->err). */
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
			   j->is_t ? NII_INTENT_TTEST : NII_INTENT_NONE, j->is_t ? df : 0.0, desc,
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

/* Writes every map with up to nthreads threads; returns 0, or 1 after reporting the failures. */
static int write_maps(const fitjob *fj, map_job *jobs, int njobs, const runfit_result *res, int nrun,
		      size_t nvox, char *const *labels, int nthreads, jdoc *files)
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
			fail(fj, "%s", jobs[i].err.msg);
			rc = 1;
		} else {
			jdoc_push_str(files, jobs[i].path);
		}
	}
	return rc;
}

/* The design matrix with named columns (io/designcsv: full precision, refittable exactly). */
static int write_design(const fitjob *fj, const char *dir, const char *base, const design *d, char **conds,
			char *const *cnames, jdoc *files)
{
	char *path = xmalloc(strlen(dir) + strlen(base) + 32);
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	sprintf(path, "%s/%s_design.csv", dir, base);
	if (designcsv_write(path, d, (const char *const *)conds, (const char *const *)cnames, &e) != SR_OK) {
		fail(fj, "%s", e.msg);
		free(path);
		return 1;
	}
	jdoc_push_str(files, path);
	free(path);
	return 0;
}


sr_status fitjob_conditions(fitjob *j)
{
	if (gather_conditions(j, j->events, j->nrun, j->condcol, &j->conds, &j->ncond))
		return SR_EFORMAT;
	if (j->ncond == 0) {
		fail(j, "the events files hold no events");
		return SR_ESTUDY;
	}
	return SR_OK;
}

/* The contrasts: every condition, then the extra effects; 1 when an effect names an unknown condition. */
static int build_contrasts(fitjob *fj)
{
	int c, j, ncond = fj->ncond;
	char **conds = fj->conds;
	const expr *fx = fj->fx;

	fj->neff = ncond + (int)fj->nfx;
	fj->C = xcalloc((size_t)fj->neff * ncond, sizeof *fj->C);
	fj->labels = xcalloc((size_t)fj->neff, sizeof *fj->labels);
	for (c = 0; c < ncond; c++) {
		fj->C[(size_t)c * ncond + c] = 1.0;
		fj->labels[c] = xstrdup(conds[c]);
	}
	for (c = 0; c < (int)fj->nfx; c++) {
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
				fail(fj, "effect '%s' names condition '%s', which no events file has (known: %s)",
				     fx[c].text, fx[c].terms[t].name, known);
				return 1;
			}
			fj->C[(size_t)(ncond + c) * ncond + j] += fx[c].terms[t].weight;
		}
		fj->labels[ncond + c] = xstrdup(fx[c].text);
	}
	return 0;
}

/* The optional mask, checked to be on every run's grid; 1 on failure. */
static int read_mask(fitjob *j)
{
	nii_info mi;
	sr_err e;
	int r;

	if (!j->maskpath)
		return 0;
	sr_err_init(&e, NULL, NULL);
	if (nii_read_mask(j->maskpath, &mi, &j->mask, NULL, &e) != SR_OK) {
		fail(j, "%s", e.msg);
		return 1;
	}
	j->nvox = nii_nvox(&mi.grid);
	for (r = 0; r < j->nrun; r++) {
		nii_info bi;
		char why[512];

		if (nii_read_info(j->bold[r], &bi, &e) != SR_OK) {
			fail(j, "%s", e.msg);
			return 1;
		}
		if (!nii_same_grid(&mi.grid, &bi.grid, 1e-3, why, sizeof why)) {
			fail(j, "%s and %s are not on the same grid: %s", j->maskpath, j->bold[r], why);
			return 1;
		}
	}
	return 0;
}

/* Fits every run (runfit_many) and checks they share one grid; 1 on failure. */
static int fit_runs(fitjob *j)
{
	int r, nrun = j->nrun;

	j->specs = xcalloc((size_t)nrun, sizeof *j->specs);
	j->res = xcalloc((size_t)nrun, sizeof *j->res);
	j->errs = xcalloc((size_t)nrun, sizeof *j->errs);
	for (r = 0; r < nrun; r++) {
		runfit_spec *s = &j->specs[r];

		s->bold = j->bold[r];
		s->events = j->events[r];
		s->condition_column = j->condcol;
		s->conditions = (const char *const *)j->conds;
		s->ncond = j->ncond;
		s->confounds = j->confs ? j->confs[r] : NULL;
		s->confound_names = (const char *const *)j->ccols;
		s->nconf = j->confs ? j->nccol : 0;
		s->skip = j->skip;
		s->censor_fd = j->censor;
		s->fd_column = "framewise_displacement";
		s->tr = j->tr[r];
		s->volume_time = j->sref;
		s->drift_cutoff = j->drift;
		s->ar1 = j->model;
		s->C = j->C;
		s->ncon = j->neff;
		s->mask = j->mask;
		s->smoothing_fwhm = j->fwhm;
		sr_err_init(&j->errs[r], j->warn, j->ctx);
	}
	if (runfit_many(j->specs, nrun, j->threads, j->res, j->errs) != SR_OK) {
		for (r = 0; r < nrun; r++)
			if (j->errs[r].code != SR_OK)
				fail(j, "%s", j->errs[r].msg);
		return 1;
	}
	j->nvox = j->res[0].out.nvox;
	for (r = 1; r < nrun; r++) {
		char why[512];

		if (!nii_same_grid(&j->res[0].info.grid, &j->res[r].info.grid, 1e-3, why, sizeof why)) {
			fail(j, "%s and %s are not on the same grid: %s", j->bold[0], j->bold[r], why);
			return 1;
		}
	}
	if (j->mask && j->res[0].out.nvox != j->nvox) {
		fail(j, "mask and runs differ in size");
		return 1;
	}
	return 0;
}

/* The file names of the maps to write; 1 when two effects would share one. */
static int name_maps(fitjob *j)
{
	/* names: each run's entities with desc-<effect>; the combination has those all runs share */
	int nrun = j->nrun, neff = j->neff, r, c, k, bids = 1, rc = 1;
	bidsname_kv (*kv)[40] = xcalloc((size_t)nrun + 1, sizeof *kv);
	size_t *nkv = xcalloc((size_t)nrun + 1, sizeof *nkv);
	char (*effval)[128] = xcalloc((size_t)neff, sizeof *effval);

	/* with one run the combination is that run: its maps are not written twice */
	j->njobs = 2 * neff * (nrun > 1 ? nrun + 1 : 1);
	j->jobs = xcalloc((size_t)j->njobs, sizeof *j->jobs);
	for (c = 0; c < neff; c++) {
		bidsname_value(j->labels[c], effval[c], sizeof effval[c]);
		for (k = 0; k < c; k++)
			if (strcmp(effval[c], effval[k]) == 0) {
				fail(j, "effects '%s' and '%s' would have the same file name (desc-%s)",
				     j->labels[k], j->labels[c], effval[c]);
				goto out;
			}
	}
	for (r = 0; r < nrun; r++) {
		char *base = run_base(j->bold[r]);

		if (bidsname_parse(base, kv[r], 39, &nkv[r]))
			bids = 0;
		free(base);
	}
	if (bids && nrun > 1)
		nkv[nrun] = common_entities(kv, nkv, nrun, kv[nrun]);
	for (r = 0; r < (nrun > 1 ? nrun + 1 : 1); r++) {
		char *base = r < nrun ? run_base(j->bold[r]) : xstrdup("combined");
		int rb = bids && (r < nrun || nkv[nrun] > 0);

		for (c = 0; c < neff; c++)
			for (k = 0; k < 2; k++) {
				map_job *jb = &j->jobs[(r * neff + c) * 2 + k];

				jb->run = r < nrun ? r : -1;
				jb->c = c;
				jb->is_t = k;
				jb->path = map_path(j->out, kv[r], nkv[r], rb, base, effval[c], k ? "tstat" : "effect");
			}
		free(base);
	}
	rc = 0;
out:
	free(kv);
	free(nkv);
	free(effval);
	return rc;
}

/* Run r's entry in fit.json (pushed on runs), its not-estimable warnings and its design table. */
static int run_record(const fitjob *j, int r, jdoc *runs, jdoc *files)
{
	const runfit_result *res = &j->res[r];
	char *base = run_base(j->bold[r]);
	jdoc *rj = jdoc_object(), *est = jdoc_object();
	size_t nok = 0, v;
	glm_model *m;
	sr_err e;
	int c;

	sr_err_init(&e, NULL, NULL);
	for (v = 0; v < j->nvox; v++)
		nok += res->out.ok[v];
	jdoc_set_str(rj, "bold", j->bold[r]);
	jdoc_set_str(rj, "events", j->events[r]);
	jdoc_set_str(rj, "confounds", j->confs ? j->confs[r] : NULL);
	jdoc_set_num(rj, "tr", j->tr[r]);
	jdoc_set_int(rj, "volumes", res->d.T);
	jdoc_set_int(rj, "columns", res->d.p);
	jdoc_set_int(rj, "drift_columns", res->d.ndrift);
	if (glm_model_make(res->d.X, res->d.T, res->d.p, &m, &e) == SR_OK) {
		jdoc_set_int(rj, "rank", glm_model_rank(m));
		glm_model_free(m);
	}
	jdoc_set_int(rj, "df", res->out.df);
	jdoc_set_int(rj, "analyzable_voxels", (long long)nok);
	for (c = 0; c < j->neff; c++) {
		jdoc_set_bool(est, j->labels[c], res->out.estimable[c]);
		if (!res->out.estimable[c])
			say(j->warn, j->ctx, "%s: effect '%s' is not estimable in this run%s", j->bold[r],
			    j->labels[c], j->nrun > 1 ? ": left out of the combined maps" : "");
	}
	jdoc_set(rj, "estimable", est);
	jdoc_push(runs, rj);
	c = write_design(j, j->out, base, &res->d, j->conds, res->conf_names, files);
	free(base);
	return c;
}

/* Writes out/fit.json: inputs, options, conditions, effects, runs (taken over), df, files (taken over). */
static int write_record(const fitjob *j, jdoc *runs, jdoc *files)
{
	jdoc *doc = jdoc_object(), *opt = jdoc_object(), *cl = jdoc_array(), *el = jdoc_array(), *cc = jdoc_array();
	char libs[512], *path = xmalloc(strlen(j->out) + 16);
	int dsum = 0, r, c, bad = 0;
	sr_err e;

	jdoc_set_str(doc, "program", "splitroi fit");
	jdoc_set_str(doc, "version", SPLITROI_VERSION);
	jdoc_library_versions(libs, sizeof libs);
	jdoc_set_str(doc, "libraries", libs);
	jdoc_set_str(opt, "autocorrelation", j->model == GLM_OLS ? "none" : j->model == GLM_AR1 ? "ar1" : "ar1-adjusted");
	if (j->drift > 0)
		jdoc_set_num(opt, "drift_cutoff", j->drift);
	else
		jdoc_set_str(opt, "drift_cutoff", "none");
	jdoc_set_num(opt, "volume_time", j->sref);
	if (j->fwhm > 0)
		jdoc_set_num(opt, "smoothing_fwhm", j->fwhm);
	else
		jdoc_set_str(opt, "smoothing_fwhm", "none");
	jdoc_set_str(opt, "condition_column", j->condcol ? j->condcol : "trial_type");
	jdoc_set_str(opt, "mask", j->maskpath);
	jdoc_set_str(opt, "study", j->study);
	jdoc_set_str(opt, "subject", j->subject);
	for (c = 0; c < j->nccol; c++)
		jdoc_push_str(cc, j->ccols[c]);
	jdoc_set(opt, "confound_columns", cc);
	jdoc_set(doc, "options", opt);
	for (c = 0; c < j->ncond; c++)
		jdoc_push_str(cl, j->conds[c]);
	jdoc_set(doc, "conditions", cl);
	for (c = 0; c < j->neff; c++)
		jdoc_push_str(el, j->labels[c]);
	jdoc_set(doc, "effects", el);
	jdoc_set(doc, "runs", runs);
	for (r = 0; r < j->nrun; r++)
		dsum += j->res[r].out.df;
	jdoc_set_int(doc, "combined_df", dsum);
	jdoc_set(doc, "files", files);
	sprintf(path, "%s/fit.json", j->out);
	sr_err_init(&e, NULL, NULL);
	if (jdoc_write(doc, path, &e) != SR_OK) {
		fail(j, "%s", e.msg);
		bad = 1;
	}
	free(path);
	jdoc_free(doc);
	return bad;
}

sr_status fitjob_run(fitjob *j)
{
	jdoc *files = NULL, *runs = NULL;
	sr_err e;
	int r, bad = 1;

	if (build_contrasts(j) || read_mask(j) || fit_runs(j))
		return SR_ESTUDY;
	/* outputs */
	sr_err_init(&e, NULL, NULL);
	if (afile_mkdirs(j->out, &e) != SR_OK) {
		fail(j, "%s", e.msg);
		return e.code;
	}
	files = jdoc_array();
	runs = jdoc_array();
	if (name_maps(j))
		goto out;
	for (r = 0; r < j->nrun; r++)
		if (run_record(j, r, runs, files))
			goto out;
	if (write_maps(j, j->jobs, j->njobs, j->res, j->nrun, j->nvox, j->labels, j->threads, files))
		goto out;
	bad = write_record(j, runs, files);   /* takes runs and files over */
	runs = files = NULL;
out:
	jdoc_free(runs);
	jdoc_free(files);
	return bad ? SR_EIO : SR_OK;
}

void fitjob_release(fitjob *j)
{
	int r;

	if (j->res)
		for (r = 0; r < j->nrun; r++)
			runfit_result_release(&j->res[r]);
	free(j->res);
	free(j->specs);
	free(j->errs);
	for (r = 0; r < j->njobs; r++)
		free(j->jobs[r].path);
	free(j->jobs);
	free(j->mask);
	free(j->C);
	if (j->labels)
		strv_free_array(j->labels, (size_t)j->neff);
	strv_free_array(j->conds, (size_t)j->ncond);
	j->res = NULL;
	j->specs = NULL;
	j->errs = NULL;
	j->jobs = NULL;
	j->njobs = 0;
	j->mask = NULL;
	j->C = NULL;
	j->labels = NULL;
	j->conds = NULL;
	j->ncond = 0;
}
