/* The FFTW plan cache: one (r2c, c2r) plan pair per power-of-two size, made
 * with FFTW_ESTIMATE under a process-wide mutex. ESTIMATE was measured against
 * MEASURE for the sizes the band-pass uses (docs/conditioning.md): MEASURE
 * spent seconds planning and its plans filtered no faster; its plans also
 * depend on timing, so results could change in the last bits from run to run,
 * while ESTIMATE plans are the same on every run of one build. */
#include "fft_plans.h"

#include <pthread.h>
#include <stdint.h>

#include "internal.h"

/* Powers of two from 2^1 to 2^22: one slot per exponent. */
enum { CACHE_SLOTS = 23 };

typedef struct cache_slot {
    rt_fft_plan plan;
    int made;
} cache_slot;

static pthread_mutex_t cache_lock = PTHREAD_MUTEX_INITIALIZER;
static cache_slot cache[CACHE_SLOTS];
static size_t cache_users;

static int size_exponent(size_t n)
{
    int e = 0;
    if (n < 2 || (n & (n - 1)) != 0 || n > (size_t)RT_FFT_MAX_SAMPLES)
        return -1;
    while (((size_t)1 << e) != n)
        e++;
    return e;
}

/* Planning with FFTW_ESTIMATE does not touch the arrays, but FFTW still wants
 * arrays of the right alignment to decide on SIMD code paths. */
static int make_plans(cache_slot *slot, size_t n)
{
    double *re = fftw_alloc_real(n);
    fftw_complex *co = fftw_alloc_complex(n / 2 + 1);
    int ok = 0;
    if (re && co) {
        slot->plan.forward = fftw_plan_dft_r2c_1d((int)n, re, co, FFTW_ESTIMATE);
        slot->plan.inverse = fftw_plan_dft_c2r_1d((int)n, co, re, FFTW_ESTIMATE);
        ok = slot->plan.forward && slot->plan.inverse;
        if (!ok) {
            if (slot->plan.forward)
                fftw_destroy_plan(slot->plan.forward);
            if (slot->plan.inverse)
                fftw_destroy_plan(slot->plan.inverse);
        }
    }
    fftw_free(re);
    fftw_free(co);
    if (ok) {
        slot->plan.n = n;
        slot->made = 1;
    }
    return ok;
}

rt_status rt_fft_plan_acquire(size_t n, const rt_fft_plan **out, rt_error *err)
{
    int e = size_exponent(n);
    *out = NULL;
    if (e < 0)
        return rt_fail(err, RT_ERR_USAGE,
                       "fft_plans.c: transform size %zu is not a power of two in 2..%d",
                       n, RT_FFT_MAX_SAMPLES);
    pthread_mutex_lock(&cache_lock);
    cache_slot *slot = &cache[e];
    if (!slot->made && !make_plans(slot, n)) {
        pthread_mutex_unlock(&cache_lock);
        /* FFTW_ESTIMATE planning fails only when its arrays cannot be had */
        return rt_fail(err, RT_ERR_NOMEM,
                       "fft_plans.c: out of memory planning a transform of %zu samples", n);
    }
    cache_users++;
    *out = &slot->plan;
    pthread_mutex_unlock(&cache_lock);
    return RT_OK;
}

void rt_fft_plan_release(const rt_fft_plan *plan)
{
    if (!plan)
        return;
    pthread_mutex_lock(&cache_lock);
    if (cache_users > 0)
        cache_users--;
    pthread_mutex_unlock(&cache_lock);
}

void rt_fft_plans_cleanup(void)
{
    pthread_mutex_lock(&cache_lock);
    if (cache_users == 0) {
        for (int e = 0; e < CACHE_SLOTS; e++) {
            if (!cache[e].made)
                continue;
            fftw_destroy_plan(cache[e].plan.forward);
            fftw_destroy_plan(cache[e].plan.inverse);
            cache[e].made = 0;
        }
        fftw_cleanup();
    }
    pthread_mutex_unlock(&cache_lock);
}
