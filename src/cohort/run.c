/* The cohort runner: picks the nights of this run (all, or one slice), clears
 * temporary files a killed run of the same slice left behind, and hands the
 * nights to worker threads. Workers take the next night whose files no other
 * worker has open, because EDFlib refuses to open one file twice in a process;
 * everything else a worker calls is safe to run in parallel (FFTW planning is
 * under a lock in src/score/fft_plans.c, EDFlib calls under one in
 * src/io/edflib_lock.c). The calling thread only waits and reports progress.
 * Locks (flock) keep two runs of the same slice, or a whole run and a slice,
 * from writing the same folder at once. */
/* realpath (XSI) and flock (BSD) are outside strict POSIX 2008 */
#define _DEFAULT_SOURCE 1
#include "cohort_internal.h"

#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <jansson.h>
#include <limits.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "internal.h"
#include "parallel.h"

enum { MAX_JOBS = 256 };

typedef struct job {
    const rt_manifest_entry *e;
    char *files[2];       /* canonical paths of the recording and the staging file */
    int state;            /* 0 pending, 1 running, 2 done */
} job;

typedef struct runner {
    cohort_shared shared;
    job *jobs;
    size_t n_jobs;
    size_t next_hint;     /* first job that may still be pending */
    pthread_mutex_t lock;
    pthread_cond_t changed;
    rt_cohort_progress progress;
    size_t running;
} runner;

void rt_cohort_options_default(rt_cohort_options *o)
{
    memset(o, 0, sizeof *o);
    rt_score_params_default(&o->params);
    o->positive = "case";
    o->negative = "control";
    o->progress_interval_s = 0.5;
}

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* The canonical spelling of path in *out (a copy of path when it cannot be
 * resolved; NULL for a NULL path), so two rows naming one file are seen. */
static rt_status canonical(const char *path, char **out, rt_error *err)
{
    *out = NULL;
    if (!path)
        return RT_OK;
    char *c = realpath(path, NULL);
    if (!c)
        c = strdup(path);
    if (!c)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", path);
    *out = c;
    return RT_OK;
}

static bool busy(const runner *r, const job *j)
{
    for (size_t k = 0; k < r->n_jobs; k++) {
        const job *o = &r->jobs[k];
        if (o->state != 1)
            continue;
        for (int a = 0; a < 2; a++)
            for (int b = 0; b < 2; b++)
                if (j->files[a] && o->files[b] && strcmp(j->files[a], o->files[b]) == 0)
                    return true;
    }
    return false;
}

/* Next pending night none of whose files is open elsewhere; NULL when all
 * are taken. Waits while the only pending nights share a file in use. */
static job *take(runner *r)
{
    pthread_mutex_lock(&r->lock);
    for (;;) {
        while (r->next_hint < r->n_jobs && r->jobs[r->next_hint].state != 0)
            r->next_hint++;
        if (r->next_hint >= r->n_jobs) {
            pthread_mutex_unlock(&r->lock);
            return NULL;
        }
        for (size_t k = r->next_hint; k < r->n_jobs; k++) {
            job *j = &r->jobs[k];
            if (j->state == 0 && !busy(r, j)) {
                j->state = 1;
                r->running++;
                pthread_mutex_unlock(&r->lock);
                return j;
            }
        }
        pthread_cond_wait(&r->changed, &r->lock);
    }
}

static void *worker(void *arg)
{
    runner *r = arg;
    job *j;
    while ((j = take(r)) != NULL) {
        night_outcome out = cohort_night(&r->shared, j->e);
        pthread_mutex_lock(&r->lock);
        j->state = 2;
        r->running--;
        r->progress.done++;
        r->progress.scored += out == NIGHT_SCORED;
        r->progress.skipped += out == NIGHT_SKIPPED;
        r->progress.failed += out == NIGHT_FAILED;
        pthread_cond_broadcast(&r->changed);
        pthread_mutex_unlock(&r->lock);
    }
    return NULL;
}

static void estimate(rt_cohort_progress *p, double elapsed)
{
    p->elapsed_s = elapsed;
    size_t worked = p->scored + p->failed;
    p->rate_per_min = worked && elapsed > 0 ? 60.0 * (double)worked / elapsed : 0;
    size_t left = p->total - p->done;
    p->remaining_s = left == 0 ? 0 : p->rate_per_min > 0 ? 60.0 * (double)left / p->rate_per_min : -1;
}

/* Removes temporary files (NAME.tmp-XXXXXX) of this slice's nights: only a
 * killed run of the same slice can have left them, and the slice lock says
 * none is running now. */
