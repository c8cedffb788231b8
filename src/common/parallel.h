/* A small pool of worker threads for loops whose items are independent: the
 * night scorer's (stretch, role) items. Items write only their own results;
 * the caller merges them afterwards in a fixed order, so what a run produces
 * does not depend on the number of threads or on which thread ran what.
 * Internal header. */
#ifndef REMTONE_PARALLEL_H
#define REMTONE_PARALLEL_H

#include <stddef.h>

#include "remtone/status.h"

/* Processor cores this process may run on: its CPU affinity mask (so a
 * taskset or a cluster's cgroup limit counts), else the online processors;
 * at least 1. */
int rt_cores_available(void);

/* Work on one item. worker (0 .. threads-1) names the calling thread's own
 * scratch; the calling thread of rt_parallel_run is worker 0. */
typedef rt_status (*rt_parallel_fn)(void *ctx, unsigned worker, size_t item, rt_error *err);

typedef struct rt_parallel_job {
    size_t n_items;
    const size_t *rank;   /* each item's place in the sequential order, increasing with the
                             item's index (NULL: the index); the first failure in this order
                             is the one reported */
    const double *cost;   /* relative cost of each item (NULL: equal); with several threads
                             the costliest start first, so the threads finish together */
    rt_parallel_fn fn;
    void *ctx;
} rt_parallel_job;

/* The lowest-ranked failure so far, carried from one job to the next. */
typedef struct rt_parallel_failure {
    size_t rank;          /* SIZE_MAX: none */
    rt_error error;
} rt_parallel_failure;

void rt_parallel_failure_init(rt_parallel_failure *f);

/* Runs job->fn on every item with at most `threads` threads (the calling
 * thread and up to threads - 1 started here, never more than the items; when
 * a thread cannot be started, fewer do the same work). With one thread the
 * items run in index order on the calling thread and the first failure stops
 * the loop. With more, an item ranked above the lowest failure so far is
 * skipped while lower-ranked items still run, so the failure recorded in *f
 * is the one the sequential loop would meet first. Items ranked above
 * f->rank on entry are skipped too. Returns RT_OK when f->rank is SIZE_MAX
 * afterwards, else f->error.status. */
rt_status rt_parallel_run(const rt_parallel_job *job, unsigned threads, rt_parallel_failure *f);

#endif
