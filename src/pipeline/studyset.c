/* studyset.c - which subjects a study has, and which of them have complete, current outputs. */
#include "studyset.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "../core/mem.h"
#include "../core/strv.h"
#include "../io/bids.h"
#include "fresh.h"

static int has_label(char **v, size_t n, const char *s)
{
	size_t i;

	for (i = 0; i < n; i++)
		if (strcmp(v[i], s) == 0)
			return 1;
	return 0;
}

sr_status studyset_subjects(const study *st, char ***out, size_t *n, sr_err *e)
{
	char **found;
	size_t nfound, i;
	sr_status rc;

	rc = bids_subjects(st->bids, &found, &nfound, e);
	if (rc)
		return rc;
	if (!st->subjects) {
		*out = found;
		*n = nfound;
		return SR_OK;
	}
	for (i = 0; i < st->nsubjects; i++)
		if (!has_label(found, nfound, st->subjects[i])) {
			sr_fail(e, SR_ESTUDY, "%s: subject '%s' is not in %s", st->path, st->subjects[i],
				st->bids);
			bids_strings_free(found, nfound);
			return SR_ESTUDY;
		}
	bids_strings_free(found, nfound);
	*out = xcalloc(st->nsubjects ? st->nsubjects : 1, sizeof **out);
	for (i = 0; i < st->nsubjects; i++)
		(*out)[i] = xstrdup(st->subjects[i]);
	*n = st->nsubjects;
	qsort(*out, *n, sizeof **out, strv_cmp);
	return SR_OK;
}

int studyset_complete(const study *st, const char *label)
{
	char path[4096];
	struct stat sb;

	snprintf(path, sizeof path, "%s/sub-%s/responses.csv", st->out, label);
	if (stat(path, &sb) != 0)
		return 0;
	snprintf(path, sizeof path, "%s/sub-%s/reliability.csv", st->out, label);
	if (stat(path, &sb) != 0)
		return 0;
	snprintf(path, sizeof path, "%s/sub-%s/timecourses.csv", st->out, label);
	if (stat(path, &sb) != 0)
		return 0;
	snprintf(path, sizeof path, "%s/sub-%s/run.json", st->out, label);
	return fresh_matches(st, label, path);
}

