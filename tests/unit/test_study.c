/* test_study.c - the study file: a good file, defaults, and every kind of bad section, key and value. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "io/study.h"
#include "testlib.h"

static char dir[256];
static char ini[300];

static void write_file(const char *path, const char *text)
{
	FILE *f = fopen(path, "wb");

	if (!f) {
		perror(path);
		exit(2);
	}
	fputs(text, f);
	fclose(f);
}

/* Writes text as the study file and loads it; *all receives every problem joined by newlines. */
static sr_status load(const char *text, study *s, char **all, size_t *nprobs)
{
	study_problems p = { 0 };
	sr_status st;
	size_t i, len = 1;

	write_file(ini, text);
	st = study_load(ini, s, &p);
	for (i = 0; i < p.n; i++)
		len += strlen(p.msg[i]) + 1;
	*all = malloc(len);
	(*all)[0] = '\0';
	for (i = 0; i < p.n; i++) {
		strcat(*all, p.msg[i]);
		strcat(*all, "\n");
	}
	*nprobs = p.n;
	study_problems_release(&p);
	return st;
}

/* Expects the study to fail with a problem containing every one of the given fragments on one line. */
static void expect_problem(const char *text, const char *a, const char *b, const char *name)
{
	study s;
	char *all, *line, *save = NULL;
	size_t n;
	int found = 0;
	sr_status st = load(text, &s, &all, &n);
	char *copy = strdup(all);

	CHECK(st == SR_ESTUDY, "%s: rejected (status %d)", name, (int)st);
	for (line = strtok_r(copy, "\n", &save); line; line = strtok_r(NULL, "\n", &save))
		if (strstr(line, a) && (!b || strstr(line, b)) && strncmp(line, ini, strlen(ini)) == 0)
			found = 1;
	CHECK(found, "%s: a message names the file and says '%s'%s%s: %s", name, a, b ? " and " : "",
	      b ? b : "", found ? "" : all);
	CHECK(s.bids == NULL && s.text == NULL && s.nmeasures == 0, "%s: study left empty", name);
	free(copy);
	free(all);
}

/* A valid file around one changed part: the [parcels] and [model] sections come from the caller. */
static char *valid_with(const char *study_extra, const char *localizer, const char *parcels,
			const char *model)
{
	static char buf[4096];

	snprintf(buf, sizeof buf,
		 "[study]\nbids = data\nout = results\n%s\n"
		 "[localizer]\n%s\n"
		 "[parcels]\n%s\n"
		 "[model]\n%s\n",
		 study_extra, localizer, parcels, model);
	return buf;
}

#define LOC "task = tones\ncontrast = melody - scrambled"
#define PAR "image = parcels.nii.gz"

/* A study with two named localizers (INTERFACE.md "Several localizers"); extra goes at the end. */
static char *two_localizers(const char *seeing_parcels, const char *extra)
{
	static char buf[4096];

	snprintf(buf, sizeof buf,
		 "[study]\nbids = data\nout = results\n"              /* lines 1-3 */
		 "[localizer hearing]\ntask = tones\ncontrast = melody - scrambled\n"   /* 4-6 */
		 "[parcels hearing]\nimage = parcels.nii.gz\ntop_percent = 5\n"          /* 7-9 */
		 "[localizer seeing]\ntask = shapes\ncontrast = faces - houses\n"        /* 10-12 */
		 "split = leave-one-out\neffects = faces, houses\n"                      /* 13-14 */
		 "%s"
		 "%s",
		 seeing_parcels, extra);
	return buf;
}

#define SEEING_PAR "[parcels seeing]\nimage = parcels.nii.gz\nnames = parcels.tsv\ntop_voxels = 50\n" /* 15-18 */

