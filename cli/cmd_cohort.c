/* remtone cohort MANIFEST --out DIR: score a cohort in parallel, resumably,
 * and gather its table and calibration; remtone cohort-merge DIR: gather
 * only (after the parts of a Slurm array). docs/cohort.md. */
#include <dirent.h>
#include <errno.h>
#include <stdbool.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "cli.h"
#include "exclusion_opts.h"
#include "remtone/cohort.h"

enum { KEY_OUT = 1, KEY_JOBS, KEY_FORCE, KEY_PART, KEY_CUTOFFS, KEY_POSITIVE, KEY_NEGATIVE,
       KEY_QUIET, KEY_MIN_REM, KEY_THREADS, KEY_PAGES, KEY_PER_SUBJECT, KEY_CALIBRATE_CORRECTED,
       KEY_BY_SEX, KEY_AGE_BANDS, KEY_NORMS };

/* The stratification options, the same for a run and a merge. */
#define COHORT_STRATA_OPTIONS                                                                     \
    {"by-sex", 0, KEY_BY_SEX, NULL, "also calibrate each sex (the manifest's sex column) apart"}, \
    {"age-bands", 1, KEY_AGE_BANDS, "EDGES", "also calibrate each age band apart: ascending "     \
     "whole years, e.g. 50,65 for <50, 50-64 and >=65 (the manifest's age column)"}

static const cli_option OPTIONS[] = {
    {"out", 1, KEY_OUT, "DIR", "output folder (created when missing; required)"},
    {"jobs", 1, KEY_JOBS, "N", "nights scored at once (default: the processor cores available)"},
    {"threads", 1, KEY_THREADS, "N", "threads scoring each night (default: the cores available "
                                     "divided by the jobs, at least 1)"},
    {"force", 0, KEY_FORCE, NULL, "rescore nights whose result is current"},
    {"html", 0, KEY_PAGES, NULL, "also write each night's review page, DIR/nights/ID.html, linked "
                                 "from DIR/cohort.html"},
    {"part", 1, KEY_PART, "K/N", "score only slice K of N (1-based, by a hash of the id); "
                                 "run cohort-merge after all parts"},
    {"cutoffs", 1, KEY_CUTOFFS, "FILE", "a lab's own cutoffs (CSV index,cutoff,unit)"},
    {"norms", 1, KEY_NORMS, "FILE", "a lab's normative values by sex and age band (as score "
                                    "--norms), for the nights with an age or sex; a row's own "
                                    "`norms` column replaces it"},
    {"positive", 1, KEY_POSITIVE, "GROUP", "group of the positive class for calibration (default case)"},
    {"negative", 1, KEY_NEGATIVE, "GROUP", "group of the negative class (default control)"},
    {"calibrate-corrected", 0, KEY_CALIBRATE_CORRECTED, NULL, "calibrate on the corrected values "
     "of nights with a corrections file (default: remtone's automatic values)"},
    {"min-rem", 1, KEY_MIN_REM, "MIN", "least scorable REM minutes for an assessable night (default 5)"},
    {"per-subject", 0, KEY_PER_SUBJECT, NULL, "calibrate on subjects (each one's mean), not nights"},
    COHORT_STRATA_OPTIONS,
    CLI_EXCLUSION_OPTIONS,
    {"quiet", 0, KEY_QUIET, NULL, "no progress line and no summary"},
    {0},
};

static const cli_option MERGE_OPTIONS[] = {
    {"cutoffs", 1, KEY_CUTOFFS, "FILE", "cutoffs the run used (tabulated besides the published ones)"},
    {"positive", 1, KEY_POSITIVE, "GROUP", "group of the positive class (default case)"},
    {"negative", 1, KEY_NEGATIVE, "GROUP", "group of the negative class (default control)"},
    {"per-subject", 0, KEY_PER_SUBJECT, NULL, "calibrate on subjects (each one's mean), not nights"},
    {"calibrate-corrected", 0, KEY_CALIBRATE_CORRECTED, NULL, "calibrate on the corrected values "
     "of nights with a corrections file (default: remtone's automatic values)"},
    COHORT_STRATA_OPTIONS,
    {"quiet", 0, KEY_QUIET, NULL, "no summary"},
    {0},
};

