/* Cohort throughput: nights scored per minute on one core and on two (two
 * nights at once, or one night on two threads), on synthetic nights
 * (alternating rbd and typical-older). Not a test: prints figures and the
 * machine they ran on.
 * usage: bench_cohort [HOURS (default 1)] [NIGHTS (default 4)] */
#define _XOPEN_SOURCE 700
#include <ftw.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/utsname.h>
#include <time.h>
#include <unistd.h>

#include "remtone/cohort.h"
#include "remtone/remtone.h"

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static int remove_entry(const char *path, const struct stat *sb, int flag, struct FTW *ftw)
{
    (void)sb;
    (void)flag;
    (void)ftw;
    return remove(path);
}

int main(int argc, char **argv)
{
    double hours = argc > 1 ? atof(argv[1]) : 1.0;
    int nights = argc > 2 ? atoi(argv[2]) : 4;
    if (!(hours >= 1 && hours <= 12) || nights < 1 || nights > 200) {
        fprintf(stderr, "usage: bench_cohort [HOURS 1..12] [NIGHTS 1..200]\n");
        return 2;
    }
    char dir[] = "/tmp/remtone-bench-cohort-XXXXXX";
    if (!mkdtemp(dir)) {
        perror("mkdtemp");
        return 1;
    }
    rt_error err;
    char path[4200], manifest[4200];
    snprintf(manifest, sizeof manifest, "%s/manifest.csv", dir);
    FILE *m = fopen(manifest, "w");
    if (!m) {
        perror(manifest);
        return 1;
    }
    fprintf(m, "id,recording,stages,events,group\n");
    for (int i = 0; i < nights; i++) {
        rt_synth_options o;
        rt_synth_options_default(&o);
        o.profile = i % 2 ? RT_SYNTH_TYPICAL_OLDER : RT_SYNTH_RBD;
        o.hours = hours;
        o.seed = (uint64_t)i + 1;
        snprintf(path, sizeof path, "%s/n%d", dir, i);
        mkdir(path, 0777);
        if (rt_synth_write(&o, path, &err) != RT_OK) {
            fprintf(stderr, "synth: %s\n", err.message);
            return 1;
        }
        fprintf(m, "n%d,n%d/night.edf,n%d/stages.csv,n%d/events.csv,%s\n", i, i, i, i,
                i % 2 ? "control" : "case");
    }
    fclose(m);
    rt_manifest *man = NULL;
    if (rt_manifest_load(manifest, &man, &err) != RT_OK) {
        fprintf(stderr, "%s\n", err.message);
        return 1;
    }
    struct utsname u;
    uname(&u);
    printf("machine: %s %s %s, %ld online cores\n", u.sysname, u.release, u.machine,
           sysconf(_SC_NPROCESSORS_ONLN));
    printf("cohort: %d synthetic nights of %.1f h (20 channels, EMG at 512 Hz)\n", nights, hours);
    /* cores used = jobs x threads: one core (1 x 1), then two cores shared
     * out as two nights at once (2 x 1) or one night on two threads (1 x 2) */
    static const int SHAPES[][2] = {{1, 1}, {2, 1}, {1, 2}};
    double per_min_one_core = 0.0;
    for (size_t k = 0; k < sizeof SHAPES / sizeof SHAPES[0]; k++) {
        int jobs = SHAPES[k][0], threads = SHAPES[k][1];
        rt_cohort_options o;
        rt_cohort_options_default(&o);
        snprintf(path, sizeof path, "%s/out", dir);
        o.out_dir = path;
        o.jobs = jobs;
        o.threads = threads;
        o.force = true;
        rt_cohort_progress p;
        double t0 = now_s();
        if (rt_cohort_run(man, &o, &p, &err) != RT_OK) {
            fprintf(stderr, "%s\n", err.message);
            return 1;
        }
        double run_s = now_s() - t0;
        t0 = now_s();
        if (rt_cohort_merge(&o, NULL, &err) != RT_OK) {
            fprintf(stderr, "%s\n", err.message);
            return 1;
        }
        double merge_s = now_s() - t0;
        double per_min = 60.0 * (double)p.scored / run_s;
        if (k == 0)
            per_min_one_core = per_min;
        printf("jobs %d x threads %d: %zu scored, %zu failed in %.2f s = %.1f nights/min, "
               "%.2fx one core (%.1f h of recording per second); merge %.3f s\n",
               jobs, threads, p.scored, p.failed, run_s, per_min, per_min / per_min_one_core,
               hours * (double)p.scored / run_s, merge_s);
    }
    rt_manifest_free(man);
    nftw(dir, remove_entry, 16, FTW_DEPTH | FTW_PHYS);
    return 0;
}
