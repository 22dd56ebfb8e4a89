/* test_pool.c - the thread pool: each job exactly once, worker numbers, the fallback when threads cannot start. */
#define _GNU_SOURCE
#include <dlfcn.h>
#include <errno.h>
#include <pthread.h>
#include <stdatomic.h>
#include <string.h>

#include "core/pool.h"
#include "testlib.h"

/*
 * Thread creation the test can make fail: this definition in the test program
 * takes the place of the C library's for the pool (linked statically from the
 * library archive); the real one is found with dlsym(RTLD_NEXT). fail_every:
 * 0 never fails, 1 fails every creation, 2 every second one.
 */
static atomic_int fail_every, ncreate;

int pthread_create(pthread_t *restrict t, const pthread_attr_t *restrict attr, void *(*f)(void *),
		   void *restrict arg)
{
	int (*real)(pthread_t *restrict, const pthread_attr_t *restrict, void *(*)(void *), void *restrict);
	int k = atomic_fetch_add(&ncreate, 1) + 1, every = atomic_load(&fail_every);

	if (every > 0 && k % every == 0)
		return EAGAIN;
	*(void **)&real = dlsym(RTLD_NEXT, "pthread_create");
	if (!real)
		return ENOSYS;
	return real(t, attr, f, arg);
}

#define MAXN 1000
#define MAXW 8

typedef struct tally {
	atomic_int count[MAXN];
	atomic_int busy[MAXW];     /* a worker number in use right now */
	atomic_int bad_worker, overlap, off_caller;
	int nw;
	pthread_t caller;
	double out[MAXN];
} tally;

/* A job whose result depends on i only, with uneven cost so that the counter must balance. */
static void job(size_t i, int worker, void *ctx)
{
	tally *t = ctx;
	double s = 0.0;
	size_t k, len = 50 + (i * 7919) % 2000;

	if (worker < 0 || worker >= t->nw || worker >= MAXW) {
		atomic_fetch_add(&t->bad_worker, 1);
	} else if (atomic_exchange(&t->busy[worker], 1)) {
		atomic_fetch_add(&t->overlap, 1);
	}
	if (!pthread_equal(pthread_self(), t->caller))
		atomic_fetch_add(&t->off_caller, 1);
	atomic_fetch_add(&t->count[i], 1);
	for (k = 1; k <= len; k++)
		s += 1.0 / ((double)k * (double)(k + i));
	t->out[i] = s;
	if (worker >= 0 && worker < t->nw && worker < MAXW)
		atomic_store(&t->busy[worker], 0);
}

/* Runs n jobs with nthreads; returns pool_run's count; fills t. */
static int run(tally *t, size_t n, int nthreads)
{
	memset(t, 0, sizeof *t);
	t->nw = pool_workers(n, nthreads);
	t->caller = pthread_self();
	return pool_run(n, nthreads, job, t);
}

static int each_once(const tally *t, size_t n)
{
	size_t i;

	for (i = 0; i < n; i++)
		if (atomic_load(&t->count[i]) != 1)
			return 0;
	for (; i < MAXN; i++)
		if (atomic_load(&t->count[i]) != 0)
			return 0;
	return 1;
}

static void test_workers(void)
{
	CHECK(pool_workers(0, 8) == 0, "no job, no worker");
	CHECK(pool_workers(1, 8) == 1, "one job, one worker");
	CHECK(pool_workers(7, 8) == 7, "7 jobs, 8 threads: 7 workers");
	CHECK(pool_workers(1000, 8) == 8, "1000 jobs, 8 threads: 8 workers");
	CHECK(pool_workers(1000, 0) == 1 && pool_workers(1000, -3) == 1,
	      "nthreads below 1 means the caller alone");
}

static void test_grid(void)
{
	static const size_t ns[] = {0, 1, 7, 1000};
	static const int ths[] = {1, 2, 8};
	static tally t, ref;
	size_t a, b;

	for (a = 0; a < sizeof ns / sizeof ns[0]; a++) {
		run(&ref, ns[a], 1);
		for (b = 0; b < sizeof ths / sizeof ths[0]; b++) {
			size_t n = ns[a];
			int th = ths[b], used = run(&t, n, th);

			CHECK(each_once(&t, n), "n %zu, %d threads: every job ran exactly once", n, th);
			CHECK(used >= (n ? 1 : 0) && used <= t.nw, "n %zu, %d threads: %d threads took part (at most %d)",
			      n, th, used, t.nw);
			CHECK(!t.bad_worker && !t.overlap,
			      "n %zu, %d threads: worker numbers in range and never shared at once", n, th);
			CHECK(memcmp(t.out, ref.out, sizeof t.out) == 0,
			      "n %zu, %d threads: the results are those of one thread, bit for bit", n, th);
			if (th == 1 || n <= 1)
				CHECK(!t.off_caller, "n %zu, %d threads: everything ran in the caller", n, th);
		}
	}
	/* with thread creation working, 8 threads for 1000 jobs means 8 take part */
	CHECK(run(&t, 1000, 8) == 8, "1000 jobs, 8 threads: 7 helpers started");
}

static void test_fallback(void)
{
	static tally t, ref;
	int used;

	run(&ref, 1000, 1);
	atomic_store(&fail_every, 1);
	atomic_store(&ncreate, 0);
	used = run(&t, 1000, 8);
	CHECK(atomic_load(&ncreate) == 7, "no thread can start: the pool tried 7 (tried %d)",
	      atomic_load(&ncreate));
	CHECK(used == 1, "no thread can start: the caller alone took part (%d)", used);
	CHECK(each_once(&t, 1000) && !t.off_caller, "no thread can start: every job ran once, in the caller");
	CHECK(memcmp(t.out, ref.out, sizeof t.out) == 0, "no thread can start: same results");

	atomic_store(&fail_every, 2);
	atomic_store(&ncreate, 0);
	used = run(&t, 1000, 8);
	CHECK(used == 1 + 4, "every second creation fails: the caller and 4 of 7 helpers (%d)", used);
	CHECK(each_once(&t, 1000) && !t.bad_worker && !t.overlap,
	      "every second creation fails: every job once, worker numbers in range");
	CHECK(memcmp(t.out, ref.out, sizeof t.out) == 0, "every second creation fails: same results");
	atomic_store(&fail_every, 0);
}

/* Worker numbers are dense even when some helpers are missing: a per-worker sum adds up. */
typedef struct sums {
	long long part[MAXW];
	int nw;
} sums;

static void add(size_t i, int worker, void *ctx)
{
	sums *s = ctx;

	if (worker >= 0 && worker < s->nw)
		s->part[worker] += (long long)i;
}

static void test_scratch(void)
{
	sums s;
	long long total = 0;
	int w;

	memset(&s, 0, sizeof s);
	s.nw = pool_workers(1000, 8);
	atomic_store(&fail_every, 3);
	pool_run(1000, 8, add, &s);
	atomic_store(&fail_every, 0);
	for (w = 0; w < s.nw; w++)
		total += s.part[w];
	CHECK(total == 999LL * 1000 / 2, "per-worker partial sums add up to 0+...+999 = 499500 (%lld)", total);
}

int main(void)
{
	test_workers();
	test_grid();
	test_fallback();
	test_scratch();
	return TEST_DONE();
}