typedef struct cohort_config {
    rt_cohort_options o;
    int quiet;
    const char *cmd;
} cohort_config;

static int parse_part(cohort_config *c, const char *arg)
{
    char *end = NULL;
    unsigned long k = strtoul(arg, &end, 10);
    if (end == arg || *end != '/') {
        fprintf(stderr, "remtone %s: --part must be K/N, got '%s'\n", c->cmd, arg);
        return EXIT_USAGE;
    }
    const char *rest = end + 1;
    unsigned long n = strtoul(rest, &end, 10);
    if (end == rest || *end || arg[0] == '-' || rest[0] == '-' || n < 1 || n > 100000 || k < 1 ||
        k > n) {
        fprintf(stderr, "remtone %s: --part K/N needs 1 <= K <= N <= 100000, got '%s'\n", c->cmd,
                arg);
        return EXIT_USAGE;
    }
    c->o.part = (unsigned)k;
    c->o.part_count = (unsigned)n;
    return EXIT_OK;
}

/* --age-bands EDGES: 1 to RT_COHORT_AGE_EDGES_MAX whole years, comma-separated,
 * strictly ascending, each 1..130. */
static int parse_age_bands(cohort_config *c, const char *arg)
{
    const char *at = arg;
    size_t n = 0;
    for (;;) {
        char *end = NULL;
        long e = *at >= '0' && *at <= '9' ? strtol(at, &end, 10) : -1;
        if (e < 1 || e > 130 || (*end != ',' && *end != '\0') || n == RT_COHORT_AGE_EDGES_MAX ||
            (n > 0 && e <= c->o.age_edges[n - 1])) {
            fprintf(stderr, "remtone %s: --age-bands must be 1 to %d ascending whole years "
                            "between 1 and 130, comma-separated (e.g. 50,65), got '%s'\n",
                    c->cmd, RT_COHORT_AGE_EDGES_MAX, arg);
            return EXIT_USAGE;
        }
        c->o.age_edges[n++] = (int)e;
        if (*end == '\0')
            break;
        at = end + 1;
    }
    c->o.n_age_edges = n;
    return EXIT_OK;
}

static int on_option(void *ctx, int key, const char *arg)
{
    cohort_config *c = ctx;
    int rc = EXIT_OK;
    if (cli_exclusion_option(c->cmd, &c->o.params, &c->o.label_map_path, key, arg, &rc))
        return rc;
    char *end = NULL;
    switch (key) {
    case KEY_OUT: c->o.out_dir = arg; break;
    case KEY_FORCE: c->o.force = true; break;
    case KEY_PAGES: c->o.pages = true; break;
    case KEY_PER_SUBJECT: c->o.per_subject = true; break;
    case KEY_CUTOFFS: c->o.cutoffs_path = arg; break;
    case KEY_NORMS: c->o.norms_path = arg; break;
    case KEY_POSITIVE: c->o.positive = arg; c->o.groups_given = true; break;
    case KEY_NEGATIVE: c->o.negative = arg; c->o.groups_given = true; break;
    case KEY_CALIBRATE_CORRECTED: c->o.calibrate_corrected = true; break;
    case KEY_BY_SEX: c->o.by_sex = true; break;
    case KEY_AGE_BANDS: return parse_age_bands(c, arg);
    case KEY_QUIET: c->quiet = 1; break;
    case KEY_PART: return parse_part(c, arg);
    case KEY_JOBS:
    case KEY_THREADS: {
        const char *name = key == KEY_JOBS ? "jobs" : "threads";
        long j = strtol(arg, &end, 10);
        if (end == arg || *end || j < 1 || j > 256) {
            fprintf(stderr, "remtone %s: --%s must be 1 to 256, got '%s'\n", c->cmd, name, arg);
            return EXIT_USAGE;
        }
        *(key == KEY_JOBS ? &c->o.jobs : &c->o.threads) = (int)j;
        break;
    }
    case KEY_MIN_REM:
        c->o.params.min_scorable_min = strtod(arg, &end);
        if (end == arg || *end || !(c->o.params.min_scorable_min >= 0 &&
                                    c->o.params.min_scorable_min <= 600)) {
            fprintf(stderr, "remtone %s: --min-rem must be 0 to 600 minutes, got '%s'\n", c->cmd, arg);
            return EXIT_USAGE;
        }
        break;
    }
    return EXIT_OK;
}

