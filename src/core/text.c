/* text.c - edit distance for "did you mean" suggestions. */
#include "text.h"

#include <stdlib.h>
#include <string.h>

size_t text_distance(const char *a, const char *b)
{
	size_t na = strlen(a), nb = strlen(b), i, j;
	size_t *d, r;

	if (na > 256 || nb > 256)
		return (na > nb ? na : nb);
	d = malloc((na + 1) * (nb + 1) * sizeof *d);
	if (!d)
		return (na > nb ? na : nb);
#define D(i, j) d[(i) * (nb + 1) + (j)]
	for (i = 0; i <= na; i++)
		D(i, 0) = i;
	for (j = 0; j <= nb; j++)
		D(0, j) = j;
	for (i = 1; i <= na; i++) {
		for (j = 1; j <= nb; j++) {
			size_t cost = a[i - 1] != b[j - 1];
			size_t best = D(i - 1, j) + 1;

			if (D(i, j - 1) + 1 < best)
				best = D(i, j - 1) + 1;
			if (D(i - 1, j - 1) + cost < best)
				best = D(i - 1, j - 1) + cost;
			if (i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] &&
			    D(i - 2, j - 2) + 1 < best)
				best = D(i - 2, j - 2) + 1;
			D(i, j) = best;
		}
	}
	r = D(na, nb);
#undef D
	free(d);
	return r;
}

const char *text_nearest(const char *word, const char *const *cands, size_t n)
{
	size_t best = (size_t)-1, i, limit = strlen(word) / 3 + 1;
	const char *pick = NULL;

	if (limit < 2)
		limit = 2;
	for (i = 0; i < n; i++) {
		size_t dist = text_distance(word, cands[i]);

		if (strlen(word) >= 2 && strncmp(cands[i], word, strlen(word)) == 0)
			dist = dist < 1 ? dist : 1;
		if (dist < best) {
			best = dist;
			pick = cands[i];
		}
	}
	return best <= limit ? pick : NULL;
}
