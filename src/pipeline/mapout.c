/* mapout.c - a subject's maps as BIDS Derivatives files (mapout.h). */
#include "mapout.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"
#include "../io/afile.h"
#include "../io/bidsname.h"
#include "../io/jdoc.h"
#include "../version.h"

/*
 * The file name (no folder) of a split's map: kind "tstat", "dseg" (ext
 * ".nii.gz", ".tsv" or ".json"). 0, or -1 when an entity value would not be
 * alphanumeric.
 */
static int mapout_name(const mapout_info *m, const char *kind, const char *ext, char *buf, size_t n)
{
	char desc[256];
	bids_entities b;

	bidsname_split(m->split, m->measure_task, desc, sizeof desc);
	if (m->localizer) {
		/* several localizers: desc-<localizer><split> keeps their maps apart */
		char one[256];

		bidsname_value(m->localizer, one, sizeof one);
		snprintf(one + strlen(one), sizeof one - strlen(one), "%s", desc);
		snprintf(desc, sizeof desc, "%s", one);
	}
	memset(&b, 0, sizeof b);
	b.sub = m->subject;
	b.task = m->task;
	b.space = m->space;
	b.res = m->res;
	b.desc = desc;
	return bidsname_make(&b, kind, ext, buf, n);
}

static sr_status path_of(const char *dir, const mapout_info *m, const char *kind, const char *ext,
			 char *path, size_t n, sr_err *e)
{
	char name[1024];

	if (mapout_name(m, kind, ext, name, sizeof name))
		return sr_fail(e, SR_EINVAL, "subject %s, split %s: no BIDS file name can be made (an entity value is not letters and digits)",
			       m->subject, m->split);
	if ((size_t)snprintf(path, n, "%s/func/%s", dir, name) >= n)
		return sr_fail(e, SR_EINVAL, "%s: the output folder name is too long", dir);
	return SR_OK;
}

/* The sidecar's common part: what the split is. */
static jdoc *split_sidecar(const mapout_info *m, const char *what)
{
	jdoc *d = jdoc_object();
	char kind[128], part[128];

	bidsname_split_parts(m->split, kind, sizeof kind, part, sizeof part);
	jdoc_set_str(d, "Description", what);
	jdoc_set_str(d, "Split", m->split);
	if (m->localizer)
		jdoc_set_str(d, "Localizer", m->localizer);
	jdoc_set_str(d, "SplitKind", kind);
	jdoc_set_str(d, "Part", part);
	jdoc_set_str(d, "LocalizerTask", m->task);
	jdoc_set_str(d, "Contrast", m->contrast);
	jdoc_set_str(d, "DefineRuns", m->define_runs);
	if (m->measure_runs && *m->measure_runs)
		jdoc_set_str(d, "MeasureRuns", m->measure_runs);
	if (m->measure_task && strcmp(kind, "all") == 0)
		jdoc_set_str(d, "MeasureTask", m->measure_task);
	return d;
}

static sr_status write_dseg_tsv(const char *path, int n, const int32_t *index, char *const *names,
				sr_err *e)
{
	afile a;
	sr_status rc = afile_open(&a, path, e);
	int p;

	if (rc)
		return rc;
	fprintf(a.f, "index\tname\n");
	for (p = 0; p < n; p++)
		fprintf(a.f, "%d\t%s\n", (int)index[p], names[p]);
	return afile_commit(&a, e);
}

sr_status mapout_split(const char *dir, const mapout_info *m, const nii_grid *g, size_t nvox,
		       const double *t, const int32_t *froi, int nparcels, const int32_t *index,
		       char *const *names, sr_err *e)
{
	char path[4096], desc[80];
	float *tf;
	size_t v;
	sr_status rc;
	jdoc *d;

	if ((rc = path_of(dir, m, "tstat", ".nii.gz", path, sizeof path, e)))
		return rc;
	tf = xmalloc_array(nvox ? nvox : 1, sizeof *tf);
	for (v = 0; v < nvox; v++)
		tf[v] = isfinite(t[v]) ? (float)t[v] : NAN;
	snprintf(desc, sizeof desc, "splitroi localizer t, df %g (fixed effects)", m->df);
	rc = nii_write_stat(path, g, tf, 1, 0.0, NII_INTENT_TTEST, m->df, desc, e);
	free(tf);
	if (rc)
		return rc;
	if ((rc = path_of(dir, m, "tstat", ".json", path, sizeof path, e)))
		return rc;
	d = split_sidecar(m, "Localizer t map of the define runs: fixed effects over runs of the selection contrast");
	jdoc_set_str(d, "Statistic", "t");
	jdoc_set_num(d, "DegreesOfFreedom", m->df);
	rc = jdoc_write(d, path, e);
	jdoc_free(d);
	if (rc)
		return rc;
	if ((rc = path_of(dir, m, "dseg", ".nii.gz", path, sizeof path, e)) ||
	    (rc = nii_write_labels(path, g, froi, "splitroi fROI labels (parcel index)", e)))
		return rc;
	if ((rc = path_of(dir, m, "dseg", ".tsv", path, sizeof path, e)) ||
	    (rc = write_dseg_tsv(path, nparcels, index, names, e)))
		return rc;
	if ((rc = path_of(dir, m, "dseg", ".json", path, sizeof path, e)))
		return rc;
	d = split_sidecar(m, "fROI label image: each voxel holds the index of the parcel whose fROI it belongs to (0: none); names in the _dseg.tsv beside it");
	jdoc_set_num(d, "DegreesOfFreedom", m->df);
	if (m->rule)
		jdoc_set_str(d, "SelectionRule", m->rule);
	rc = jdoc_write(d, path, e);
	jdoc_free(d);
	return rc;
}

