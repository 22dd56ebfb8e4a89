/* check.c - the `check` command: validates a study and its data without fitting, listing every problem. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"
#include "../core/strv.h"
#include "../io/bids.h"
#include "../io/nii.h"
#include "../io/parcels.h"
#include "../io/study.h"
#include "cmd.h"
#include "cmdline.h"
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

/* The state of one check: what is wrong, what deserves a warning. */
typedef struct checker {
	const study *st;
	study_problems probs;
	strv warns;
	studycheck_ctx sc;          /* the shared validation of runs; its warnings join warns in order */
	study_problems sc_warns;
} checker;

static void problem(checker *c, const char *msg)
{
	study_problems_add(&c->probs, NULL, 0, "%s", msg);
}

/* The shared validation's context for the study c checks now (pass to studycheck_*, then sc_done). */
static studycheck_ctx *sc(checker *c)
{
	c->sc.st = c->st;
	c->sc.probs = &c->probs;
	c->sc.warns = &c->sc_warns;
	return &c->sc;
}

/* Moves the shared validation's warnings to c's, in the order they came. */
static void sc_done(checker *c)
{
	for (size_t i = 0; i < c->sc_warns.n; i++)
		strv_push(&c->warns, c->sc_warns.msg[i]);
	study_problems_release(&c->sc_warns);
	memset(&c->sc_warns, 0, sizeof c->sc_warns);
}

static const char *base(const char *path)
{
	const char *s = strrchr(path, '/');

	return s ? s + 1 : path;
}

/* ---- the listing of one run ---- */

static void print_confounds(const study *st, const studycheck_run *f)
{
	int k, i;

	if (f->conf_listed) {
		printf("      confounds (%d column%s):", f->nconf, f->nconf == 1 ? "" : "s");
		for (k = 0; k < f->nconf; k++)
			printf(" %s", f->conf_cols[k]);
		printf("\n");
		if (f->na_listed) {
			printf("      n/a replaced by the column mean:");
			for (k = 0, i = 0; k < f->nconf; k++)
				if (f->conf_na[k])
					printf("%s %s (%zu)", i++ ? "," : "", f->conf_cols[k], f->conf_na[k]);
			printf("\n");
		}
	}
	if (f->censor_listed)
		printf("      censored volumes (framewise_displacement > %g mm): %zu\n", st->censor_fd, f->ncensored);
}

/* One run's lines, from what studycheck_run_validate found. */
static void print_run(const study *st, const bids_run *run, const studycheck_run *f)
{
	size_t i;

	printf("    run %s: %s", run->label, base(run->bold));
	if (!f->readable) {
		printf("  (unreadable)\n");
	} else {
		printf("  %lld volumes", (long long)f->nt);
		if (st->skip_volumes)
			printf(" (first %d skipped)", st->skip_volumes);
		if (f->tr_ok)
			printf(", TR %g s", f->tr);
		printf(", %lld x %lld x %lld voxels of %g x %g x %g mm\n", (long long)f->grid.nx,
		       (long long)f->grid.ny, (long long)f->grid.nz, f->grid.dx, f->grid.dy, f->grid.dz);
		print_confounds(st, f);
	}
	if (!f->events_ok)
		return;
	printf("      conditions:");
	for (i = 0; i < f->conds.n; i++)
		printf("%s %s (%zu)", i ? "," : "", f->conds.v[i], f->cond_count[i]);
	printf("%s\n", f->conds.n ? "" : " none");
}

static void print_task_runs(const study *st, const studycheck_task *ts)
{
	for (size_t r = 0; r < ts->nruns; r++)
		print_run(st, &ts->runs[r], &ts->info[r]);
}

/* ---- splits ---- */

static void print_runs(const bids_run *runs, const size_t *idx, size_t n)
{
	size_t i;

	for (i = 0; i < n; i++)
		printf("%s%s", i ? "+" : "", runs[idx[i]].label);
}

static void print_splits(checker *c, const char *label, const studycheck_task *ts)
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
		strv_push(&c->warns, msg);
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

/* The effects of task t (0: the localizer's contrast and effects) named in known conditions (studycheck_names). */
static void check_task_names(checker *c, const char *section, size_t t, char **subs, size_t nsub,
			     const studycheck_task *seen, size_t stride)
{
	const study *st = c->st;
	const char *task = t ? st->measures[t - 1].task : st->loc_task;
	study_problems reported = { 0 };
	strv known = { 0 };
	size_t s, k;

	for (s = 0; s < nsub; s++)
		for (k = 0; k < seen[s * stride].conds.n; k++)
			if (!strv_contains(&known, seen[s * stride].conds.v[k]))
				strv_push(&known, seen[s * stride].conds.v[k]);
	strv_sort(&known);
	if (t == 0) {
		studycheck_names(sc(c), section, "contrast", task, &st->contrast, 1, known.v, known.n, subs, nsub,
				 seen, stride, &reported);
		studycheck_names(sc(c), section, "effects", task, st->loc_effects, st->nloc_effects, known.v, known.n,
				 subs, nsub, seen, stride, &reported);
	} else {
		studycheck_names(sc(c), section, "effects", task, st->measures[t - 1].effects,
				 st->measures[t - 1].neffects, known.v, known.n, subs, nsub, seen, stride, &reported);
	}
	sc_done(c);
	strv_free(&known);
	study_problems_release(&reported);
}

