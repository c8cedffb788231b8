/* Cohort runs: many nights from a manifest, scored in parallel, resumable,
 * shardable across a cluster, gathered into one table with a calibration of
 * every index against the cohort's own labels (docs/cohort.md).
 *
 * A run writes, under an output folder, one result per night
 * (nights/ID.json, schema "remtone-night/4"), a key beside it (nights/ID.key:
 * the sizes and XXH3 digests of the night's inputs and a digest of the
 * settings, so a rerun skips nights whose identity is unchanged), or a
 * failure record (nights/ID.error.json). Every file is written to a
 * temporary name and renamed, so a killed run leaves no partial file. The
 * merge step reads those files back and writes cohort.csv, calibration.csv,
 * calibrated-cutoffs.csv and cohort.html (with strata by sex or age band,
 * also calibration-strata.csv and calibrated-cutoffs-TAG.csv).
 *
 * Ownership: rt_manifest_load() makes a manifest (*out) freed by rt_manifest_free();
 * rt_roc_compute() fills an rt_roc whose arrays rt_roc_free() releases.
 * Thread safety: rt_cohort_run() starts and joins its own worker threads;
 * the progress callback is called from the calling thread only. */
#ifndef REMTONE_COHORT_H
#define REMTONE_COHORT_H

#include <stdbool.h>
#include <stddef.h>

#include "remtone/roles.h"
#include "remtone/score.h"
#include "remtone/status.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- Manifest ---------------------------------------------------------- */

enum {
    RT_COHORT_ID_MAX = 100,   /* bytes of a night id, without the NUL */
    RT_COHORT_GROUP_MAX = 63, /* bytes of a group name, without the NUL */
    RT_COHORT_AGE_EDGES_MAX = 8, /* edges of --age-bands (so at most 9 bands) */
    RT_COHORT_STRATA_MAX = 16    /* strata of one merge, "unknown" ones included */
};

typedef struct rt_manifest_entry {
    char id[RT_COHORT_ID_MAX + 1];
    char group[RT_COHORT_GROUP_MAX + 1]; /* "" when the row gives none */
    char subject[RT_COHORT_GROUP_MAX + 1]; /* the person, "" when the row gives none */
    char visit[RT_COHORT_GROUP_MAX + 1];   /* the visit or date, "" when none; a subject's
                                              nights are ordered by it (as text) */
    char *recording;          /* resolved path, never NULL */
    char *stages;             /* resolved path; NULL = the recording's own annotations */
    char *events;             /* resolved path; NULL when none */
    char *label_map;          /* resolved path of the row's label map; NULL = the run's */
    char *cutoffs;            /* resolved path of the row's cutoff file; NULL = the run's */
    char *role_override[RT_ROLE_COUNT]; /* per-row role overrides ("LABEL" or "A-B"); NULL = detect */
    double age_years;         /* optional `age` column: NaN when not given */
    char sex;                 /* optional `sex` column: 'F', 'M', or 0 when not given */
    char *corrections;        /* resolved path of a reviewer's decisions (docs/corrections.md);
                                 NULL when none */
    char *norms;              /* resolved path of the row's norms file (rt_norms_load); NULL =
                                 the run's */
    long line;                /* manifest line of the row */
} rt_manifest_entry;

typedef struct rt_manifest {
    char path[4096];
    size_t n_entries;
    rt_manifest_entry *entries; /* in manifest order */
} rt_manifest;

/* Reads a manifest: CSV (comma or tab) with header `id,recording,stages,events,group`
 * (events and group may be empty; stages may be empty to use the recording's
 * EDF+ annotations), optional columns `subject`, `visit`, `label_map` and
 * `cutoffs` (a row's own label map and cutoff file, for nights of several
 * sites), `age` (years) and `sex` (F or M) that place the night's indices
 * against the norms, `norms` (a row's own norms file, as `cutoffs`), and optional columns named after roles (`chin`,
 * `arm-left`, `arm-right`, `leg-left`, `leg-right`, `ecg`) that override
 * detection for that night, and an optional `corrections` column: a file of
 * a reviewer's decisions rescoring that night (docs/corrections.md). Relative paths resolve against the manifest's
 * folder. Errors name the file and line: a missing input file (RT_ERR_IO), a
 * duplicate id (compared case-insensitively, as some file systems do), an id
 * that is not a safe file name, a malformed row, an empty manifest
 * (RT_ERR_STAGING); RT_ERR_NOMEM when out of memory. On success *out holds
 * the manifest; on failure *out is NULL. */
rt_status rt_manifest_load(const char *path, rt_manifest **out, rt_error *err);
void rt_manifest_free(rt_manifest *manifest);

/* True when id may name files: 1..RT_COHORT_ID_MAX bytes of ASCII letters,
 * digits, '.', '_' and '-', not starting with '.' or '-', and not ending in
 * ".error" or ".key" (those would collide with a run's own files). */