static void test_localizers(void)
{
	study s, v;
	char *all;
	size_t n;

	/* the unnamed form is one localizer labelled by its task */
	CHECK(load(valid_with("", LOC, PAR, ""), &s, &all, &n) == SR_OK, "unnamed: loads: %s", all);
	free(all);
	CHECK(s.nlocs == 1 && !s.named_localizers && s.locs[0].name == NULL &&
	      strcmp(s.locs[0].label, "tones") == 0 && s.loc_task == s.locs[0].task,
	      "unnamed: one localizer labelled 'tones', flat fields alias it");
	study_release(&s);

	CHECK(load(two_localizers(SEEING_PAR,
				  "[measure memory]\ntask = memory\neffects = familiar, novel\n"
				  "[measure hear]\ntask = tones\neffects = melody\nlocalizers = seeing\n"),
		   &s, &all, &n) == SR_OK, "two: loads: %s", all);
	free(all);
	CHECK(s.nlocs == 2 && s.named_localizers, "two: two named localizers (%zu)", s.nlocs);
	if (s.nlocs == 2) {
		const study_localizer *h = &s.locs[0], *g = &s.locs[1];

		CHECK(strcmp(h->label, "hearing") == 0 && strcmp(h->task, "tones") == 0 && h->line == 4 &&
		      h->split == SPLIT_ODD_EVEN && h->select == SELECT_TOP_PERCENT && h->select_value == 5 &&
		      h->neffects == 3 && h->parcel_names == NULL,
		      "two: hearing's task, split, rule and default effects");
		CHECK(strcmp(g->label, "seeing") == 0 && strcmp(g->task, "shapes") == 0 && g->line == 10 &&
		      g->split == SPLIT_LEAVE_ONE_OUT && g->select == SELECT_TOP_VOXELS &&
		      g->select_value == 50 && g->neffects == 2 && g->parcel_names != NULL &&
		      g->contrast.nterms == 2,
		      "two: seeing's task, split, rule, effects and names");
		CHECK(s.nmeasures == 2 && s.measures[0].nlocalizers == 2 &&
		      strcmp(s.measures[0].localizers[1], "seeing") == 0 && s.measures[1].nlocalizers == 1 &&
		      strcmp(s.measures[1].localizers[0], "seeing") == 0,
		      "two: measures default to every localizer, or the ones listed");
		study_use_localizer(&s, 1, &v);
		CHECK(strcmp(v.loc_task, "shapes") == 0 && v.split == SPLIT_LEAVE_ONE_OUT && v.nmeasures == 2 &&
		      strcmp(study_loc_label(&s, 1), "seeing") == 0,
		      "two: the view of seeing has its task, split and both measures");
		study_view_release(&v);
		study_use_localizer(&s, 0, &v);
		CHECK(strcmp(v.loc_task, "tones") == 0 && v.nmeasures == 1 &&
		      strcmp(v.measures[0].name, "memory") == 0,
		      "two: the view of hearing keeps only the measure that uses it");
		study_view_release(&v);
	}
	study_release(&s);

	expect_problem(two_localizers("", ""), "line 10: [localizer seeing] has no [parcels seeing]", NULL,
		       "named localizer without parcels");
	expect_problem(two_localizers(SEEING_PAR, "[parcels other]\nimage = parcels.nii.gz\n"),
		       "line 19: [parcels other] has no [localizer other]", NULL, "parcels without localizer");
	expect_problem(two_localizers(SEEING_PAR, "[localizer]\ntask = x\ncontrast = a - b\n"),
		       "line 19: the unnamed [localizer] (line 19) and named", "cannot be mixed",
		       "named and unnamed mixed");
	expect_problem(two_localizers(SEEING_PAR, "[parcels]\nimage = parcels.nii.gz\n"),
		       "line 19: an unnamed [parcels] section goes with the unnamed [localizer]", NULL,
		       "unnamed parcels with named localizers");
	expect_problem(two_localizers(SEEING_PAR, "[measure m]\ntask = memory\neffects = novel\nlocalizers = hearing smelling\n"),
		       "line 22: localizers: 'smelling' is not a localizer of this study", "hearing, seeing",
		       "unknown localizer name");
	expect_problem(two_localizers(SEEING_PAR, "[measure m]\ntask = tones\neffects = melody\n"),
		       "line 20: task 'tones' is the task of localizer 'hearing'", "localizers =",
		       "a localizer's task in its own fROIs");
	expect_problem(two_localizers(SEEING_PAR, "[measure m]\ntask = memory\neffects = novel\nlocalizers = seeing seeing\n"),
		       "line 22: localizers: 'seeing' is listed twice", NULL, "localizer listed twice");
	expect_problem(valid_with("", LOC, PAR, "[measure m]\ntask = memory\neffects = novel\nlocalizers = other\n"),
		       "localizers: 'other' is not a localizer of this study (localizers: tones)", NULL,
		       "unnamed: unknown localizer name");
	expect_problem(two_localizers(SEEING_PAR, "[localizer see_ing]\ntask = x\ncontrast = a - b\n"),
		       "line 19: localizer name 'see_ing' may hold only letters and digits", NULL,
		       "localizer name not alphanumeric");
	expect_problem(two_localizers(SEEING_PAR, "[localizer seeing]\ntask = x\n"),
		       "line 19: section [localizer seeing] repeated (first on line 10)", NULL,
		       "localizer repeated");
	expect_problem(two_localizers("[parcels seeing]\nimage = parcels.nii.gz\ncondition_column = x\n", ""),
		       "line 17: key 'condition_column' belongs in [localizer], not [parcels seeing]", NULL,
		       "keys checked in named sections");
}