static void clear_temporaries(const runner *r)
{
    DIR *d = opendir(r->shared.nights_dir);
    if (!d)
        return;
    const rt_cohort_options *o = r->shared.options;
    struct dirent *de;
    while ((de = readdir(d)) != NULL) {
        const char *tmp = strstr(de->d_name, ".tmp-");
        if (!tmp)
            continue;
        char id[RT_COHORT_ID_MAX + 16];
        size_t n = (size_t)(tmp - de->d_name);
        if (n >= sizeof id)
            continue;
        memcpy(id, de->d_name, n);
        id[n] = '\0';
        static const char *const suffixes[] = {".error.json", ".json", ".key"};
        for (size_t k = 0; k < 3; k++) {
            size_t sl = strlen(suffixes[k]);
            if (n > sl && strcmp(id + n - sl, suffixes[k]) == 0) {
                id[n - sl] = '\0';
                break;
            }
        }
        if (o->part_count > 1 && rt_cohort_part_of(id, o->part_count) != o->part - 1)
            continue;
        char path[COHORT_PATH_MAX];
        if (cohort_night_path(path, sizeof path, r->shared.nights_dir, de->d_name, ""))
            unlink(path);
    }
    closedir(d);
}

static rt_status make_dir(const char *path, rt_error *err)
{
    if (mkdir(path, 0777) == 0 || errno == EEXIST) {
        struct stat sb;
        if (stat(path, &sb) == 0 && S_ISDIR(sb.st_mode))
            return RT_OK;
        return rt_fail(err, RT_ERR_IO, "%s: exists and is not a folder", path);
    }
    return rt_fail(err, rt_errno_status(errno, RT_ERR_IO),
                   "%s: cannot create folder: %s", path, strerror(errno));
}

/* A whole run holds OUT/.run.lock exclusively; a slice holds it shared and
 * its own OUT/.part-K-of-N.lock exclusively. Returns the descriptors to keep. */
static rt_status take_locks(const rt_cohort_options *o, int fds[2], rt_error *err)
{
    char path[COHORT_PATH_MAX];
    bool sliced = o->part_count > 1;
    fds[0] = fds[1] = -1;
    snprintf(path, sizeof path, "%s/.run.lock", o->out_dir);
    fds[0] = open(path, O_RDWR | O_CREAT, 0666);
    if (fds[0] < 0)
        return rt_fail(err, rt_errno_status(errno, RT_ERR_IO),
                       "%s: cannot create: %s", path, strerror(errno));
    if (flock(fds[0], (sliced ? LOCK_SH : LOCK_EX) | LOCK_NB) != 0)
        return rt_fail(err, RT_ERR_IO, "%s: cannot write output: another cohort run is writing "
                       "this folder%s (%s is locked)", o->out_dir, sliced ? " (a whole run)" : "",
                       path);
    if (!sliced)
        return RT_OK;
    snprintf(path, sizeof path, "%s/.part-%u-of-%u.lock", o->out_dir, o->part, o->part_count);
    fds[1] = open(path, O_RDWR | O_CREAT, 0666);
    if (fds[1] < 0)
        return rt_fail(err, rt_errno_status(errno, RT_ERR_IO),
                       "%s: cannot create: %s", path, strerror(errno));
    if (flock(fds[1], LOCK_EX | LOCK_NB) != 0)
        return rt_fail(err, RT_ERR_IO, "%s: cannot write output: part %u of %u is already "
                       "running (%s is locked)", o->out_dir, o->part, o->part_count, path);
    return RT_OK;
}

static rt_status check_options(const rt_cohort_options *o, rt_error *err)
{
    if (!o->out_dir || !o->out_dir[0])
        return rt_fail(err, RT_ERR_USAGE, "cohort: no output folder given");
    if (strlen(o->out_dir) > COHORT_PATH_MAX - RT_COHORT_ID_MAX - 64)
        return rt_fail(err, RT_ERR_IO, "%.80s...: cannot write output: the folder's path is too "
                       "long (%zu bytes, at most %d)", o->out_dir, strlen(o->out_dir),
                       COHORT_PATH_MAX - RT_COHORT_ID_MAX - 64);
    if (o->jobs < 0 || o->jobs > MAX_JOBS)
        return rt_fail(err, RT_ERR_USAGE, "cohort: jobs must be 0 to %d, got %d", MAX_JOBS, o->jobs);
    if (o->threads < 0 || o->threads > MAX_JOBS)
        return rt_fail(err, RT_ERR_USAGE, "cohort: threads must be 0 to %d, got %d", MAX_JOBS,
                       o->threads);
    if (o->part_count > 1 && (o->part < 1 || o->part > o->part_count))
        return rt_fail(err, RT_ERR_USAGE, "cohort: part %u of %u: the part must be 1 to %u",
                       o->part, o->part_count, o->part_count);
    return rt_score_params_check(&o->params, err);
}

