/* test_bids.c - subjects, run discovery and order, labels, events and sidecar paths, TR inheritance. */
#include <math.h>
#include <string.h>

#include "core/strv.h"
#include "io/bids.h"
#include "testlib.h"
#include "tfiles.h"

static char *join(const char *a, const char *b)
{
	char *s = malloc(strlen(a) + strlen(b) + 2);

	sprintf(s, "%s/%s", a, b);
	return s;
}

static void touch(const char *root, const char *rel)
{
	free(tf_write(root, rel, "x", 0));
}

static void make_dataset(const char *root)
{
	char *bare;

	touch(root, "dataset_description.json");
	free(tf_write(root, "task-tones_bold.json", "{\"RepetitionTime\": 2.0, \"TaskName\": \"tones\"}", 0));
	/* sub-01: indexed runs out of order, two without index, another task that starts alike. */
	touch(root, "sub-01/func/sub-01_task-tones_run-10_bold.nii.gz");
	touch(root, "sub-01/func/sub-01_task-tones_run-2_bold.nii.gz");
	touch(root, "sub-01/func/sub-01_task-tones_run-01_bold.nii");
	touch(root, "sub-01/func/sub-01_task-tonesX_run-3_bold.nii");
	touch(root, "sub-01/func/sub-01_task-memory_run-1_bold.nii");
	touch(root, "sub-01/func/sub-01_task-tones_run-2_events.tsv");
	touch(root, "sub-01/func/sub-01_task-tones_run-2_sbref.nii.gz");
	free(tf_write(root, "sub-01/func/sub-01_task-tones_run-2_bold.json", "{\"RepetitionTime\": 1.5}", 0));
	free(tf_write(root, "sub-01/func/sub-01_task-tones_run-10_bold.json", "{\"TaskName\": \"tones\"}", 0));
	/* sub-02: sessions, subject- and session-level sidecars. */
	touch(root, "sub-02/ses-a/func/sub-02_ses-a_task-tones_run-2_bold.nii");
	touch(root, "sub-02/ses-b/func/sub-02_ses-b_task-tones_run-1_bold.nii");
	free(tf_write(root, "sub-02/sub-02_task-tones_bold.json", "{\"RepetitionTime\": 2.5}", 0));
	free(tf_write(root, "sub-02/ses-b/sub-02_ses-b_task-tones_bold.json", "{\"RepetitionTime\": 3}", 0));
	/* sub-10: run-1 in both sessions (labels would clash) and a misnamed file. */
	touch(root, "sub-10/ses-a/func/sub-10_ses-a_task-tones_run-1_bold.nii");
	touch(root, "sub-10/ses-b/func/sub-10_ses-b_task-tones_run-1_bold.nii");
	touch(root, "sub-10/ses-b/func/sub-10_ses-a_task-tones_run-3_bold.nii");
	/* sub-04: two files for one run (no index, told apart by acq-) */
	touch(root, "sub-04/func/sub-04_task-tones_bold.nii.gz");
	touch(root, "sub-04/func/sub-04_task-tones_acq-fast_bold.nii");
	/* sub-05: one run without an index; sub-06: one without and run-1 (labels clash) */
	touch(root, "sub-05/func/sub-05_task-tones_bold.nii.gz");
	touch(root, "sub-06/func/sub-06_task-tones_bold.nii.gz");
	touch(root, "sub-06/func/sub-06_task-tones_run-1_bold.nii.gz");
	/* sub-07: numbered sessions order by value (2 before 10) */
	touch(root, "sub-07/ses-10/func/sub-07_ses-10_task-tones_run-1_bold.nii");
	touch(root, "sub-07/ses-2/func/sub-07_ses-2_task-tones_run-2_bold.nii");
	touch(root, "sub-07/ses-2/func/sub-07_ses-2_task-tones_run-1_bold.nii");
	/* not subjects: a file and a bare prefix */
	touch(root, "sub-03");
	bare = join(root, "sub-");
	mkdir(bare, 0755);
	free(bare);
}