bool rt_cohort_id_is_safe(const char *id);

/* The slice (0 .. n_parts-1) an id belongs to: XXH3-64 of the id's bytes
 * modulo n_parts, so slices are disjoint, cover the cohort and do not depend
 * on manifest order. n_parts >= 1. */
unsigned rt_cohort_part_of(const char *id, unsigned n_parts);

/* ---- Running ----------------------------------------------------------- */

typedef struct rt_cohort_progress {
    size_t total;      /* nights in this run (this part) */
    size_t done;       /* finished: scored + skipped + failed */
    size_t scored;     /* scored in this run */
    size_t skipped;    /* already done with the same identity */
    size_t failed;     /* failed in this run (nights/ID.error.json) */
    double elapsed_s;  /* wall time since the run started */
    double rate_per_min; /* nights scored per minute of wall time, 0 before the first */
    double remaining_s;  /* estimated time left, negative when unknown */
} rt_cohort_progress;

typedef void (*rt_cohort_progress_fn)(const rt_cohort_progress *progress, void *user);

typedef struct rt_cohort_options {
    const char *out_dir;       /* required; created when missing (its parent must exist) */
    int jobs;                  /* worker threads, 1..256; 0 = the processor cores available */
    int threads;               /* threads scoring each night (rt_night_score_threads), 1..256;
                                  0 = the cores available shared among the workers, at least 1;
                                  results do not depend on it */
    bool force;                /* rescore nights whose result is current */
    bool pages;                /* also write nights/ID.html, each night's review page
                                  (rt_night_write_html, de-identified, titled with the id);
                                  a current result without its page is scored again */
    unsigned part;             /* this run's slice, 1..part_count (1-based) */
    unsigned part_count;       /* number of slices; 0 or 1 = the whole manifest */
    const char *cutoffs_path;  /* a lab's cutoff file (rt_cutoffs_load), NULL = published; a
                                  row's own `cutoffs` column replaces it for that night */
    const char *norms_path;    /* a lab's norms file (rt_norms_load), NULL = the built-in table;
                                  a row's own `norms` column replaces it for that night */
    const char *label_map_path; /* stage and event labels (rt_labelmap_load) of every night,
                                  NULL = none; a row's own `label_map` column replaces it */
    bool per_subject;          /* calibrate on subjects, not nights: each subject's mean
                                  value of every index, so one person counts once */
    rt_score_params params;    /* scoring parameters (rt_score_params_default) */
    const char *positive;      /* calibration: group of the positive class, default "case" */
    const char *negative;      /* calibration: group of the negative class, default "control" */
    bool groups_given;         /* the user named the groups: a named group that no night of
                                  the table has is then an error (RT_ERR_STAGING) and nothing
                                  is written; otherwise it only means no calibration */
    bool calibrate_corrected;  /* calibrate on the corrected values of corrected nights
                                  (docs/corrections.md); default: remtone's automatic values */
    bool by_sex;               /* also calibrate each sex apart (the manifest's `sex`) */
    size_t n_age_edges;        /* also calibrate each age band apart: 0 = no; the bands are
                                  below age_edges[0], [age_edges[k], age_edges[k+1]), and
                                  at or above the last edge (the manifest's `age`) */
    int age_edges[RT_COHORT_AGE_EDGES_MAX]; /* whole years, strictly ascending, 1..130 */
    rt_cohort_progress_fn progress; /* called about every progress_interval_s and at the end */
    void *progress_user;
    double progress_interval_s;     /* default 0.5 */
} rt_cohort_options;

/* Defaults: jobs 0, threads 0, no force, whole manifest, published cutoffs, default
 * parameters, positive "case", negative "control", no progress callback. */
void rt_cohort_options_default(rt_cohort_options *options);

/* Scores every night of the manifest (or of options->part) that has no
 * current result. A night that fails is recorded in nights/ID.error.json and
 * the run goes on; a success removes an older error file. Two rows that share
 * a recording file are never scored at the same time (EDFlib refuses to open
 * one file twice in a process). Returns RT_OK when the run completed, even
 * with failed nights (count in summary->failed); an error only when the run
 * could not proceed (bad options, output folder, cutoff or norms file). A line per
 * night scored is appended to OUT/cohort.log ("scored ID"). summary may be
 * NULL. */
rt_status rt_cohort_run(const rt_manifest *manifest, const rt_cohort_options *options,
                        rt_cohort_progress *summary, rt_error *err);

