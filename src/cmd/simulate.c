/* simulate.c - `splitroi simulate`: writes an invented BIDS study whose true effects are known.
 *
 * What truth.csv holds (one row per subject, parcel, task and effect):
 *   value      = the subject's true effect (percent signal change of the
 *                baseline, equal to the percent-of-run-mean beta of an ideal
 *                voxel) times the mean region weight over the top 10% of the
 *                parcel's voxels ranked by true weight: k = ceil(10 n / 100) of
 *                the parcel's n voxels. This is what a correct top-10% fROI
 *                analysis should recover, within noise. The region is
 *                flat-topped (weight 1 on a plateau holding about a third of
 *                the parcel), so value is normally the peak value itself. At
 *                the default noise, noisy selection admits a few voxels of
 *                lower weight: over 32 subjects, analyze landed 2.7% below
 *                value on average for the localizer's odd-even rows and 1%
 *                below for the measured task (fROIs from all four runs).
 *   peak_value = the effect at a voxel of weight 1.
 *   n_top, n_parcel = k and n above.
 * Contrasts (a - b) are differences of the condition rows.
 */
#include <errno.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <dirent.h>

#include "cmd.h"
#include "cmdline.h"
#include "../core/design.h"
#include "../core/err.h"
#include "../core/mem.h"
#include "../core/sim.h"
#include "../core/text.h"
#include "../io/afile.h"
#include "../io/csvout.h"
#include "../io/jdoc.h"
#include "../io/nii.h"

#define CONFOUNDS_SUFFIX "_desc-confounds_timeseries.tsv"
#define MEASURE_RUNS 2
#define MAX_EVENTS 4096
/* NIfTI-1 datatype codes (the standard's numbers; the io layer owns the library) */
enum { DT_INT16 = 4, DT_FLOAT32 = 16 };

static const char *const motion_names[6] = {
	"motion_tx", "motion_ty", "motion_tz", "motion_rx", "motion_ry", "motion_rz"
};

/* An invented study: task and condition names (the preferred condition first) and parcel names. */
struct scenario {
	const char *name, *title;
	const char *loc_task, *loc_cond[2];
	const char *meas_task, *meas_cond[2]; /* meas_task NULL: no measured task */
	const char *parcel[SIM_NPARCELS];
};

static const struct scenario scenarios[] = {
	{ "auditory", "Invented auditory study: melodies, scrambled tones and a memory task",
	  "tones", { "melody", "scrambled" }, "memory", { "familiar", "novel" },
	  { "left_auditory", "right_auditory", "frontal_pitch", "occipital_control" } },
	{ "visual", "Invented visual study: scenes versus objects",
	  "viewing", { "scenes", "objects" }, NULL, { NULL, NULL },
	  { "left_scene", "right_scene", "frontal_object", "motor_control" } },
	{ "numbers", "Invented number study: adding digits versus naming them, with a comparison task",
	  "digits", { "adding", "naming" }, "compare", { "near", "far" },
	  { "left_parietal", "right_parietal", "frontal_number", "occipital_control" } },
	{ "motor", "Invented motor study: hand versus foot movements, with imagined movements",
	  "movement", { "hand", "foot" }, "imagery", { "imagined_hand", "imagined_foot" },
	  { "left_hand", "right_hand", "premotor", "occipital_control" } },
};
#define NSCENARIOS (sizeof scenarios / sizeof scenarios[0])

enum { O_OUT, O_SUBJECTS, O_SEED, O_GRID, O_VOLUMES, O_TR, O_NOISE, O_AR1, O_RUNS, O_NULL,
       O_INT16, O_SCENARIO, O_PGRID, O_GROUPS, O_TWO_LOC, O_QUIET, O_N };

static const cmdline_opt opts[O_N + 1] = {
	[O_OUT] = { "out", "DIR", "folder to create for the study (required; must be new or empty)" },
	[O_SUBJECTS] = { "subjects", "N", "number of subjects (default 8)" },
	[O_SEED] = { "seed", "N", "random seed; same seed, same bytes (default 1)" },
	[O_GRID] = { "grid", "NAME", "small (24x28x20, 3 mm; default) or standard (91x109x91, 2 mm)" },
	[O_VOLUMES] = { "volumes", "N", "volumes per run (default 120)" },
	[O_TR] = { "tr", "S", "repetition time in seconds (default 2)" },
	[O_NOISE] = { "noise", "SD", "noise standard deviation, percent of baseline (default 0.7)" },
	[O_AR1] = { "ar1", "RHO", "lag-1 autocorrelation of the noise (default 0.3)" },
	[O_RUNS] = { "runs", "N", "localizer runs per subject (default 4; measured task: 2)" },
	[O_NULL] = { "null", NULL, "no true effects anywhere" },
	[O_INT16] = { "int16", NULL, "store runs as int16 with scl_slope instead of float32" },
	[O_SCENARIO] = { "scenario", "NAME", "auditory (default), visual, numbers or motor" },
	[O_PGRID] = { "parcel-grid", "NAME", "same (default) or fine (half the voxel size: needs resampling)" },
	[O_GROUPS] = { "groups", "SCALE", "two groups in participants.tsv's group column: odd subjects control, even subjects patient, whose effects are SCALE times as large" },
	[O_TWO_LOC] = { "two-localizers", NULL, "study.ini with both tasks as localizers (named by their tasks), each measured in the other's fROIs; the same truth holds for both" },
	[O_QUIET] = { "quiet", NULL, "print nothing but errors" },
	[O_N] = { NULL, NULL, NULL },
};

