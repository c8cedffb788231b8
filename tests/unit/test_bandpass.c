/* The conditioning band-pass (src/score/bandpass.c): its gain against the
 * Butterworth magnitude formula, zero phase, edge handling by reflection,
 * block-size independence, notches, spec validation and the plan cache under
 * concurrent use. Reference-library comparisons (scipy) live in
 * tests/ref/test_bandpass_scipy.py. */
#include "support.h"

#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>

#include "dsp/bandpass.h"
#include "dsp/fft_plans.h"

static const double PI = 3.14159265358979323846;

static uint64_t rng_state;

/* xorshift64* (Vigna 2016): enough for test signals, and seedable. */
static double rng_uniform(void)
{
    rng_state ^= rng_state >> 12;
    rng_state ^= rng_state << 25;
    rng_state ^= rng_state >> 27;
    return (double)((rng_state * 2685821657736338717u) >> 11) / 9007199254740992.0;
}

static double *noise(size_t n)
{
    double *x = malloc(n * sizeof *x);
    assert_non_null(x);
    for (size_t i = 0; i < n; i++)
        x[i] = rng_uniform() - 0.5;
    return x;
}

static double *copy_of(const double *x, size_t n)
{
    double *y = malloc(n * sizeof *y);
    assert_non_null(y);
    memcpy(y, x, n * sizeof *y);
    return y;
}

static rt_bandpass *make(const rt_bandpass_spec *spec, size_t block)
{
    rt_error err;
    rt_bandpass *bp = NULL;
    if (rt_bandpass_new_with_block(spec, block, &bp, &err) != RT_OK)
        fail_msg("rt_bandpass_new: %s", err.message);
    return bp;
}

static void filter(rt_bandpass *bp, double *x, size_t n)
{
    rt_error err;
    if (rt_bandpass_apply(bp, x, n, &err) != RT_OK)
        fail_msg("rt_bandpass_apply: %s", err.message);
}

static double max_abs(const double *x, size_t n)
{
    double m = 0;
    for (size_t i = 0; i < n; i++)
        m = fmax(m, fabs(x[i]));
    return m;
}

static double rms(const double *x, size_t n)
{
    double s = 0;
    for (size_t i = 0; i < n; i++)
        s += x[i] * x[i];
    return sqrt(s / (double)n);
}

static void gain_is_butterworth_squared(void **state)
{
    (void)state;
    rt_bandpass_spec spec = rt_bandpass_spec_defaults(512);
    rt_bandpass *bp = make(&spec, 0);
    /* Butterworth magnitude |H|^2 = 1 / (1 + (w/wc)^(2n)) (standard formula):
     * half power at the corner of each section, so the forward-backward gain
     * is 0.5 (-6 dB) at 10 and 100 Hz, up to the other section's ~1e-9. */
    assert_true(fabs(rt_bandpass_gain(bp, 10) - 0.5) < 1e-6);
    assert_true(fabs(rt_bandpass_gain(bp, 100) - 0.5) < 1e-6);
    /* Maximally flat passband (Butterworth): within 1 % from 30 to 60 Hz. */
    for (double f = 30; f <= 60; f += 5)
        assert_true(rt_bandpass_gain(bp, f) > 0.99 && rt_bandpass_gain(bp, f) <= 1.0);
    /* Order 4 squared rolls off 16 x 6 dB per octave: (1/10)^16 ~ 1e-8 at 1 Hz
     * from the analog asymptote; at Nyquist the bilinear transform gives 0. */
    assert_true(rt_bandpass_gain(bp, 1) < 2e-8);
    assert_true(rt_bandpass_gain(bp, 256) < 1e-12);
    /* DC is blocked exactly; the response is even and periodic in the rate. */
    assert_true(rt_bandpass_gain(bp, 0) == 0.0);
    assert_true(rt_bandpass_gain(bp, -40) == rt_bandpass_gain(bp, 40));
    assert_true(fabs(rt_bandpass_gain(bp, 512 - 40) - rt_bandpass_gain(bp, 40)) < 1e-12);
    rt_bandpass_free(bp);
}

