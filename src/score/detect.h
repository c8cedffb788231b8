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
    double start;    /* onset, in samples (fractional) */
    double end;      /* end, in samples (fractional, exclusive) */
    double ratio;    /* ramp-corrected mean envelope between the edges / background */
} rt_span;

/* The conditioned stretch that bursts are found on. background is per block
 * (block b covers starts[b] .. starts[b+1]). */
typedef struct rt_burst_signal {
    const double *env;        /* rectified envelope, uV, n samples */
    const double *rect_cum;   /* prefix sums of |x| (n + 1 values: rect_cum[i] is the sum of
                                 samples 0..i-1), or NULL: edges at half height only */
    size_t n;
    const double *background; /* n_blocks values, uV */
    const size_t *starts;     /* n_blocks + 1 sample boundaries */
    size_t n_blocks;
    double rate_hz;
} rt_burst_signal;

/* Finds bursts: runs where env >= k x background (gaps shorter than
 * merge_gap samples joined), each located at half its height above the
 * background and, with rect_cum, each edge then placed where the rectified
 * signal steps (the least-squares split of |x| within one envelope window of
 * the half-height edge); kept when the ramp-corrected mean envelope between
 * the edges reaches k x background and the duration lies in [min_s, max_s]
 * within tolerance_s plus half a sample. Writes at most cap spans; returns
 * how many were found (may exceed cap: then only cap were written). scratch
 * holds n doubles. */
size_t rt_find_bursts(const rt_burst_signal *sig, const rt_burst_rule *rule, size_t merge_gap,
                      rt_span *spans, size_t cap, double *scratch);

/* rt_find_bursts for several rules (at most 8) on one signal: rule r's spans
 * go to spans[r] (cap each), their number to found[r]. Rules with the same k
 * and window share one scan, since their candidate runs, edges and
 * amplitudes are the same; each is then kept by its own duration limits, so
 * every rule finds exactly what rt_find_bursts finds for it alone. */
void rt_find_bursts_rules(const rt_burst_signal *sig, const rt_burst_rule *rules, size_t n_rules,
                          size_t merge_gap, rt_span *const *spans, size_t cap, size_t *found,
                          double *scratch);

/* Number of samples in [from, to) whose envelope is at the tonic level: at or
 * above rel x background, or above abs_uv (abs_uv <= 0: relative only;
 * rel <= 0: absolute only). */
size_t rt_count_tonic(const double *env, size_t from, size_t to, const double *background,
                      const size_t *starts, size_t n_blocks, double rel, double abs_uv);

/* rt_count_tonic of every block: counts[b] for [starts[b], starts[b+1]), so
 * that a stretch of whole blocks counts as the sum of its blocks. */
void rt_count_tonic_blocks(const double *env, const double *background, const size_t *starts,
                           size_t n_blocks, double rel, double abs_uv, size_t *counts);

#endif