static const cmdline_spec spec = {
	"simulate", "--out DIR [options]",
	"Writes an invented study with known true effects: a BIDS dataset (DIR/data),\n"
	"parcels (DIR/parcels.nii.gz, DIR/parcels.tsv), a ready study file\n"
	"(DIR/study.ini) and the truth (DIR/truth.csv). Each subject has a head-shaped\n"
	"phantom, a flat-topped active region inside each parcel (one parcel never\n"
	"responds), AR(1) noise, slow cosine drift and motion confounds that leak into\n"
	"the signal. The signal model uses the study's own HRF-convolved regressors.\n"
	"truth.csv: value = true percent signal change times the mean region weight\n"
	"over the top 10% of the parcel's voxels by true weight, the number a correct\n"
	"top-10% fROI analysis recovers within noise; peak_value = at weight 1.",
	opts
};

struct opts {
	const char *out;
	long subjects, volumes, runs;
	uint64_t seed;
	int standard, null, int16, quiet, fine;
	int two_loc;          /* --two-localizers: both tasks localizers in study.ini */
	double tr, noise, rho;
	double group_scale;   /* 0: one group; else the patients' (even subjects') effect factor */
	const struct scenario *sc;
};

/* What stays fixed over a subject's runs. */
struct subject {
	size_t nvox;
	uint8_t *tissue;
	double *baseline, *u, *w, *amp, *noise_state, *vol, *scratch;
	double factor[SIM_NPARCELS];
	int32_t *labels;
};

static uint64_t stream_id(long subject, int purpose, int run)
{
	return ((uint64_t)(subject + 1) << 20) | ((uint64_t)purpose << 12) | (uint64_t)run;
}

enum { P_PHANTOM = 1, P_REGION, P_FACTOR, P_EVENTS, P_MOTION, P_DRIFT, P_NOISE };

static int bad_name(const char *what, const char *given, const char *const *names, size_t n)
{
	const char *near = text_nearest(given, names, n);
	char list[256] = "";
	size_t i;

	for (i = 0; i < n; i++) {
		strncat(list, i ? ", " : "", sizeof list - strlen(list) - 1);
		strncat(list, names[i], sizeof list - strlen(list) - 1);
	}
	if (near)
		cmdline_error("simulate", "--%s '%s' is not one of: %s; did you mean '%s'?", what, given,
			      list, near);
	else
		cmdline_error("simulate", "--%s '%s' is not one of: %s", what, given, list);
	return 2;
}

