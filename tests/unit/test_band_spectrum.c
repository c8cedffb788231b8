/* Band-limited channels found from the spectrum (docs/quality.md): a channel
 * low-passed at 35 Hz or high-passed at 40 Hz when it was recorded falls more
 * than 30 dB below its 25-45 Hz level at the band's edges; white noise
 * (flat by definition) and the unfiltered EMG band do not. Filters here are
 * the Butterworth responses of src/score/bandpass.c, checked against scipy. */
#include "support.h"

#include <math.h>
#include <stdlib.h>

#include "quality/quality.h"
#include "dsp/bandpass.h"

#define RATE 512.0
#define SECONDS 120

/* Unit-variance white Gaussian noise from the shared seeded stream. */
static double *white_noise(size_t n)
{
    double *x = malloc(n * sizeof *x);
    assert_non_null(x);
    for (size_t i = 0; i < n; i++)
        x[i] = rt_test_gauss();
    return x;
}

static rt_channel_quality edges_of(const double *x, size_t n)
{
    rt_mains m;
    rt_error err;
    assert_int_equal(rt_mains_estimate(x, n, RATE, 10.0, 100.0, &m, &err), RT_OK);
    rt_channel_quality q = {0};
    rt_quality_band_edges(&m, &q);
    return q;
}


static void white_noise_is_not_narrow(void **state)
{
    (void)state;
    size_t n = (size_t)(RATE * SECONDS);
    double *x = white_noise(n);
    rt_channel_quality q = edges_of(x, n);
    assert_true(fabs(q.low_edge_db) < 1.0 && fabs(q.high_edge_db) < 1.0); /* flat spectrum */
    assert_false(q.spectrum_narrow);
    free(x);
}

static void low_passed_at_35_hz_is_narrow(void **state)
{
    (void)state;
    size_t n = (size_t)(RATE * SECONDS);
    double *x = white_noise(n);
    rt_test_filter(x, n, RATE, 1.0, 35.0);
    rt_channel_quality q = edges_of(x, n);
    assert_true(q.high_edge_db < RT_BAND_EDGE_DB);
    assert_true(q.spectrum_narrow);
    free(x);
}

static void high_passed_at_40_hz_is_narrow(void **state)
{
    (void)state;
    size_t n = (size_t)(RATE * SECONDS);
    double *x = white_noise(n);
    rt_test_filter(x, n, RATE, 40.0, 200.0);
    rt_channel_quality q = edges_of(x, n);
    assert_true(q.low_edge_db < RT_BAND_EDGE_DB);
    assert_true(q.spectrum_narrow);
    free(x);
}

/* The scoring band itself (10-100 Hz, the AASM recording filters [from
 * memory]) must not count as narrowed: its corners sit at the band edges. */
static void the_scoring_band_is_not_narrow(void **state)
{
    (void)state;
    size_t n = (size_t)(RATE * SECONDS);
    double *x = white_noise(n);
    rt_test_filter(x, n, RATE, 10.0, 100.0);
    rt_channel_quality q = edges_of(x, n);
    assert_false(q.spectrum_narrow);
    free(x);
}

int main(void)
{
    rt_test_rng_seed(rt_test_seed());
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(white_noise_is_not_narrow),
        cmocka_unit_test(low_passed_at_35_hz_is_narrow),
        cmocka_unit_test(high_passed_at_40_hz_is_narrow),
        cmocka_unit_test(the_scoring_band_is_not_narrow),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