static void test_good(void)
{
	study s;
	char *all, want[512];
	size_t n;
	const char *text =
		"; an invented auditory study\n"
		"# hash comments too\n"
		"[study]\n"
		"bids = data                 ; BIDS dataset root\n"
		"out = results               # where results go\n"
		"subjects = sub-01 02, 07\n"
		"mask = mask.nii.gz\n"
		"\n"
		"[localizer]\n"
		"task = tones\n"
		"contrast = melody - scrambled\n"
		"split = leave-one-out\n"
		"effects = melody, scrambled,\n"
		"    melody - scrambled, \"loud tone#2\" - melody\n"
		"condition_column = stimulus\n"
		"\n"
		"[parcels]\n"
		"image = parcels.nii.gz\n"
		"names = parcels.tsv\n"
		"top_percent = 12.5\n"
		"resample = nearest\n"
		"\n"
		"[model]\n"
		"autocorrelation = none\n"
		"drift_cutoff = none\n"
		"volume_time = 0\n"
		"confounds = csf white_matter\n"
		"confounds_suffix = _desc-confounds.tsv\n"
		"motion = trans_x trans_y trans_z rot_x rot_y rot_z\n"
		"motion_units = mm_deg\n"
		"fd_threshold = 0.9\n"
		"\n"
		"[measure memory]\n"
		"  task = memory\n"
		"effects = familiar, novel, familiar - novel\n";

	CHECK(load(text, &s, &all, &n) == SR_OK, "good study loads: %s", all);
	free(all);
	if (n)
		return;
	snprintf(want, sizeof want, "%s/data", dir);
	CHECK(strcmp(s.bids, want) == 0, "bids resolved against the file's folder: %s", s.bids);
	snprintf(want, sizeof want, "%s/results", dir);
	CHECK(strcmp(s.out, want) == 0, "out resolved: %s", s.out);
	snprintf(want, sizeof want, "%s/mask.nii.gz", dir);
	CHECK(s.mask && strcmp(s.mask, want) == 0, "mask resolved");
	CHECK(s.nsubjects == 3 && strcmp(s.subjects[0], "01") == 0 &&
		      strcmp(s.subjects[1], "02") == 0 && strcmp(s.subjects[2], "07") == 0,
	      "subjects split on spaces and commas, sub- stripped");
	CHECK(strcmp(s.loc_task, "tones") == 0, "localizer task");
	CHECK(s.contrast.nterms == 2 && s.contrast.terms[1].weight == -1.0, "contrast parsed");
	CHECK(s.split == SPLIT_LEAVE_ONE_OUT, "split leave-one-out");
	CHECK(s.nloc_effects == 4, "continuation line joined to effects (%zu)", s.nloc_effects);
	if (s.nloc_effects == 4)
		CHECK(strcmp(s.loc_effects[3].text, "\"loud tone#2\"-melody") == 0 &&
			      strcmp(s.loc_effects[3].terms[0].name, "loud tone#2") == 0,
		      "'#' inside quotes is no comment: %s", s.loc_effects[3].text);
	CHECK(strcmp(s.condition_column, "stimulus") == 0, "condition_column");
	snprintf(want, sizeof want, "%s/parcels.tsv", dir);
	CHECK(strcmp(s.parcel_names, want) == 0, "names resolved");
	CHECK(s.select == SELECT_TOP_PERCENT && s.select_value == 12.5 &&
		      strcmp(s.top_percent_text, "12.5") == 0,
	      "top_percent 12.5 with its decimal text");
	CHECK(s.resample_parcels == 1, "resample nearest");
	CHECK(s.ar1 == 0 && s.drift_cutoff == 0 && s.volume_time == 0, "model: none, none, 0");
	CHECK(s.nconfounds == 2 && strcmp(s.confounds[1], "white_matter") == 0, "confounds");
	CHECK(strcmp(s.confounds_suffix, "_desc-confounds.tsv") == 0, "confounds_suffix");
	CHECK(s.nmotion == 6 && strcmp(s.motion[5], "rot_z") == 0 && s.motion_deg == 1,
	      "motion columns in degrees");
	CHECK(s.fd_threshold == 0.9, "fd_threshold");
	CHECK(s.nmeasures == 1 && strcmp(s.measures[0].name, "memory") == 0 &&
		      strcmp(s.measures[0].task, "memory") == 0 && s.measures[0].neffects == 3,
	      "[measure memory] with an indented key");
	CHECK(strcmp(s.text, text) == 0, "full text kept");
	CHECK(study_line(&s, "parcels", "top_percent") == 20, "study_line finds top_percent on line 20");
	CHECK(study_line(&s, "measure memory", "task") == 34, "study_line in a measure section");
	CHECK(study_line(&s, "parcels", "min_t") == 0, "study_line 0 for an absent key");
	study_release(&s);
}

