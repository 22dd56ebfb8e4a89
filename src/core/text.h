/* text.h - small string helpers for messages: edit distance and nearest-word suggestions. */
#ifndef SR_TEXT_H
#define SR_TEXT_H

#include <stddef.h>

/* Optimal string alignment distance (Levenshtein with transpositions). */
size_t text_distance(const char *a, const char *b);

/*
 * The candidate nearest to word, or NULL when none is close enough to be a
 * plausible typo (distance at most max(1, strlen(word) / 3) + 1, or a prefix).
 */
const char *text_nearest(const char *word, const char *const *cands, size_t n);

#endif
