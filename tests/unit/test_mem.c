/* test_mem.c - overflow-checked sizes and the allocation wrappers; the out-of-memory exit runs in a child. */
#include <stdint.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

#include "core/mem.h"
#include "testlib.h"

static void test_mul(void)
{
	size_t out = 77;

	CHECK(sr_mul_size(6, 7, &out) == 0 && out == 42, "6 * 7 = 42 (got %zu)", out);
	CHECK(sr_mul_size(0, SIZE_MAX, &out) == 0 && out == 0, "0 * SIZE_MAX = 0, no overflow");
	CHECK(sr_mul_size(SIZE_MAX, 0, &out) == 0 && out == 0, "SIZE_MAX * 0 = 0, no overflow");
	CHECK(sr_mul_size(SIZE_MAX, 1, &out) == 0 && out == SIZE_MAX, "SIZE_MAX * 1 fits");
	CHECK(sr_mul_size(1, SIZE_MAX, &out) == 0 && out == SIZE_MAX, "1 * SIZE_MAX fits");
	out = 77;
	CHECK(sr_mul_size(SIZE_MAX, 2, &out) == -1, "SIZE_MAX * 2 overflows");
	CHECK(out == 77, "and leaves the output alone on overflow");
	/* SIZE_MAX = 2^64 - 1 = 3 * 5 * 17 * 257 * 641 * 65537 * 6700417: (SIZE_MAX / 3) * 3 is
	 * exactly SIZE_MAX, one more than SIZE_MAX / 3 overflows */
	CHECK(sr_mul_size(SIZE_MAX / 3, 3, &out) == 0 && out == SIZE_MAX,
	      "(SIZE_MAX / 3) * 3 = SIZE_MAX exactly fits");
	CHECK(sr_mul_size(SIZE_MAX / 3 + 1, 3, &out) == -1, "(SIZE_MAX / 3 + 1) * 3 overflows");
	CHECK(sr_mul_size((size_t)1 << 32, (size_t)1 << 31, &out) == 0 && out == (size_t)1 << 63,
	      "2^32 * 2^31 = 2^63 fits");
	CHECK(sr_mul_size((size_t)1 << 32, (size_t)1 << 32, &out) == -1, "2^32 * 2^32 overflows");
	/* a voxel count: 256 * 256 * 180 * 1200 volumes of doubles, done in steps as callers do */
	CHECK(sr_mul_size(256 * 256, 180, &out) == 0 && sr_mul_size(out, 1200, &out) == 0 &&
		      sr_mul_size(out, sizeof(double), &out) == 0 && out == 113246208000ULL,
	      "chained sizes of a long run: %zu bytes", out);
}

static void test_alloc(void)
{
	unsigned char *p = xmalloc(0), *q;
	double *d;
	char *s;
	int i, zero = 1;

	CHECK(p != NULL, "xmalloc(0) gives a pointer, not NULL");
	free(p);
	d = xcalloc(1000, sizeof *d);
	for (i = 0; i < 1000; i++)
		zero &= d[i] == 0.0;
	CHECK(zero, "xcalloc memory is zero");
	free(d);
	p = xcalloc(0, 0);
	CHECK(p != NULL, "xcalloc(0, 0) gives a pointer");
	free(p);

	p = xmalloc(16);
	for (i = 0; i < 16; i++)
		p[i] = (unsigned char)(i * 7);
	q = xrealloc(p, 1 << 20);
	zero = 1;
	for (i = 0; i < 16; i++)
		zero &= q[i] == (unsigned char)(i * 7);
	CHECK(zero, "xrealloc keeps the old content when growing");
	q = xrealloc(q, 4);
	CHECK(q[0] == 0 && q[1] == 7 && q[3] == 21, "and when shrinking");
	free(q);
	q = xrealloc(NULL, 8);
	CHECK(q != NULL, "xrealloc(NULL, n) allocates");
	free(q);

	s = xstrdup("melody vs scrambled");
	CHECK(strcmp(s, "melody vs scrambled") == 0, "xstrdup copies the text");
	s[0] = 'M';
	CHECK(s[0] == 'M', "into its own writable memory");
	free(s);
	s = xstrdup("");
	CHECK(s && s[0] == '\0', "xstrdup of an empty text");
	free(s);

	d = xmalloc_array(3, sizeof *d);
	d[0] = 1, d[1] = 2, d[2] = 3;
	CHECK(d[0] + d[1] + d[2] == 6, "xmalloc_array gives n * size usable bytes");
	free(d);
}

/* Runs f in a child; returns its exit status (or -1) and its stderr in err. */
static int in_child(void (*f)(void), char *err, size_t n)
{
	int fd[2], st;
	ssize_t got, used = 0;
	pid_t pid;

	if (pipe(fd) != 0)
		return -1;
	fflush(stdout);
	pid = fork();
	if (pid < 0)
		return -1;
	if (pid == 0) {
		close(fd[0]);
		dup2(fd[1], 2);
		f();
		_exit(0);
	}
	close(fd[1]);
	while (used + 1 < (ssize_t)n && (got = read(fd[0], err + used, n - 1 - (size_t)used)) > 0)
		used += got;
	err[used] = '\0';
	if (used > 0 && err[used - 1] == '\n')
		err[used - 1] = '\0';
	close(fd[0]);
	if (waitpid(pid, &st, 0) != pid || !WIFEXITED(st))
		return -1;
	return WEXITSTATUS(st);
}

/* The overflow checks come before any allocation, so these never ask malloc for anything. */
static void overflow_array(void)
{
	free(xmalloc_array(SIZE_MAX / 2 + 1, 2));
}

static void overflow_calloc(void)
{
	free(xcalloc(SIZE_MAX / 8 + 1, 8));
}

static void test_die(void)
{
	char err[512];
	int rc;

	rc = in_child(overflow_array, err, sizeof err);
	CHECK(rc == 1, "an overflowing xmalloc_array ends the process with status 1 (got %d)", rc);
	CHECK(strstr(err, "splitroi: out of memory") != NULL, "with a message on stderr: '%s'", err);
	rc = in_child(overflow_calloc, err, sizeof err);
	CHECK(rc == 1 && strstr(err, "out of memory"),
	      "an overflowing xcalloc count ends the process with status 1 (got %d, '%s')", rc, err);
}

int main(void)
{
	test_mul();
	test_alloc();
	test_die();
	return TEST_DONE();
}
