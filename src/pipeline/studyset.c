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
#include "studycheck.h"

sr_status studyset_subjects(const study *st, char ***out, size_t *n, sr_err *e)
{
	/* one rule for every command: the list check and analyze validate (studycheck.c) */
	study_problems probs = { 0 };
	sr_status rc = SR_OK;

	if (studycheck_subjects(st, out, n, &probs)) {
		rc = sr_fail(e, SR_ESTUDY, "%s", probs.msg[0]);
		strv_free_array(*out, *n);
		*out = NULL;
		*n = 0;
	}
	study_problems_release(&probs);
	return rc;
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

