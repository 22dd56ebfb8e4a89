/* fresh.c - whether a subject's outputs are current: fingerprints of its inputs' content. */
#include "fresh.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"
#include "../io/bids.h"
#include "../io/fprint.h"

static void add(jdoc *o, const char *path)
{
	char fp[128];
	sr_err e;

	if (!path)
		return;
	sr_err_init(&e, NULL, NULL);
	jdoc_set_str(o, path, fprint_file(path, 0, fp, sizeof fp, &e) == SR_OK ? fp : "absent");
}

jdoc *fresh_record(const study *st, const char *label)
{
	jdoc *o = jdoc_object();
	/* the first localizer's task, the measured tasks, then the other localizers' tasks */
	size_t k, ntasks = 1 + st->nmeasures + (st->nlocs ? st->nlocs - 1 : 0);

	for (k = 0; k < (st->nlocs ? st->nlocs : 1); k++) {
		const char *pi = st->nlocs ? st->locs[k].parcels : st->parcels;
		const char *pn = st->nlocs ? st->locs[k].parcel_names : st->parcel_names;
		char *img = study_subject_path(pi, label);
		char *nm = study_subject_path(pn, label);

		add(o, img);
		add(o, nm);
		free(img);
		free(nm);
	}
	if (!st->mask_auto) {
		char *m = study_subject_path(st->mask, label);

		add(o, m);
		free(m);
	}
	for (k = 0; k < ntasks; k++) {
		const char *task = k == 0 ? st->loc_task : k <= st->nmeasures ? st->measures[k - 1].task :
				   st->locs[k - st->nmeasures].task;
		bids_run *runs;
		size_t nr, r;

		sr_err re;

		sr_err_init(&re, NULL, NULL);
		if (study_runs(st, label, task, &runs, &nr, &re)) {
			jdoc_free(o);
			return NULL;
		}
		for (r = 0; r < nr; r++) {
			char *conf = st->nconfounds ? bids_confounds_path(&runs[r], st->confounds_suffix) : NULL;

			add(o, runs[r].bold);
			add(o, runs[r].events);
			add(o, runs[r].sidecar);
			add(o, runs[r].deriv_sidecar);
			if (st->mask_auto)
				add(o, runs[r].brain_mask);
			add(o, conf);
			free(conf);
		}
		bids_runs_release(runs, nr);
	}
	return o;
}

int fresh_matches(const study *st, const char *label, const char *runjson)
{
	char **k = NULL, **v = NULL, **k2 = NULL, **v2 = NULL;
	size_t n = 0, n2 = 0, i, j;
	int ok = 0, have_text = 0;
	jdoc *now;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	if (jdoc_read_strings(runjson, NULL, &k, &v, &n, &e))
		return 0;
	for (i = 0; i < n; i++)
		if (strcmp(k[i], "study_text") == 0) {
			have_text = 1;
			if (!st->text || strcmp(v[i], st->text) != 0)
				goto out;
		}
	if (!have_text)
		goto out;
	jdoc_strings_free(k, v, n);
	k = v = NULL;
	n = 0;
	if (jdoc_read_strings(runjson, "fingerprints", &k, &v, &n, &e) || n == 0)
		goto out;
	now = fresh_record(st, label);
	if (!now)
		goto out;
	ok = jdoc_strings_of(now, &k2, &v2, &n2) == 0 && n2 == n;
	jdoc_free(now);
	for (i = 0; ok && i < n2; i++) {
		for (j = 0; j < n; j++)
			if (strcmp(k[j], k2[i]) == 0)
				break;
		if (j == n || strcmp(v[j], v2[i]) != 0)
			ok = 0;
	}
out:
	jdoc_strings_free(k, v, n);
	jdoc_strings_free(k2, v2, n2);
	return ok;
}