static void clock_text(char *dst, size_t cap, double s)
{
    if (s < 0) {
        snprintf(dst, cap, "?");
        return;
    }
    long t = (long)(s + 0.5);
    snprintf(dst, cap, "%ld:%02ld:%02ld", t / 3600, t / 60 % 60, t % 60);
}

/* One line on a terminal, rewritten in place. */
static void show_progress(const rt_cohort_progress *p, void *user)
{
    (void)user;
    char left[32], spent[32];
    clock_text(left, sizeof left, p->remaining_s);
    clock_text(spent, sizeof spent, p->elapsed_s);
    fprintf(stderr, "\r%zu/%zu nights done (%zu scored, %zu current, %zu failed), %.1f/min, "
                    "%s elapsed, %s left  ",
            p->done, p->total, p->scored, p->skipped, p->failed, p->rate_per_min, spent, left);
    fflush(stderr);
}

/* The files a run or a merge writes in the output folder (docs/cohort.md,
 * "Files"), with every calibrated-cutoffs-*.csv there (a merge writes or
 * removes those of the strata); none may be an input, however spelled
 * (cli_check_outputs). The inputs are the manifest, the cutoffs, the label
 * map, the norms and every file the manifest names. */
static int check_outputs(const cohort_config *c, const char *manifest_path, const rt_manifest *m)
{
    static const char *const NAMES[] = {"cohort.csv", "calibration.csv", "calibrated-cutoffs.csv",
                                        "cohort.html", "cohort.log", "subjects.csv",
                                        "calibration-strata.csv"};
    enum { N = sizeof NAMES / sizeof NAMES[0], MAX_OUT = N + 64 };
    static char paths[MAX_OUT][4200];
    cli_output outputs[MAX_OUT];
    size_t n_out = 0;
    for (; n_out < N; n_out++)
        snprintf(paths[n_out], sizeof paths[n_out], "%s/%s", c->o.out_dir, NAMES[n_out]);
    DIR *d = opendir(c->o.out_dir);
    for (struct dirent *de; d && n_out < MAX_OUT && (de = readdir(d)) != NULL;) {
        size_t len = strlen(de->d_name);
        if (strncmp(de->d_name, "calibrated-cutoffs-", 19) == 0 && len > 23 &&
            strcmp(de->d_name + len - 4, ".csv") == 0)
            snprintf(paths[n_out++], sizeof paths[0], "%s/%s", c->o.out_dir, de->d_name);
    }
    if (d)
        closedir(d);
    for (size_t i = 0; i < n_out; i++)
        outputs[i] = (cli_output){"out", paths[i]};
    enum { RUN = 4, PER_ROW = 7 };
    size_t n_inputs = RUN + (m ? PER_ROW * m->n_entries : 0);
    const char **inputs = calloc(n_inputs, sizeof *inputs);
    if (!inputs) {
        fprintf(stderr, "remtone %s: out of memory\n", c->cmd);
        return EXIT_NOMEM;
    }
    inputs[0] = manifest_path;
    inputs[1] = c->o.cutoffs_path;
    inputs[2] = c->o.label_map_path;
    inputs[3] = c->o.norms_path;
    for (size_t i = 0; m && i < m->n_entries; i++) {
        const rt_manifest_entry *e = &m->entries[i];
        const char *row[PER_ROW] = {e->recording, e->stages,  e->events,     e->label_map,
                                    e->cutoffs,   e->norms,   e->corrections};
        memcpy(&inputs[RUN + PER_ROW * i], row, sizeof row);
    }
    int rc = cli_check_outputs(c->cmd, outputs, n_out, inputs, n_inputs);
    free(inputs);
    return rc;
}

