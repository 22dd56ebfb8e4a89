/* analyze.c - `splitroi analyze`: the whole job for every subject of a study. */
#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../core/mem.h"
#include "../core/strv.h"
#include "../core/pool.h"
#include "../io/afile.h"
#include "../io/bids.h"
#include "../io/events.h"
#include "../io/nii.h"
#include "../io/study.h"
#include "../io/table.h"
#include "../pipeline/mapout.h"
#include "cmd.h"
#include "cmdline.h"
#include "../pipeline/fresh.h"
#include "../pipeline/groupunit.h"
#include "../pipeline/outcheck.h"
#include "../pipeline/leftout.h"
#include "progress.h"
#include "../report/report.h"
#include "../pipeline/studycheck.h"
#include "../pipeline/studyset.h"
#include "../pipeline/subject.h"
#include "../pipeline/subunit.h"

enum { O_OUT, O_SUBJECTS, O_JOBS, O_THREADS, O_FORCE, O_NOGROUP, O_QUIET, O_COLLECT, O_NOREPORT, O_NOWAIT, O_NOPTS };

static const cmdline_opt opts[O_NOPTS + 1] = {
	[O_OUT] = { "out", "DIR", "write results under DIR instead of the study's 'out'" },
	[O_SUBJECTS] = { "subjects", "LIST", "analyze only these subjects (labels, comma or space separated)" },
	[O_JOBS] = { "jobs", "N", "analyze N subjects at a time (default 1); tables do not depend on N" },
	[O_THREADS] = { "threads", "N", "threads for fitting one subject's runs (default: the CPU count / jobs)" },
	[O_FORCE] = { "force", NULL, "redo subjects whose outputs are complete and up to date" },
	[O_NOGROUP] = { "no-group", NULL, "skip the group step (per-subject tables only)" },
	[O_QUIET] = { "quiet", NULL, "no progress lines and no summary (warnings still shown)" },
	[O_COLLECT] = { "collect", NULL, "fit nothing: rebuild OUT/responses.csv from the complete subjects, then the group step" },
	[O_NOREPORT] = { "no-report", NULL, "do not write OUT/report.html and the subject pages" },
	[O_NOWAIT] = { "no-wait", NULL, "stop instead of waiting when another process holds a subject's or the group step's lock" },
	[O_NOPTS] = { NULL, NULL, NULL },
};

static const cmdline_spec spec = {
	"analyze", "STUDY.ini [options]",
	"Runs the whole job on a study: fits every run of every subject, defines each\n"
	"subject's fROIs inside the parcels on one half of the localizer runs, measures\n"
	"the responses on the other half (and in the measured tasks), and writes\n"
	"OUT/sub-<label>/responses.csv, the combined OUT/responses.csv, the maps per\n"
	"split under OUT/sub-<label>/func/ (a BIDS Derivatives dataset, with\n"
	"OUT/dataset_description.json), reliability.csv (agreement of the\n"
	"localizer's halves per parcel), timecourses.csv (FIR response time courses\n"
	"per fROI) and the group tables. Subjects whose outputs are complete and newer than their\n"
	"inputs are skipped (see --force). --collect is the last step of a run split\n"
	"into one job per subject (see 'splitroi slurm').",
	opts,
};

/* ---- the subject list ---- */

static int has_label(char **v, size_t n, const char *s)
{
	size_t i;

	for (i = 0; i < n; i++)
		if (strcmp(v[i], s) == 0)
			return 1;
	return 0;
}

/* ---- running subjects, possibly several at a time ---- */

typedef struct work {
	const subject_ctx *ctx;
	char **labels;
	int *status;           /* per subject: 0 ok, 1 failed */
	subject_result *res;
	progress *prog;
	int force, wait;
} work;

/* Pool job i: subject labels[i]; a failure is printed and counted, the others go on. */
static void run_subject(size_t i, int worker, void *arg)
{
	work *w = arg;
	sr_err e;
	int skipped;

	sr_err_init(&e, progress_warn, w->prog);
	/* check's validation first: a subject check refuses fails here, the way check says it */
	if (studycheck_analyzable(w->ctx->st, w->labels[i], &e) ||
	    subunit_run(w->ctx, w->labels[i], w->force, w->wait, &w->res[i], &skipped, &e)) {
		progress_clear(w->prog);
		pthread_mutex_lock(&w->prog->lock);
		fprintf(stderr, "splitroi analyze: sub-%s failed: %s\n", w->labels[i], e.msg);
		pthread_mutex_unlock(&w->prog->lock);
		w->status[i] = 1;
	}
	progress_step(w->prog);
}

