/* The worker pool of parallel.h: threads take the next item from a shared
 * list under one mutex (items are whole stretches of a recording, milliseconds
 * each at least, so the lock is never busy), and the lowest-ranked failure
 * wins whatever thread met it. */
/* sched_getaffinity and CPU_COUNT are GNU extensions */
#define _GNU_SOURCE 1
#include "parallel.h"

#include <pthread.h>
#include <sched.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

int rt_cores_available(void)
{
#ifdef CPU_COUNT
    cpu_set_t set;
    CPU_ZERO(&set);
    if (sched_getaffinity(0, sizeof set, &set) == 0) {
        int n = CPU_COUNT(&set);
        if (n > 0)
            return n;
    }
#endif
    long n = sysconf(_SC_NPROCESSORS_ONLN);
    return n < 1 ? 1 : n > 4096 ? 4096 : (int)n;
}

void rt_parallel_failure_init(rt_parallel_failure *f)
{
    f->rank = SIZE_MAX;
    rt_error_clear(&f->error);
}

typedef struct pool {
    const rt_parallel_job *job;
    const size_t *order;      /* execution order; NULL: index order */
    size_t next;
    rt_parallel_failure *failure;
    pthread_mutex_t lock;
} pool;

typedef struct worker_arg {
    pool *p;
    unsigned worker;
} worker_arg;

static size_t rank_of(const rt_parallel_job *job, size_t item)
{
    return job->rank ? job->rank[item] : item;
}

static void *work(void *arg)
{
    worker_arg *a = arg;
    pool *p = a->p;
    const rt_parallel_job *job = p->job;
    rt_error err;
    for (;;) {
        pthread_mutex_lock(&p->lock);
        size_t item = SIZE_MAX;
        while (p->next < job->n_items) {
            size_t k = p->order ? p->order[p->next] : p->next;
            p->next++;
            if (rank_of(job, k) < p->failure->rank) {
                item = k;
                break;
            }
        }
        pthread_mutex_unlock(&p->lock);
        if (item == SIZE_MAX)
            return NULL;
        rt_error_clear(&err);
        rt_status st = job->fn(job->ctx, a->worker, item, &err);
        if (st == RT_OK)
            continue;
        if (err.status == RT_OK)
            err.status = st;
        pthread_mutex_lock(&p->lock);
        if (rank_of(job, item) < p->failure->rank) {
            p->failure->rank = rank_of(job, item);
            p->failure->error = err;
        }
        pthread_mutex_unlock(&p->lock);
    }
}

typedef struct costed {
    double cost;
    size_t item;
} costed;

static int costliest_first(const void *a, const void *b)
{
    const costed *x = a, *y = b;
    if (x->cost != y->cost)
        return x->cost < y->cost ? 1 : -1;
    return (x->item > y->item) - (x->item < y->item);
}

/* Items by decreasing cost (ties in index order); NULL without costs or memory. */
static size_t *costliest_order(const rt_parallel_job *job)
{
    if (!job->cost)
        return NULL;
    costed *c = malloc(job->n_items * sizeof *c);
    size_t *order = malloc(job->n_items * sizeof *order);
    if (c && order) {
        for (size_t i = 0; i < job->n_items; i++)
            c[i] = (costed){job->cost[i], i};
        qsort(c, job->n_items, sizeof *c, costliest_first);
        for (size_t i = 0; i < job->n_items; i++)
            order[i] = c[i].item;
    } else {
        free(order);
        order = NULL;
    }
    free(c);
    return order;
}

rt_status rt_parallel_run(const rt_parallel_job *job, unsigned threads, rt_parallel_failure *f)
{
    if (threads > job->n_items)
        threads = (unsigned)job->n_items;
    if (threads <= 1) {
        for (size_t i = 0; i < job->n_items && rank_of(job, i) < f->rank; i++) {
            rt_error err;
            rt_error_clear(&err);
            rt_status st = job->fn(job->ctx, 0, i, &err);
            if (st != RT_OK) {
                if (err.status == RT_OK)
                    err.status = st;
                f->rank = rank_of(job, i);
                f->error = err;
            }
        }
        return f->rank == SIZE_MAX ? RT_OK : f->error.status;
    }
    pool p = {job, costliest_order(job), 0, f, PTHREAD_MUTEX_INITIALIZER};
    worker_arg *args = malloc(threads * sizeof *args);
    pthread_t *ids = malloc(threads * sizeof *ids);
    unsigned started = 1;
    if (args && ids) {
        for (unsigned w = 0; w < threads; w++)
            args[w] = (worker_arg){&p, w};
        while (started < threads && pthread_create(&ids[started], NULL, work, &args[started]) == 0)
            started++;
        work(&args[0]);
    } else {
        worker_arg only = {&p, 0};
        work(&only);
    }
    for (unsigned w = 1; w < started; w++)
        pthread_join(ids[w], NULL);
    free(args);
    free(ids);
    free((void *)p.order);
    pthread_mutex_destroy(&p.lock);
    return f->rank == SIZE_MAX ? RT_OK : f->error.status;
}
