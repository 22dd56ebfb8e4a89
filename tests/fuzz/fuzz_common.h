/* fuzz_common.h - shared by the afl++ harnesses in tests/fuzz/ (one reader each).
 *
 * Each harness reads the file named on its command line (afl's @@) through the
 * project's own readers, prints one line, "accepted ..." or "refused: MESSAGE",
 * and exits 0 either way: a refusal is the reader doing its job. What afl counts
 * as a finding is a crash, a sanitizer report, an abort() from a check below,
 * or a hang. A refusal whose message does not name the file is such an abort
 * (rules: every error names the file).
 */
#ifndef SR_FUZZ_COMMON_H
#define SR_FUZZ_COMMON_H

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/err.h"

/* Warnings are part of normal reading; they are dropped, not printed, to keep runs fast. */
static inline void fuzz_quiet(void *ctx, const char *msg)
{
	(void)ctx;
	(void)msg;
}

/* A refusal: the message must be set and name the file. Returns 0 (the exit status). */
static inline int fuzz_refused(const char *path, const sr_err *e)
{
	if (e->code == SR_OK || !e->msg[0] || !strstr(e->msg, path)) {
		fprintf(stderr, "fuzz: a refusal without a message naming %s: code %d, '%s'\n", path,
			(int)e->code, e->msg);
		abort();
	}
	printf("refused: %s\n", e->msg);
	return 0;
}

/* The usage check every harness starts with. */
static inline const char *fuzz_path(int argc, char **argv)
{
	if (argc != 2) {
		fprintf(stderr, "usage: %s FILE\n", argv[0]);
		exit(2);
	}
	return argv[1];
}

/*
 * Runs one(path) once, or under afl++'s persistent mode (its compilers define __AFL_LOOP)
 * many times in one process, afl rewriting the file between runs: tens of times faster
 * than a fork per input under ASan. one() must therefore free what it allocates.
 */
#ifdef __AFL_LOOP
#define FUZZ_MAIN(one, path)                 \
	do {                                 \
		while (__AFL_LOOP(10000))    \
			one(path);           \
		return 0;                    \
	} while (0)
#else
#define FUZZ_MAIN(one, path) return one(path)
#endif

#endif
