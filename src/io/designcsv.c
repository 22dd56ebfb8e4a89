/* designcsv.c - design matrices as CSV through csvout (one format for every caller). */
#include "designcsv.h"

#include <stdio.h>
#include <stdlib.h>

#include "../core/mem.h"
#include "csvout.h"

sr_status designcsv_write(const char *path, const design *d, const char *const *conds,
			  const char *const *confs, sr_err *e)
{
	const char **hdr;
	char **own;
	csvout c;
	sr_status rc;
	int j, k;

	if (d->p < 1 || d->T < 1 || d->ncond + d->nconf + d->ndrift + 1 != d->p)
		return sr_fail(e, SR_EDIM, "%s: design with %d columns does not add up (%d + %d + %d + 1)",
			       path, d->p, d->ncond, d->nconf, d->ndrift);
	hdr = xcalloc((size_t)d->p, sizeof *hdr);
	own = xcalloc((size_t)d->p, sizeof *own);
	for (j = 0; j < d->p; j++) {
		char buf[32];

		if (j < d->ncond) {
			hdr[j] = conds[j];
		} else if (j < d->ncond + d->nconf) {
			hdr[j] = confs[j - d->ncond];
		} else if (j < d->ncond + d->nconf + d->ndrift) {
			snprintf(buf, sizeof buf, "cos_%d", j - d->ncond - d->nconf + 1);
			hdr[j] = own[j] = xstrdup(buf);
		} else {
			hdr[j] = "baseline";
		}
	}
	rc = csvout_open(&c, path, hdr, (size_t)d->p, e);
	if (rc == SR_OK) {
		for (k = 0; k < d->T; k++) {
			for (j = 0; j < d->p; j++)
				csvout_num_exact(&c, d->X[(size_t)j * (size_t)d->T + (size_t)k]);
			csvout_endrow(&c);
		}
		rc = csvout_commit(&c, e);
	}
	for (j = 0; j < d->p; j++)
		free(own[j]);
	free(own);
	free(hdr);
	return rc;
}