/* The aligned summary on stdout: per parcel, mean fROI size and the cross-validated effects. */
static void print_summary_loc(const study *st, size_t li, const subject_result *res, const int *ran, size_t n)
{
	const study_localizer *L = &st->locs[li];
	const char *kind = L->split == SPLIT_ODD_EVEN ? "odd-even:mean" : "leave-one-out:mean";
	size_t i, k;
	char **parcels = NULL;
	size_t np = 0, cap = 0;

	/* only parcels with cross-validated rows: none when no subject has two localizer runs */
	for (i = 0; i < n; i++)
		for (k = 0; ran[i] && k < res[i].nrows; k++)
			if (strcmp(res[i].rows[k].split, kind) == 0 && strcmp(res[i].rows[k].localizer, L->label) == 0 &&
			    !has_label(parcels, np, res[i].rows[k].parcel)) {
				XGROW(parcels, np, cap);
				parcels[np++] = res[i].rows[k].parcel;
			}
	if (!np)
		return;
	if (st->nlocs > 1)
		printf("\nlocalizer %s: cross-validated responses (%s), mean over subjects analyzed now:\n", L->label, kind);
	else
		printf("\ncross-validated responses (%s), mean over subjects analyzed now:\n", kind);
	printf("  %-22s %10s  %-28s %10s %4s\n", "parcel", "fROI size", "effect", "mean", "n");
	for (k = 0; k < np; k++) {
		size_t j, ne = L->neffects;

		for (j = 0; j < ne; j++) {
			double sv = 0, sn = 0;
			size_t cnt = 0, cntv = 0;

			for (i = 0; i < n; i++) {
				size_t r;

				for (r = 0; ran[i] && r < res[i].nrows; r++) {
					const response_row *w = &res[i].rows[r];

					if (strcmp(w->parcel, parcels[k]) || strcmp(w->split, kind) ||
					    strcmp(w->localizer, L->label) || strcmp(w->effect, L->effects[j].text))
						continue;
					sn += w->n_voxels;
					cntv++;
					if (isfinite(w->value)) {
						sv += w->value;
						cnt++;
					}
				}
			}
			if (!cntv)
				continue;
			if (cnt)
				printf("  %-22s %10.1f  %-28s %9.3f%% %4zu\n", j ? "" : parcels[k],
				       sn / (double)cntv, L->effects[j].text, sv / (double)cnt, cnt);
			else
				printf("  %-22s %10.1f  %-28s %10s %4zu\n", j ? "" : parcels[k],
				       sn / (double)cntv, L->effects[j].text, "-", cnt);
		}
	}
	free(parcels);
}

/* The summary of every localizer. */
static void print_summary(const study *st, const subject_result *res, const int *ran, size_t n)
{
	for (size_t li = 0; li < st->nlocs; li++)
		print_summary_loc(st, li, res, ran, n);
}

/*
 * --collect: the combined table and the group step from what the per-subject jobs
 * left. Incomplete subjects are named here and the group step marks its table
 * incomplete; neither makes this fail, so one failed subject cannot hold back
 * the table of the others.
 */
static int collect(const study *st, char **subs, size_t nsub, int group, int quiet, int wait,
		   int no_report)
{
	size_t i, ncomplete = 0, nmiss = 0;
	sr_err e;
	int rc = 0;

	sr_err_init(&e, NULL, NULL);
	if (afile_mkdirs(st->out, &e)) {
		fprintf(stderr, "splitroi analyze: %s\n", e.msg);
		return 1;
	}
	if (groupunit_step(st, subs, nsub, group, 1, wait, no_report, quiet, &ncomplete))
		rc = 1;
	if (ncomplete < nsub) {
		fprintf(stderr, "splitroi analyze: %zu of %zu subjects have no complete, up-to-date outputs:",
			nsub - ncomplete, nsub);
		for (i = 0; i < nsub && nmiss < 20; i++)
			if (!studyset_complete(st, subs[i])) {
				fprintf(stderr, " sub-%s", subs[i]);
				nmiss++;
			}
		fprintf(stderr, "%s\n", nsub - ncomplete > nmiss ? " ..." : "");
	}
	if (!quiet)
		printf("%zu of %zu subjects complete; tables: %s/responses.csv%s\n", ncomplete, nsub,
		       st->out, group ? ", group tables" : "");
	return rc;
}

/* Prints each problem as analyze's error and empties the list. */
static void print_problems(study_problems *probs)
{
	for (size_t i = 0; i < probs->n; i++)
		fprintf(stderr, "splitroi analyze: %s\n", probs->msg[i]);
	study_problems_release(probs);
	memset(probs, 0, sizeof *probs);
}

