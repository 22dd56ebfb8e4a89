/* report.c - `splitroi report`: rewrites a results folder's HTML report (src/report/ renders it). */
#include <stdlib.h>
#include <sys/stat.h>

#include "../core/mem.h"
#include "../report/report.h"
#include "cmd.h"
#include "cmdline.h"

enum { O_QUIET, O_N };

static const cmdline_opt opts[O_N + 1] = {
	[O_QUIET] = { "quiet", NULL, "no summary line" },
	[O_N] = { NULL, NULL, NULL },
};

static const cmdline_spec spec = {
	"report", "OUT [options]",
	"Writes OUT/report.html, one self-contained page (images embedded, no network\n"
	"access) with the study's cross-validated responses per parcel and effect, the\n"
	"measured tasks, fROI sizes and the overlap of the localizer's halves per\n"
	"subject, and the group table; and OUT/sub-<label>/report.html per subject with\n"
	"slices through each fROI, the localizer t maps, the design matrices and the\n"
	"framewise displacement of every run. OUT is a folder written by 'analyze'.",
	opts,
};

int cmd_report(int argc, char **argv)
{
	const char *val[O_N], **pos = xcalloc((size_t)argc + 1, sizeof *pos);
	int npos, rc;
	struct stat sb;

	rc = cmdline_parse(&spec, argc, argv, val, pos, &npos);
	if (rc) {
		free(pos);
		return rc == 1 ? 0 : 2;
	}
	if (npos != 1) {
		cmdline_error("report", npos ? "give one results folder" : "which results? usage: splitroi report OUT");
		free(pos);
		return 2;
	}
	if (stat(pos[0], &sb) != 0 || !S_ISDIR(sb.st_mode)) {
		cmdline_error("report", "%s: not a folder", pos[0]);
		free(pos);
		return 1;
	}
	rc = report_write(pos[0], val[O_QUIET] != NULL);
	free(pos);
	return rc;
}
