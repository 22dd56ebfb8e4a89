/* test_text.c - edit distance (optimal string alignment) and nearest-name suggestions, cases worked by hand. */
#include <string.h>

#include "core/text.h"
#include "testlib.h"

static void dist(const char *a, const char *b, size_t want)
{
	size_t got = text_distance(a, b), back = text_distance(b, a);

	CHECK(got == want && back == want, "distance('%s', '%s') = %zu (got %zu, reversed %zu)", a, b,
	      want, got, back);
}

static void test_distance(void)
{
	/* worked by hand: count the fewest single-letter insertions, deletions, substitutions
	 * and swaps of two neighbours (each value also checked against a ten-line Python
	 * implementation of the optimal string alignment recurrence) */
	dist("", "", 0);
	dist("tones", "tones", 0);
	dist("", "abc", 3);                 /* three insertions */
	dist("tones", "tone", 1);           /* delete s */
	dist("tones", "tonex", 1);          /* substitute s -> x */
	dist("tones", "tnoes", 1);          /* swap o, n: one transposition */
	dist("melody", "meldoy", 1);        /* swap o, d */
	dist("kitten", "sitting", 3);       /* k->s, e->i, insert g (the textbook example) */
	dist("novel", "navel", 1);          /* o -> a */
	dist("familiar", "famliiar", 1);    /* swap i, l */
	dist("abc", "ca", 3);               /* OSA, not full Damerau: no edit of a swapped pair */
	/* delete s c r a, keep m, b -> e, keep l, e -> o, keep d, insert y: 4 + 2 + 1 */
	dist("scrambled", "melody", 7);
	dist("ab", "ba", 1);
	dist("abcd", "badc", 2);            /* two independent swaps */
}

static void test_nearest(void)
{
	static const char *const opts[] = { "mask", "out", "threshold", "smooth", "subjects",
					    "contrast" };
	static const char *const conds[] = { "melody", "scrambled", "familiar", "novel" };
	const char *got;

	got = text_nearest("treshold", opts, 6);
	CHECK(got && strcmp(got, "threshold") == 0, "'treshold' -> threshold (one deletion): %s",
	      got ? got : "(none)");
	got = text_nearest("smoth", opts, 6);
	CHECK(got && strcmp(got, "smooth") == 0, "'smoth' -> smooth: %s", got ? got : "(none)");
	got = text_nearest("constrast", opts, 6);
	CHECK(got && strcmp(got, "contrast") == 0, "'constrast' -> contrast (one extra s): %s",
	      got ? got : "(none)");
	got = text_nearest("sub", opts, 6);
	CHECK(got && strcmp(got, "subjects") == 0,
	      "'sub' -> subjects: a prefix counts as distance 1 though 5 letters are missing: %s",
	      got ? got : "(none)");
	got = text_nearest("mask", opts, 6);
	CHECK(got && strcmp(got, "mask") == 0, "an exact name is its own nearest");
	got = text_nearest("zzzz", opts, 6);
	CHECK(got == NULL, "nothing near 'zzzz': %s", got ? got : "(none)");
	got = text_nearest("s", opts, 6);
	CHECK(got == NULL, "'s' starts smooth and subjects, but one letter is no prefix match; "
			   "nearest by distance is 3 > limit 2 (%s)", got ? got : "(none)");

	/* the limit: max(1, len / 3) + 1. 'melo' (4 letters, limit 2) is a prefix of melody;
	 * 'mxlxdx' (6 letters, limit 3) is 3 substitutions from melody, 'mxxxdx' 4 */
	got = text_nearest("mxlxdx", conds, 4);
	CHECK(got && strcmp(got, "melody") == 0, "'mxlxdx' -> melody at distance 3 = limit for 6 letters: %s",
	      got ? got : "(none)");
	got = text_nearest("mxxxdx", conds, 4);
	CHECK(got == NULL, "'mxxxdx' at distance 4 > 3: no suggestion (%s)", got ? got : "(none)");
	got = text_nearest("nxvxl", conds, 4);
	CHECK(got && strcmp(got, "novel") == 0, "'nxvxl' -> novel at 2 = limit for 5 letters");
	got = text_nearest("nxxxl", conds, 4);
	CHECK(got == NULL, "'nxxxl' at 3 > 2: none (%s)", got ? got : "(none)");
	/* ties go to the first candidate: 'tonec' is 1 from both */
	static const char *const tie[] = { "tonea", "toneb" };
	got = text_nearest("tonec", tie, 2);
	CHECK(got == tie[0], "equal distances: the first candidate wins");
	CHECK(text_nearest("novel", conds, 0) == NULL, "no candidates: no suggestion");
}

int main(void)
{
	test_distance();
	test_nearest();
	return TEST_DONE();
}
