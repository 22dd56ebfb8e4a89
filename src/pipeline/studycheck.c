/* studycheck.c - what check and analyze both validate before any fit, so that the two cannot drift. */
#include "studycheck.h"

#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"
#include "../io/bids.h"

static int has_label(char *const *v, size_t n, const char *s)
{
	size_t i;

	for (i = 0; i < n; i++)
		if (strcmp(v[i], s) == 0)
			return 1;
	return 0;
}

static int cmp_str(const void *a, const void *b)
{
	return strcmp(*(char *const *)a, *(char *const *)b);
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
		qsort(pick, npick, sizeof *pick, cmp_str);
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
	char **v = NULL;
	size_t k = 0, before = probs->n;

	for (tok = strtok_r(copy, ", \t", &save); tok; tok = strtok_r(NULL, ", \t", &save)) {
		if (strncmp(tok, "sub-", 4) == 0)
			tok += 4;
		if (!*tok || has_label(v, k, tok))
			continue;
		if (!has_label(subs, n, tok)) {
			study_problems_add(probs, NULL, 0, "subject '%s' is not in the study (%zu subject%s%s%s%s)",
					   tok, n, n == 1 ? "" : "s", n ? ": " : "", n ? subs[0] : "",
					   n > 1 ? " ..." : "");
			continue;
		}
		v = xrealloc(v, (k + 1) * sizeof *v);
		v[k++] = xstrdup(tok);
	}
	free(copy);
	if (probs->n != before) {
		bids_strings_free(v, k);
		return 2;
	}
	*out = v;
	*nout = k;
	return 0;
}