static void test_subjects(const char *root)
{
	char **s;
	size_t n;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	CHECK(bids_subjects(root, &s, &n, &e) == SR_OK, "subjects listed");
	CHECK(n == 7 && strcmp(s[0], "01") == 0 && strcmp(s[1], "02") == 0 && strcmp(s[6], "10") == 0,
	      "sub-01 .. sub-10 sorted, files and empty labels ignored (%zu)", n);
	strv_free_array(s, n);
	CHECK(bids_subjects("/nonexistent/dataset", &s, &n, &e) == SR_EIO &&
		      strstr(e.msg, "/nonexistent/dataset") && n == 0,
	      "missing dataset folder is an error naming it (%s)", e.msg);
}

static void test_runs(const char *root)
{
	tf_warnings w = { "", 0 };
	bids_run *r;
	size_t n;
	sr_err e;
	static const char *const order[] = {
		"sub-01_task-tones_run-01_bold.nii", "sub-01_task-tones_run-2_bold.nii.gz",
		"sub-01_task-tones_run-10_bold.nii.gz",
	};
	static const char *const labels[] = { "1", "2", "10" };
	static const int index[] = { 1, 2, 10 };

	sr_err_init(&e, tf_warn, &w);
	CHECK(bids_runs(root, "01", "tones", &r, &n, &e) == SR_OK, "sub-01 runs found (%s)", e.msg);
	CHECK(n == 3, "3 tones runs: task-tonesX and task-memory do not match (%zu)", n);
	for (size_t i = 0; i < n && i < 3; i++) {
		const char *b = strrchr(r[i].bold, '/') + 1;

		CHECK(strcmp(b, order[i]) == 0, "run %zu is %s (%s)", i + 1, order[i], b);
		CHECK(strcmp(r[i].label, labels[i]) == 0 && r[i].run_index == index[i],
		      "run %zu label %s, index %d (%s, %d)", i + 1, labels[i], index[i], r[i].label,
		      r[i].run_index);
		CHECK(strcmp(r[i].subject, "01") == 0 && r[i].session == NULL && strcmp(r[i].task, "tones") == 0,
		      "run %zu subject 01, no session, task tones", i + 1);
	}
	if (n == 3) {
		char *c = bids_confounds_path(&r[1], "_desc-confounds_timeseries.tsv");
		char *want = join(root, "sub-01/func/sub-01_task-tones_run-2_desc-confounds_timeseries.tsv");

		CHECK(r[1].events_exist && !r[0].events_exist, "events_exist only where the file is");
		CHECK(strcmp(strrchr(r[0].events, '/'), "/sub-01_task-tones_run-01_events.tsv") == 0,
		      "events path of a .nii run");
		CHECK(strcmp(strrchr(r[1].events, '/'), "/sub-01_task-tones_run-2_events.tsv") == 0,
		      "events path of a .nii.gz run");
		CHECK(r[1].sidecar && strcmp(strrchr(r[1].sidecar, '/'), "/sub-01_task-tones_run-2_bold.json") == 0 &&
			      r[0].sidecar == NULL,
		      "sidecar beside run-2 only");
		CHECK(strcmp(c, want) == 0, "confounds path (%s)", c);
		free(c);
		free(want);
	}
	bids_runs_release(r, n);

	CHECK(bids_runs(root, "02", "tones", &r, &n, &e) == SR_OK && n == 2, "sub-02: 2 runs across sessions");
	if (n == 2) {
		/* METHODS.md section 11: session, then run; labels <session>.<run> */
		CHECK(r[0].run_index == 2 && strcmp(r[0].session, "a") == 0 && strcmp(r[0].label, "a.2") == 0,
		      "ses-a run-2 first (%s)", r[0].label);
		CHECK(r[1].run_index == 1 && strcmp(r[1].session, "b") == 0 && strcmp(r[1].label, "b.1") == 0,
		      "ses-b run-1 second (%s)", r[1].label);
	}
	bids_runs_release(r, n);

	CHECK(bids_runs(root, "10", "tones", &r, &n, &e) == SR_OK && n == 2, "sub-10: 2 runs");
	if (n == 2) {
		CHECK(strcmp(r[0].session, "a") == 0 && strcmp(r[1].session, "b") == 0,
		      "equal index ordered by session");
		CHECK(strcmp(r[0].label, "a.1") == 0 && strcmp(r[1].label, "b.1") == 0,
		      "run-1 of two sessions are two runs, labelled by session (%s %s)", r[0].label, r[1].label);
	}
	CHECK(strstr(w.text, "position") == NULL, "no labelling by position");
	CHECK(strstr(w.text, "sub-10_ses-a_task-tones_run-3_bold.nii: its sub-/ses- entities do not match") != NULL,
	      "misplaced file ignored with a warning");
	bids_runs_release(r, n);

	CHECK(bids_runs(root, "04", "tones", &r, &n, &e) == SR_ESTUDY && n == 0 &&
		      strstr(e.msg, "sub-04_task-tones_bold.nii.gz") && strstr(e.msg, "sub-04_task-tones_acq-fast_bold.nii") &&
		      strstr(e.msg, "entity acq"),
	      "two files for one run is an error naming both and the entity (%s)", e.msg);
	CHECK(bids_runs(root, "05", "tones", &r, &n, &e) == SR_OK && n == 1 && r[0].run_index == -1 &&
		      strcmp(r[0].label, "1") == 0,
	      "a lone run without an index is run 1");
	bids_runs_release(r, n);
	CHECK(bids_runs(root, "06", "tones", &r, &n, &e) == SR_ESTUDY && strstr(e.msg, "sub-06_task-tones_bold.nii.gz") &&
		      strstr(e.msg, "sub-06_task-tones_run-1_bold.nii.gz"),
	      "a run without an index beside run-1 is an error, not a label by position (%s)", e.msg);
	CHECK(bids_runs(root, "07", "tones", &r, &n, &e) == SR_OK && n == 3, "sub-07: 3 runs");
	if (n == 3)
		CHECK(strcmp(r[0].label, "2.1") == 0 && strcmp(r[1].label, "2.2") == 0 && strcmp(r[2].label, "10.1") == 0,
		      "numbered sessions by value, then run (%s %s %s)", r[0].label, r[1].label, r[2].label);
	bids_runs_release(r, n);
	CHECK(bids_runs(root, "01", "rest", &r, &n, &e) == SR_OK && n == 0 && r == NULL,
	      "no runs of a task is not an error");
	CHECK(bids_runs(root, "99", "tones", &r, &n, &e) != SR_OK && strstr(e.msg, "sub-99"),
	      "missing subject folder is an error (%s)", e.msg);
}

