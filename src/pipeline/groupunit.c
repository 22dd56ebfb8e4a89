/* groupunit.c - the combined and group tables as one unit: staged, swapped in, with a completion record. */
#include "groupunit.h"

#include <dirent.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../core/mem.h"
#include "../io/afile.h"
#include "../io/fprint.h"
#include "../io/jdoc.h"
#include "outlock.h"
#include "studyset.h"
#include "../report/report.h"
#include "groupstat.h"
#include "reliability.h"
#include "subject.h"
#include "subunit.h"
#include "tabledict.h"
#include "timecourse.h"

/* Every table of the unit, in the order they are renamed into place. */
static const char *const tables[] = {
	"group.csv", "group_subjects.csv", "responses_wide.csv", "responses_wide_columns.csv",
	"group.json", "group_subjects.json", "responses_wide.json", "responses_wide_columns.json",
	"reliability_group.csv", "timecourses_group.csv", "reliability_group.json",
	"timecourses_group.json",
	"responses.json", "reliability.json", "timecourses.json",
	"responses.csv", "reliability.csv", "timecourses.csv",
};
/* the per-subject tables that the last 2 NSUB_TABLES of tables[] combine (with their
   dictionaries), and their columns; these are made without the group step too */
static const char *const sub_tables[] = { "responses.csv", "reliability.csv", "timecourses.csv" };
enum { NSUB_TABLES = sizeof sub_tables / sizeof sub_tables[0] };
enum { NTABLES = sizeof tables / sizeof tables[0], NGROUP_TABLES = NTABLES - 2 * NSUB_TABLES };

static void sub_columns(size_t k, const char *const **cols, size_t *n)
{
	*cols = k == 0 ? subject_columns : k == 1 ? reliability_columns : timecourse_columns;
	*n = k == 0 ? subject_ncolumns : k == 1 ? reliability_ncolumns : timecourse_ncolumns;
}

static int lookup(char **keys, char **vals, size_t n, const char *k, const char **v)
{
	size_t i;

	for (i = 0; i < n; i++)
		if (strcmp(keys[i], k) == 0) {
			*v = vals[i];
			return 1;
		}
	return 0;
}

static int print_of(const char *path, char *buf, size_t n)
{
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	return fprint_file(path, 1, buf, n, &e) == SR_OK;
}

/*
 * 1 when OUT/tables.json exists and matches what is there now: the same
 * subjects, each complete now exactly when it was (its run.json unchanged),
 * every table present with the recorded fingerprint, made with (group = 1)
 * or without the group step as asked.
 */
static int groupunit_current(const study *st, char *const *subs, size_t nsub, int group)
{
	char path[4096], fp[128], **k = NULL, **v = NULL;
	const char *want;
	size_t n = 0, i;
	int ok = 0;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	snprintf(path, sizeof path, "%s/%s", st->out, GROUPUNIT_RECORD);
	if (jdoc_read_strings(path, NULL, &k, &v, &n, &e))
		return 0;
	if (!lookup(k, v, n, "group", &want) || strcmp(want, group ? "yes" : "no") != 0)
		goto out;
	jdoc_strings_free(k, v, n);
	if (jdoc_read_strings(path, "subjects", &k, &v, &n, &e) || n != nsub)
		goto out;
	for (i = 0; i < nsub; i++) {
		int done = studyset_complete(st, subs[i]);

		if (!lookup(k, v, n, subs[i], &want))
			goto out;
		if (!done != (strcmp(want, "missing") == 0))
			goto out;
		snprintf(path, sizeof path, "%s/sub-%s/run.json", st->out, subs[i]);
		if (done && (!print_of(path, fp, sizeof fp) || strcmp(fp, want) != 0))
			goto out;
	}
	jdoc_strings_free(k, v, n);
	snprintf(path, sizeof path, "%s/%s", st->out, GROUPUNIT_RECORD);
	if (jdoc_read_strings(path, "tables", &k, &v, &n, &e))
		goto out;
	for (i = 0; i < NTABLES; i++) {
		if (!group && i < NGROUP_TABLES)
			continue;
		snprintf(path, sizeof path, "%s/%s", st->out, tables[i]);
		if (!lookup(k, v, n, tables[i], &want) || !print_of(path, fp, sizeof fp) ||
		    strcmp(fp, want) != 0)
			goto out;
	}
	ok = 1;
out:
	jdoc_strings_free(k, v, n);
	return ok;
}