/* One stratum of a stratified calibration (options by_sex, n_age_edges). */
typedef struct rt_cohort_stratum_summary {
    char by[8];              /* "sex" or "age" */
    char name[24];           /* "F", "M", "<50", "50-64", ">=65", or "unknown" */
    bool unknown;            /* the nights (subjects) without that column: left out */
    size_t positives;        /* scored nights (subjects) of the positive group in it */
    size_t negatives;        /* ... and of the negative group */
    size_t calibrated_indices; /* indices with a Youden cutoff in this stratum */
    char cutoffs_file[64];   /* its cutoff file in OUT ("calibrated-cutoffs-sex-F.csv"),
                                "" when it has none */
} rt_cohort_stratum_summary;

typedef struct rt_cohort_merge_summary {
    size_t nights;        /* rows in cohort.csv */
    size_t scored;        /* nights with a result */
    size_t failed;        /* nights with an error record */
    size_t incomplete;    /* results without a key (a run stopped between the two): ignored */
    size_t positives;     /* scored nights (subjects, with per_subject) of the positive group */
    size_t negatives;     /* scored nights (subjects, with per_subject) of the negative group */
    size_t subjects;      /* subjects named in the manifest (subjects.csv rows) */
    bool calibrated;      /* false when a group had no scored night: calibration.csv and
                             calibrated-cutoffs.csv were then not written (earlier ones
                             removed: they would describe other results) */
    size_t calibrated_indices; /* indices with a calibrated (Youden) cutoff; 0: no
                                  calibrated-cutoffs.csv (an earlier one is removed, since
                                  a cutoff file listing no index is one --cutoffs refuses) */
    size_t n_strata;      /* strata of by_sex and the age bands (0 when neither was asked,
                             or without a calibration), each stratification in order */
    rt_cohort_stratum_summary strata[RT_COHORT_STRATA_MAX];
} rt_cohort_merge_summary;

/* Rebuilds OUT/cohort.csv, OUT/calibration.csv, OUT/calibrated-cutoffs.csv and
 * OUT/cohort.html from OUT/nights/ (rows in id order, so the files depend
 * only on the results, not on the order or the parts that produced them).
 * The two calibration files are written only when both groups have a scored
 * night; every check on the inputs (groups, cutoff file) runs before the
 * first file is replaced, and the files are written into a staging folder
 * OUT/.merge-XXXXXX and moved into OUT together once all are complete, so a
 * failed merge (bad input, out of memory, a file that cannot be written)
 * leaves the earlier files; only a rename failing during the move itself
 * could leave some moved.
 * Uses options->out_dir, positive, negative and cutoffs_path (the cutoffs the
 * sensitivity and specificity are tabulated at besides the published ones).
 * With by_sex or age bands, every stratum is calibrated as well: the table
 * OUT/calibration-strata.csv and a cutoff file OUT/calibrated-cutoffs-TAG.csv
 * per stratum with a cutoff; files of that name left by an earlier merge and
 * not written now are removed. Bad age edges: RT_ERR_USAGE.
 * summary may be NULL. */
rt_status rt_cohort_merge(const rt_cohort_options *options, rt_cohort_merge_summary *summary,
                          rt_error *err);

/* ---- ROC analysis ------------------------------------------------------ */

typedef struct rt_roc {
    size_t n_pos, n_neg;       /* nights of each class used (finite values only) */
    double auc;                /* Mann-Whitney estimate of the area, 0..1; NaN without both classes */
    double auc_var;            /* DeLong et al. 1988 variance; NaN with fewer than 2 per class */
    double auc_low, auc_high;  /* 95 % confidence interval auc -/+ 1.959964 sqrt(var), clipped to [0, 1] */
    double youden_cutoff;      /* cutoff maximising sensitivity + specificity - 1 (a midpoint
                                  between adjacent observed values), NaN when undefined or
                                  when no threshold is better than chance (J <= 0) */
    double youden_j;           /* that maximum, -1..1 */
    double youden_sens, youden_spec;
    size_t n_points;           /* ROC points from (0,0) to (1,1) */
    double *fpr;               /* 1 - specificity at each point, ascending */
    double *tpr;               /* sensitivity at each point */
} rt_roc;

/* ROC analysis of one index: values[i] of night i, positive[i] its class.
 * With lower_is_worse, a night is called positive when its value is below the
 * cutoff; otherwise at or above it. Non-finite values are left out. Fills
 * *out (free with rt_roc_free). Fails only with RT_ERR_NOMEM. */
rt_status rt_roc_compute(const double *values, const bool *positive, size_t n,
                         bool lower_is_worse, rt_roc *out, rt_error *err);
void rt_roc_free(rt_roc *roc);

/* Sensitivity and specificity (0..1, NaN when a class is empty) of the rule
 * "positive at or above cutoff" (below it, with lower_is_worse). */
void rt_roc_at_cutoff(const double *values, const bool *positive, size_t n, bool lower_is_worse,
                      double cutoff, double *sensitivity, double *specificity);

#ifdef __cplusplus
}
#endif
#endif