static int parse(int argc, char **argv, struct opts *o)
{
	const char *v[O_N + 1];
	const char **pos = xmalloc_array((size_t)argc + 1, sizeof *pos);
	int npos, rc;
	long l;
	size_t i;

	rc = cmdline_parse(&spec, argc, argv, v, pos, &npos);
	if (rc == 0 && npos > 0) {
		cmdline_error("simulate", "unexpected argument '%s' (the folder goes after --out)", pos[0]);
		rc = 2;
	}
	free(pos);
	if (rc == 1)
		return 1;
	if (rc)
		return 2;
	memset(o, 0, sizeof *o);
	o->subjects = 8;
	o->seed = 1;
	o->volumes = 120;
	o->runs = 4;
	o->tr = 2.0;
	o->noise = 0.7;
	o->rho = 0.3;
	o->sc = &scenarios[0];
	if (!v[O_OUT] || !*v[O_OUT]) {
		cmdline_error("simulate", "--out DIR is required (see 'splitroi help simulate')");
		return 2;
	}
	o->out = v[O_OUT];
	if (v[O_SUBJECTS] && cmdline_int("simulate", "subjects", v[O_SUBJECTS], 1, 999, &o->subjects))
		return 2;
	if (v[O_SEED]) {
		if (cmdline_int("simulate", "seed", v[O_SEED], 0, 2147483647L, &l))
			return 2;
		o->seed = (uint64_t)l;
	}
	if (v[O_VOLUMES] && cmdline_int("simulate", "volumes", v[O_VOLUMES], 20, 5000, &o->volumes))
		return 2;
	if (v[O_RUNS] && cmdline_int("simulate", "runs", v[O_RUNS], 1, 20, &o->runs))
		return 2;
	if (v[O_TR] && cmdline_double("simulate", "tr", v[O_TR], 0.2, 10.0, &o->tr))
		return 2;
	if (v[O_NOISE] && cmdline_double("simulate", "noise", v[O_NOISE], 0.0, 50.0, &o->noise))
		return 2;
	if (v[O_AR1] && cmdline_double("simulate", "ar1", v[O_AR1], -0.95, 0.95, &o->rho))
		return 2;
	if (v[O_GRID]) {
		static const char *const g[] = { "small", "standard" };

		if (strcmp(v[O_GRID], "small") == 0)
			o->standard = 0;
		else if (strcmp(v[O_GRID], "standard") == 0)
			o->standard = 1;
		else
			return bad_name("grid", v[O_GRID], g, 2);
	}
	if (v[O_PGRID]) {
		static const char *const g[] = { "same", "fine" };

		if (strcmp(v[O_PGRID], "same") == 0)
			o->fine = 0;
		else if (strcmp(v[O_PGRID], "fine") == 0)
			o->fine = 1;
		else
			return bad_name("parcel-grid", v[O_PGRID], g, 2);
	}
	if (v[O_SCENARIO]) {
		const char *names[NSCENARIOS];

		o->sc = NULL;
		for (i = 0; i < NSCENARIOS; i++) {
			names[i] = scenarios[i].name;
			if (strcmp(v[O_SCENARIO], scenarios[i].name) == 0)
				o->sc = &scenarios[i];
		}
		if (!o->sc)
			return bad_name("scenario", v[O_SCENARIO], names, NSCENARIOS);
	}
	if (v[O_GROUPS] && cmdline_double("simulate", "groups", v[O_GROUPS], 0, 100, &o->group_scale) != 0)
		return 2;
	if (v[O_GROUPS] && !(o->group_scale > 0)) {
		cmdline_error("simulate", "--groups wants a positive scale, got %s", v[O_GROUPS]);
		return 2;
	}
	o->null = v[O_NULL] != NULL;
	o->int16 = v[O_INT16] != NULL;
	o->two_loc = v[O_TWO_LOC] != NULL;
	if (o->two_loc && !o->sc->meas_task) {
		cmdline_error("simulate", "--two-localizers needs a scenario with a second task; %s has one",
			      o->sc->name);
		return 2;
	}
	o->quiet = v[O_QUIET] != NULL;
	if (o->volumes * o->tr < 100.0) {
		cmdline_error("simulate", "runs of %ld volumes at TR %g s last %g s; at least 100 s are needed for two blocks",
			      o->volumes, o->tr, o->volumes * o->tr);
		return 2;
	}
	return 0;
}

/* The output folder must be new or empty: a half-overwritten older study would mix two truths. */
static sr_status check_out(const char *dir, sr_err *e)
{
	DIR *d = opendir(dir);
	struct dirent *de;

	if (!d) {
		if (errno == ENOENT)
			return afile_mkdirs(dir, e);
		return sr_fail(e, SR_EIO, "%s: cannot open folder: %s", dir, strerror(errno));
	}
	while ((de = readdir(d)) != NULL) {
		if (strcmp(de->d_name, ".") && strcmp(de->d_name, "..")) {
			closedir(d);
			return sr_fail(e, SR_EINVAL,
				       "%s: folder is not empty; remove it or choose a new one", dir);
		}
	}
	closedir(d);
	return SR_OK;
}

static char *path_join(const char *a, const char *b)
{
	size_t n = strlen(a) + strlen(b) + 2;
	char *p = xmalloc(n);

	snprintf(p, n, "%s/%s", a, b);
	return p;
}

/* Writes text to path atomically. */
static sr_status write_text(const char *path, const char *text, sr_err *e)
{
	afile a;
	sr_status st = afile_open(&a, path, e);

	if (st != SR_OK)
		return st;
	if (fputs(text, a.f) == EOF) {
		afile_abort(&a);
		return sr_fail(e, SR_EIO, "%s: write failed", path);
	}
	return afile_commit(&a, e);
}

static void grid_for(const struct opts *o, int fine, nii_grid *g)
{
	int64_t n[3] = { 24, 28, 20 };
	double d = 3.0;
	int f = fine ? 2 : 1;

	if (o->standard) {
		n[0] = 91;
		n[1] = 109;
		n[2] = 91;
		d = 2.0;
	}
	/* the fine grid's voxel 2i sits on the data grid's voxel i, so nearest resampling is exact */
	nii_grid_make(g, f * n[0], f * n[1], f * n[2], d / f, d / f, d / f, f * (n[0] - 1) / 2.0,
		      f * (n[1] - 1) / 2.0, f * (n[2] - 1) / 2.0);
}

