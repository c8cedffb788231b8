/* Benchmark: score synthetic 20-channel nights (5 EMG at 512 Hz, the RBD
 * profile) and compare with the time needed to read the whole recording
 * file from the page cache (as `cat night.edf > /dev/null` does) and to read
 * only the EMG samples the scorer uses, measured in the same process and
 * run, and the filter floor: those samples through the scorer's band-pass
 * once, on one core, timed alone (docs/performance.md, "The floor"). Each
 * (hours, threads) case runs in its own child process, so its
 * peak resident memory is its own. With python3, numpy and scipy it also
 * times bench/straightforward.py, the same steps written plainly in numpy
 * and scipy, on the 8-hour night.
 *
 * Usage: bench_score [HOURS,...] [DIR] [THREADS,...] [RUNS] [EMG_HZ]
 *   defaults: 1,8,24  bench-night  1,2  5  512
 * DIR keeps the nights between runs (DIR/8h/night.edf, DIR/8h-1000hz/ ...). THREADS as
 * `remtone score --threads` (0: the cores available). Timings are the best
 * of RUNS. Timings are never asserted by tests: this program only prints. */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <sys/types.h>
#include <sys/utsname.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "remtone/remtone.h"
#include "dsp/bandpass.h"

enum { MAX_LIST = 8 };

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

static void die(const char *what, const rt_error *err)
{
    fprintf(stderr, "bench_score: %s: %s\n", what, err->message);
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
    double load[3] = {0, 0, 0};
    f = fopen("/proc/loadavg", "r");
    if (f) {
        if (fscanf(f, "%lf %lf %lf", &load[0], &load[1], &load[2]) != 3)
            load[0] = -1;
        fclose(f);
    }
    printf("machine: %s %s, %s, %ld cores online, load %.2f\n", u.sysname, u.machine, model,
           sysconf(_SC_NPROCESSORS_ONLN), load[0]);
}

/* A comma-separated list of numbers; returns how many. */
static int parse_list(const char *text, double *out)
{
    int n = 0;
    char *end = NULL;
    for (const char *p = text; *p && n < MAX_LIST; p = *end ? end + 1 : end) {
        out[n++] = strtod(p, &end);
        if (end == p)
            return 0;
    }
    return n;
}

static bool is_nrem(unsigned char s) { return s == RT_STAGE_N1 || s == RT_STAGE_N2 || s == RT_STAGE_N3; }

/* The whole file read from the page cache in 1-MiB blocks, as cat does. */
static double read_file_s(const char *path, long long *bytes)
{
    static char block[1 << 20];
    double t = now_s();
    int fd = open(path, O_RDONLY);
    if (fd < 0) {
        fprintf(stderr, "bench_score: %s: %s\n", path, strerror(errno));
        exit(1);
    }
    *bytes = 0;
    ssize_t got;
    while ((got = read(fd, block, sizeof block)) > 0)
        *bytes += got;
    close(fd);
    return now_s() - t;
}

/* Reads what the scorer reads: every REM bout of every EMG role, plus the
 * chin over NREM in runs of at most 20 epochs. With filter_s, it also passes
 * each stretch once through the scorer's band-pass (default corners, no
 * notch) and adds the time of the filtering alone to *filter_s: a floor for
 * any scorer that filters those samples with this zero-phase FFT band-pass,
 * before its quality marks, ECG removal, envelope and detection. Returns the
 * samples read. */
static size_t read_emg(rt_recording *rec, const rt_role_map *roles, const rt_timeline *tl,
                       double *filter_s)
{
    size_t total = 0, cap = 0;
    double *buf = NULL, *scratch = NULL;
    rt_error err;
    size_t n_epochs = tl->n_epochs;
    double epoch_s = tl->epoch_s;
    for (int r = 0; r < RT_ROLE_ECG; r++) {
        const rt_role_source *src = &roles->role[r];
        if (src->channel < 0)
            continue;
        rt_bandpass *bp = NULL;
        if (filter_s) {
            rt_bandpass_spec spec = rt_bandpass_spec_defaults(src->rate_hz);
            if (rt_bandpass_new(&spec, &bp, &err) != RT_OK)
                die("band-pass", &err);
        }
        for (size_t e = 0; e < n_epochs;) {
            bool rem = tl->stages[e] == RT_STAGE_R;
            bool nrem = r == RT_ROLE_CHIN && is_nrem(tl->stages[e]);
            if (!rem && !nrem) {
                e++;
                continue;
            }
            size_t run = 0;
            while (e + run < n_epochs && (rem || run < 20) &&
                   (rem ? tl->stages[e + run] == RT_STAGE_R
                        : is_nrem(tl->stages[e + run])))
                run++;
            long long first = (long long)((double)e * epoch_s * src->rate_hz + 0.5);
            size_t n = (size_t)((double)run * epoch_s * src->rate_hz + 0.5);
            if (n > cap) {
                free(buf);
                free(scratch);
                buf = malloc(n * sizeof *buf);
                scratch = malloc(n * sizeof *scratch);
                if (!buf || !scratch) {
                    fprintf(stderr, "bench_score: out of memory\n");
                    exit(1);
                }
                cap = n;
            }
            if (rt_role_read_uv(rec, src, first, n, buf, scratch, &err) != RT_OK)
                die("reading", &err);
            if (bp) {
                double t0 = now_s();
                if (rt_bandpass_apply(bp, buf, n, &err) != RT_OK)
                    die("band-pass", &err);
                *filter_s += now_s() - t0;
            }
            total += n;
            e += run;
        }
        rt_bandpass_free(bp);
    }
    free(buf);
    free(scratch);
    return total;
}

