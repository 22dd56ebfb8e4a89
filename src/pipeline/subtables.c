/* subtables.c - reading one kind of per-subject table of every subject, for a group summary. */
#include "subtables.h"

#include <stdio.h>
#include <sys/stat.h>

sr_status subtables_each(const char *out, char *const *labels, size_t n, const char *name,
			 const char *summary, const char *hint, subtables_read_fn read, void *ctx,
			 int *none, sr_err *e)
{
	char path[4096 + 64];
	struct stat sb;
	size_t i, have = 0;
	sr_status rc = SR_OK;

	for (i = 0; i < n; i++) {
		snprintf(path, sizeof path, "%s/sub-%s/%s", out, labels[i], name);
		have += stat(path, &sb) == 0;
	}
	*none = have == 0;
	if (*none) {
		snprintf(path, sizeof path, "%s/%s.json", out, summary);
		remove(path);
		snprintf(path, sizeof path, "%s/%s.csv", out, summary);
		remove(path);
		return SR_OK;
	}
	for (i = 0; i < n && !rc; i++) {
		snprintf(path, sizeof path, "%s/sub-%s/%s", out, labels[i], name);
		if (stat(path, &sb) != 0) {
			sr_warnf(e, "sub-%s/%s: no such file; the subject is left out of %s.csv%s", labels[i],
				 name, summary, hint);
			continue;
		}
		rc = read(path, ctx, e);
	}
	return rc;
}