static void test_tr(const char *root)
{
	bids_run *r;
	size_t n;
	sr_err e;
	double tr;

	sr_err_init(&e, NULL, NULL);
	if (bids_runs(root, "01", "tones", &r, &n, &e) != SR_OK || n != 3) {
		CHECK(0, "sub-01 runs for the TR tests");
		return;
	}
	CHECK(bids_run_tr(root, &r[0], 0, &tr, &e) == SR_OK && tr == 2.0,
	      "dataset-level task-tones_bold.json applies (%g)", tr);
	CHECK(bids_run_tr(root, &r[0], 2.0005, &tr, &e) == SR_OK && tr == 2.0,
	      "header within 1e-3 s agrees; sidecar value used");
	CHECK(bids_run_tr(root, &r[0], 2.5, &tr, &e) == SR_EFORMAT && strstr(e.msg, "RepetitionTime 2 s") &&
		      strstr(e.msg, "2.5 s") && strstr(e.msg, "task-tones_bold.json") &&
		      strstr(e.msg, "sub-01_task-tones_run-01_bold.nii"),
	      "disagreement names both values and both sources (%s)", e.msg);
	CHECK(isnan(tr), "no TR on error");
	CHECK(bids_run_tr(root, &r[1], 0, &tr, &e) == SR_OK && tr == 1.5,
	      "run-level sidecar overrides the dataset level (%g)", tr);
	CHECK(bids_run_tr(root, &r[1], 2.0, &tr, &e) == SR_EFORMAT &&
		      strstr(e.msg, "sub-01_task-tones_run-2_bold.json"),
	      "the closer sidecar is the one named (%s)", e.msg);
	CHECK(bids_run_tr(root, &r[2], 0, &tr, &e) == SR_OK && tr == 2.0,
	      "a run sidecar without the key does not hide the dataset level (%g)", tr);
	bids_runs_release(r, n);

	if (bids_runs(root, "02", "tones", &r, &n, &e) == SR_OK && n == 2) {
		CHECK(bids_run_tr(root, &r[1], 0, &tr, &e) == SR_OK && tr == 3,
		      "session level overrides subject level (%g)", tr);
		CHECK(bids_run_tr(root, &r[0], 0, &tr, &e) == SR_OK && tr == 2.5,
		      "subject level overrides dataset level (%g)", tr);
		bids_runs_release(r, n);
	}
}

