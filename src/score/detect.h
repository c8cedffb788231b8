/* The signal definitions behind every rule set: phasic bursts and tonic
 * share (the envelope and quantiles are in dsp/levels.h). Pure functions on arrays,
 * so each published boundary can be tested on a constructed signal.
 * docs/scoring.md explains each choice. */
#ifndef REMTONE_DETECT_H
#define REMTONE_DETECT_H

#include <stddef.h>

#include "dsp/levels.h"

typedef struct rt_burst_rule {
    double k;        /* amplitude: envelope >= k x background */
    double min_s;    /* shortest burst, inclusive */
    double max_s;    /* longest burst, inclusive */
    double tolerance_s; /* min_s and max_s are applied with this slack (edge noise) */
    size_t window;   /* samples of the envelope's moving average (its ramps) */
} rt_burst_rule;

typedef struct rt_span {
    double start;    /* half-height onset, in samples (fractional) */
    double end;      /* half-height end, in samples (fractional, exclusive) */
    double ratio;    /* median envelope over the measured extent / background */
} rt_span;

/* Finds bursts: runs where env >= k x background (gaps shorter than
 * merge_gap samples joined), each measured at half its height above the
 * background, kept when the median envelope over that extent reaches k x
 * background and the measured duration lies in [min_s, max_s] within
 * tolerance_s plus half a sample. background is per block (block b covers starts[b] ..
 * starts[b+1]). Writes at most cap spans; returns how many were found (may
 * exceed cap: then only cap were written). scratch holds n doubles. */
size_t rt_find_bursts(const double *env, size_t n, const double *background,
                      const size_t *starts, size_t n_blocks, double rate_hz,
                      const rt_burst_rule *rule, size_t merge_gap, rt_span *spans, size_t cap,
                      double *scratch);

/* Number of samples in [from, to) whose envelope is at the tonic level: at or
 * above rel x background, or above abs_uv (abs_uv <= 0: relative only;
 * rel <= 0: absolute only). */
size_t rt_count_tonic(const double *env, size_t from, size_t to, const double *background,
                      const size_t *starts, size_t n_blocks, double rel, double abs_uv);

#endif