sr_status mapout_boldref(const char *dir, const mapout_info *m, const char *ses, const char *run,
			 const char *bold, const nii_grid *g, const float *mean, sr_err *e)
{
	char name[1024], path[4096];
	bids_entities b;
	sr_status rc;
	jdoc *d;
	size_t k;

	memset(&b, 0, sizeof b);
	b.sub = m->subject;
	b.ses = ses;
	b.task = m->task;
	b.run = run;
	b.space = m->space;
	b.res = m->res;
	for (k = 0; k < 2; k++) {
		if (bidsname_make(&b, "boldref", k ? ".json" : ".nii.gz", name, sizeof name))
			return sr_fail(e, SR_EINVAL, "%s: no BIDS file name for the mean image of this run", bold);
		if ((size_t)snprintf(path, sizeof path, "%s/func/%s", dir, name) >= sizeof path)
			return sr_fail(e, SR_EINVAL, "%s: the output folder name is too long", dir);
		if (!k) {
			rc = nii_write_float(path, g, mean, 1, 0.0, "splitroi temporal mean, first localizer run", e);
		} else {
			d = jdoc_object();
			jdoc_set_str(d, "Description", "Temporal mean of the first localizer run (the report's background image)");
			jdoc_set_str(d, "Sources", bold);
			rc = jdoc_write(d, path, e);
			jdoc_free(d);
		}
		if (rc)
			return rc;
	}
	return SR_OK;
}

sr_status mapout_dataset_description(const char *out, const char *bids, const char *deriv,
				     int argc, char **argv, sr_err *e)
{
	jdoc *d = jdoc_object(), *gen = jdoc_array(), *g1 = jdoc_object(), *src = jdoc_array();
	char path[4096], *cmd;
	size_t len = 16;
	int i;
	sr_status rc;

	for (i = 0; i < argc; i++)
		len += strlen(argv[i]) + 1;
	cmd = xmalloc(len);
	strcpy(cmd, "splitroi");   /* argv[0] is the command's name */
	for (i = 0; i < argc; i++) {
		strcat(cmd, " ");
		strcat(cmd, argv[i]);
	}
	jdoc_set_str(d, "Name", "splitroi results");
	jdoc_set_str(d, "BIDSVersion", "1.9.0");
	jdoc_set_str(d, "DatasetType", "derivative");
	jdoc_set_str(g1, "Name", "splitroi");
	jdoc_set_str(g1, "Version", SPLITROI_VERSION);
	jdoc_set_str(g1, "Description", "subject-specific fROIs and split-half responses; research software, not for clinical or presurgical decisions");
	jdoc_set_str(g1, "CommandLine", cmd);
	jdoc_push(gen, g1);
	jdoc_set(d, "GeneratedBy", gen);
	{
		const char *roots[2] = { bids, deriv };

		for (i = 0; i < 2; i++) {
			jdoc *s;
			char *abs;

			if (!roots[i])
				continue;
			s = jdoc_object();
			abs = realpath(roots[i], NULL);
			snprintf(path, sizeof path, "file://%s", abs ? abs : roots[i]);
			free(abs);
			jdoc_set_str(s, "URL", path);
			jdoc_push(src, s);
		}
	}
	jdoc_set(d, "SourceDatasets", src);
	free(cmd);
	snprintf(path, sizeof path, "%s/dataset_description.json", out);
	rc = jdoc_write(d, path, e);
	jdoc_free(d);
	return rc;
}