/* DIR/Hh (DIR/Hh-RATEhz for EMG not at 512 Hz): a night's folder. */
static void night_folder(char *dst, size_t size, const char *dir, double hours, int emg_hz)
{
    if (emg_hz == 512)
        snprintf(dst, size, "%s/%gh", dir, hours);
    else
        snprintf(dst, size, "%s/%gh-%dhz", dir, hours, emg_hz);
}

/* Writes the night's folder unless it holds a night already. */
static int ensure_night(const char *dir, double hours, int emg_hz, char *night_dir, size_t size)
{
    night_folder(night_dir, size, dir, hours, emg_hz);
    char path[4300];
    snprintf(path, sizeof path, "%s/night.edf", night_dir);
    struct stat st;
    if (stat(path, &st) == 0)
        return 0;
    mkdir(dir, 0777);
    mkdir(night_dir, 0777);
    rt_synth_options o;
    rt_synth_options_default(&o);
    o.profile = RT_SYNTH_RBD;
    o.hours = hours;
    o.seed = 2026;
    o.emg_rate_hz = emg_hz;
    rt_error err;
    double t = now_s();
    if (rt_synth_write(&o, night_dir, &err) != RT_OK) {
        printf("%5gh  night not written: %s\n", hours, err.message);
        return -1;
    }
    printf("%5gh  synthetic night written in %.1f s\n", hours, now_s() - t);
    return 0;
}

/* One case, in a child process: prints one row of the table. */
static int run_case(const char *night_dir, int threads, int runs)
{
    char path[4300], stages[4300];
    snprintf(path, sizeof path, "%s/night.edf", night_dir);
    snprintf(stages, sizeof stages, "%s/stages.csv", night_dir);
    rt_error err;
    rt_recording *rec = NULL;
    rt_timeline *tl = NULL;
    rt_role_map roles;
    if (rt_recording_open(path, &rec, &err) != RT_OK)
        die(path, &err);
    if (rt_timeline_new(&tl, &err) != RT_OK || rt_roles_resolve(rec, NULL, &roles, &err) != RT_OK ||
        rt_timeline_load_stages_csv(tl, stages, NULL, &err) != RT_OK)
        die(stages, &err);
    double best_file = 1e9, best_emg = 1e9, best_filter = 1e9, best_wall = 1e9, best_cpu = 1e9;
    long long bytes = 0;
    rt_night *night = NULL;
    for (int i = 0; i < runs; i++) {
        double tf = read_file_s(path, &bytes);
        double t0 = now_s();
        read_emg(rec, &roles, tl, NULL);
        double te = now_s() - t0, filter = 0.0;
        read_emg(rec, &roles, tl, &filter);
        rt_night_free(night);
        night = NULL;
        double w0 = now_s(), c0 = cpu_s();
        if (rt_night_score_threads(rec, &roles, tl, NULL, NULL, threads, &night, &err) != RT_OK)
            die("scoring", &err);
        double w = now_s() - w0, c = cpu_s() - c0;
        best_file = tf < best_file ? tf : best_file;
        best_emg = te < best_emg ? te : best_emg;
        best_filter = filter < best_filter ? filter : best_filter;
        best_wall = w < best_wall ? w : best_wall;
        best_cpu = c < best_cpu ? c : best_cpu;
    }
    struct rusage ru;
    getrusage(RUSAGE_SELF, &ru);
    printf("%5.0fh %7d %7.0f %9.3f %8.3f %8.3f %8.3f %8.3f %8.1fx %7.1fx %7.1fx %8.1f\n",
           rt_recording_duration_s(rec) / 3600.0, threads, (double)bytes / 1048576.0, best_file,
           best_emg, best_filter, best_wall, best_cpu, best_wall / best_file, best_wall / best_emg,
           best_filter / best_file, (double)ru.ru_maxrss / 1024.0);
    fflush(stdout);
    rt_night_free(night);
    rt_timeline_free(tl);
    rt_recording_close(rec);
    return 0;
}

