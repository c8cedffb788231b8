/* Process-wide cache of FFTW plans for real transforms, one pair (r2c, c2r)
 * per transform size, shared by every filter of every thread.
 *
 * FFTW's planner is not thread-safe, while fftw_execute_dft_r2c/_c2r on new
 * arrays is; so plans are made here once, under one lock, and executed by
 * their users on their own buffers. Every other FFTW user in remtone must plan
 * through this cache too, or planning can race. Internal header: FFTW stays out
 * of the public API. */
#ifndef REMTONE_FFT_PLANS_H
#define REMTONE_FFT_PLANS_H

#include <stddef.h>

#include <fftw3.h>

#include "remtone/status.h"

/* Largest transform size the cache plans (2^22 samples: 32 MiB of doubles). */
enum { RT_FFT_MAX_SAMPLES = 1 << 22 };

typedef struct rt_fft_plan {
    size_t n;           /* transform size in samples, a power of two */
    fftw_plan forward;  /* real n -> complex n/2+1, out of place */
    fftw_plan inverse;  /* complex n/2+1 -> real n, out of place, destroys its input,
                           unnormalised (a forward-inverse round trip scales by n) */
} rt_fft_plan;

/* Looks up or creates the plans for size n (a power of two, 2..RT_FFT_MAX_SAMPLES)
 * and registers one more user. Buffers passed to the plans must come from
 * fftw_alloc_real / fftw_alloc_complex (the plans assume SIMD alignment) and be
 * distinct arrays (out of place). The cache owns the plans; release each
 * acquired plan with rt_fft_plan_release. RT_ERR_USAGE for any other n,
 * RT_ERR_NOMEM when the plan's arrays cannot be had (FFTW's own allocations
 * stop the process: cli/fftw_abort.c). Thread-safe. */
rt_status rt_fft_plan_acquire(size_t n, const rt_fft_plan **out, rt_error *err);

/* Drops one user registered by rt_fft_plan_acquire; plan may be NULL.
 * The plans stay cached for the next user. Thread-safe. */
void rt_fft_plan_release(const rt_fft_plan *plan);

/* Destroys every cached plan and calls fftw_cleanup(), so tests and leak
 * checkers see no FFTW memory left. Does nothing while any plan is still
 * acquired (a filter not yet freed). Thread-safe, but any FFTW use outside
 * this cache at the same time is not. */
void rt_fft_plans_cleanup(void);

#endif