/* The parcels (one set for all subjects unless per subject) and the study's one mask; warnings through e. */
static int load_shared(const study *st, parcels_set *ps, unsigned char **mask, nii_grid *mask_grid, sr_err *e)
{
	memset(ps, 0, sizeof *ps);
	*mask = NULL;
	if (!study_per_subject(st->parcels) && !study_per_subject(st->parcel_names) &&
	    parcels_load(st->parcels, st->parcel_names, ps, e)) {
		fprintf(stderr, "splitroi analyze: %s\n", e->msg);
		return 1;
	}
	if (ps->labels && subject_parcels_template_on_raw(st, &ps->grid, st->parcels))
		sr_warnf(e, "%s: " PARCELS_RAW_NOTE, st->parcels);
	if (st->derivatives && !bids_is_derivative(st->derivatives))
		sr_warnf(e, "%s: its dataset_description.json does not say \"DatasetType\": \"derivative\"; is this the preprocessed dataset?",
			 st->derivatives);
	if (st->mask && !study_mask_per_subject(st)) {
		nii_info mi;

		if (nii_read_mask(st->mask, &mi, mask, NULL, e)) {
			fprintf(stderr, "splitroi analyze: %s\n", e->msg);
			return 1;
		}
		*mask_grid = mi.grid;
	}
	return 0;
}

/* Drops (and frees) the subjects whose outputs are complete and up to date, unless force; returns how many are left. */
static size_t skip_fresh(const study *st, char **todo, size_t ntodo, int force, int quiet)
{
	size_t i, kept = 0;

	for (i = 0; i < ntodo; i++) {
		if (!force && studyset_complete(st, todo[i])) {
			if (!quiet)
				fprintf(stderr, "splitroi analyze: sub-%s: up to date, skipped (--force redoes it)\n",
					todo[i]);
			free(todo[i]);
			continue;
		}
		todo[kept++] = todo[i];
	}
	return kept;
}

/* The work list of the subjects in todo. */
static void work_init(work *w, const subject_ctx *ctx, char **todo, size_t ntodo, progress *prog, int force,
		      int wait)
{
	memset(w, 0, sizeof *w);
	w->ctx = ctx;
	w->labels = todo;
	w->status = xcalloc(ntodo ? ntodo : 1, sizeof *w->status);
	w->res = xcalloc(ntodo ? ntodo : 1, sizeof *w->res);
	w->prog = prog;
	w->force = force;
	w->wait = wait;
}

/* The left-out-run lines of the subjects that ran. */
static void print_leftout(char **todo, const subject_result *res, const int *ran, size_t ntodo)
{
	const char **names = xcalloc(ntodo ? ntodo : 1, sizeof *names);
	const leftout_run **lr = xcalloc(ntodo ? ntodo : 1, sizeof *lr);
	size_t *nl = xcalloc(ntodo ? ntodo : 1, sizeof *nl), k = 0, i;

	for (i = 0; i < ntodo; i++)
		if (ran[i]) {
			names[k] = todo[i];
			lr[k] = res[i].leftout;
			nl[k++] = res[i].nleftout;
		}
	leftout_print(names, lr, nl, k);
	free(names);
	free(lr);
	free(nl);
}

/* The options: -1 to go on (the study file in pos[0]), else the exit status. */
static int parse_options(int argc, char **argv, const char **val, const char **pos, long *jobs, long *threads)
{
	int npos, rc = cmdline_parse(&spec, argc, argv, val, pos, &npos);

	if (rc)
		return rc == 1 ? 0 : 2;
	if (npos != 1) {
		cmdline_error("analyze", npos ? "give one study file" : "which study? usage: splitroi analyze STUDY.ini");
		return 2;
	}
	if ((val[O_JOBS] && cmdline_int("analyze", "jobs", val[O_JOBS], 1, 256, jobs)) ||
	    (val[O_THREADS] && cmdline_int("analyze", "threads", val[O_THREADS], 1, 256, threads))) {
		return 2;
	}
	if (val[O_COLLECT] && (val[O_SUBJECTS] || val[O_FORCE] || val[O_JOBS] || val[O_THREADS])) {
		cmdline_error("analyze", "--collect fits nothing: it takes no --subjects, --force, --jobs or --threads");
		return 2;
	}
	if (!*threads) {
		long ncpu = sysconf(_SC_NPROCESSORS_ONLN);

		*threads = ncpu > *jobs ? ncpu / *jobs : 1;
	}
	return -1;
}