/* The comparison script on one night: its wall time, or a negative value
 * when python3, numpy or scipy is missing (Debian's python3 first, whose
 * python3-numpy and python3-scipy scripts/install-deps installs). */
static double script_s(const char *night_dir)
{
    char cmd[9100];
    snprintf(cmd, sizeof cmd,
             "%s '%s/straightforward.py' '%s/night.edf' '%s/stages.csv' > /dev/null 2>&1",
             access("/usr/bin/python3", X_OK) == 0 ? "/usr/bin/python3" : "python3",
             REMTONE_BENCH_DIR, night_dir, night_dir);
    double t = now_s();
    int rc = system(cmd);
    double s = now_s() - t;
    return rc == 0 ? s : -1.0;
}

/* Forks: returns CHILD in the child; in the parent, after the child ends, 0
 * when it exited with 0, 1 when it failed, -1 when there is no child. */
enum { CHILD = 2 };
static int in_child(void)
{
    fflush(stdout);
    pid_t pid = fork();
    if (pid < 0) {
        perror("bench_score: fork");
        return -1;
    }
    if (pid == 0)
        return CHILD;
    int status = 0;
    return waitpid(pid, &status, 0) < 0 || !WIFEXITED(status) || WEXITSTATUS(status) != 0;
}

int main(int argc, char **argv)
{
    double hours[MAX_LIST], threads[MAX_LIST];
    int n_hours = parse_list(argc > 1 ? argv[1] : "1,8,24", hours);
    const char *dir = argc > 2 ? argv[2] : "bench-night";
    int n_threads = parse_list(argc > 3 ? argv[3] : "1,2", threads);
    int runs = argc > 4 ? atoi(argv[4]) : 5;
    int emg_hz = argc > 5 ? atoi(argv[5]) : 512;
    if (n_hours == 0 || n_threads == 0 || runs < 1 || emg_hz < 1) {
        fprintf(stderr, "usage: bench_score [HOURS,...] [DIR] [THREADS,...] [RUNS] [EMG_HZ]\n");
        return 2;
    }
    machine();
    char night_dir[4200];
    /* nights are written in a child too: memory the writer leaves in this
     * process would be resident in every case's child after fork() and
     * count in its peak */
    for (int h = 0; h < n_hours; h++) {
        int rc = in_child();
        if (rc == CHILD)
            _exit(ensure_night(dir, hours[h], emg_hz, night_dir, sizeof night_dir) == 0 ? 0 : 1);
        if (rc < 0)
            return 1;
    }
    printf("\nbest of %d runs; file = the whole recording read from the page cache; emg = only "
           "the EMG samples the scorer reads;\nfilter = those samples through the scorer's "
           "band-pass once, on one core (a floor: filtering alone)\n", runs);
    printf("%6s %7s %7s %9s %8s %8s %8s %8s %9s %8s %8s %8s\n", "hours", "threads", "MiB",
           "file s", "emg s", "filter s", "score s", "cpu s", "/file", "/emg", "filt/file",
           "peak MiB");
    for (int h = 0; h < n_hours; h++) {
        night_folder(night_dir, sizeof night_dir, dir, hours[h], emg_hz);
        char probe[4300];
        snprintf(probe, sizeof probe, "%s/night.edf", night_dir);
        if (access(probe, R_OK) != 0)
            continue;
        for (int t = 0; t < n_threads; t++) {
            int rc = in_child();
            if (rc == CHILD)
                _exit(run_case(night_dir, (int)threads[t], runs));
            if (rc < 0)
                return 1;
            if (rc > 0)
                printf("%5gh %7d  failed\n", hours[h], (int)threads[t]);
        }
    }
    for (int h = 0; h < n_hours; h++) {
        if (hours[h] != 8.0)
            continue;
        night_folder(night_dir, sizeof night_dir, dir, hours[h], emg_hz);
        double s = script_s(night_dir);
        if (s < 0)
            printf("\nstraightforward.py: skipped (python3 with numpy and scipy not found)\n");
        else
            printf("\nstraightforward.py (numpy + scipy, the same steps, 8 h): %.2f s wall\n", s);
    }
    if (fflush(stdout) != 0 || ferror(stdout)) {
        fprintf(stderr, "bench_score: cannot write standard output\n");
        return 7;
    }
    return 0;
}
