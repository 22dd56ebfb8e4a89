/* studycheck.c - what check and analyze both validate before any fit, so that the two cannot drift. */
#include "studycheck.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"
#include "../core/strv.h"
#include "../io/bids.h"
#include "../io/events.h"

static int has_label(char *const *v, size_t n, const char *s)
{
	size_t i;

	for (i = 0; i < n; i++)
		if (strcmp(v[i], s) == 0)
			return 1;
	return 0;
}

int studycheck_subjects(const study *st, char ***out, size_t *n, study_problems *probs)
{
	char **found = NULL, **pick = NULL;
	size_t nfound = 0, npick = 0, i, before = probs->n;
	sr_err e;

	*out = NULL;
	*n = 0;
	sr_err_init(&e, NULL, NULL);
	if (bids_subjects(st->bids, &found, &nfound, &e) != SR_OK) {
		study_problems_add(probs, NULL, 0, "%s", e.msg);
		return 1;
	}
	if (st->subjects) {
		pick = xcalloc(st->nsubjects ? st->nsubjects : 1, sizeof *pick);
		for (i = 0; i < st->nsubjects; i++) {
			if (!has_label(found, nfound, st->subjects[i]))
				study_problems_add(probs, st->path, study_line(st, "study", "subjects"),
						   "subject '%s' is not in %s", st->subjects[i], st->bids);
			else
				pick[npick++] = xstrdup(st->subjects[i]);
		}
		bids_strings_free(found, nfound);
	} else {
		pick = found;
		npick = nfound;
	}
	if (npick)
		qsort(pick, npick, sizeof *pick, strv_cmp);
	if (npick == 0 && probs->n == before)
		study_problems_add(probs, st->bids, 0, "no subjects (sub-* folders) found");
	*out = pick;
	*n = npick;
	return probs->n != before;
}

int studycheck_only(char *const *subs, size_t n, const char *only, char ***out, size_t *nout,
		    study_problems *probs)
{
	char *copy = xstrdup(only), *tok, *save = NULL;
	char **v = NULL, **bad = NULL;
	size_t k = 0, nbad = 0, before = probs->n;

	for (tok = strtok_r(copy, ", \t", &save); tok; tok = strtok_r(NULL, ", \t", &save)) {
		if (strncmp(tok, "sub-", 4) == 0)
			tok += 4;
		if (!*tok || has_label(v, k, tok) || has_label(bad, nbad, tok))
			continue;
		if (!has_label(subs, n, tok)) {
			bad = xrealloc(bad, (nbad + 1) * sizeof *bad);
			bad[nbad++] = xstrdup(tok);
			study_problems_add(probs, NULL, 0, "subject '%s' is not in the study (%zu subject%s%s%s%s)",
					   tok, n, n == 1 ? "" : "s", n ? ": " : "", n ? subs[0] : "",
					   n > 1 ? " ..." : "");
			continue;
		}
		v = xrealloc(v, (k + 1) * sizeof *v);
		v[k++] = xstrdup(tok);
	}
	free(copy);
	bids_strings_free(bad, nbad);
	if (probs->n != before) {
		bids_strings_free(v, k);
		return 2;
	}
	*out = v;
	*nout = k;
	return 0;
}

/* ---- conditions named in effects must exist for some subject (METHODS.md section 11) ---- */

static sr_status task_conditions(const study *st, char **subs, size_t nsub, const char *task,
				 char ***conds, size_t *ncond, size_t *nruns, sr_err *e)
{
	size_t s, cap = 0;

	*conds = NULL;
	*ncond = 0;
	*nruns = 0;
	for (s = 0; s < nsub; s++) {
		bids_run *runs;
		size_t nr, r;
		sr_status rc = study_runs(st, subs[s], task, &runs, &nr, e);

		if (rc)
			return rc;
		*nruns += nr;
		for (r = 0; r < nr; r++) {
			event_list ev;
			size_t k;

			if (!runs[r].events_exist)
				continue;   /* reported with the subject */
			if (events_read(runs[r].events, st->condition_column, &ev, NULL))
				continue;   /* likewise */
			for (k = 0; k < ev.n; k++) {
				if (has_label(*conds, *ncond, ev.ev[k].condition))
					continue;
				XGROW(*conds, *ncond, cap);
				(*conds)[(*ncond)++] = xstrdup(ev.ev[k].condition);
			}
			events_release(&ev);
		}
		bids_runs_release(runs, nr);
	}
	if (*ncond)
		qsort(*conds, *ncond, sizeof **conds, strv_cmp);
	return SR_OK;
}

static int check_effects(const study *st, const char *task, const expr *fx, size_t nfx,
			 char **conds, size_t ncond, study_problems *probs)
{
	size_t i, k, c, bad = 0;

	for (i = 0; i < nfx; i++)
		for (k = 0; k < fx[i].nterms; k++) {
			if (has_label(conds, ncond, fx[i].terms[k].name))
				continue;
			char known[1024];
			size_t used = 0;

			known[0] = '\0';
			for (c = 0; c < ncond && used < sizeof known; c++)
				used += (size_t)snprintf(known + used, sizeof known - used, "%s %s", c ? "," : "", conds[c]);
			study_problems_add(probs, st->path, 0,
					   "effect %s names condition '%s', which no subject has in task '%s'; known conditions:%s",
					   fx[i].text, fx[i].terms[k].name, task, ncond ? known : " none");
			bad++;
		}
	return (int)bad;
}

int studycheck_effects(const study *st, char **subs, size_t nsub, study_problems *probs)
{
	size_t t, ntasks = 1 + st->nmeasures;
	int bad = 0;

	for (t = 0; t < ntasks; t++) {
		const char *task = t ? st->measures[t - 1].task : st->loc_task;
		char **conds;
		size_t ncond, c, nruns;
		sr_err e;

		sr_err_init(&e, NULL, NULL);
		if (task_conditions(st, subs, nsub, task, &conds, &ncond, &nruns, &e)) {
			study_problems_add(probs, NULL, 0, "%s", e.msg);
			return 1;
		}
		if (nruns == 0) {
			study_problems_add(probs, st->path, 0,
					   "no subject has runs of task '%s' under %s (files named sub-<label>_task-%s_..._bold.nii[.gz])",
					   task, st->bids, task);
			bad++;
			continue;
		}
		if (t == 0) {
			bad += check_effects(st, task, &st->contrast, 1, conds, ncond, probs);
			bad += check_effects(st, task, st->loc_effects, st->nloc_effects, conds, ncond, probs);
		} else {
			bad += check_effects(st, task, st->measures[t - 1].effects,
					     st->measures[t - 1].neffects, conds, ncond, probs);
		}
		for (c = 0; c < ncond; c++)
			free(conds[c]);
		free(conds);
	}
	return bad;
}