static void space_of(const nii_grid *g, sim_space *sp)
{
	sp->nx = g->nx;
	sp->ny = g->ny;
	sp->nz = g->nz;
	memcpy(sp->affine, g->affine, sizeof sp->affine);
}

static sr_status write_top(const struct opts *o, const char *data, sr_err *e)
{
	const struct scenario *sc = o->sc;
	const char *tasks[2] = { sc->loc_task, sc->meas_task };
	char name[256], meas[256], *p, *text;
	size_t cap, len = 0;
	sr_status st;
	long s;
	int t;

	{
		jdoc *d = jdoc_object();

		jdoc_set_str(d, "Name", sc->title);
		jdoc_set_str(d, "BIDSVersion", "1.8.0");
		jdoc_set_str(d, "DatasetType", "raw");
		{
			jdoc *au = jdoc_array();

			jdoc_push_str(au, "splitroi simulate (invented data, no participants)");
			jdoc_set(d, "Authors", au);
		}
		p = path_join(data, "dataset_description.json");
		st = jdoc_write(d, p, e);
		jdoc_free(d);
		free(p);
		if (st != SR_OK)
			return st;
	}
	for (t = 0; t < 2; t++) {
		jdoc *d;

		if (!tasks[t])
			continue;
		d = jdoc_object();
		jdoc_set_str(d, "TaskName", tasks[t]);
		jdoc_set_num(d, "RepetitionTime", o->tr);
		snprintf(name, sizeof name, "task-%s_bold.json", tasks[t]);
		p = path_join(data, name);
		st = jdoc_write(d, p, e);
		jdoc_free(d);
		free(p);
		if (st != SR_OK)
			return st;
	}
	cap = 32 + (size_t)o->subjects * 32;
	text = xmalloc(cap);
	len += (size_t)snprintf(text + len, cap - len, "participant_id%s\n", o->group_scale > 0 ? "\tgroup" : "");
	for (s = 1; s <= o->subjects; s++)
		len += (size_t)snprintf(text + len, cap - len, "sub-%0*ld%s\n", o->subjects > 99 ? 3 : 2, s,
					o->group_scale > 0 ? (s % 2 ? "\tcontrol" : "\tpatient") : "");
	p = path_join(data, "participants.tsv");
	st = write_text(p, text, e);
	free(p);
	free(text);
	if (st != SR_OK)
		return st;
	p = path_join(data, "README");
	text = xmalloc(2048);
	meas[0] = '\0';
	if (sc->meas_task)
		snprintf(meas, sizeof meas, "Measured task '%s' (events %s, %s) in %d runs.\n",
			 sc->meas_task, sc->meas_cond[0], sc->meas_cond[1], MEASURE_RUNS);
	snprintf(text, 2048,
		 "%s\n\n"
		 "Simulated data made by splitroi simulate (seed %llu); no person was scanned.\n"
		 "Localizer task '%s' (blocks %s, %s) in %ld runs.\n%s"
		 "Each run has %ld volumes at a repetition time of %g s. The true effects\n"
		 "are in truth.csv beside this folder. Motion confounds are in\n"
		 "*%s beside each run (listed in .bidsignore).\n",
		 sc->title, (unsigned long long)o->seed, sc->loc_task, sc->loc_cond[0],
		 sc->loc_cond[1], o->runs, meas, o->volumes, o->tr, CONFOUNDS_SUFFIX);
	st = write_text(p, text, e);
	free(text);
	free(p);
	if (st != SR_OK)
		return st;
	/* confounds are not a raw BIDS file type: tell the validator to skip them */
	p = path_join(data, ".bidsignore");
	st = write_text(p, "*" CONFOUNDS_SUFFIX "\n", e);
	free(p);
	return st;
}

static sr_status write_parcels(const struct opts *o, const sim_head *h, sr_err *e)
{
	nii_grid g;
	sim_space sp;
	int32_t *labels;
	char *p, text[512];
	size_t len = 0;
	sr_status st;
	int i;

	grid_for(o, o->fine, &g);
	space_of(&g, &sp);
	labels = xmalloc_array(nii_nvox(&g), sizeof *labels);
	sim_parcels(&sp, h, labels);
	p = path_join(o->out, "parcels.nii.gz");
	st = nii_write_labels(p, &g, labels, "splitroi simulated parcels", e);
	free(p);
	free(labels);
	if (st != SR_OK)
		return st;
	len += (size_t)snprintf(text + len, sizeof text - len, "index\tname\n");
	for (i = 0; i < SIM_NPARCELS; i++)
		len += (size_t)snprintf(text + len, sizeof text - len, "%d\t%s\n", i + 1,
					o->sc->parcel[i]);
	p = path_join(o->out, "parcels.tsv");
	st = write_text(p, text, e);
	free(p);
	return st;
}

