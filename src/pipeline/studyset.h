/* studyset.h - which subjects a study has, and which of them have complete, current outputs. */
#ifndef SR_STUDYSET_H
#define SR_STUDYSET_H

#include <stddef.h>

#include "../core/err.h"
#include "../io/study.h"

/*
 * The study's subjects: its `subjects` list (each must exist under bids) or every
 * sub-* folder, sorted, as studycheck_subjects finds them; its first problem
 * (a listed subject missing, no subjects at all) is the error. Caller frees
 * with strv_free_array.
 */
sr_status studyset_subjects(const study *st, char ***out, size_t *n, sr_err *e);

/* 1 when OUT/sub-<label>/ holds complete outputs made from inputs with the content they have now (fresh.h). */
int studyset_complete(const study *st, const char *label);

#endif