static void test_defaults(void)
{
	study s;
	char *all;
	size_t n;

	/* CRLF line ends and a byte-order mark, as an editor on another system writes them */
	CHECK(load("\xEF\xBB\xBF[study]\r\nbids = data\r\nout = /abs/out\r\n[localizer]\r\n"
		   "task = tones\r\ncontrast = melody - 0.5*scrambled\r\n[parcels]\r\nimage = parcels.nii.gz\r\n",
		   &s, &all, &n) == SR_OK,
	      "minimal study with CRLF and BOM: %s", all);
	free(all);
	if (n)
		return;
	CHECK(strcmp(s.out, "/abs/out") == 0, "absolute path kept");
	CHECK(s.subjects == NULL && s.nsubjects == 0, "subjects default all");
	CHECK(s.mask == NULL && s.parcel_names == NULL, "mask and names absent");
	CHECK(s.split == SPLIT_ODD_EVEN, "split default odd-even");
	CHECK(strcmp(s.condition_column, "trial_type") == 0, "condition_column default trial_type");
	CHECK(s.nloc_effects == 3, "default effects: two conditions and the contrast");
	if (s.nloc_effects == 3)
		CHECK(strcmp(s.loc_effects[0].text, "melody") == 0 &&
			      strcmp(s.loc_effects[1].text, "scrambled") == 0 &&
			      strcmp(s.loc_effects[2].text, "melody-0.5*scrambled") == 0,
		      "default effects in order");
	CHECK(s.select == SELECT_TOP_PERCENT && s.select_value == 10 &&
		      strcmp(s.top_percent_text, "10") == 0,
	      "selection default top_percent 10");
	CHECK(s.resample_parcels == 0, "resample default no");
	CHECK(s.ar1 == 2 && s.drift_cutoff == 128 && s.volume_time == 0.5,
	      "model defaults ar1-adjusted (METHODS.md 4), 128 s, 0.5");
	CHECK(s.nconfounds == 0 && s.confounds == NULL, "no confounds");
	CHECK(strcmp(s.confounds_suffix, "_confounds.tsv") == 0, "confounds_suffix default");
	CHECK(s.motion == NULL && s.motion_deg == 0 && s.fd_threshold == 0.5, "motion defaults");
	CHECK(s.nmeasures == 0, "no measures");
	study_release(&s);

	CHECK(load(valid_with("", "task = tones\ncontrast = \"go-left\"", PAR, ""), &s, &all, &n) ==
		      SR_OK,
	      "single quoted condition as contrast");
	CHECK(s.nloc_effects == 1 && strcmp(s.loc_effects[0].text, "\"go-left\"") == 0,
	      "a one-condition contrast is not listed twice");
	free(all);
	study_release(&s);

	CHECK(load(valid_with("", LOC, "image = parcels.nii.gz\ntop_voxels = 50", ""), &s, &all, &n) ==
		      SR_OK && s.select == SELECT_TOP_VOXELS && s.select_value == 50 &&
		      s.top_percent_text == NULL,
	      "top_voxels 50");
	free(all);
	study_release(&s);
	CHECK(load(valid_with("", LOC, "image = parcels.nii.gz\nmin_t = -1.5e0", ""), &s, &all, &n) ==
		      SR_OK && s.select == SELECT_MIN_T && s.select_value == -1.5,
	      "min_t -1.5");
	free(all);
	study_release(&s);
	{
		/* every model stays selectable, each to its own code */
		static const char *const word[] = { "ar1-adjusted", "ar1", "none" };
		static const int code[] = { 2, 1, 0 };
		int i;

		for (i = 0; i < 3; i++) {
			char model[64];

			snprintf(model, sizeof model, "autocorrelation = %s", word[i]);
			CHECK(load(valid_with("", LOC, PAR, model), &s, &all, &n) == SR_OK && s.ar1 == code[i],
			      "autocorrelation = %s gives model %d", word[i], code[i]);
			free(all);
			study_release(&s);
		}
	}
}

