/* Benchmark: score an 8-hour, 20-channel synthetic night (5 EMG at 512 Hz) and
 * compare with the time needed merely to read the EMG samples the scorer
 * uses. Prints wall time, CPU time, peak resident memory and the machine.
 * Usage: bench_score [HOURS] [DIR] [THREADS]   (DIR keeps the night between
 * runs; THREADS as `remtone score --threads`, default 0: the cores available)
 *        bench_score memory [DIR]   peak resident memory of scoring 1-, 8- and
 * 24-hour nights (kept in DIR/1h, DIR/8h, DIR/24h), each in a child process
 * of its own so that nothing else is counted, on 1 thread and on the cores
 * available. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <sys/utsname.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "remtone/remtone.h"

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static double cpu_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void die(const rt_error *err)
{
    fprintf(stderr, "bench_score: %s\n", err->message);
    exit(1);
}

static void machine(void)
{
    struct utsname u;
    uname(&u);
    char model[600] = "unknown CPU";
    FILE *f = fopen("/proc/cpuinfo", "r");
    if (f) {
        char line[512];
        while (fgets(line, sizeof line, f))
            if (strncmp(line, "model name", 10) == 0) {
                char *c = strchr(line, ':');
                snprintf(model, sizeof model, "%s", c ? c + 2 : line);
                model[strcspn(model, "\n")] = '\0';
                break;
            }
        fclose(f);
    }
    printf("machine: %s %s, %s\n", u.sysname, u.machine, model);
}

static bool is_nrem(unsigned char s) { return s == RT_STAGE_N1 || s == RT_STAGE_N2 || s == RT_STAGE_N3; }

/* The read buffers, kept from run to run. */
typedef struct read_bufs {
    double *buf, *scratch;
    size_t cap;
} read_bufs;

/* Reads what the scorer reads: every REM bout of every EMG role, plus the chin
 * over NREM in runs of at most 20 epochs (as the scorer reads it), without
 * processing it. Returns samples read. */
static size_t read_only(rt_recording *rec, const rt_role_map *roles, const rt_timeline *tl,
                        read_bufs *b)
{
    size_t total = 0;
    rt_error err;
    for (int r = 0; r < RT_ROLE_ECG; r++) {
        const rt_role_source *src = &roles->role[r];
        if (src->channel < 0)
            continue;
        for (size_t e = 0; e < tl->n_epochs;) {
            bool rem = tl->stages[e] == RT_STAGE_R;
            bool nrem = r == RT_ROLE_CHIN && is_nrem(tl->stages[e]);
            if (!rem && !nrem) {
                e++;
                continue;
            }
            size_t run = 0;
            while (e + run < tl->n_epochs && (rem || run < 20) &&
                   (rem ? tl->stages[e + run] == RT_STAGE_R : is_nrem(tl->stages[e + run])))
                run++;
            long long first = (long long)((double)e * tl->epoch_s * src->rate_hz + 0.5);
            size_t n = (size_t)((double)run * tl->epoch_s * src->rate_hz + 0.5);
            if (n > b->cap) {
                free(b->buf);
                free(b->scratch);
                b->buf = malloc(n * sizeof *b->buf);
                b->scratch = malloc(n * sizeof *b->scratch);
                b->cap = n;
            }
            if (rt_role_read_uv(rec, src, first, n, b->buf, b->scratch, &err) != RT_OK)
                die(&err);
            total += n;
            e += run;
        }
    }
    return total;
}

/* Writes the synthetic night of `hours` (EMG at emg_rate_hz) into dir unless
 * it is there. */
static void ensure_night(const char *dir, double hours, int emg_rate_hz)
{
    char path[4400];
    snprintf(path, sizeof path, "%s/night.edf", dir);
    struct stat st;
    if (stat(path, &st) == 0)
        return;
    mkdir(dir, 0777);
    rt_synth_options o;
    rt_synth_options_default(&o);
    o.profile = RT_SYNTH_RBD;
    o.hours = hours;
    o.seed = 2026;
    o.emg_rate_hz = emg_rate_hz;
    rt_error err;
    double t = now_s();
    if (rt_synth_write(&o, dir, &err) != RT_OK)
        die(&err);
    printf("synthetic night of %g h written in %.2f s\n", hours, now_s() - t);
}

/* The calling process's peak resident memory so far, KiB (VmHWM), or -1. */
static double own_peak_kib(void)
{
    FILE *f = fopen("/proc/self/status", "r");
    char line[256];
    double kib = -1.0;
    while (f && fgets(line, sizeof line, f))
        if (strncmp(line, "VmHWM:", 6) == 0)
            kib = atof(line + 6);
    if (f)
        fclose(f);
    return kib;
}

/* Scores dir's night once in a child process; returns the child's peak
 * resident memory in MiB, and its REM minutes in *rem_min. */
