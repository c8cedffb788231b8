/* The signal definitions behind every rule set: rectified envelope, robust
 * local background, phasic bursts and tonic share. Pure functions on arrays,
 * so each published boundary can be tested on a constructed signal.
 * docs/scoring.md explains each choice. */
#ifndef REMTONE_DETECT_H
#define REMTONE_DETECT_H

#include <stddef.h>

/* Rectified moving average: env[i] = mean(|x[j]|) over the centred window of
 * 2*(window/2)+1 samples, clipped at the ends. env may alias x. scratch holds
 * window + 1 doubles. */
void rt_envelope(double *x, size_t n, size_t window, double *env, double *scratch);

/* The q-quantile (0..1) of env over each block [starts[b], starts[b+1]), for
 * b in 0..n_blocks-1 (starts holds n_blocks+1 values), so non-integer rates
 * stay on the time grid, taking every stride-th sample (>= 1; the envelope is
 * smooth over its window, so a stride well below the window loses nothing).
 * scratch holds the longest block. */
void rt_block_quantiles(const double *env, const size_t *starts, size_t n_blocks, double q,
                        size_t stride, double *out, double *scratch);

/* q-quantile of v[0..n) with linear interpolation (the "type 7" definition of
 * Hyndman & Fan 1996, as numpy's default); v is reordered. n >= 1. */
double rt_quantile(double *v, size_t n, double q);

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
