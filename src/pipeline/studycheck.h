/* studycheck.h - what check and analyze both validate before any fit, so that the two cannot drift. */
#ifndef SR_STUDYCHECK_H
#define SR_STUDYCHECK_H

#include <stddef.h>

#include "../io/study.h"

/*
 * The study's subjects: its `subjects` list or every sub-* folder under bids,
 * sorted. Each listed subject missing from bids is a problem naming the study
 * file's line; every one is added to probs (none is printed). An unreadable
 * bids folder and a study without subjects are problems too.
 * Returns 0 when probs gained nothing. Caller frees *out with bids_strings_free.
 */
int studycheck_subjects(const study *st, char ***out, size_t *n, study_problems *probs);

/*
 * The subjects of a --subjects value among the n in subs: labels separated by
 * commas or spaces, "sub-" optional, a repeated label counted once, in the
 * order given. Each label not among subs is a problem added to probs.
 * Returns 0 when all are known (then *out holds them; bids_strings_free), else 2.
 */
int studycheck_only(char *const *subs, size_t n, const char *only, char ***out, size_t *nout,
		    study_problems *probs);

/*
 * Every condition an effect names (the localizer's contrast and effects, each
 * measured task's effects) occurs in some subject's events of that task
 * (METHODS.md section 11), and every task has runs. Each miss is a problem.
 * Returns the number of problems added (1 when runs could not be listed).
 */
int studycheck_effects(const study *st, char **subs, size_t nsub, study_problems *probs);

#endif
