/* pool.h - the one thread pool: n independent jobs run by up to nthreads threads. */
#ifndef SR_POOL_H
#define SR_POOL_H

#include <stddef.h>

/*
 * The number of workers pool_run uses for n jobs and nthreads threads:
 * min(nthreads, n), at least 1 (0 when n is 0). A caller that keeps one
 * workspace per worker allocates this many before calling pool_run.
 */
int pool_workers(size_t n, int nthreads);

/*
 * Runs fn(i, worker, ctx) once for every i in 0..n-1. The jobs are handed out
 * one at a time from a shared counter (a fast worker takes the next job, so
 * uneven jobs balance), in increasing i but on any worker. worker is in
 * 0..pool_workers(n, nthreads)-1 and no two calls with the same worker run at
 * the same time: it indexes per-thread scratch. The calling thread is worker 0
 * and takes jobs too; the others are new threads, all joined before the return.
 * With nthreads <= 1, or n <= 1, everything runs in the calling thread, in
 * order; a thread that cannot be created is simply missing (the others, at
 * least the caller, take its jobs), so pool_run cannot fail. fn must make
 * each job's result depend on i only (never on worker, order or timing), and
 * write only to its job's own outputs or under its own lock: then results do
 * not depend on the thread count. Returns the number of threads that took
 * part (1 when everything ran in the caller, 0 when n is 0).
 */
int pool_run(size_t n, int nthreads, void (*fn)(size_t i, int worker, void *ctx), void *ctx);

#endif