/* Copies src to dst (a hard link when the file system allows: tables are replaced, never edited). */
static sr_status snapshot(const char *src, const char *dst, sr_err *e)
{
	FILE *in, *out;
	char buf[1 << 16];
	size_t got;

	if (link(src, dst) == 0)
		return SR_OK;
	in = fopen(src, "rb");
	if (!in)
		return sr_fail(e, SR_EIO, "%s: cannot read: %s", src, strerror(errno));
	out = fopen(dst, "wb");
	if (!out) {
		fclose(in);
		return sr_fail(e, SR_EIO, "%s: cannot create: %s", dst, strerror(errno));
	}
	while ((got = fread(buf, 1, sizeof buf, in)) > 0)
		if (fwrite(buf, 1, got, out) != got)
			break;
	if (ferror(in) || ferror(out) | (fclose(out) != 0)) {
		fclose(in);
		return sr_fail(e, SR_EIO, "%s: write failed: %s", dst, strerror(errno));
	}
	fclose(in);
	return SR_OK;
}

/* The combined table `name` (columns cols) from the snapshot's subject tables, in label order. */
static sr_status combine(const char *stage, const char *name, const char *const *cols,
			 size_t ncols, char *const *subs, const unsigned char *done, size_t nsub,
			 sr_err *e)
{
	afile a;
	size_t s;
	sr_status rc;
	char path[4096];
	int header_done = 0;

	snprintf(path, sizeof path, "%s/%s", stage, name);
	rc = afile_open(&a, path, e);
	if (rc)
		return rc;
	for (s = 0; s < nsub; s++) {
		FILE *f;
		char line[8192];
		int first = 1;

		if (!done[s])
			continue;
		snprintf(path, sizeof path, "%s/sub-%s/%s", stage, subs[s], name);
		f = fopen(path, "r");
		if (!f) {
			afile_abort(&a);
			return sr_fail(e, SR_EIO, "%s: cannot read: %s", path, strerror(errno));
		}
		while (fgets(line, sizeof line, f)) {
			size_t len = strlen(line);

			if (first && header_done) {
				first = line[len ? len - 1 : 0] != '\n';
				continue;
			}
			first = first && line[len ? len - 1 : 0] != '\n';
			header_done = 1;
			fputs(line, a.f);
		}
		if (ferror(f)) {
			fclose(f);
			afile_abort(&a);
			return sr_fail(e, SR_EIO, "%s: read error", path);
		}
		fclose(f);
	}
	if (!header_done) {
		size_t i;

		for (i = 0; i < ncols; i++)
			fprintf(a.f, "%s%s", i ? "," : "", cols[i]);
		fputc('\n', a.f);
	}
	rc = afile_commit(&a, e);
	if (!rc) {
		snprintf(path, sizeof path, "%s/%s", stage, name);
		rc = tabledict_write(path, cols, ncols, NULL, 0, e);
	}
	return rc;
}

/* The group stage on the staging folder for the study's subjects (those without a table are listed
 * missing, not passed over); its "wrote" line names the out folder the tables are moved to. */
static int group_step(const char *stage, const char *shown, char *const *subs, size_t nsub,
		      const char *participants, int quiet)
{
	groupstat_opts o = { 0 };

	o.out = stage;
	o.shown = shown;
	o.subjects = subs;
	o.nsubjects = nsub;
	o.participants = participants;
	o.alpha = 0.05;
	o.quiet = quiet;
	o.in_analyze = 1;
	return groupstat_run(&o);
}

/*
 * Redoes the unit: withdraws the record, snapshots the complete subjects'
 * tables into a staging folder OUT/.tables.tmp.PID, writes the combined table
 * from them and (group = 1) runs the group step on the same snapshot, so the
 * tables can never disagree; then renames them into OUT and writes the
 * record last. On failure the earlier tables stay as they were (without a
 * record, so that the next run redoes the unit). *ncomplete: subjects in the
 * combined table. Returns 0, or 1 with the reason printed on stderr.
 * The caller holds the group lock (outlock.h).
 */