/* ---- parcels and mask ---- */

/* The parcels (studycheck_parcels_validate) and their listing: voxels per parcel, on the data grid when resampled. */
static void check_parcels(checker *c, const studycheck_grid *grids, size_t ngrids)
{
	const study *st = c->st;
	studycheck_parcels f;
	const parcels_set *ps = &f.ps;
	int i;

	if (studycheck_parcels_validate(sc(c), grids, ngrids, &f)) {
		sc_done(c);
		return;
	}
	sc_done(c);
	printf("parcels: %s (%lld x %lld x %lld), %d parcel%s\n", st->parcels, (long long)ps->grid.nx,
	       (long long)ps->grid.ny, (long long)ps->grid.nz, ps->n, ps->n == 1 ? "" : "s");
	if (f.resampled_onto)
		printf("  resampled (nearest neighbour) onto the data grid of %s\n", base(f.resampled_onto));
	printf("  %6s  %-24s %8s%s\n", "index", "name", "voxels", f.on_data ? "  on data grid" : "");
	for (i = 0; i < ps->n; i++) {
		printf("  %6d  %-24s %8zu", (int)ps->index[i], ps->name[i], ps->count[i]);
		if (f.on_data)
			printf("  %12zu", f.on_data[i]);
		printf("\n");
	}
	studycheck_parcels_release(&f);
}

/* The study's one mask (studycheck_mask_validate) and its voxel count. */
static void check_mask(checker *c, const studycheck_grid *grids, size_t ngrids)
{
	size_t count;

	if (studycheck_mask_validate(sc(c), grids, ngrids, &count))
		printf("mask: %s: %zu voxels in the mask\n", c->st->mask, count);
	sc_done(c);
}

static void check_study_parcels(checker *c, char **subs, size_t nsub, const studycheck_grid *grids, size_t ngrids);

/*
 * A localizer after the first (several localizers): its task's runs (checked
 * here when no earlier localizer or measure has that task), its splits, the
 * conditions its contrast and effects name, and its parcels.
 */
static void check_localizer(checker *c, size_t l, char **subs, size_t nsub, const studycheck_grid *grids,
			    size_t ngrids)
{
	const study *whole = c->st;
	study v;
	studycheck_task *seen = xcalloc(nsub ? nsub : 1, sizeof *seen);
	char section[512];
	size_t s;
	int done = !studycheck_localizer_task_new(whole, l);

	study_use_localizer(whole, l, &v);
	c->st = &v;
	for (s = 0; s < nsub; s++) {
		studycheck_task *ts = &seen[s];
		studycheck_grid ref = { .have = 0 };

		if (studycheck_task_find(sc(c), subs[s], v.loc_task, ts)) {
			sc_done(c);
			continue;
		}
		if (done) {
			/* a task checked already: only its events' conditions (the earlier check said the rest) */
			studycheck_task_conds(&v, ts);
			continue;
		}
		printf("sub-%s\n  task %s (localizer %s): %zu run%s\n", subs[s], v.loc_task,
		       study_loc_label(whole, l), ts->nruns, ts->nruns == 1 ? "" : "s");
		if (ts->nruns == 0) {
			char msg[1024];

			snprintf(msg, sizeof msg, "%s: sub-%s has no runs of task %s (localizer %s)",
				 v.derivatives ? v.derivatives : v.bids, subs[s], v.loc_task,
				 study_loc_label(whole, l));
			problem(c, msg);
		}
		studycheck_task_runs(sc(c), ts, &ref);
		sc_done(c);
		print_task_runs(&v, ts);
	}
	printf("localizer %s splits (%s)\n", study_loc_label(whole, l),
	       v.split == SPLIT_ODD_EVEN ? "odd-even" : "leave-one-out");
	for (s = 0; s < nsub; s++)
		print_splits(c, subs[s], &seen[s]);
	snprintf(section, sizeof section, "localizer %s", study_loc_label(whole, l));
	check_task_names(c, section, 0, subs, nsub, seen, 1);
	check_study_parcels(c, subs, nsub, grids, ngrids);
	c->st = whole;
	study_view_release(&v);
	for (s = 0; s < nsub; s++)
		studycheck_task_release(&seen[s]);
	free(seen);
}

/* ---- the command ---- */