static void test_names(void)
{
	expect_problem(valid_with("", LOC, "image = parcels.nii.gz\ntop_percnt = 5", ""),
		       "line 10: unknown key 'top_percnt' in [parcels]", "did you mean 'top_percent'",
		       "typo top_percnt");
	expect_problem(valid_with("", LOC, PAR, "frobnicate = 1"), "line 11: unknown key 'frobnicate'",
		       "keys: autocorrelation", "unknown key lists the section's keys");
	expect_problem(valid_with("", LOC, PAR, "top_percent = 5"),
		       "line 11: key 'top_percent' belongs in [parcels], not [model]", NULL,
		       "key in the wrong section");
	expect_problem("[study]\nbids = data\nout = r\n[localiser]\ntask = tones\n",
		       "line 4: unknown section [localiser]", "did you mean [localizer]",
		       "unknown section with suggestion");
	expect_problem(valid_with("", LOC, PAR, "[zzz]\nx = 1"), "line 11: unknown section [zzz]",
		       "sections:", "unknown section without suggestion");
	expect_problem(valid_with("", LOC, PAR, "[measure]\ntask = memory"),
		       "line 11: section [measure] needs a name", NULL, "measure without a name");
	expect_problem(valid_with("", LOC, PAR, "[measures memory]\ntask = memory"),
		       "line 11: unknown section [measures memory]", "did you mean [measure memory]",
		       "measure section typo");
	expect_problem(valid_with("", LOC, PAR, "[study]\nmask = m.nii"),
		       "line 11: section [study] repeated (first on line 1)", NULL, "repeated section");
	expect_problem(valid_with("", "task = tones\ntask = memory\ncontrast = a", PAR, ""),
		       "line 7: 'task' is set twice in [localizer] (first on line 6)", NULL,
		       "duplicate key");
	expect_problem("bids = data\n[study]\nout = r\n", "line 1: key 'bids' comes before any [section]",
		       NULL, "key outside a section");
	expect_problem(valid_with("", LOC, PAR, "drift cutoff = 100"),
		       "line 11: 'drift cutoff' is not a key name", NULL, "key with a space");
	expect_problem(valid_with("", LOC, PAR, "autocorrelation"),
		       "line 11: expected 'key = value' or '[section]'", NULL, "line without '='");
	expect_problem(valid_with("", LOC, PAR, "[model"), "line 11: section header '[model' has no closing",
		       NULL, "unclosed section header");
	expect_problem(valid_with("", "task = tones\ncontrast = \"a ;b\" - c", PAR, ""),
		       "line 7: ';' after a space inside quotes", NULL, "quoted ';' after a space");
	{
		char longline[600], text[5000];

		memset(longline, 'x', 300);
		longline[300] = '\0';
		snprintf(text, sizeof text, "%s", valid_with("", LOC, PAR, ""));
		strcat(text, "confounds = ");
		strcat(text, longline);
		strcat(text, "\n");
		expect_problem(text, "line 12: line is longer than", "indented", "line too long");
	}
}