static int groupunit_write(const study *st, char *const *subs, size_t nsub, int group, int quiet,
		    size_t *ncomplete)
{
	char stage[4096], path[4096], dst[4096], fp[128];
	unsigned char *done = xcalloc(nsub ? nsub : 1, 1);
	jdoc *rec = NULL, *js, *jt;
	size_t i;
	sr_err e;
	int rc = 1;

	sr_err_init(&e, NULL, NULL);
	*ncomplete = 0;
	snprintf(path, sizeof path, "%s/%s", st->out, GROUPUNIT_RECORD);
	if (remove(path) != 0 && errno != ENOENT) {
		fprintf(stderr, "splitroi analyze: %s: cannot withdraw the record: %s\n", path, strerror(errno));
		free(done);
		return 1;
	}
	snprintf(stage, sizeof stage, "%s/.tables.tmp.%ld", st->out, (long)getpid());
	subunit_remove_tree(stage);
	if (mkdir(stage, 0777) != 0) {
		fprintf(stderr, "splitroi analyze: %s: cannot create the staging folder: %s\n", stage,
			strerror(errno));
		free(done);
		return 1;
	}
	rec = jdoc_object();
	js = jdoc_object();
	jt = jdoc_object();
	jdoc_set_str(rec, "about", "completion record of the combined and group tables (splitroi analyze)");
	jdoc_set_str(rec, "group", group ? "yes" : "no");
	for (i = 0; i < nsub; i++) {
		done[i] = (unsigned char)studyset_complete(st, subs[i]);
		snprintf(path, sizeof path, "%s/sub-%s/run.json", st->out, subs[i]);
		if (done[i] && !print_of(path, fp, sizeof fp))
			done[i] = 0;
		if (done[i]) {
			snprintf(dst, sizeof dst, "%s/sub-%s", stage, subs[i]);
			if (mkdir(dst, 0777) != 0) {
				sr_fail(&e, SR_EIO, "%s: cannot create: %s", dst, strerror(errno));
				goto fail;
			}
			for (size_t k = 0; k < NSUB_TABLES; k++) {
				snprintf(path, sizeof path, "%s/sub-%s/%s", st->out, subs[i], sub_tables[k]);
				snprintf(dst, sizeof dst, "%s/sub-%s/%s", stage, subs[i], sub_tables[k]);
				if (snapshot(path, dst, &e))
					goto fail;
			}
			(*ncomplete)++;
		}
		jdoc_set_str(js, subs[i], done[i] ? fp : "missing");
	}
	for (i = 0; i < NSUB_TABLES; i++) {
		const char *const *cols;
		size_t ncols;

		sub_columns(i, &cols, &ncols);
		if (combine(stage, sub_tables[i], cols, ncols, subs, done, nsub, &e))
			goto fail;
	}
	snprintf(path, sizeof path, "%s/participants.tsv", st->bids);
	if (group && group_step(stage, st->out, subs, nsub, path, quiet)) {
		sr_fail(&e, SR_EIO, "the group step failed; the earlier tables are left as they were");
		goto fail;
	}
	/* swap in: every table is complete in the staging folder before the first rename */
	for (i = 0; i < NTABLES; i++) {
		snprintf(dst, sizeof dst, "%s/%s", st->out, tables[i]);
		if (!group && i < NGROUP_TABLES) {
			remove(dst);   /* group tables of other subjects' results would disagree */
			continue;
		}
		snprintf(path, sizeof path, "%s/%s", stage, tables[i]);
		if (rename(path, dst) != 0) {
			sr_fail(&e, SR_EIO, "%s: cannot rename into place: %s", dst, strerror(errno));
			goto fail;
		}
		if (!print_of(dst, fp, sizeof fp)) {
			sr_fail(&e, SR_EIO, "%s: cannot read back", dst);
			goto fail;
		}
		jdoc_set_str(jt, tables[i], fp);
	}
	jdoc_set(rec, "subjects", js);
	jdoc_set(rec, "tables", jt);
	js = jt = NULL;
	snprintf(path, sizeof path, "%s/%s", st->out, GROUPUNIT_RECORD);
	if (jdoc_write(rec, path, &e))
		goto fail;
	rc = 0;
	goto out;
fail:
	fprintf(stderr, "splitroi analyze: %s\n", e.msg);
out:
	jdoc_free(js);
	jdoc_free(jt);
	jdoc_free(rec);
	subunit_remove_tree(stage);
	free(done);
	return rc;
}

int groupunit_step(const study *st, char *const *subs, size_t nsub, int group, int redo,
		   int wait, int no_report, int quiet, size_t *ncomplete)
{
	outlock l;
	sr_err e;
	int rc = 0;
	size_t i;
	DIR *d;
	struct dirent *de;

	sr_err_init(&e, NULL, NULL);
	*ncomplete = 0;
	if (outlock_take(&l, st->out, "group", wait, "splitroi analyze", &e)) {
		fprintf(stderr, "splitroi analyze: %s\n", e.msg);
		return 1;
	}
	/* only this lock's holder makes temporary files in OUT (staging folders of subjects
	   aside) and in the subject folders (the report pages) */
	outlock_clean_stale(st->out, NULL, ".sub-");
	if ((d = opendir(st->out)) != NULL) {
		while ((de = readdir(d)) != NULL) {
			char p[4096];

			if (strncmp(de->d_name, "sub-", 4) != 0)
				continue;
			snprintf(p, sizeof p, "%s/%s", st->out, de->d_name);
			outlock_clean_stale(p, NULL, NULL);
		}
		closedir(d);
	}
	if (!redo && groupunit_current(st, subs, nsub, group)) {
		if (!quiet)
			fprintf(stderr, "splitroi analyze: every subject is up to date; tables left as they are\n");
		for (i = 0; i < nsub; i++)
			*ncomplete += (size_t)studyset_complete(st, subs[i]);
	} else if (groupunit_write(st, subs, nsub, group, quiet, ncomplete)) {
		rc = 1;
	}
	if (!no_report && report_write(st->out, quiet))
		rc = 1;
	outlock_release(&l);
	return rc;
}