/* The [model] section of study.ini. */
static void write_model(char *text, size_t cap, size_t *len)
{
	int j;

#define ADDM(...) (*len += (size_t)snprintf(text + *len, cap - *len, __VA_ARGS__))
	ADDM("\n[model]\nautocorrelation = ar1-adjusted\ndrift_cutoff = 128\nvolume_time = 0.5\n");
	ADDM("confounds =");
	for (j = 0; j < 6; j++)
		ADDM(" %s", motion_names[j]);
	ADDM("\nmotion =");
	for (j = 0; j < 6; j++)
		ADDM(" %s", motion_names[j]);
	ADDM("\nconfounds_suffix = %s\n", CONFOUNDS_SUFFIX);
}

/*
 * --two-localizers: both tasks are localizers on the same parcels, named by their
 * tasks; the first by its contrast, the second by both its conditions (both respond in
 * the simulator's regions); each task is measured in the other's fROIs. The regions
 * and their weights are the same for both, so truth.csv holds for both.
 */
static void write_two_localizers(const struct opts *o, char *text, size_t cap, size_t *len)
{
	const struct scenario *sc = o->sc;
	const char *task[2] = { sc->loc_task, sc->meas_task };
	const char *const *cond[2] = { sc->loc_cond, sc->meas_cond };

	for (int k = 0; k < 2; k++) {
		ADDM("[localizer %s]\ntask = %s\ncontrast = %s %s %s\nsplit = odd-even\n", task[k],
		     task[k], cond[k][0], k ? "+" : "-", cond[k][1]);
		ADDM("effects = %s, %s, %s - %s\n\n", cond[k][0], cond[k][1], cond[k][0], cond[k][1]);
		ADDM("[parcels %s]\nimage = parcels.nii.gz\nnames = parcels.tsv\ntop_percent = 10\n",
		     task[k]);
		if (o->fine)
			ADDM("resample = nearest\n");
		if (k == 0)
			ADDM("\n");
	}
}

/* --two-localizers, after [model]: each task measured in the other localizer's fROIs. */
static void write_cross_measures(const struct opts *o, char *text, size_t cap, size_t *len)
{
	const struct scenario *sc = o->sc;
	const char *task[2] = { sc->loc_task, sc->meas_task };
	const char *const *cond[2] = { sc->loc_cond, sc->meas_cond };

	for (int k = 0; k < 2; k++) {
		ADDM("\n[measure %s]\ntask = %s\nlocalizers = %s\n", task[1 - k], task[1 - k], task[k]);
		ADDM("effects = %s, %s, %s - %s\n", cond[1 - k][0], cond[1 - k][1], cond[1 - k][0],
		     cond[1 - k][1]);
	}
#undef ADDM
}

static sr_status write_study(const struct opts *o, sr_err *e)
{
	const struct scenario *sc = o->sc;
	char text[4096], *p;
	size_t len = 0;
	sr_status st;

#define ADD(...) (len += (size_t)snprintf(text + len, sizeof text - len, __VA_ARGS__))
	ADD("; study.ini - made by splitroi simulate (%s, seed %llu)\n", sc->title,
	    (unsigned long long)o->seed);
	ADD("; run with: splitroi analyze study.ini; compare the results with truth.csv\n\n");
	ADD("[study]\nbids = data\nout = results\nsubjects = all\n\n");
	if (o->two_loc) {
		write_two_localizers(o, text, sizeof text, &len);
	} else {
		ADD("[localizer]\ntask = %s\ncontrast = %s - %s\nsplit = odd-even\n", sc->loc_task,
		    sc->loc_cond[0], sc->loc_cond[1]);
		ADD("effects = %s, %s, %s - %s\n\n", sc->loc_cond[0], sc->loc_cond[1], sc->loc_cond[0],
		    sc->loc_cond[1]);
		ADD("[parcels]\nimage = parcels.nii.gz\nnames = parcels.tsv\ntop_percent = 10\n");
		if (o->fine)
			ADD("resample = nearest\n");
	}
	write_model(text, sizeof text, &len);
	if (o->two_loc)
		write_cross_measures(o, text, sizeof text, &len);
	if (sc->meas_task && !o->two_loc) {
		ADD("\n[measure %s]\ntask = %s\n", sc->meas_task, sc->meas_task);
		ADD("effects = %s, %s, %s - %s\n", sc->meas_cond[0], sc->meas_cond[1],
		    sc->meas_cond[0], sc->meas_cond[1]);
	}
#undef ADD
	p = path_join(o->out, "study.ini");
	st = write_text(p, text, e);
	free(p);
	return st;
}