static void constant_offset_removed(void **state)
{
    (void)state;
    rt_bandpass_spec spec = rt_bandpass_spec_defaults(512);
    rt_bandpass *bp = make(&spec, 0);
    size_t n = 20000;
    double *x = malloc(n * sizeof *x);
    assert_non_null(x);
    for (size_t i = 0; i < n; i++)
        x[i] = 37.5;
    filter(bp, x, n);
    /* A reflected constant is the same constant and G(0) = 0, so nothing is
     * left but truncation (<= 1e-9 of the input, see bandpass.h). */
    assert_true(max_abs(x, n) < 1e-9 * 37.5);
    free(x);
    rt_bandpass_free(bp);
}

/* A 40 Hz cosine sampled at 512 Hz has a peak every 6.4 samples' half period;
 * starting at a peak and ending at one after 32k samples, its reflection
 * about either end is the cosine itself (even symmetry), so the edges must
 * show no ringing at all: output = G(40) x input everywhere. */
static void sine_kept_in_amplitude_and_phase(void **state)
{
    (void)state;
    rt_bandpass_spec spec = rt_bandpass_spec_defaults(512);
    rt_bandpass *bp = make(&spec, 0);
    size_t n = 32 * 600 + 1;
    double *x = malloc(n * sizeof *x), *y = malloc(n * sizeof *y);
    assert_non_null(x);
    assert_non_null(y);
    for (size_t i = 0; i < n; i++)
        x[i] = y[i] = cos(2 * PI * 40.0 * (double)i / 512.0);
    filter(bp, y, n);
    double g = rt_bandpass_gain(bp, 40);
    double ratio = rms(y, n) / rms(x, n);
    assert_true(fabs(ratio - 1.0) < 0.01);
    for (size_t i = 0; i < n; i++)
        assert_true(fabs(y[i] - g * x[i]) < 1e-8);
    /* Zero lag: every local maximum stays on the same sample. */
    for (size_t i = 1; i + 1 < n; i++) {
        int peak_x = x[i] > x[i - 1] && x[i] >= x[i + 1];
        int peak_y = y[i] > y[i - 1] && y[i] >= y[i + 1];
        assert_int_equal(peak_x, peak_y);
    }
    free(x);
    free(y);
    rt_bandpass_free(bp);
}

static void block_boundaries_invisible(void **state)
{
    (void)state;
    rng_state = rt_test_seed() | 1;
    rt_bandpass_spec spec = rt_bandpass_spec_defaults(512);
    spec.n_notches = 1;
    spec.notch_hz[0] = 50;
    rt_bandpass *blocked = make(&spec, 0);
    rt_bandpass *whole = make(&spec, 1 << 19);
    assert_true(rt_bandpass_block_samples(blocked) < 200000);
    size_t lengths[] = { 1, 2, 3, 37, 1000, 4095, 4097, 200000 };
    for (size_t t = 0; t < sizeof lengths / sizeof *lengths + 6; t++) {
        /* The fixed lengths, then random ones (the seed is printed above). */
        size_t n = t < sizeof lengths / sizeof *lengths ? lengths[t]
                                                       : 1 + (size_t)(rng_uniform() * 60000);
        double *a = noise(n), *b = copy_of(a, n);
        double peak = max_abs(a, n);
        filter(blocked, a, n);
        filter(whole, b, n);
        /* Each result is within 1e-9 x peak|h| x max|x| of the exact linear
         * filter of the reflected signal (margin rule, bandpass.h), and
         * peak|h| < 1 because G <= 1. */
        for (size_t i = 0; i < n; i++)
            if (fabs(a[i] - b[i]) > 1e-9 * peak)
                fail_msg("n=%zu sample %zu: blocked %.17g vs single block %.17g", n, i, a[i], b[i]);
        free(a);
        free(b);
    }
    rt_bandpass_free(blocked);
    rt_bandpass_free(whole);
}

