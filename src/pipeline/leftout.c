/* leftout.c - the voxels the rules of METHODS.md section 3 leave out: records, warnings, summary. */
#include "leftout.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"

void leftout_from_fit(leftout_run *r, const char *task, const char *run, const glm_out *o, size_t nvox)
{
	memset(r, 0, sizeof *r);
	snprintf(r->task, sizeof r->task, "%s", task);
	snprintf(r->run, sizeof r->run, "%s", run);
	r->nvox = nvox;
	memcpy(r->left_out, o->left_out, sizeof r->left_out);
	r->floor = o->floor;
}

jdoc *leftout_record(const glm_out *o)
{
	jdoc *rec = jdoc_object(), *lo = jdoc_object();
	int k;

	jdoc_set_num(rec, "reference_intensity", o->ref_intensity);
	jdoc_set_num(rec, "intensity_floor", o->floor);
	for (k = 0; k < GLM_OUT_NRULES; k++)
		jdoc_set_int(lo, glm_out_rule_names[k], (long long)o->left_out[k]);
	jdoc_set(rec, "left_out", lo);
	return rec;
}

void leftout_warn_parcels(const char *subject, const int32_t *labels, size_t nvox, int n,
			  const int32_t *index, char *const *name, const glm_out *const *outs,
			  size_t nout, const int32_t *pos, sr_err *e)
{
	size_t *tot = xcalloc((size_t)n + 1, sizeof *tot);
	size_t *lost = xcalloc(((size_t)n + 1) * GLM_OUT_NRULES, sizeof *lost);
	size_t v, r;
	int p, k;

	for (v = 0; v < nvox; v++) {
		int lo = 0, hi = n - 1, at = -1;

		if (labels[v] == 0)
			continue;
		while (lo <= hi) {
			int mid = lo + (hi - lo) / 2;

			if (index[mid] == labels[v]) {
				at = mid;
				break;
			}
			if (index[mid] < labels[v])
				lo = mid + 1;
			else
				hi = mid - 1;
		}
		if (at < 0 || (pos && pos[v] < 0))
			continue;
		tot[at]++;
		for (r = 0; r < nout; r++) {
			size_t w = pos ? (size_t)pos[v] : v;

			if (!outs[r]->ok[w]) {
				lost[(size_t)at * GLM_OUT_NRULES + outs[r]->rule[w]]++;
				break;
			}
		}
	}
	for (p = 0; p < n; p++) {
		size_t sum = 0, *l = lost + (size_t)p * GLM_OUT_NRULES;
		char why[512];
		size_t at = 0;

		for (k = 0; k < GLM_OUT_NRULES; k++)
			sum += l[k];
		if (tot[p] == 0 || 10 * sum <= tot[p])
			continue;
		why[0] = 0;
		for (k = 0; k < GLM_OUT_NRULES; k++)
			if (l[k] && at < sizeof why)
				at += (size_t)snprintf(why + at, sizeof why - at, "%s%s %zu", at ? ", " : "",
						       glm_out_rule_names[k], l[k]);
		sr_warnf(e, "subject %s, parcel %s: %zu of %zu voxels (%.1f%%) are not analyzable in at least one run (%s); they cannot be selected",
			 subject, name[p], sum, tot[p], 100.0 * (double)sum / (double)tot[p], why);
	}
	free(tot);
	free(lost);
}

void leftout_print(const char *const *subjects, const leftout_run *const *runs,
		   const size_t *nruns, size_t nsub)
{
	size_t s, r, any = 0;
	int k;

	for (s = 0; s < nsub; s++)
		any += nruns[s];
	if (!any)
		return;
	printf("\nvoxels left out per run (METHODS.md section 3; first rule failed):\n");
	printf("  %-12s %-12s %-6s %8s %8s %10s %10s %9s %10s\n", "subject", "task", "run", "voxels",
	       "mask", "nonfinite", "mean<=0", "constant", "floor");
	for (s = 0; s < nsub; s++)
		for (r = 0; r < nruns[s]; r++) {
			const leftout_run *x = &runs[s][r];

			printf("  sub-%-8s %-12s %-6s %8zu", subjects[s], x->task, x->run, x->nvox);
			for (k = 0; k < GLM_OUT_NRULES; k++)
				printf(" %*zu", k == GLM_OUT_MASK ? 8 : k == GLM_OUT_CONSTANT ? 9 : 10, x->left_out[k]);
			printf("\n");
		}
}