static void test_tr_edge(const char *dir)
{
	char *root = join(dir, "ds2");
	bids_run *r;
	size_t n;
	sr_err e;
	double tr;

	sr_err_init(&e, NULL, NULL);
	touch(root, "sub-01/func/sub-01_task-tones_run-1_bold.nii");
	touch(root, "sub-01/func/sub-01_task-tones_run-2_bold.nii");
	touch(root, "sub-01/func/sub-01_task-tones_run-3_bold.nii");
	touch(root, "sub-01/func/sub-01_task-tones_run-4_bold.nii");
	touch(root, "sub-01/func/sub-01_task-tones_run-5_bold.nii");
	free(tf_write(root, "sub-01/func/sub-01_task-tones_run-2_bold.json",
		      "{\n  \"RepetitionTime\": 2,\n  oops\n}\n", 0));
	free(tf_write(root, "sub-01/func/sub-01_task-tones_run-3_bold.json", "{\"RepetitionTime\": \"2\"}", 0));
	free(tf_write(root, "sub-01/func/sub-01_task-tones_run-4_bold.json", "{\"RepetitionTime\": -2}", 0));
	free(tf_write(root, "sub-01/func/sub-01_task-tones_run-5_bold.json", "[2]", 0));
	if (bids_runs(root, "01", "tones", &r, &n, &e) != SR_OK || n != 5) {
		CHECK(0, "ds2 runs (%s)", e.msg);
		free(root);
		return;
	}
	CHECK(bids_run_tr(root, &r[0], 1.25, &tr, &e) == SR_OK && tr == 1.25, "header TR alone is used");
	CHECK(bids_run_tr(root, &r[0], 0, &tr, &e) == SR_EFORMAT && strstr(e.msg, "no repetition time"),
	      "neither source is an error (%s)", e.msg);
	CHECK(bids_run_tr(root, &r[0], NAN, &tr, &e) == SR_EFORMAT, "a NaN header TR counts as absent");
	CHECK(bids_run_tr(root, &r[1], 2, &tr, &e) == SR_EFORMAT &&
		      strstr(e.msg, "sub-01_task-tones_run-2_bold.json: line 3, column"),
	      "malformed JSON names file, line 3 and column (%s)", e.msg);
	CHECK(bids_run_tr(root, &r[2], 2, &tr, &e) == SR_EFORMAT && strstr(e.msg, "positive number"),
	      "RepetitionTime as text is an error (%s)", e.msg);
	CHECK(bids_run_tr(root, &r[3], 2, &tr, &e) == SR_EFORMAT && strstr(e.msg, "positive number"),
	      "negative RepetitionTime is an error");
	CHECK(bids_run_tr(root, &r[4], 2, &tr, &e) == SR_EFORMAT && strstr(e.msg, "JSON object"),
	      "a sidecar that is not an object is an error");
	bids_runs_release(r, n);

	/* One sidecar in func/ for all runs (fewer entities, same folder: BIDS inheritance). */
	free(tf_write(root, "sub-01/func/sub-01_task-tones_bold.json", "{\"RepetitionTime\": 0.8}", 0));
	if (bids_runs(root, "01", "tones", &r, &n, &e) == SR_OK && n == 5) {
		CHECK(bids_run_tr(root, &r[0], 0, &tr, &e) == SR_OK && tr == 0.8,
		      "func-level task sidecar applies to runs without their own (%g)", tr);
		bids_runs_release(r, n);
	}

	/* The same run stored twice would be counted twice. */
	touch(root, "sub-01/func/sub-01_task-tones_run-1_bold.nii.gz");
	CHECK(bids_runs(root, "01", "tones", &r, &n, &e) == SR_EFORMAT && strstr(e.msg, "both") && n == 0,
	      ".nii and .nii.gz of one run is an error (%s)", e.msg);
	{
		char *link = join(root, "sub-01/func/sub-01_task-rest_run-1_bold.nii.gz");

		CHECK(symlink("/nonexistent/annex/object", link) == 0, "dangling link made");
		CHECK(bids_runs(root, "01", "rest", &r, &n, &e) == SR_EIO && strstr(e.msg, "task-rest_run-1_bold.nii.gz"),
		      "a run that cannot be read is an error, not a silently missing run (%s)", e.msg);
		free(link);
	}
	touch(root, "sub-01/func/sub-01_task-memory_run-x_bold.nii");
	CHECK(bids_runs(root, "01", "memory", &r, &n, &e) == SR_EFORMAT && strstr(e.msg, "run-x"),
	      "a run entity that is not a number is an error (%s)", e.msg);
	free(root);
}