static void notch_removes_mains_keeps_emg(void **state)
{
    (void)state;
    rt_bandpass_spec spec = rt_bandpass_spec_defaults(512);
    spec.n_notches = 1;
    spec.notch_hz[0] = 50;
    rt_bandpass *bp = make(&spec, 0);
    size_t n = 512 * 30;
    double *mains = malloc(n * sizeof *mains), *emg = malloc(n * sizeof *emg);
    assert_non_null(mains);
    assert_non_null(emg);
    for (size_t i = 0; i < n; i++) {
        mains[i] = sin(2 * PI * 50.0 * (double)i / 512.0 + 0.4);
        emg[i] = sin(2 * PI * 40.0 * (double)i / 512.0 + 0.4);
    }
    double before = rms(mains + 1024, n - 2048);
    filter(bp, mains, n);
    filter(bp, emg, n);
    /* 40 dB = amplitude factor 0.01 (definition of the decibel). Measured away
     * from the edges, where the reflected phase of the sine does not fit. */
    assert_true(rms(mains + 1024, n - 2048) < 0.01 * before);
    assert_true(fabs(rms(emg + 1024, n - 2048) / before - 1.0) < 0.01);
    free(mains);
    free(emg);
    rt_bandpass_free(bp);
}

static void expect_refused(const rt_bandpass_spec *spec, const char *why)
{
    rt_error err;
    rt_error_clear(&err);
    rt_bandpass *bp = NULL;
    if (rt_bandpass_new(spec, &bp, &err) == RT_OK) {
        rt_bandpass_free(bp);
        fail_msg("accepted a spec with %s", why);
    }
    assert_int_equal(err.status, RT_ERR_USAGE);
    assert_true(strlen(err.message) > 0);
}

static void invalid_specs_refused(void **state)
{
    (void)state;
    rt_bandpass_spec s = rt_bandpass_spec_defaults(0);
    expect_refused(&s, "rate 0");
    s.rate_hz = -512;
    expect_refused(&s, "negative rate");
    s.rate_hz = NAN;
    expect_refused(&s, "NaN rate");
    s = rt_bandpass_spec_defaults(512);
    s.low_hz = 100;
    expect_refused(&s, "low corner equal to the high corner");
    s.low_hz = 0;
    expect_refused(&s, "low corner 0");
    s = rt_bandpass_spec_defaults(100);
    s.low_hz = 50; /* high 100 clips to 45 Hz, below the low corner */
    expect_refused(&s, "low corner above the clipped high corner");
    s = rt_bandpass_spec_defaults(512);
    s.order = 0;
    expect_refused(&s, "order 0");
    s.order = 9;
    expect_refused(&s, "order 9");
    s = rt_bandpass_spec_defaults(512);
    s.n_notches = 9;
    expect_refused(&s, "9 notches");
    s.n_notches = 1;
    s.notch_hz[0] = 256;
    expect_refused(&s, "a notch at Nyquist");
    s.notch_hz[0] = 50;
    s.notch_width_hz = 0;
    expect_refused(&s, "a zero notch width");
    expect_refused(NULL, "no spec");
}

static void high_corner_clipped_below_nyquist(void **state)
{
    (void)state;
    /* 200 Hz is the AASM minimum EMG sampling rate [from memory]. */
    rt_bandpass_spec s = rt_bandpass_spec_defaults(200);
    rt_bandpass *bp = make(&s, 0);
    assert_true(rt_bandpass_high_hz(bp) == 90.0);
    assert_true(rt_bandpass_low_hz(bp) == 10.0);
    assert_true(fabs(rt_bandpass_gain(bp, 90) - 0.5) < 1e-6);
    rt_bandpass_free(bp);
    s = rt_bandpass_spec_defaults(512);
    bp = make(&s, 0);
    assert_true(rt_bandpass_high_hz(bp) == 100.0);
    rt_bandpass_free(bp);
}

static void non_finite_samples_refused(void **state)
{
    (void)state;
    rt_bandpass_spec s = rt_bandpass_spec_defaults(512);
    rt_bandpass *bp = make(&s, 0);
    double x[5000] = { 0 };
    x[4321] = NAN;
    rt_error err;
    assert_int_equal(rt_bandpass_apply(bp, x, 5000, &err), RT_ERR_USAGE);
    assert_int_equal(rt_bandpass_apply(bp, x, 0, &err), RT_OK);
    rt_bandpass_free(bp);
    rt_bandpass_free(NULL);
}

