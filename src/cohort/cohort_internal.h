/* Shared inside the cohort module: the per-night step the workers run, and
 * the file names every part agrees on. */
#ifndef REMTONE_COHORT_INTERNAL_H
#define REMTONE_COHORT_INTERNAL_H

#include <jansson.h>
#include <stdbool.h>
#include <stddef.h>
#include <stdio.h>

#include "output.h"

#include "remtone/cohort.h"

enum { COHORT_PATH_MAX = 4096 };

typedef enum night_outcome { NIGHT_SCORED = 0, NIGHT_SKIPPED, NIGHT_FAILED } night_outcome;

/* What every night of one run shares. */
typedef struct cohort_shared {
    const rt_cohort_options *options;
    int threads;               /* threads scoring each night */
    rt_cutoffs cutoffs;        /* in force for this run */
    char settings[8192];       /* every setting that changes a result, as text; hashed per night */
    char nights_dir[COHORT_PATH_MAX];
    char log_path[COHORT_PATH_MAX];
} cohort_shared;

/* Fills shared->settings from the options and cutoffs. */
void cohort_settings_text(cohort_shared *shared);

/* Scores one night unless its result is current; writes ID.json + ID.key or
 * ID.error.json. Never fails the run: problems become an error record. */
night_outcome cohort_night(const cohort_shared *shared, const rt_manifest_entry *e);

/* DIR/nights/ID<suffix>. Returns false when it does not fit. */
int cohort_night_path(char *dst, size_t cap, const char *nights_dir, const char *id,
                      const char *suffix);



/* ---- merge ---- */

/* True when root is a night result the merge can read: schema
 * remtone-night/4 (or /3, /2, /1) with the objects "rem", "review" and "indices".
 * A run rescores a night whose stored result is not one (a file cut short or
 * damaged), whatever its key says. */
bool cohort_result_usable(json_t *root);

/* One row of cohort.csv, read back from a night's files. */
typedef struct cohort_row {
    char id[RT_COHORT_ID_MAX + 1];
    char group[RT_COHORT_GROUP_MAX + 1];
    char subject[RT_COHORT_GROUP_MAX + 1]; /* "" when the manifest gave none */
    char visit[RT_COHORT_GROUP_MAX + 1];
    double age;                  /* the manifest's age (its key or error record), NaN: none */
    char sex;                    /* 'F', 'M', 0: none */
    bool failed;
    bool flagged;
    char level[32];              /* review level, or "failed" */
    char reservations[256];      /* reservation codes joined by ';' ("" none; "unknown" for a
                                    remtone-night/1 result, which had none to give) */
    double rem_minutes;          /* NaN for a failed night */
    double scorable_minutes;
    double value[RT_IX_COUNT];   /* NaN when not computed or failed; the corrected values of a
                                    corrected night (its level comes from them) */
    bool corrected;              /* scored with a reviewer's corrections */
    double automatic[RT_IX_COUNT]; /* remtone's own values (= value when not corrected) */
    long warnings;               /* -1 for a failed night */
    char *warning_texts;         /* the warnings joined by " | " (NULL: none); owned */
    char error[512];             /* the failure message */
    bool page;                   /* nights/ID.html exists (a per-night review page) */
} cohort_row;

/* Calibration of every index against the positive and negative groups. */
typedef struct cohort_calibration {
    bool computed;                   /* false when a group has no scored night: then no
                                        calibration file is written and roc[] is empty */
    size_t positives, negatives;     /* scored rows of each group used */
    rt_roc roc[RT_IX_COUNT];
    double published[RT_IX_COUNT];   /* NaN when none */
    double sens_published[RT_IX_COUNT], spec_published[RT_IX_COUNT];
    double in_force[RT_IX_COUNT];    /* cutoffs of options->cutoffs_path (or published) */
    double sens_in_force[RT_IX_COUNT], spec_in_force[RT_IX_COUNT];
} cohort_calibration;

/* A number in a cohort CSV (%.10g; nothing when not finite). */
void cohort_put_number(FILE *f, double v);

/* ---- strata: calibration per sex or age band ---- */

/* One stratum: the rows of one sex, or of one age band [age_lo, age_hi), or
 * those without the column ("unknown": counted, left out). */