static rt_status prepare(runner *r, const rt_manifest *m, const rt_cohort_options *o, rt_error *err)
{
    r->shared.options = o;
    rt_cutoffs_published(&r->shared.cutoffs);
    rt_status st = o->cutoffs_path ? rt_cutoffs_load(&r->shared.cutoffs, o->cutoffs_path, err) : RT_OK;
    if (st != RT_OK)
        return st;
    /* the run's label map and norms file are read by every night: a bad one
     * stops the run here, once, rather than failing each night alike */
    if (o->norms_path) {
        rt_norms *norms = NULL;
        if ((st = rt_norms_load(o->norms_path, &norms, err)) != RT_OK)
            return st;
        rt_norms_free(norms);
    }
    if (o->label_map_path) {
        rt_labelmap *map = NULL;
        if ((st = rt_labelmap_load(o->label_map_path, &map, err)) != RT_OK)
            return st;
        rt_labelmap_free(map);
    }
    cohort_settings_text(&r->shared);
    snprintf(r->shared.nights_dir, sizeof r->shared.nights_dir, "%s/nights", o->out_dir);
    snprintf(r->shared.log_path, sizeof r->shared.log_path, "%s/cohort.log", o->out_dir);
    r->jobs = rt_calloc(m->n_entries, sizeof *r->jobs);
    if (!r->jobs)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory");
    for (size_t i = 0; i < m->n_entries; i++) {
        const rt_manifest_entry *e = &m->entries[i];
        if (o->part_count > 1 && rt_cohort_part_of(e->id, o->part_count) != o->part - 1)
            continue;
        job *j = &r->jobs[r->n_jobs++];
        j->e = e;
        if ((st = canonical(e->recording, &j->files[0], err)) != RT_OK ||
            (st = canonical(e->stages, &j->files[1], err)) != RT_OK)
            return st;
    }
    r->progress.total = r->n_jobs;
    return RT_OK;
}

static int worker_count(const rt_cohort_options *o, size_t n_jobs)
{
    long n = o->jobs;
    if (n == 0) {
        n = rt_cores_available();
        if (n > MAX_JOBS)
            n = MAX_JOBS;
    }
    if ((size_t)n > n_jobs)
        n = n_jobs ? (long)n_jobs : 1;
    return (int)n;
}

static rt_status run_workers(runner *r, int n_workers, rt_error *err)
{
    pthread_t threads[MAX_JOBS];
    int started = 0;
    const rt_cohort_options *o = r->shared.options;
    double t0 = now_s();
    int code = 0;
    for (; started < n_workers; started++)
        if ((code = pthread_create(&threads[started], NULL, worker, r)) != 0)
            break;
    /* EAGAIN: the system lacks the memory (a stack) or the threads for one */
    if (started == 0)
        return rt_fail(err, code == EAGAIN || code == ENOMEM ? RT_ERR_NOMEM : RT_ERR_INTERNAL,
                       "%s: cannot start a worker thread: %s%s", o->out_dir, strerror(code),
                       code == EAGAIN ? " (out of memory or threads)" : "");
    double interval = o->progress_interval_s > 0.01 ? o->progress_interval_s : 0.5;
    pthread_mutex_lock(&r->lock);
    while (r->progress.done < r->n_jobs) {
        struct timespec until;
        clock_gettime(CLOCK_REALTIME, &until);
        long long ns = (long long)until.tv_nsec + (long long)(interval * 1e9);
        until.tv_sec += (time_t)(ns / 1000000000LL);
        until.tv_nsec = (long)(ns % 1000000000LL);
        pthread_cond_timedwait(&r->changed, &r->lock, &until);
        if (o->progress) {
            rt_cohort_progress p = r->progress;
            pthread_mutex_unlock(&r->lock);
            estimate(&p, now_s() - t0);
            o->progress(&p, o->progress_user);
            pthread_mutex_lock(&r->lock);
        }
    }
    pthread_mutex_unlock(&r->lock);
    for (int i = 0; i < started; i++)
        pthread_join(threads[i], NULL);
    estimate(&r->progress, now_s() - t0);
    if (o->progress)
        o->progress(&r->progress, o->progress_user);
    return RT_OK;
}

rt_status rt_cohort_run(const rt_manifest *m, const rt_cohort_options *o,
                        rt_cohort_progress *summary, rt_error *err)
{
    if (summary)
        memset(summary, 0, sizeof *summary);
    rt_status st = check_options(o, err);
    if (st != RT_OK)
        return st;
    runner r;
    memset(&r, 0, sizeof r);
    pthread_mutex_init(&r.lock, NULL);
    pthread_cond_init(&r.changed, NULL);
    int locks[2] = {-1, -1};
    st = make_dir(o->out_dir, err);
    if (st == RT_OK)
        st = take_locks(o, locks, err);
    if (st == RT_OK)
        st = prepare(&r, m, o, err);
    if (st == RT_OK)
        st = make_dir(r.shared.nights_dir, err);
    if (st == RT_OK) {
        clear_temporaries(&r);
        /* jansson seeds its hash function on first use; do it before threads exist */
        json_object_seed(0);
        if (r.n_jobs > 0) {
            int workers = worker_count(o, r.n_jobs);
            /* workers x threads stay within the cores unless both were asked for */
            r.shared.threads = o->threads ? o->threads : rt_cores_available() / workers;
            if (r.shared.threads < 1)
                r.shared.threads = 1;
            st = run_workers(&r, workers, err);
        }
    }
    if (st == RT_OK && summary)
        *summary = r.progress;
    for (size_t i = 0; i < r.n_jobs; i++) {
        free(r.jobs[i].files[0]);
        free(r.jobs[i].files[1]);
    }
    free(r.jobs);
    for (int k = 0; k < 2; k++)
        if (locks[k] >= 0)
            close(locks[k]);
    pthread_cond_destroy(&r.changed);
    pthread_mutex_destroy(&r.lock);
    return st;
}