static double child_peak_mib(const char *dir, int threads, double *rem_min)
{
    int fd[2];
    if (pipe(fd) != 0)
        return -1.0;
    fflush(stdout);
    pid_t pid = fork();
    if (pid == 0) {
        close(fd[0]);
        char path[4400], stages[4400];
        snprintf(path, sizeof path, "%s/night.edf", dir);
        snprintf(stages, sizeof stages, "%s/stages.csv", dir);
        rt_error err;
        rt_recording *rec = NULL;
        rt_role_map roles;
        rt_timeline *tl = NULL;
        rt_night *night = NULL;
        if (rt_recording_open(path, &rec, &err) != RT_OK || rt_timeline_new(&tl, &err) != RT_OK ||
            rt_roles_resolve(rec, NULL, &roles, &err) != RT_OK ||
            rt_timeline_load_stages_csv(tl, stages, NULL, &err) != RT_OK ||
            rt_night_score_threads(rec, &roles, tl, NULL, NULL, threads, &night, &err) != RT_OK)
            die(&err);
        double out[2] = {night->rem_minutes, own_peak_kib()};
        if (write(fd[1], out, sizeof out) != (ssize_t)sizeof out)
            _exit(1);
        _exit(0);
    }
    close(fd[1]);
    double got[2] = {0.0, -1.0};
    ssize_t n = pid > 0 ? read(fd[0], got, sizeof got) : -1;
    close(fd[0]);
    int status = 0;
    if (pid < 0 || waitpid(pid, &status, 0) != pid || !WIFEXITED(status) ||
        WEXITSTATUS(status) != 0 || n != (ssize_t)sizeof got || got[1] < 0)
        return -1.0;
    *rem_min = got[0];
    return got[1] / 1024.0;
}

/* Peak memory of scoring 1-, 8- and 24-hour nights at 512 Hz and an 8-hour
 * night at 1000 Hz. */
static int memory_rows(const char *dir)
{
    mkdir(dir, 0777);
    machine();
    const double hours[4] = {1.0, 8.0, 24.0, 8.0};
    const int rates[4] = {512, 512, 512, 1000};
    const int threads[2] = {1, 0};
    printf("| night | REM min | threads | peak resident memory |\n|---|---|---|---|\n");
    for (int h = 0; h < 4; h++) {
        char sub[4200];
        snprintf(sub, sizeof sub, "%.4000s/%gh%s", dir, hours[h], rates[h] == 512 ? "" : "-1000hz");
        /* written by a child too: the writer's memory must not be inherited
         * by the children measured next */
        fflush(stdout);
        pid_t pid = fork();
        if (pid == 0) {
            ensure_night(sub, hours[h], rates[h]);
            fflush(stdout);
            _exit(0);
        }
        int status = 0;
        if (pid < 0 || waitpid(pid, &status, 0) != pid || !WIFEXITED(status) ||
            WEXITSTATUS(status) != 0)
            return 1;
        for (int t = 0; t < 2; t++) {
            double rem = 0.0, mib = child_peak_mib(sub, threads[t], &rem);
            if (mib < 0)
                return 1;
            printf("| %g h, 20 channels, EMG at %d Hz | %.0f | %s | %.1f MiB |\n", hours[h],
                   rates[h], rem, threads[t] ? "1" : "cores", mib);
        }
    }
    return 0;
}

int main(int argc, char **argv)
{
    if (argc > 1 && strcmp(argv[1], "memory") == 0)
        return memory_rows(argc > 2 ? argv[2] : "bench-nights");
    double hours = argc > 1 ? atof(argv[1]) : 8.0;
    const char *dir = argc > 2 ? argv[2] : "bench-night";
    int threads = argc > 3 ? atoi(argv[3]) : 0;
    char path[4200], stages[4200];
    snprintf(path, sizeof path, "%s/night.edf", dir);
    snprintf(stages, sizeof stages, "%s/stages.csv", dir);
    rt_error err;
    struct stat st;
    if (stat(path, &st) != 0)
        ensure_night(dir, hours, 0);
    machine();
    rt_recording *rec = NULL;
    if (rt_recording_open(path, &rec, &err) != RT_OK)
        die(&err);
    rt_role_map roles;
    rt_timeline *tl = NULL;
    if (rt_timeline_new(&tl, &err) != RT_OK || rt_roles_resolve(rec, NULL, &roles, &err) != RT_OK ||
        rt_timeline_load_stages_csv(tl, stages, NULL, &err) != RT_OK)
        die(&err);
    printf("night: %.2f h, %d channels, %s\n", rt_recording_duration_s(rec) / 3600.0,
           rt_recording_channel_count(rec), path);
    if (threads > 0)
        printf("scoring threads: %d\n", threads);
    else
        printf("scoring threads: the cores available\n");

    enum { RUNS = 5 };
    double best_read = 1e9, best_wall = 1e9, best_cpu = 1e9;
    size_t samples = 0;
    rt_night *night = NULL;
    read_bufs bufs = {NULL, NULL, 0};
    for (int i = 0; i < RUNS; i++) {
        double t0 = now_s();
        samples = read_only(rec, &roles, tl, &bufs);
        double tr = now_s() - t0;
        if (tr < best_read)
            best_read = tr;
        rt_night_free(night);
        double w0 = now_s(), c0 = cpu_s();
        if (rt_night_score_threads(rec, &roles, tl, NULL, NULL, threads, &night, &err) != RT_OK)
            die(&err);
        double w = now_s() - w0, c = cpu_s() - c0;
        if (w < best_wall)
            best_wall = w;
        if (c < best_cpu)
            best_cpu = c;
    }
    struct rusage ru;
    getrusage(RUSAGE_SELF, &ru);
    printf("EMG samples read per night: %zu (%.1f M)\n", samples, (double)samples / 1e6);
    printf("read only (best of %d):      %.3f s\n", RUNS, best_read);
    printf("score     (best of %d):      %.3f s wall, %.3f s CPU\n", RUNS, best_wall, best_cpu);
    printf("score / read:                %.2fx\n", best_wall / best_read);
    printf("peak resident memory:        %.1f MiB\n", (double)ru.ru_maxrss / 1024.0);
    printf("REM %.1f min, headline %s = %.1f\n", night->rem_minutes,
           rt_index_rules()[night->headline].id, night->index[night->headline].value);
    rt_night_free(night);
    free(bufs.buf);
    free(bufs.scratch);
    rt_timeline_free(tl);
    rt_recording_close(rec);
    return 0;
}