/* The inputs a run or a merge reads besides the manifest -- the cutoffs, the
 * norms, and for a merge the results folder -- are read before anything is
 * written, so that their failures carry the input exit codes (README.md, "Exit codes")
 * and the library's remaining I/O failures are those of the output folder. */
static int check_inputs(const cohort_config *c, bool merge)
{
    if (c->o.cutoffs_path) {
        rt_error err;
        rt_error_clear(&err);
        rt_cutoffs cut;
        rt_cutoffs_published(&cut);
        rt_status st = rt_cutoffs_load(&cut, c->o.cutoffs_path, &err);
        if (st != RT_OK)
            return cli_report(st, &err, 0);
    }
    if (c->o.norms_path) {
        rt_error err;
        rt_error_clear(&err);
        rt_norms *norms = NULL;
        rt_status st = rt_norms_load(c->o.norms_path, &norms, &err);
        rt_norms_free(norms);
        if (st != RT_OK)
            return cli_report(st, &err, 0);
    }
    if (merge) {
        char nights[4200];
        snprintf(nights, sizeof nights, "%s/nights", c->o.out_dir);
        struct stat sb;
        int missing = stat(nights, &sb) != 0;
        if (missing || !S_ISDIR(sb.st_mode)) {
            int code = missing ? errno : ENOTDIR;
            fprintf(stderr, "remtone %s: %s: cannot open: %s (no cohort results here)\n", c->cmd,
                    nights, strerror(code));
            return code == ENOMEM ? EXIT_NOMEM : EXIT_INPUT_IO;
        }
    }
    return EXIT_OK;
}

static int merge_and_report(cohort_config *c)
{
    rt_error err;
    rt_error_clear(&err);
    rt_cohort_merge_summary s;
    rt_status st = rt_cohort_merge(&c->o, &s, &err);
    if (st != RT_OK)
        return cli_report(st, &err, st == RT_ERR_IO);
    if (c->quiet)
        return EXIT_OK;
    printf("%s: %zu nights in cohort.csv (%zu scored, %zu failed%s); ", c->o.out_dir, s.nights,
           s.scored, s.failed, s.incomplete ? ", some incomplete results ignored" : "");
    if (s.calibrated)
        printf("calibration on %zu \"%s\" and %zu \"%s\" %s\n", s.positives, c->o.positive,
               s.negatives, c->o.negative, c->o.per_subject ? "subjects" : "nights");
    else
        printf("no calibration: it needs nights in both groups \"%s\" and \"%s\" "
               "(--positive, --negative); no calibrated-cutoffs.csv or calibration.csv\n",
               c->o.positive, c->o.negative);
    if (s.calibrated && s.calibrated_indices == 0)
        printf("%s: no calibrated-cutoffs.csv: no index could be calibrated\n", c->o.out_dir);
    for (size_t k = 0; k < s.n_strata; k++) {
        const rt_cohort_stratum_summary *t = &s.strata[k];
        printf("  %s %s: %zu \"%s\" and %zu \"%s\" %s", t->by, t->name, t->positives,
               c->o.positive, t->negatives, c->o.negative, c->o.per_subject ? "subjects" : "nights");
        if (t->unknown)
            printf(", left out (no %s given)\n", t->by);
        else if (t->cutoffs_file[0])
            printf(", cutoffs in %s\n", t->cutoffs_file);
        else if (t->positives == 0 || t->negatives == 0)
            printf(", no cutoff: no \"%s\" %s in it\n",
                   t->positives == 0 ? c->o.positive : c->o.negative,
                   c->o.per_subject ? "subject" : "night");
        else
            printf(", no cutoff (calibration-strata.csv says why)\n");
    }
    return EXIT_OK;
}