int cmd_analyze(int argc, char **argv)
{
	const char *val[O_NOPTS + 1] = { NULL }, **pos = xcalloc((size_t)argc + 1, sizeof *pos);
	int rc, quiet, nfail = 0, nsubfail;
	long jobs = 1, threads = 0;
	study st;
	study_problems probs = { 0 };
	parcels_set ps;
	char **subs = NULL, **todo = NULL;
	size_t nsub = 0, ntodo = 0, i, ncomplete = 0;
	unsigned char *mask = NULL;
	nii_grid mask_grid;
	sr_err e;
	progress prog;
	subject_ctx ctx;
	work w;
	int *ran = NULL;

	rc = parse_options(argc, argv, val, pos, &jobs, &threads);
	if (rc >= 0) {
		free(pos);
		return rc;
	}
	quiet = val[O_QUIET] != NULL;
	if (study_load(pos[0], &st, &probs) != SR_OK) {
		print_problems(&probs);
		free(pos);
		return 1;
	}
	study_problems_release(&probs);
	free(pos);
	if (val[O_OUT]) {
		free(st.out);
		st.out = xstrdup(val[O_OUT]);
	}
	sr_err_init(&e, NULL, NULL);
	rc = 1;
	if (studycheck_subjects(&st, &subs, &nsub, &probs)) {
		print_problems(&probs);
		goto out_subs;
	}
	if (studycheck_effects(&st, subs, nsub, &probs)) {
		print_problems(&probs);
		goto out_subs;
	}
	if (outcheck_safe(&st, subs, nsub, &e)) {
		fprintf(stderr, "splitroi analyze: %s\n", e.msg);
		goto out_subs;
	}
	if (val[O_COLLECT]) {
		rc = collect(&st, subs, nsub, !val[O_NOGROUP], quiet, !val[O_NOWAIT], val[O_NOREPORT] != NULL);
		goto out_subs;
	}
	if (val[O_SUBJECTS]) {
		if (studycheck_only(subs, nsub, val[O_SUBJECTS], &todo, &ntodo, &probs)) {
			print_problems(&probs);
			rc = 2;
			goto out_subs;
		}
	} else {
		ntodo = nsub;
		todo = xcalloc(nsub, sizeof *todo);
		for (i = 0; i < nsub; i++)
			todo[i] = xstrdup(subs[i]);
	}
	progress_init(&prog, "analyze", 0, quiet);
	sr_err_init(&e, progress_warn, &prog);
	if (load_shared(&st, &ps, &mask, &mask_grid, &e))
		goto out_parcels;
	if (afile_mkdirs(st.out, &e) ||
	    mapout_dataset_description(st.out, st.bids, st.derivatives, argc, argv, &e)) {
		fprintf(stderr, "splitroi analyze: %s\n", e.msg);
		goto out_parcels;
	}
	ntodo = skip_fresh(&st, todo, ntodo, val[O_FORCE] != NULL, quiet);
	prog.total = (int)ntodo;
	memset(&ctx, 0, sizeof ctx);
	ctx.st = &st;
	ctx.parcels = study_per_subject(st.parcels) || study_per_subject(st.parcel_names) ? NULL : &ps;
	ctx.mask = mask;
	ctx.mask_grid = mask ? &mask_grid : NULL;
	ctx.nthreads = (int)threads;
	ctx.progress = progress_stage;
	ctx.progress_ctx = &prog;
	work_init(&w, &ctx, todo, ntodo, &prog, val[O_FORCE] != NULL, !val[O_NOWAIT]);
	pool_run(ntodo, (int)jobs, run_subject, &w);   /* jobs is 1..256 */
	progress_clear(&prog);
	ran = xcalloc(ntodo ? ntodo : 1, sizeof *ran);
	for (i = 0; i < ntodo; i++) {
		ran[i] = !w.status[i];
		nfail += w.status[i];
	}
	/* the summary counts subjects; a failed table or report step only sets the exit status */
	nsubfail = nfail;
	if (groupunit_step(&st, subs, nsub, !val[O_NOGROUP], ntodo > 0, !val[O_NOWAIT],
			   val[O_NOREPORT] != NULL, quiet, &ncomplete))
		nfail++;
	if (!quiet) {
		print_summary(&st, w.res, ran, ntodo);
		print_leftout(todo, w.res, ran, ntodo);
		printf("\n%zu of %zu subjects complete; %zu analyzed now, %d failed; %ld warnings\n",
		       ncomplete, nsub, ntodo - (size_t)nsubfail, nsubfail, prog.warnings);
		printf("tables: %s/responses.csv (all subjects), %s/sub-<label>/responses.csv\n", st.out,
		       st.out);
	}
	rc = nfail ? 1 : 0;
	for (i = 0; i < ntodo; i++)
		subject_result_release(&w.res[i]);
	free(w.res);
	free(w.status);
	free(ran);
out_parcels:
	free(mask);
	parcels_release(&ps);
	progress_release(&prog);
out_subs:
	strv_free_array(todo, ntodo);
	strv_free_array(subs, nsub);
	study_release(&st);
	return rc;
}
