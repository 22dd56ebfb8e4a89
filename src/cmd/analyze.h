/* analyze.h - pieces of `analyze` that other commands reuse (skip rule, combined table). */
#ifndef SR_ANALYZE_H
#define SR_ANALYZE_H

#include <stddef.h>

#include "../core/err.h"
#include "../io/study.h"

/*
 * The study's subjects: its `subjects` list (each must exist under bids) or every
 * sub-* folder, sorted. Caller frees with bids_strings_free.
 */
sr_status analyze_study_subjects(const study *st, char ***out, size_t *n, sr_err *e);

/* 1 when OUT/sub-<label>/ holds complete outputs made from inputs with the content they have now (fresh.h). */
int analyze_subject_complete(const study *st, const char *label);

/* Runs the group step on OUT for the study's subjects (those without a table are listed missing); group.c; 0 = ok.
 * shown: the folder its "wrote" line names (the tables are staged in OUT and moved there), or NULL for OUT.
 * participants: the study's participants.tsv path (it may be absent), or NULL. */
int analyze_group_step(const char *out, const char *shown, char *const *subs, size_t nsub,
		       const char *participants, int quiet);

#endif