static void test_hostile(const char *dir)
{
	char *root = join(dir, "ds3"), *p;
	char **s;
	size_t n;
	bids_run *r;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	touch(root, "sub-01/func/sub-01_task-tones_run-1_bold.nii");
	touch(root, "sub-a b/func/x");
	CHECK(bids_subjects(root, &s, &n, &e) == SR_EFORMAT && strstr(e.msg, "sub-a b") && n == 0,
	      "a subject folder whose label is not alphanumeric is an error naming it (%s)", e.msg);
	p = join(root, "sub-01/func/sub-01_task-tones_run-2_bold.nii");
	CHECK(mkfifo(p, 0644) == 0, "fifo made");
	CHECK(bids_runs(root, "01", "tones", &r, &n, &e) == SR_EIO && strstr(e.msg, "run-2_bold.nii") &&
		      strstr(e.msg, "not a regular file"),
	      "a BOLD entry that is not a regular file is an error, not a dropped run (%s)", e.msg);
	unlink(p);
	CHECK(symlink("sub-01_task-tones_run-2_bold.nii", p) == 0, "link loop made");
	CHECK(bids_runs(root, "01", "tones", &r, &n, &e) == SR_EIO && strstr(e.msg, "run-2_bold.nii"),
	      "a link loop is an error (%s)", e.msg);
	free(p);
	free(root);
}