static int run(int argc, char **argv)
{
    cohort_config c;
    memset(&c, 0, sizeof c);
    rt_cohort_options_default(&c.o);
    c.cmd = "cohort";
    char *pos[1];
    int npos = 0;
    int rc = cli_parse(&CLI_COHORT, argc, argv, on_option, &c, pos, 1, &npos);
    if (rc != EXIT_OK)
        return rc < 0 ? EXIT_OK : rc;
    if (!c.o.out_dir) {
        fprintf(stderr, "remtone cohort: give --out DIR (remtone cohort --help)\n");
        return EXIT_USAGE;
    }
    if (strcmp(c.o.positive, c.o.negative) == 0) {
        fprintf(stderr, "remtone cohort: --positive and --negative name the same group\n");
        return EXIT_USAGE;
    }
    rt_error err;
    rt_error_clear(&err);
    rt_manifest *m = NULL;
    rt_status st = rt_manifest_load(pos[0], &m, &err);
    if (st != RT_OK)
        return cli_report(st, &err, 0);
    if ((rc = check_outputs(&c, pos[0], m)) != EXIT_OK || (rc = check_inputs(&c, false)) != EXIT_OK) {
        rt_manifest_free(m);
        return rc;
    }
    bool tty = !c.quiet && isatty(STDERR_FILENO);
    if (tty)
        c.o.progress = show_progress;
    rt_cohort_progress p;
    st = rt_cohort_run(m, &c.o, &p, &err);
    rt_manifest_free(m);
    if (tty)
        fputc('\n', stderr);
    if (st != RT_OK)
        return cli_report(st, &err, st == RT_ERR_IO);
    if (!c.quiet)
        printf("%s: %zu nights: %zu scored, %zu already current, %zu failed (nights/*.error.json)\n",
               c.o.out_dir, p.total, p.scored, p.skipped, p.failed);
    /* the parts of a split run gather once, with cohort-merge, after all finish */
    if (c.o.part_count > 1)
        return EXIT_OK;
    return merge_and_report(&c);
}

static int run_merge(int argc, char **argv)
{
    cohort_config c;
    memset(&c, 0, sizeof c);
    rt_cohort_options_default(&c.o);
    c.cmd = "cohort-merge";
    char *pos[1];
    int npos = 0;
    int rc = cli_parse(&CLI_COHORT_MERGE, argc, argv, on_option, &c, pos, 1, &npos);
    if (rc != EXIT_OK)
        return rc < 0 ? EXIT_OK : rc;
    c.o.out_dir = pos[0];
    if ((rc = check_outputs(&c, NULL, NULL)) != EXIT_OK || (rc = check_inputs(&c, true)) != EXIT_OK)
        return rc;
    return merge_and_report(&c);
}

const cli_command CLI_COHORT = {
    "cohort", "MANIFEST --out DIR [--jobs N] [--threads N] [--force] [--part K/N] [options]",
    "Score a cohort from a manifest: resumable, parallel, shardable; table and calibration.",
    OPTIONS, run, "a manifest"};

const cli_command CLI_COHORT_MERGE = {
    "cohort-merge", "DIR [--positive GROUP] [--negative GROUP] [--cutoffs FILE] [--by-sex] "
    "[--age-bands EDGES]",
    "Rebuild cohort.csv, calibration and cohort.html from DIR/nights (after --part runs).",
    MERGE_OPTIONS, run_merge, "the output folder of a cohort run"};
