/* The atonic REM background of a channel through the night: the level a
 * scorer sees in REM between bursts, fitted so that activity of any length
 * (one burst, a tonic minute, a whole REM period, most of the night's REM)
 * cannot raise it, while a slow drift (electrode impedance) is followed.
 * docs/scoring.md ("Background") gives the reasoning. */
#ifndef REMTONE_BACKGROUND_H
#define REMTONE_BACKGROUND_H

#include <stdbool.h>
#include <stddef.h>

#include "remtone/score.h"

/* One quiet-candidate second of REM: its time and level (median envelope). */
typedef struct rt_level_point {
    double t_s;        /* centre of the second, seconds from the recording start */
    double level_uv;   /* > 0 */
} rt_level_point;

typedef struct rt_atonic_model {
    bool valid;        /* false: too few usable seconds to fit (fewer than 10) */
    double level_uv;   /* the night's atonic level at ref_s: floor_uv x the night's lift */
    double floor_uv;   /* the floor line at ref_s, before any lift */
    double ref_s;      /* reference time, seconds from the recording start */
    double drift_per_s;/* log-level slope: level(t) = level_uv * exp(drift_per_s * (t - ref_s)) */
    bool drift_from_nrem; /* the slope was fitted to NREM levels (else to REM) */
    size_t seconds;    /* seconds that entered the fit */
    size_t minutes;    /* minute levels the line was fitted to */
} rt_atonic_model;

/* Fits the model to rem[0..n) (REM seconds not marked by quality checks, in
 * time order), with the drift taken from nrem[0..n_nrem) (NREM seconds, in
 * time order; may be empty) and p's background_quantile,
 * background_quiet_ratio and background_drift_max. Allocates working memory;
 * RT_ERR_NOMEM only. */
rt_status rt_atonic_fit(const rt_level_point *rem, size_t n, const rt_level_point *nrem,
                        size_t n_nrem, const rt_score_params *p, rt_atonic_model *out,
                        rt_error *err);

/* The model's level at t_s (NaN when not valid). */
double rt_atonic_at(const rt_atonic_model *m, double t_s);

/* The atonic level of one REM bout relative to the night's floor line: the
 * median ratio to the line of the bout's quiet seconds pts[0..n) (those at
 * most background_quiet_ratio times the line). With fewer than 10 quiet
 * seconds (a tonic bout, a bout of scraps) the night's lift. The bout's
 * background is floor line x this lift. scratch holds n doubles. */
double rt_atonic_bout_lift(const rt_atonic_model *m, const rt_level_point *pts, size_t n,
                           const rt_score_params *p, double *scratch);

#endif