static void subject_alloc(struct subject *s, size_t nvox)
{
	s->nvox = nvox;
	s->tissue = xmalloc_array(nvox, 1);
	s->baseline = xmalloc_array(nvox, sizeof(double));
	s->u = xmalloc_array(nvox, 3 * sizeof(double));
	s->w = xmalloc_array(nvox, sizeof(double));
	s->amp = xmalloc_array(nvox, 2 * sizeof(double));
	s->noise_state = xmalloc_array(nvox, sizeof(double));
	s->vol = xmalloc_array(nvox, sizeof(double));
	s->scratch = xmalloc_array(nvox, sizeof(double));
	s->labels = xmalloc_array(nvox, sizeof(int32_t));
}

static void subject_release(struct subject *s)
{
	free(s->tissue);
	free(s->baseline);
	free(s->u);
	free(s->w);
	free(s->amp);
	free(s->noise_state);
	free(s->vol);
	free(s->scratch);
	free(s->labels);
}

/* Rows of truth.csv for one subject and task (kind 0 localizer, 1 measured). */
static void truth_rows(csvout *c, const struct opts *o, const struct subject *s, const char *sub,
		       int kind, double *topmean, size_t *ntop, size_t *npar)
{
	const char *task = kind ? o->sc->meas_task : o->sc->loc_task;
	const char *const *cond = kind ? o->sc->meas_cond : o->sc->loc_cond;
	int p, ef;

	for (p = 1; p <= SIM_NPARCELS; p++) {
		for (ef = 0; ef < 3; ef++) {
			double peak[2], pv;
			char name[128];
			int ci;

			for (ci = 0; ci < 2; ci++)
				peak[ci] = o->null ? 0.0 :
					   s->factor[p - 1] * sim_nominal_effect(p, kind, ci);
			if (ef < 2) {
				pv = peak[ef];
				snprintf(name, sizeof name, "%s", cond[ef]);
			} else {
				pv = peak[0] - peak[1];
				snprintf(name, sizeof name, "%s-%s", cond[0], cond[1]);
			}
			csvout_str(c, sub);
			csvout_str(c, o->sc->parcel[p - 1]);
			csvout_str(c, task);
			csvout_str(c, name);
			csvout_num(c, pv * topmean[p - 1] + 0.0);
			csvout_num(c, pv + 0.0);
			csvout_int(c, (long long)ntop[p - 1]);
			csvout_int(c, (long long)npar[p - 1]);
			csvout_endrow(c);
		}
	}
}

static sr_status write_events(const char *path, const design_event *ev, size_t n,
			      const char *const *cond, sr_err *e)
{
	afile a;
	sr_status st = afile_open(&a, path, e);
	size_t i;

	if (st != SR_OK)
		return st;
	fprintf(a.f, "onset\tduration\ttrial_type\n");
	for (i = 0; i < n; i++)
		fprintf(a.f, "%.2f\t%.2f\t%s\n", ev[i].onset, ev[i].duration, cond[ev[i].cond]);
	return afile_commit(&a, e);
}

static sr_status write_confounds(const char *path, const double *m, int T, sr_err *e)
{
	afile a;
	sr_status st = afile_open(&a, path, e);
	int j, k;

	if (st != SR_OK)
		return st;
	for (j = 0; j < 6; j++)
		fprintf(a.f, "%s%s", j ? "\t" : "", motion_names[j]);
	fputc('\n', a.f);
	for (k = 0; k < T; k++)
		for (j = 0; j < 6; j++)
			fprintf(a.f, "%.9g%c", m[(size_t)j * T + k], j == 5 ? '\n' : '\t');
	return afile_commit(&a, e);
}

