/* group.c - the `group` command: options, then the group stage (pipeline/groupstat.c). */
#include <stdlib.h>

#include "../core/mem.h"
#include "../pipeline/groupstat.h"
#include "cmd.h"
#include "cmdline.h"

enum { OPT_SUBJECTS, OPT_EXCLUDE, OPT_PAIRED, OPT_ALPHA, OPT_PARTICIPANTS, OPT_BY, OPT_QUIET, NOPT };

static const cmdline_opt group_opts[NOPT + 1] = {
	[OPT_SUBJECTS] = { "subjects", "LIST", "only these subjects (labels, with or without sub-, comma or space separated)" },
	[OPT_EXCLUDE] = { "exclude", "FILE", "TSV/CSV with columns subject and reason: subjects left out on purpose" },
	[OPT_PAIRED] = { "paired", "A:B[,C:D]", "also test the per-subject difference A - B of two effects of one task" },
	[OPT_ALPHA] = { "alpha", "Q", "FDR level that marks rows in the summary (default 0.05)" },
	[OPT_PARTICIPANTS] = { "participants", "FILE", "participants.tsv whose columns are joined by participant_id (default: the one at the root of the dataset named in OUT/dataset_description.json)" },
	[OPT_BY] = { "by", "COLUMN", "also the statistics per level of this participants.tsv column, and a Welch t test when it has two levels (OUT/group_by_COLUMN.csv)" },
	[OPT_QUIET] = { "quiet", NULL, "print no summary" },
	[NOPT] = { NULL, NULL, NULL }
};

static const cmdline_spec group_spec = {
	"group", "OUT [options]",
	"Reads OUT/sub-<label>/responses.csv of every subject and tests each parcel's\n"
	"cross-validated (odd-even:mean, leave-one-out:mean) and measured-task (all)\n"
	"values against 0 across subjects: one-sample t, two-sided p, Cohen's d and\n"
	"Benjamini-Hochberg q over the parcels of each split, task and effect.\n"
	"Writes OUT/group.csv, OUT/group_subjects.csv (who was used, missing or\n"
	"excluded), OUT/responses_wide.csv (one row per subject) and\n"
	"OUT/responses_wide_columns.csv (what each wide column holds), each with a\n"
	"JSON data dictionary beside it. The columns of participants.tsv are joined\n"
	"into group_subjects.csv and responses_wide.csv by participant_id. --by\n"
	"COLUMN adds OUT/group_by_COLUMN.csv: the tests per level of that column,\n"
	"and a two-sample Welch t test when it has exactly two levels. A subject\n"
	"whose table is missing or unreadable is left out and the group rows are\n"
	"marked incomplete; a table with bad content is an error. Research\n"
	"software: not for clinical or presurgical decisions.",
	group_opts
};

int cmd_group(int argc, char **argv)
{
	const char *val[NOPT], **pos = xmalloc_array((size_t)argc + 1, sizeof *pos);
	groupstat_opts o = { 0 };
	int npos, rc;

	o.alpha = 0.05;
	rc = cmdline_parse(&group_spec, argc, argv, val, pos, &npos);
	if (rc) {
		free(pos);
		return rc == 1 ? 0 : 2;
	}
	if (npos != 1) {
		if (npos)
			cmdline_error("group", "wants one OUT folder, got %d arguments", npos);
		else
			cmdline_error("group", "wants the OUT folder (see 'splitroi help group')");
		free(pos);
		return 2;
	}
	if (val[OPT_ALPHA] && (cmdline_double("group", "alpha", val[OPT_ALPHA], 0, 1, &o.alpha) != 0 ||
			       o.alpha <= 0.0 || o.alpha >= 1.0)) {
		if (o.alpha <= 0.0 || o.alpha >= 1.0)
			cmdline_error("group", "--alpha must lie strictly between 0 and 1");
		free(pos);
		return 2;
	}
	o.out = pos[0];
	o.subject_list = val[OPT_SUBJECTS];
	o.exclude = val[OPT_EXCLUDE];
	o.paired = val[OPT_PAIRED];
	o.participants = val[OPT_PARTICIPANTS];
	o.by = val[OPT_BY];
	o.quiet = val[OPT_QUIET] != NULL;
	rc = groupstat_run(&o);
	free(pos);
	return rc;
}