static void test_required(void)
{
	study s;
	char *all;
	size_t n;

	CHECK(load("[study]\nmask =\n[localizer]\nsplit = odd-even\n[measure memory]\n", &s, &all, &n) ==
		      SR_ESTUDY,
	      "study without required keys is rejected");
	CHECK(strstr(all, "line 1: [study] needs 'bids'") != NULL, "bids required: %s", strstr(all, "needs 'bids'") ? "" : all);
	CHECK(strstr(all, "line 1: [study] needs 'out'") != NULL, "out required");
	CHECK(strstr(all, "line 3: [localizer] needs 'task'") != NULL, "task required");
	CHECK(strstr(all, "line 3: [localizer] needs 'contrast'") != NULL, "contrast required");
	CHECK(strstr(all, "no [parcels] section: it needs 'image'") != NULL, "parcels image required");
	CHECK(strstr(all, "line 5: [measure memory] needs 'task'") != NULL, "measure task required");
	CHECK(strstr(all, "line 5: [measure memory] needs 'effects'") != NULL,
	      "measure effects required");
	CHECK(n == 7, "all seven problems listed at once (%zu)", n);
	free(all);

	CHECK(load("", &s, &all, &n) == SR_ESTUDY && n == 5 && strstr(all, "no [study] section"),
	      "empty file: five required keys missing (%zu)", n);
	free(all);
	CHECK(load("; only a comment\n\n   # and another\n", &s, &all, &n) == SR_ESTUDY && n == 5,
	      "comments only: five required keys missing (%zu)", n);
	free(all);

	CHECK(load("[study]\nbids =\nout = r\n", &s, &all, &n) == SR_ESTUDY &&
		      strstr(all, "line 2: bids is empty") != NULL,
	      "empty required key names its line");
	free(all);
}

