/* tabledict.c - JSON data dictionaries of the result tables (tabledict.h). */
#include "tabledict.h"

#include <stdio.h>
#include <string.h>

#include "../io/jdoc.h"

typedef struct coldoc {
	const char *name, *description, *units;   /* units NULL: text or a count without units */
} coldoc;

static const coldoc known[] = {
	{ "subject", "BIDS participant_id of the subject (sub-<label>); joins participants.tsv", NULL },
	{ "localizer", "the localizer (its [localizer NAME] section, or the localizer task of the unnamed form)", NULL },
	{ "parcel", "parcel name (from the parcels' names table; else the integer label)", NULL },
	{ "split", "how the localizer runs were split: odd-even:A, odd-even:B, odd-even:mean, leave-one-out:<run>, leave-one-out:mean, or all (fROI from all localizer runs, measured in another task)", NULL },
	{ "split_kind", "the kind of split: odd-even, leave-one-out or all", NULL },
	{ "part", "the part of the split: A, B, a run label (leave-one-out), mean (the cross-validated average of the parts), or all; one row per subject and effect: part is mean or all", NULL },
	{ "define_runs", "runs that defined the fROI, run labels joined by +; a mean row joins its parts with |", NULL },
	{ "measure_task", "task whose runs gave the value", NULL },
	{ "measure_runs", "runs that gave the value, joined by + (parts joined by |)", NULL },
	{ "effect", "condition or linear combination of conditions (the expression without spaces)", NULL },
	{ "value", "mean effect over the fROI's voxels (timecourses.csv: the FIR estimate of the fROI's mean response in that bin); empty when it cannot be estimated", "percent signal change" },
	{ "n_voxels", "responses: voxels in the fROI; reliability.csv: parcel voxels with a finite define t (a mean over parts for mean rows)", "voxels" },
	{ "n_candidates", "parcel voxels analyzable in every run used, from which the fROI was chosen", "voxels" },
	{ "test", "one-sample (against 0 across subjects), paired (difference of two effects), or welch (two-sample Welch t test between two levels)", NULL },
	{ "level", "level of the participants.tsv column the row's subjects share (group --by); for a welch row: A - B", NULL },
	{ "by", "the participants.tsv column the rows are grouped by", NULL },
	{ "n", "subjects with a finite value", NULL },
	{ "n_a", "subjects of the first level with a finite value (welch rows)", NULL },
	{ "n_b", "subjects of the second level with a finite value (welch rows)", NULL },
	{ "mean", "mean over subjects (welch rows: mean of the first level minus mean of the second)", "percent signal change" },
	{ "sd", "standard deviation over subjects (n - 1)", "percent signal change" },
	{ "sem", "standard error of the mean (welch rows: of the difference)", "percent signal change" },
	{ "t", "t statistic", NULL },
	{ "df", "degrees of freedom (welch rows: Welch-Satterthwaite)", NULL },
	{ "p", "two-sided p value", NULL },
	{ "cohen_d", "Cohen's d: mean / sd (welch rows: difference over the root mean of the two variances)", NULL },
	{ "q_fdr", "Benjamini-Hochberg adjusted p over the parcels of one split, task and effect", NULL },
	{ "mean_n_voxels", "mean fROI size over the subjects used", "voxels" },
	{ "note", "remarks: incomplete (a subject is missing), n < 2, no spread between subjects", NULL },
	{ "status", "used, missing, unreadable or excluded", NULL },
	{ "reason", "why a subject was not used", NULL },
	{ "column", "a column name of responses_wide.csv", NULL },
	{ "t_threshold", "the define t above which n_above counts a parcel voxel", NULL },
	{ "n_above", "parcel voxels whose define t exceeds t_threshold (a mean over parts for mean rows)", "voxels" },
	{ "froi_voxels", "voxels in the split's fROI (a mean over parts for mean rows)", "voxels" },
	{ "t_correlation", "Pearson correlation of two parts' define t over the parcel's voxels finite in both (mean rows: mean over pairs of parts)", NULL },
	{ "dice", "Dice overlap 2|A&B|/(|A|+|B|) of two parts' fROIs (mean rows: mean over pairs of parts)", NULL },
	{ "pairs", "pairs of parts the mean row averages", NULL },
	{ "measure", "which reliability value the row summarises: t_correlation, dice or n_above", NULL },
	{ "median", "median over subjects", NULL },
	{ "min", "smallest value over subjects", NULL },
	{ "max", "largest value over subjects", NULL },
	{ "condition", "the condition whose response the time course is", NULL },
	{ "time", "start of the time bin after the condition's onsets (bins of one TR)", "s" },
};

sr_status tabledict_write(const char *csv_path, const char *const *header, size_t n,
			  char *const *participant_cols, size_t np, sr_err *e)
{
	char path[4096];
	size_t len = strlen(csv_path), i, k;
	jdoc *d;
	sr_status rc;

	if (len < 4 || strcmp(csv_path + len - 4, ".csv") != 0 || len + 2 > sizeof path)
		return sr_fail(e, SR_EINVAL, "%s: not a .csv name for a data dictionary", csv_path);
	snprintf(path, sizeof path, "%.*s.json", (int)(len - 4), csv_path);
	d = jdoc_object();
	for (i = 0; i < n; i++) {
		jdoc *c = jdoc_object();
		int done = 0;

		for (k = 0; k < np && !done; k++)
			if (strcmp(header[i], participant_cols[k]) == 0) {
				jdoc_set_str(c, "Description", "column of participants.tsv (joined on participant_id; empty when the file or the subject's row is absent)");
				done = 1;
			}
		for (k = 0; k < sizeof known / sizeof known[0] && !done; k++)
			if (strcmp(header[i], known[k].name) == 0) {
				jdoc_set_str(c, "Description", known[k].description);
				if (known[k].units)
					jdoc_set_str(c, "Units", known[k].units);
				done = 1;
			}
		if (!done && strchr(header[i], '.')) {
			jdoc_set_str(c, "Description", "one subject's value of one parcel, task and effect (responses_wide_columns.csv says which)");
			jdoc_set_str(c, "Units", "percent signal change");
			done = 1;
		}
		if (!done)
			jdoc_set_str(c, "Description", "see README.md, Outputs");
		jdoc_set(d, header[i], c);
	}
	rc = jdoc_write(d, path, e);
	jdoc_free(d);
	return rc;
}