/* One run: events, confounds and the BOLD series, written volume by volume. */
static sr_status simulate_run(const struct opts *o, struct subject *s, const nii_grid *g,
			      long subj, const char *sub, int kind, int run, sr_err *e)
{
	const char *task = kind ? o->sc->meas_task : o->sc->loc_task;
	const char *const *cond = kind ? o->sc->meas_cond : o->sc->loc_cond;
	int T = (int)o->volumes, k, c, j, tag = kind * 64 + run;
	design_event *ev = xmalloc_array(MAX_EVENTS, sizeof *ev);
	double *x = xmalloc_array((size_t)T, 2 * sizeof(double));
	double *m = xmalloc_array((size_t)T, 6 * sizeof(double));
	double xbar[2] = { 0, 0 }, mbar[6] = { 0 };
	char base[512], *path;
	nii_writer *w = NULL;
	sim_run sr;
	sim_rng r;
	size_t nev, v;
	sr_status st;

	snprintf(base, sizeof base, "%s/data/%s/func/%s_task-%s_run-%02d", o->out, sub, sub, task, run);
	sim_rng_seed(&r, o->seed, stream_id(subj, P_EVENTS, tag));
	if (kind == 0)
		nev = sim_block_events(&r, T, o->tr, 16.0, (int)(subj + run) % 2, ev, MAX_EVENTS);
	else
		nev = sim_event_events(&r, T, o->tr, 3.0, 6.0, 10.0, ev, MAX_EVENTS);
	st = design_regressors(T, o->tr, 0.5, ev, nev, 2, x, e);
	if (st != SR_OK)
		goto out;
	/* centred regressors and motion keep the noise-free run mean at the baseline */
	for (c = 0; c < 2; c++) {
		for (k = 0; k < T; k++)
			xbar[c] += x[(size_t)c * T + k];
		xbar[c] /= T;
	}
	sim_rng_seed(&r, o->seed, stream_id(subj, P_MOTION, tag));
	sim_motion(&r, T, m);
	for (j = 0; j < 6; j++) {
		for (k = 0; k < T; k++)
			mbar[j] += m[(size_t)j * T + k];
		mbar[j] /= T;
	}
	path = xmalloc(strlen(base) + 64);
	sprintf(path, "%s_events.tsv", base);
	st = write_events(path, ev, nev, cond, e);
	if (st == SR_OK) {
		sprintf(path, "%s%s", base, CONFOUNDS_SUFFIX);
		st = write_confounds(path, m, T, e);
	}
	if (st != SR_OK) {
		free(path);
		goto out;
	}

	for (c = 0; c < 2; c++)
		for (v = 0; v < s->nvox; v++) {
			int p = s->labels[v];

			s->amp[(size_t)c * s->nvox + v] =
				(o->null || p < 1) ? 0.0 :
				s->w[v] * s->factor[p - 1] * sim_nominal_effect(p, kind, c);
		}
	memset(&sr, 0, sizeof sr);
	sr.nvox = s->nvox;
	sr.baseline = s->baseline;
	sr.u = s->u;
	sr.amp = s->amp;
	sr.ncond = 2;
	sr.noise = o->noise;
	sr.rho = o->rho;
	sim_rng_seed(&r, o->seed, stream_id(subj, P_DRIFT, tag));
	sr.drift[0] = 1.5 * sim_rng_normal(&r);
	sr.drift[1] = 0.8 * sim_rng_normal(&r);
	for (j = 0; j < 6; j++)
		sr.leak[j] = (j < 3 ? 1.0 : 50.0) * (2.0 * sim_rng_uniform(&r) - 1.0);

	sprintf(path, "%s_bold.nii.gz", base);
	{
		double slope = 1.0;

		if (o->int16) {
			double maxb = 0;

			for (v = 0; v < s->nvox; v++)
				if (s->baseline[v] > maxb)
					maxb = s->baseline[v];
			slope = maxb * (1.2 + 6.0 * o->noise / 100.0) / 32000.0;
		}
		st = nii_writer_open(path, g, T, o->tr, o->int16 ? DT_INT16 : DT_FLOAT32,
				     slope, 0.0, &w, e);
	}
	free(path);
	if (st != SR_OK)
		goto out;
	sim_rng_seed(&r, o->seed, stream_id(subj, P_NOISE, tag));
	sim_ar1_init(&r, s->nvox, s->noise_state);
	for (k = 0; k < T; k++) {
		double xc[2], mc[6];

		if (k > 0)
			sim_ar1_step(&r, o->rho, s->nvox, s->noise_state);
		for (c = 0; c < 2; c++)
			xc[c] = x[(size_t)c * T + k] - xbar[c];
		for (j = 0; j < 6; j++)
			mc[j] = m[(size_t)j * T + k] - mbar[j];
		sim_volume(&sr, k, T, xc, mc, s->noise_state, s->vol);
		st = nii_writer_put(w, s->vol, e);
		if (st != SR_OK) {
			nii_writer_abort(w);
			goto out;
		}
	}
	st = nii_writer_commit(w, e);
out:
	free(ev);
	free(x);
	free(m);
	return st;
}