/* A raw dataset and a derivatives dataset beside it (INTERFACE.md, "Runs"). */
static void test_deriv(const char *dir)
{
	char *raw = join(dir, "raw"), *der = join(dir, "raw/derivatives/prep");
	bids_src src = { raw, der, NULL, NULL, NULL };
	bids_run *r;
	size_t n;
	sr_err e;
	double tr;
	static const char *const spaces[] = { "MNI152NLin2009cAsym", "T1w" };

	sr_err_init(&e, NULL, NULL);
	free(tf_write(raw, "task-tones_bold.json", "{\"RepetitionTime\": 2.0}", 0));
	touch(raw, "task-tones_events.tsv");
	touch(raw, "sub-01/ses-1/func/sub-01_ses-1_task-tones_run-1_bold.nii.gz");
	touch(raw, "sub-01/ses-1/func/sub-01_ses-1_task-tones_run-1_events.tsv");
	touch(raw, "sub-01/ses-2/func/sub-01_ses-2_task-tones_run-1_bold.nii.gz");
	for (int s = 1; s <= 2; s++)
		for (int k = 0; k < 2; k++) {
			char rel[256];

			snprintf(rel, sizeof rel, "sub-01/ses-%d/func/sub-01_ses-%d_task-tones_run-1_space-%s_desc-preproc_bold.nii.gz",
				 s, s, spaces[k]);
			touch(der, rel);
			snprintf(rel, sizeof rel, "sub-01/ses-%d/func/sub-01_ses-%d_task-tones_run-1_space-%s_desc-brain_mask.nii.gz",
				 s, s, spaces[k]);
			touch(der, rel);
			snprintf(rel, sizeof rel, "sub-01/ses-%d/func/sub-01_ses-%d_task-tones_run-1_space-%s_desc-smooth_bold.nii.gz",
				 s, s, spaces[k]);
			touch(der, rel);
		}
	free(tf_write(der, "sub-01/ses-2/func/sub-01_ses-2_task-tones_run-1_space-T1w_desc-preproc_bold.json",
		      "{\"RepetitionTime\": 2.5}", 0));
	CHECK(bids_find_runs(&src, "01", "tones", &r, &n, &e) == SR_ESTUDY && strstr(e.msg, "several spaces") &&
		      strstr(e.msg, "MNI152NLin2009cAsym, T1w"),
	      "two spaces and no space key: an error listing both (%s)", e.msg);
	src.space = "MNI152NLin6Asym";
	CHECK(bids_find_runs(&src, "01", "tones", &r, &n, &e) == SR_ESTUDY && strstr(e.msg, "MNI152NLin6Asym") &&
		      strstr(e.msg, "spaces present: MNI152NLin2009cAsym, T1w"),
	      "a space not present: an error listing the spaces present (%s)", e.msg);
	src.space = "MNI152NLin2009cAsym";
	CHECK(bids_find_runs(&src, "01", "tones", &r, &n, &e) == SR_OK && n == 2, "two runs in the chosen space (%s)", e.msg);
	if (n == 2) {
		CHECK(strstr(r[0].bold, "derivatives/prep/sub-01/ses-1/func/sub-01_ses-1_task-tones_run-1_space-MNI152NLin2009cAsym_desc-preproc_bold.nii.gz") &&
			      strstr(r[1].bold, "ses-2_task-tones_run-1_space-MNI152NLin2009cAsym_desc-preproc"),
		      "the derivative BOLD of the chosen space and desc (%s)", r[0].bold);
		CHECK(strcmp(r[0].label, "1.1") == 0 && strcmp(r[1].label, "2.1") == 0, "labels carry the session");
		CHECK(r[0].events_exist && strstr(r[0].events, "raw/sub-01/ses-1/func/sub-01_ses-1_task-tones_run-1_events.tsv"),
		      "events of the raw run (%s)", r[0].events);
		CHECK(r[1].events_exist && strcmp(strrchr(r[1].events, '/'), "/task-tones_events.tsv") == 0,
		      "events inherited from the dataset level (%s)", r[1].events);
		CHECK(strstr(r[0].confounds, "prep/sub-01/ses-1/func/sub-01_ses-1_task-tones_run-1_desc-confounds_timeseries.tsv") != NULL,
		      "confounds by entities (%s)", r[0].confounds);
		CHECK(r[0].brain_mask && strstr(r[0].brain_mask, "run-1_space-MNI152NLin2009cAsym_desc-brain_mask.nii.gz"),
		      "the run's brain mask");
		CHECK(bids_run_tr(raw, &r[0], 2.0, &tr, &e) == SR_OK && tr == 2.0, "TR from the raw sidecar (%s)", e.msg);
	}
	bids_runs_release(r, n);
	src.space = "T1w";
	CHECK(bids_find_runs(&src, "01", "tones", &r, &n, &e) == SR_OK && n == 2, "T1w runs");
	if (n == 2)
		CHECK(bids_run_tr(raw, &r[1], 2.5, &tr, &e) == SR_EFORMAT && strstr(e.msg, "T1w_desc-preproc_bold.json") &&
			      strstr(e.msg, "task-tones_bold.json"),
		      "derivative and raw sidecar disagreeing on the TR: an error naming both (%s)", e.msg);
	bids_runs_release(r, n);
	src.desc = "smooth";
	CHECK(bids_find_runs(&src, "01", "tones", &r, &n, &e) == SR_OK && n == 2 && strstr(r[0].bold, "desc-smooth"),
	      "desc chooses the image");
	bids_runs_release(r, n);
	src.desc = NULL;
	touch(der, "sub-01/ses-1/func/sub-01_ses-1_task-tones_run-1_space-T1w_res-2_desc-preproc_bold.nii.gz");
	CHECK(bids_find_runs(&src, "01", "tones", &r, &n, &e) == SR_ESTUDY && strstr(e.msg, "two files for one run") &&
		      strstr(e.msg, "run-1_space-T1w_desc-preproc_bold.nii.gz") && strstr(e.msg, "run-1_space-T1w_res-2_desc-preproc_bold.nii.gz") &&
		      strstr(e.msg, "entity res"),
	      "two images of one run after the filters: an error naming both and the entity (%s)", e.msg);
	src.res = "2";
	CHECK(bids_find_runs(&src, "01", "tones", &r, &n, &e) == SR_OK && n == 1, "res narrows it");
	bids_runs_release(r, n);
	free(raw);
	free(der);
}

int main(void)
{
	char *dir = tf_tmpdir();
	char *root = join(dir, "ds");

	make_dataset(root);
	test_subjects(root);
	test_runs(root);
	test_tr(root);
	test_tr_edge(dir);
	test_hostile(dir);
	test_deriv(dir);
	tf_rmtree(dir);
	free(root);
	free(dir);
	return TEST_DONE();
}