/* Several threads creating filters of different block sizes at once: the
 * cache must plan each size once, under its lock, and every thread must get
 * the same result as a single-threaded run. */
typedef struct job {
    size_t block;
    const double *input;
    size_t n;
    double *output;
} job;

static void *run_job(void *arg)
{
    job *j = arg;
    rt_bandpass_spec s = rt_bandpass_spec_defaults(512);
    rt_bandpass *bp = NULL;
    if (rt_bandpass_new_with_block(&s, j->block, &bp, NULL) == RT_OK) {
        memcpy(j->output, j->input, j->n * sizeof *j->output);
        if (rt_bandpass_apply(bp, j->output, j->n, NULL) != RT_OK)
            j->output[0] = NAN;
    } else {
        j->output[0] = NAN;
    }
    rt_bandpass_free(bp);
    return NULL;
}

static void threads_share_the_plan_cache(void **state)
{
    (void)state;
    rng_state = 12345;
    enum { THREADS = 6 };
    size_t n = 50000;
    double *x = noise(n);
    double *expect = copy_of(x, n);
    rt_bandpass_spec s = rt_bandpass_spec_defaults(512);
    rt_bandpass *bp = make(&s, 1 << 17);
    filter(bp, expect, n);
    rt_bandpass_free(bp);
    rt_fft_plans_cleanup();
    pthread_t tid[THREADS];
    job jobs[THREADS];
    for (int t = 0; t < THREADS; t++) {
        jobs[t] = (job){ (size_t)4096 << (t % 3), x, n, malloc(n * sizeof(double)) };
        assert_non_null(jobs[t].output);
        assert_int_equal(pthread_create(&tid[t], NULL, run_job, &jobs[t]), 0);
    }
    for (int t = 0; t < THREADS; t++) {
        pthread_join(tid[t], NULL);
        for (size_t i = 0; i < n; i++)
            assert_true(fabs(jobs[t].output[i] - expect[i]) < 1e-9);
        free(jobs[t].output);
    }
    free(x);
    free(expect);
}

/* A clone (one filter per thread) filters exactly as its original: same
 * response, margin and block, so the night scorer's threads condition every
 * stretch to the same samples (byte-identical results are the contract of
 * rt_night_score_threads). */
static void clone_filters_identically(void **state)
{
    (void)state;
    rng_state = 777;
    size_t n = 30000;
    double *x = noise(n);
    double *a = copy_of(x, n), *b = copy_of(x, n);
    rt_bandpass_spec s = rt_bandpass_spec_defaults(500);
    s.n_notches = 1;
    s.notch_hz[0] = 50.0;
    rt_bandpass *bp = NULL, *c = NULL;
    assert_int_equal(rt_bandpass_new(&s, &bp, NULL), RT_OK);
    assert_int_equal(rt_bandpass_clone(bp, &c, NULL), RT_OK);
    assert_int_equal(rt_bandpass_block_samples(c), rt_bandpass_block_samples(bp));
    assert_int_equal(rt_bandpass_margin_samples(c), rt_bandpass_margin_samples(bp));
    filter(bp, a, n);
    filter(c, b, n);
    assert_memory_equal(a, b, n * sizeof *a);
    rt_bandpass_free(bp);
    filter(c, x, n); /* the clone outlives its original */
    assert_memory_equal(a, x, n * sizeof *a);
    rt_bandpass_free(c);
    free(x);
    free(a);
    free(b);
}

static int cleanup_plans(void **state)
{
    (void)state;
    rt_fft_plans_cleanup();
    return 0;
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(gain_is_butterworth_squared),
        cmocka_unit_test(constant_offset_removed),
        cmocka_unit_test(sine_kept_in_amplitude_and_phase),
        cmocka_unit_test(block_boundaries_invisible),
        cmocka_unit_test(notch_removes_mains_keeps_emg),
        cmocka_unit_test(invalid_specs_refused),
        cmocka_unit_test(high_corner_clipped_below_nyquist),
        cmocka_unit_test(non_finite_samples_refused),
        cmocka_unit_test(threads_share_the_plan_cache),
        cmocka_unit_test(clone_filters_identically),
    };
    return cmocka_run_group_tests(tests, NULL, cleanup_plans);
}