static sr_status simulate_subject(const struct opts *o, struct subject *s, const nii_grid *g,
				  const sim_space *sp, const sim_head *h, long subj, csvout *truth,
				  sr_err *e)
{
	char sub[32], dir[512];
	double centers[3 * SIM_NPARCELS], topmean[SIM_NPARCELS];
	size_t ntop[SIM_NPARCELS], npar[SIM_NPARCELS];
	sim_rng r;
	sr_status st;
	int p, run;

	snprintf(sub, sizeof sub, "sub-%0*ld", o->subjects > 99 ? 3 : 2, subj);
	snprintf(dir, sizeof dir, "%s/data/%s/func", o->out, sub);
	st = afile_mkdirs(dir, e);
	if (st != SR_OK)
		return st;
	sim_rng_seed(&r, o->seed, stream_id(subj, P_PHANTOM, 0));
	sim_phantom(sp, h, &r, s->tissue, s->baseline, s->u);
	sim_parcels(sp, h, s->labels);
	sim_rng_seed(&r, o->seed, stream_id(subj, P_REGION, 0));
	for (p = 1; p <= SIM_NPARCELS; p++)
		sim_region_center(&r, p, centers + 3 * (p - 1));
	sim_region_weights(s->nvox, s->labels, s->u, centers, s->w);
	sim_rng_seed(&r, o->seed, stream_id(subj, P_FACTOR, 0));
	for (p = 1; p <= SIM_NPARCELS; p++) {
		double f = 1.0 + 0.15 * sim_rng_normal(&r);

		s->factor[p - 1] = f < 0.5 ? 0.5 : f;
		if (o->group_scale > 0 && subj % 2 == 0)   /* --groups: the patients' effects scaled */
			s->factor[p - 1] *= o->group_scale;
		topmean[p - 1] = sim_top_mean(s->nvox, s->labels, s->w, p, 1000, s->scratch,
					      &ntop[p - 1], &npar[p - 1]);
	}
	truth_rows(truth, o, s, sub, 0, topmean, ntop, npar);
	if (o->sc->meas_task)
		truth_rows(truth, o, s, sub, 1, topmean, ntop, npar);
	for (run = 1; run <= o->runs; run++) {
		st = simulate_run(o, s, g, subj, sub, 0, run, e);
		if (st != SR_OK)
			return st;
	}
	if (o->sc->meas_task)
		for (run = 1; run <= MEASURE_RUNS; run++) {
			st = simulate_run(o, s, g, subj, sub, 1, run, e);
			if (st != SR_OK)
				return st;
		}
	if (!o->quiet)
		printf("simulated %s: %ld %s runs%s\n", sub, o->runs, o->sc->loc_task,
		       o->sc->meas_task ? ", 2 measured-task runs" : "");
	return SR_OK;
}

int cmd_simulate(int argc, char **argv)
{
	static const char *const truth_cols[] = { "subject", "parcel", "task", "effect", "value",
						  "peak_value", "n_top", "n_parcel" };
	struct opts o;
	struct subject s;
	nii_grid g;
	sim_space sp;
	sim_head h;
	csvout truth;
	sr_err e;
	sr_status st;
	char *data, *p;
	long subj;
	int rc = parse(argc, argv, &o);

	if (rc == 1)
		return 0;
	if (rc)
		return rc;
	sr_err_init(&e, NULL, NULL);
	st = check_out(o.out, &e);
	if (st != SR_OK) {
		cmdline_error("simulate", "%s", e.msg);
		return 1;
	}
	grid_for(&o, 0, &g);
	space_of(&g, &sp);
	sim_head_for(&sp, &h);
	data = path_join(o.out, "data");
	st = afile_mkdirs(data, &e);
	if (st == SR_OK)
		st = write_top(&o, data, &e);
	free(data);
	if (st == SR_OK)
		st = write_parcels(&o, &h, &e);
	if (st != SR_OK) {
		cmdline_error("simulate", "%s", e.msg);
		return 1;
	}
	p = path_join(o.out, "truth.csv");
	st = csvout_open(&truth, p, truth_cols, 8, &e);
	free(p);
	if (st != SR_OK) {
		cmdline_error("simulate", "%s", e.msg);
		return 1;
	}
	subject_alloc(&s, nii_nvox(&g));
	for (subj = 1; subj <= o.subjects && st == SR_OK; subj++)
		st = simulate_subject(&o, &s, &g, &sp, &h, subj, &truth, &e);
	subject_release(&s);
	if (st != SR_OK) {
		csvout_abort(&truth);
		cmdline_error("simulate", "%s", e.msg);
		return 1;
	}
	st = csvout_commit(&truth, &e);
	if (st == SR_OK)
		st = write_study(&o, &e);
	if (st != SR_OK) {
		cmdline_error("simulate", "%s", e.msg);
		return 1;
	}
	if (!o.quiet)
		printf("wrote %s/data (BIDS), %s/parcels.nii.gz, %s/truth.csv, %s/study.ini\n", o.out,
		       o.out, o.out, o.out);
	return 0;
}