typedef struct cohort_stratum {
    rt_cohort_stratum_summary sum;
    char tag[32];                 /* "sex-F", "age-50-64": the cutoff file's name part */
    char sex;
    double age_lo, age_hi;
    cohort_calibration cal;
} cohort_stratum;

typedef struct cohort_strata {
    cohort_stratum *v;
    size_t n;
} cohort_strata;

/* Whether a row belongs to a stratum. */
bool cohort_in_stratum(const cohort_stratum *s, const cohort_row *row);

/* Calibrates rows (only those of the stratum `only`, NULL = all) into cal,
 * whose published and in-force cutoffs are already set and whose computed
 * flag says whether both groups have a scored night in the whole table. */
rt_status cohort_calibrate(const cohort_row *rows, size_t n_rows, const rt_cohort_options *o,
                           const cohort_stratum *only, cohort_calibration *cal, rt_error *err);

/* Checks the options' age edges (RT_ERR_USAGE naming the bad one). */
rt_status cohort_check_age_edges(const rt_cohort_options *o, rt_error *err);

/* The strata the options ask for (none: out->n = 0), each calibrated on the
 * rows like `overall` (its cutoffs, its computed flag). Free with
 * cohort_strata_free. */
rt_status cohort_stratify(const cohort_row *rows, size_t n_rows, const rt_cohort_options *o,
                          const cohort_calibration *overall, cohort_strata *out, rt_error *err);
void cohort_strata_free(cohort_strata *s);

/* What a stratum's index row says beside its numbers: "" when it has a
 * cutoff, else why not (written to dst). */
void cohort_stratum_note(const cohort_stratum *s, int ix, const rt_cohort_options *o, char *dst,
                         size_t cap);

/* calibration-strata.csv (docs/cohort.md): overall first, then every stratum. */
rt_status cohort_write_strata(const char *path, const cohort_calibration *overall,
                              const cohort_strata *strata, const rt_cohort_options *o,
                              rt_error *err);

/* One subject of the cohort (rows with the same `subject`). */
typedef struct cohort_subject {
    char name[RT_COHORT_GROUP_MAX + 1];
    char group[RT_COHORT_GROUP_MAX + 1]; /* the first night's group */
    bool mixed_group;                    /* its nights are in more than one group */
    size_t first, n;                     /* its nights: order[first .. first + n) */
    size_t scored, flagged;              /* nights scored, and flagged among them */
    double mean[RT_IX_COUNT], min[RT_IX_COUNT], max[RT_IX_COUNT];
    double mean_automatic[RT_IX_COUNT];  /* the mean of remtone's own values (= mean unless
                                            a night is corrected) */
    double change[RT_IX_COUNT];          /* largest |difference| between a night and the
                                            subject's next night with a value (visit order);
                                            NaN with fewer than two values */
} cohort_subject;

typedef struct cohort_subjects {
    cohort_subject *v;
    size_t n;
    size_t *order;   /* row indices by subject, then visit (as text), then id */
    size_t n_rows;   /* rows that have a subject */
} cohort_subjects;

/* Groups rows by subject; rows without one are left out. */
rt_status cohort_subjects_build(const cohort_row *rows, size_t n_rows, cohort_subjects *out,
                                rt_error *err);
void cohort_subjects_free(cohort_subjects *s);
/* "agrees", "differs" (some nights flagged, some not) or "one night". */
const char *cohort_subject_agreement(const cohort_subject *s);
/* subjects.csv (docs/cohort.md). */
rt_status cohort_write_subjects(const char *path, const cohort_subjects *subjects, rt_error *err);
/* The rows a calibration on subjects uses: one per subject holding its mean
 * values (failed when it has no scored night), then every night without a
 * subject as it is. RT_ERR_STAGING when a subject's nights are in more than
 * one group. *out is freed by the caller (not its warning texts: none). */
rt_status cohort_subject_rows(const cohort_row *rows, size_t n_rows,
                              const cohort_subjects *subjects, const char *out_dir,
                              cohort_row **out, size_t *n_out, rt_error *err);

rt_status cohort_write_html(const char *path, const cohort_row *rows, size_t n_rows,
                            const cohort_subjects *subjects, const cohort_calibration *cal,
                            const cohort_strata *strata, const rt_cohort_options *options,
                            rt_error *err);
#endif
