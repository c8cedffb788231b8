/* Rectified envelope and quantiles (levels.c). */
#ifndef REMTONE_DSP_LEVELS_H
#define REMTONE_DSP_LEVELS_H

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

#endif