static void test_values(void)
{
	study s;
	char *all;
	size_t n;
	expect_problem(valid_with("", LOC, "image = parcels.nii.gz\ntop_percent = 0", ""),
		       "line 10: top_percent: '0' is not a percentage in (0, 100]", NULL, "top_percent 0");
	expect_problem(valid_with("", LOC, "image = parcels.nii.gz\ntop_percent = 100.5", ""),
		       "top_percent: '100.5'", NULL, "top_percent above 100");
	expect_problem(valid_with("", LOC, "image = parcels.nii.gz\ntop_percent = 1e1", ""),
		       "top_percent: '1e1'", "plain decimal", "top_percent with an exponent");
	expect_problem(valid_with("", LOC, "image = parcels.nii.gz\ntop_voxels = 2.5", ""),
		       "line 10: top_voxels: '2.5' is not a whole number", NULL, "top_voxels 2.5");
	expect_problem(valid_with("", LOC, "image = parcels.nii.gz\ntop_voxels = 0", ""),
		       "top_voxels: '0'", NULL, "top_voxels 0");
	expect_problem(valid_with("", LOC, "image = parcels.nii.gz\nmin_t = inf", ""),
		       "line 10: min_t: 'inf' is not a finite number", NULL, "min_t inf");
	expect_problem(valid_with("", LOC, "image = parcels.nii.gz\nmin_t = 1e999", ""),
		       "min_t: '1e999'", NULL, "min_t overflowing");
	expect_problem(valid_with("", LOC, "image = parcels.nii.gz\ntop_percent = 5\nmin_t = 3", ""),
		       "give only one of top_percent, top_voxels, min_t",
		       "top_percent (line 10), min_t (line 11)", "two selection keys");
	expect_problem(valid_with("", LOC, "image = parcels.nii.gz\nresample = linear", ""),
		       "resample: 'linear' is not one of no | nearest", NULL, "resample linear");
	expect_problem(valid_with("", LOC, PAR, "drift_cutoff = -10"),
		       "line 11: drift_cutoff: '-10' is not a positive number", NULL, "negative cutoff");
	expect_problem(valid_with("", LOC, PAR, "drift_cutoff = 0x80"), "drift_cutoff: '0x80'", NULL,
		       "hexadecimal cutoff");
	expect_problem(valid_with("", LOC, PAR, "volume_time = 1.5"),
		       "line 11: volume_time: '1.5' is not a number in [0, 1]", NULL,
		       "volume_time 1.5");
	expect_problem(valid_with("", LOC, PAR, "slice_reference = 0.5"),
		       "line 11: key 'slice_reference' is now called 'volume_time'", NULL,
		       "the old name slice_reference names the new key");
	expect_problem(valid_with("", LOC, PAR, "autocorrelation = ols"),
		       "line 11: autocorrelation: 'ols' is called 'none' here", NULL,
		       "the fit command's old word ols names none");
	expect_problem(valid_with("", LOC, PAR, "autocorrelation = ar2"),
		       "autocorrelation: 'ar2' is not one of ar1-adjusted | ar1 | none", "did you mean 'ar1'",
		       "autocorrelation ar2");
	expect_problem(valid_with("", "task = tones\ncontrast = a - b\nsplit = odd-evn", PAR, ""),
		       "line 8: split: 'odd-evn' is not one of", "did you mean 'odd-even'", "split typo");
	expect_problem(valid_with("", LOC, PAR, "motion = tx ty tz rx ry"),
		       "motion: expected six column names", "found 5", "five motion columns");
	expect_problem(valid_with("", LOC, PAR, "motion_units = mm_grad"), "motion_units: 'mm_grad'",
		       NULL, "motion units");
	expect_problem(valid_with("", LOC, PAR, "fd_threshold = 0"), "fd_threshold: '0'", NULL,
		       "fd_threshold 0");
	expect_problem(valid_with("space = T1w", LOC, PAR, ""),
		       "space: only used with derivatives", NULL, "space without derivatives");
	expect_problem(valid_with("mask = auto", LOC, PAR, ""),
		       "mask: auto takes each run's desc-brain_mask", NULL, "mask auto without derivatives");
	expect_problem(valid_with("derivatives = nowhere", LOC, PAR, ""),
		       "derivatives: 'nowhere'", "does not exist", "missing derivatives folder");
	expect_problem(valid_with("", LOC, PAR, "skip_volumes = 2.5"),
		       "skip_volumes: '2.5' is not a whole number", NULL, "skip_volumes 2.5");
	expect_problem(valid_with("", LOC, PAR, "censor_fd = -1"),
		       "censor_fd: '-1' is not a positive number", NULL, "censor_fd -1");
	expect_problem(valid_with("", LOC, PAR, "confounds = csf csf"),
		       "confounds: column 'csf' is listed twice", NULL, "confound twice");
	expect_problem(valid_with("subjects = 01 sub-x_y", LOC, PAR, ""),
		       "line 4: subjects: 'x_y' is not a subject label", NULL, "bad subject label");
	expect_problem(valid_with("subjects = 01 sub-01", LOC, PAR, ""),
		       "subjects: '01' is listed twice", NULL, "subject twice");
	expect_problem(valid_with("", "task = to-nes\ncontrast = a", PAR, ""),
		       "line 6: task: 'to-nes' is not a BIDS label", NULL, "bad task label");
	expect_problem(valid_with("", "task = tones\ncontrast = melody -", PAR, ""),
		       "line 7: contrast: position 9: expected a condition name", NULL,
		       "contrast syntax error with position");
	expect_problem(valid_with("", "task = tones\ncontrast = a\neffects = a, b *", PAR, ""),
		       "line 8: effects: position 6", NULL, "effects syntax error with position");
	expect_problem(valid_with("", LOC, PAR, "[measure memory]\ntask = tones\neffects = a"),
		       "line 12: task 'tones' is the localizer task", NULL, "measure on the localizer task");
	expect_problem(valid_with("", LOC, PAR,
				  "[measure m1]\ntask = memory\neffects = a\n[measure m2]\ntask = memory\neffects = b"),
		       "line 15: task 'memory' is already measured in [measure m1]", NULL,
		       "task measured twice");

	/* several problems, all listed, in line order */
	CHECK(load(valid_with("", "task = tones\ncontrast = a\nsplit = halves",
			      "image = parcels.nii.gz\ntop_percnt = 5\nmin_t = x", "drift_cutoff = -1"),
		   &s, &all, &n) == SR_ESTUDY,
	      "study with four problems rejected");
	CHECK(n == 4, "four problems listed (%zu): %s", n, n == 4 ? "" : all);
	{
		const char *a = strstr(all, "line 8:"), *b = strstr(all, "line 11:"),
			   *c = strstr(all, "line 12:"), *d = strstr(all, "line 14:");

		CHECK(a && b && c && d && a < b && b < c && c < d, "problems in line order");
	}
	free(all);
}

