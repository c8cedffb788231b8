/* Shared inside the cohort module: the per-night step the workers run, and
 * the file names every part agrees on. */
#ifndef REMTONE_COHORT_INTERNAL_H
#define REMTONE_COHORT_INTERNAL_H

#include <jansson.h>
#include <stdbool.h>
#include <stddef.h>

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
 * remtone-night/2 (or /1) with the objects "rem", "review" and "indices".
 * A run rescores a night whose stored result is not one (a file cut short or
 * damaged), whatever its key says. */
bool cohort_result_usable(json_t *root);

/* One row of cohort.csv, read back from a night's files. */
typedef struct cohort_row {
    char id[RT_COHORT_ID_MAX + 1];
    char group[RT_COHORT_GROUP_MAX + 1];
    bool failed;
    bool flagged;
    char level[32];              /* review level, or "failed" */
    char reservations[256];      /* reservation codes joined by ';' ("" none; "unknown" for a
                                    remtone-night/1 result, which had none to give) */
    double rem_minutes;          /* NaN for a failed night */
    double scorable_minutes;
    double value[RT_IX_COUNT];   /* NaN when not computed or failed */
    long warnings;               /* -1 for a failed night */
    char error[512];             /* the failure message */
} cohort_row;

/* Calibration of every index against the positive and negative groups. */
typedef struct cohort_calibration {
    rt_roc roc[RT_IX_COUNT];
    double published[RT_IX_COUNT];   /* NaN when none */
    double sens_published[RT_IX_COUNT], spec_published[RT_IX_COUNT];
    double in_force[RT_IX_COUNT];    /* cutoffs of options->cutoffs_path (or published) */
    double sens_in_force[RT_IX_COUNT], spec_in_force[RT_IX_COUNT];
} cohort_calibration;

rt_status cohort_write_html(const char *path, const cohort_row *rows, size_t n_rows,
                            const cohort_calibration *cal, const rt_cohort_options *options,
                            rt_error *err);
#endif
