/* pool.c - the one thread pool: jobs taken from an atomic counter by the caller and its helpers. */
#include "pool.h"

#include <pthread.h>
#include <stdatomic.h>
#include <stdlib.h>

#include "mem.h"

typedef struct pool_job {
	size_t n;
	atomic_size_t next;
	void (*fn)(size_t, int, void *);
	void *ctx;
} pool_job;

typedef struct pool_helper {
	pool_job *job;
	int worker;
} pool_helper;

/* Takes jobs until none is left; the counter never goes past n, so it cannot wrap. */
static void drain(pool_job *job, int worker)
{
	size_t i = atomic_load_explicit(&job->next, memory_order_relaxed);

	while (i < job->n) {
		if (!atomic_compare_exchange_weak_explicit(&job->next, &i, i + 1, memory_order_relaxed,
							   memory_order_relaxed))
			continue;   /* i now holds the current value: try again with it */
		job->fn(i, worker, job->ctx);
		i = atomic_load_explicit(&job->next, memory_order_relaxed);
	}
}

static void *helper_main(void *arg)
{
	pool_helper *h = arg;

	drain(h->job, h->worker);
	return NULL;
}

int pool_workers(size_t n, int nthreads)
{
	if (n == 0)
		return 0;
	if (nthreads < 1)
		return 1;
	return (size_t)nthreads < n ? nthreads : (int)n;
}

int pool_run(size_t n, int nthreads, void (*fn)(size_t i, int worker, void *ctx), void *ctx)
{
	int nw = pool_workers(n, nthreads), k, used = 1;
	pool_job job;
	pthread_t *th;
	pool_helper *hp;

	if (nw == 0)
		return 0;
	job.n = n;
	atomic_init(&job.next, 0);
	job.fn = fn;
	job.ctx = ctx;
	if (nw == 1) {
		drain(&job, 0);
		return 1;
	}
	th = xcalloc((size_t)nw, sizeof *th);
	hp = xcalloc((size_t)nw, sizeof *hp);
	/* worker numbers stay dense even when a creation fails: a missing thread's
	 * number is never handed out, and the caller's 0 always is */
	for (k = 1; k < nw; k++) {
		hp[used].job = &job;
		hp[used].worker = used;
		if (pthread_create(&th[used], NULL, helper_main, &hp[used]) == 0)
			used++;
	}
	drain(&job, 0);
	for (k = 1; k < used; k++)
		pthread_join(th[k], NULL);
	free(th);
	free(hp);
	return used;
}