static void test_files(void)
{
	char text[1024];

	expect_problem("[study]\nbids = nodata\nout = r\n[localizer]\ntask = t\ncontrast = a\n"
		       "[parcels]\nimage = parcels.nii.gz\n",
		       "line 2: bids: 'nodata'", "does not exist", "missing bids folder");
	expect_problem(valid_with("", LOC, "image = missing.nii.gz", ""), "line 9: image: 'missing.nii.gz'",
		       "does not exist", "missing parcels image");
	expect_problem(valid_with("", LOC, "image = data", ""), "image: ", "is not a file",
		       "parcels image is a folder");
	expect_problem(valid_with("", LOC, "image = parcels.nii.gz\nnames = none.tsv", ""),
		       "line 10: names: 'none.tsv'", "does not exist", "missing names table");
	expect_problem(valid_with("mask = nomask.nii", LOC, PAR, ""), "line 4: mask: 'nomask.nii'",
		       "does not exist", "missing mask");
	snprintf(text, sizeof text, "[study]\nbids = %s/data\nout = %s/parcels.nii.gz\n", dir, dir);
	expect_problem(text, "line 3: out: ", "exists and is not a folder", "out is a file");
	{
		study s;
		study_problems p = { 0 };
		char path[400];

		snprintf(path, sizeof path, "%s/absent.ini", dir);
		CHECK(study_load(path, &s, &p) == SR_EIO && p.n == 1 && strstr(p.msg[0], path) &&
			      strstr(p.msg[0], "cannot open"),
		      "missing study file: %s", p.n ? p.msg[0] : "");
		study_problems_release(&p);
	}
}

int main(void)
{
	char path[400];
	const char *t = getenv("TMPDIR");

	snprintf(dir, sizeof dir, "%s/test_study.XXXXXX", t ? t : "/tmp");
	if (!mkdtemp(dir)) {
		perror("mkdtemp");
		return 2;
	}
	snprintf(ini, sizeof ini, "%s/study.ini", dir);
	snprintf(path, sizeof path, "%s/data", dir);
	mkdir(path, 0755);
	snprintf(path, sizeof path, "%s/parcels.nii.gz", dir);
	write_file(path, "x");
	snprintf(path, sizeof path, "%s/parcels.tsv", dir);
	write_file(path, "index\tname\n1\tA1\n");
	snprintf(path, sizeof path, "%s/mask.nii.gz", dir);
	write_file(path, "x");

	test_good();
	test_defaults();
	test_names();
	test_required();
	test_values();
	test_files();
	test_localizers();

	unlink(ini);
	snprintf(path, sizeof path, "%s/parcels.nii.gz", dir);
	unlink(path);
	snprintf(path, sizeof path, "%s/parcels.tsv", dir);
	unlink(path);
	snprintf(path, sizeof path, "%s/mask.nii.gz", dir);
	unlink(path);
	snprintf(path, sizeof path, "%s/data", dir);
	rmdir(path);
	rmdir(dir);
	return TEST_DONE();
}