/* The parcels: the study's, or each subject's own (made without its data). */
static void check_study_parcels(checker *c, char **subs, size_t nsub, const studycheck_grid *grids, size_t ngrids)
{
	const study *whole = c->st;

	if (!study_per_subject(whole->parcels) && !study_per_subject(whole->parcel_names)) {
		check_parcels(c, grids, ngrids);
		return;
	}
	for (size_t s = 0; s < nsub; s++) {
		study one = *whole;

		one.parcels = study_subject_path(whole->parcels, subs[s]);
		one.parcel_names = study_subject_path(whole->parcel_names, subs[s]);
		c->st = &one;
		check_parcels(c, grids, ngrids);
		c->st = whole;
		free(one.parcels);
		free(one.parcel_names);
	}
}

/* One subject: its tasks' runs validated (studycheck_subject), then listed. */
static void check_subject(checker *c, const char *label, studycheck_task *tasks, studycheck_grid *ref)
{
	const study *st = c->st;
	size_t t, k, nsp;

	studycheck_subject(sc(c), label, tasks, ref);
	sc_done(c);
	printf("sub-%s\n", label);
	for (t = 0; t < 1 + st->nmeasures; t++) {
		const studycheck_task *ts = &tasks[t];

		if (!ts->listed)
			continue;
		printf("  task %s (%s): %zu run%s", ts->task, t ? "measured" : "localizer", ts->nruns,
		       ts->nruns == 1 ? "" : "s");
		if (st->derivatives) {
			char **sp = bids_spaces(st->derivatives, label, ts->task, &nsp);

			printf(" (spaces found:");
			for (k = 0; k < nsp; k++)
				printf("%s %s", k ? "," : "", sp[k]);
			printf("%s)", nsp ? "" : " none");
			strv_free_array(sp, nsp);
		}
		printf("\n");
		print_task_runs(st, ts);
	}
}

/* Each subject's own mask (mask = auto, or a path with {subject}) on its grid. */
static void check_subject_masks(checker *c, char **subs, size_t nsub, const studycheck_task *seen, size_t ntasks,
				const studycheck_grid *refs)
{
	for (size_t s = 0; s < nsub; s++) {
		char **paths;
		size_t n = 0, count = 0;
		int read;

		studycheck_subject_mask(sc(c), subs[s], &seen[s * ntasks], ntasks, &refs[s], &paths, &n, &count, &read);
		sc_done(c);
		if (read)
			printf("mask sub-%s: %s%s: %zu voxels%s\n", subs[s], paths[0],
			       n > 1 ? " and the other runs' brain masks" : "", count, n > 1 ? " in all of them" : "");
		strv_free_array(paths, n);
	}
}

static int run_check(checker *c, char **subs, size_t nsub)
{
	const study *st = c->st;
	size_t ntasks = 1 + st->nmeasures, s, t, g, ngrids = 0;
	studycheck_task *seen = xcalloc(nsub > 0 ? nsub * ntasks : 1, sizeof *seen);
	studycheck_grid *refs = xcalloc(nsub ? nsub : 1, sizeof *refs);   /* each subject's data grid */
	studycheck_grid *grids = xcalloc(nsub ? nsub : 1, sizeof *grids);
	char why[8];

	for (s = 0; s < nsub; s++) {
		check_subject(c, subs[s], &seen[s * ntasks], &refs[s]);
		if (!refs[s].have)
			continue;
		for (g = 0; g < ngrids; g++)
			if (nii_same_grid(&grids[g].g, &refs[s].g, 1e-3, why, sizeof why))
				break;
		if (g == ngrids)
			grids[ngrids++] = refs[s];   /* a distinct data grid and the first run found on it */
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
		char section[512];

		snprintf(section, sizeof section, t ? "measure %s" : "localizer", t ? st->measures[t - 1].name : "");
		check_task_names(c, section, t, subs, nsub, seen + t, ntasks);
	}
	check_study_parcels(c, subs, nsub, grids, ngrids);
	for (size_t l = 1; l < st->nlocs; l++)
		check_localizer(c, l, subs, nsub, grids, ngrids);
	if (study_mask_per_subject(st))
		check_subject_masks(c, subs, nsub, seen, ntasks, refs);
	else
		check_mask(c, grids, ngrids);
	free(refs);
	free(grids);
	for (s = 0; s < nsub * ntasks; s++)
		studycheck_task_release(&seen[s]);
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
		strv_free_array(all, nall);
		return 2;
	}
	strv_free_array(all, nall);
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
	c.sc.headers_only = val[O_HEADERS_ONLY] != NULL;
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
			strv_push(&c.warns, msg);
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
		fprintf(stderr, "splitroi check: warning: %s\n", c.warns.v[i]);
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
	strv_free_array(subs, nsub);
	strv_free(&c.warns);
	study_problems_release(&c.probs);
	study_release(&st);
	return rc;
}
