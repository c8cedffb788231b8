/* The published rule boundaries, decided on constructed signals.
 *
 * Signals: a 50 Hz carrier sampled at 500 Hz whose amplitude is 1 uV
 * (background) and k uV inside a burst. With a 0.05-s envelope window the
 * rectified moving average covers whole carrier half-periods, so the envelope
 * is flat outside the ramps and the burst's measured length and ratio are
 * exact; each check therefore tests the rule itself, not noise. */
#include "support.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "detect.h"

#define FS 500.0
#define FS_INT 500
#define SECONDS 60
#define N ((size_t)FS_INT * SECONDS)

typedef struct fixture {
    double x[N];
    double env[N];
    double scratch[N];
    size_t starts[SECONDS + 1];
    double background[SECONDS];
} fixture;

static fixture *make_fixture(void)
{
    fixture *f = calloc(1, sizeof *f);
    assert_non_null(f);
    for (size_t b = 0; b <= SECONDS; b++)
        f->starts[b] = (size_t)(b * FS);
    return f;
}

/* Envelope level of the unit carrier: the mean of |sin| over its five
 * sample phases at 50 Hz / 500 Hz. */
static double carrier_level(void)
{
    double sum = 0.0;
    for (int i = 0; i < 10; i++)
        sum += fabs(sin(2.0 * 3.14159265358979323846 * 50.0 * i / FS + 0.3));
    return sum / 10.0;
}

/* Carrier of amplitude 1 with one burst of amplitude `ratio` from onset_s for
 * dur_s, then envelope and background as the scorer computes them. */
static void build(fixture *f, double onset_s, double dur_s, double ratio)
{
    size_t a = (size_t)llround(onset_s * FS), b = (size_t)llround((onset_s + dur_s) * FS);
    for (size_t i = 0; i < N; i++) {
        double amp = (i >= a && i < b) ? ratio : 1.0;
        f->x[i] = amp * sin(2.0 * 3.14159265358979323846 * 50.0 * (double)i / FS + 0.3);
    }
    rt_envelope(f->x, N, (size_t)(0.05 * FS), f->env, f->scratch);
    /* the atonic background is a property of the night (background.c): here
     * the level of the unit carrier, the same in every second */
    for (size_t j = 0; j < SECONDS; j++)
        f->background[j] = carrier_level();
}

static size_t bursts(fixture *f, double k, double min_s, double max_s, rt_span *spans)
{
    /* exact signals: no edge tolerance */
    rt_burst_rule rule = {k, min_s, max_s, 0.0, (size_t)(0.05 * FS)};
    rt_burst_signal sig = {f->env, NULL, N, f->background, f->starts, SECONDS, FS};
    return rt_find_bursts(&sig, &rule, (size_t)(0.05 * FS), spans, 4, f->scratch);
}

/* AASM Manual v2 (excessive transient muscle activity): bursts 0.1-5.0 s,
 * at least 4x background (from memory). */
static void aasm_duration_boundaries(void **state)
{
    (void)state;
    fixture *f = make_fixture();
    rt_span s[4];
    build(f, 20.0, 0.09, 8.0);
    assert_int_equal(bursts(f, 4.0, 0.1, 5.0, s), 0);   /* 0.09 s: too short */
    build(f, 20.0, 0.10, 8.0);
    assert_int_equal(bursts(f, 4.0, 0.1, 5.0, s), 1);   /* 0.10 s: counts */
    assert_true(fabs((s[0].end - s[0].start) / FS - 0.10) < 0.5 / FS);
    assert_true(fabs(s[0].start / FS - 20.0) < 0.5 / FS); /* zero-lag onset */
    build(f, 20.0, 5.0, 8.0);
    assert_int_equal(bursts(f, 4.0, 0.1, 5.0, s), 1);   /* 5.0 s: counts */
    build(f, 20.0, 5.1, 8.0);
    assert_int_equal(bursts(f, 4.0, 0.1, 5.0, s), 0);   /* 5.1 s: too long */
    free(f);
}

static void aasm_amplitude_boundary(void **state)
{
    (void)state;
    fixture *f = make_fixture();
    rt_span s[4];
    build(f, 30.0, 1.0, 3.9);
    assert_int_equal(bursts(f, 4.0, 0.1, 5.0, s), 0);   /* 3.9x: below 4x */
    build(f, 30.0, 1.0, 4.0);
    assert_int_equal(bursts(f, 4.0, 0.1, 5.0, s), 1);   /* 4.0x: at least 4x */
    /* the ramp-corrected mean amplitude (detect.c): exact for linear ramps, the
     * carrier's ramps are linear to within 1 % */
    assert_true(fabs(s[0].ratio - 4.0) < 0.04);
    free(f);
}

/* SINBAR (Frauscher et al. 2012, Sleep 35:835): phasic = burst 0.1-5 s above
 * twice the background (from memory). */
static void sinbar_amplitude_boundary(void **state)
{
    (void)state;
    fixture *f = make_fixture();
    rt_span s[4];
    build(f, 30.0, 1.0, 1.9);
    assert_int_equal(bursts(f, 2.0, 0.1, 5.0, s), 0);   /* 1.9x */
    build(f, 30.0, 1.0, 2.0);
    assert_int_equal(bursts(f, 2.0, 0.1, 5.0, s), 1);   /* 2.0x */
    free(f);
}

/* Montreal method (Montplaisir et al. 2010): phasic bursts 0.1-10 s at 4x
 * background (from memory). */
static void montreal_duration_boundary(void **state)
{
    (void)state;
    fixture *f = make_fixture();
    rt_span s[4];
    build(f, 20.0, 10.0, 8.0);
    assert_int_equal(bursts(f, 4.0, 0.1, 10.0, s), 1);
    build(f, 20.0, 10.1, 8.0);
    assert_int_equal(bursts(f, 4.0, 0.1, 10.0, s), 0);
    free(f);
}

/* Tonic: more than 50 % of the epoch at the tonic level (SINBAR, Montreal;
 * AASM "at least 50 %")(from memory). 49 % vs 51 % of a 30-s epoch. */
static void tonic_share_boundary(void **state)
{
    (void)state;
    fixture *f = make_fixture();
    double epoch = 30.0;
    build(f, 15.0, 0.49 * epoch, 5.0);
    size_t c49 = rt_count_tonic(f->env, (size_t)(15 * FS), (size_t)(45 * FS), f->background,
                                f->starts, SECONDS, 2.0, 10.0);
    build(f, 15.0, 0.51 * epoch, 5.0);
    size_t c51 = rt_count_tonic(f->env, (size_t)(15 * FS), (size_t)(45 * FS), f->background,
                                f->starts, SECONDS, 2.0, 10.0);
    double n = epoch * FS;
    assert_true(c49 / n < 0.5);
    assert_true(c51 / n > 0.5);
    assert_true(fabs(c49 / n - 0.49) < 0.002);  /* ramps cost at most one window */
    free(f);
}

/* SINBAR/Montreal absolute tonic level: above 10 uV counts even when the
 * background is just as high (from memory). The envelope of a
 * sine of amplitude A sampled as here is A x 0.6155 (mean of |sin| over the
 * five sample phases), so A is set to land just above and below 10 uV. */
static void tonic_absolute_level(void **state)
{
    (void)state;
    fixture *f = make_fixture();
    double unit = 0.0;
    build(f, 0.0, 0.0, 1.0);
    unit = f->env[N / 2];
    build(f, 0.0, SECONDS, 10.2 / unit);                 /* everything at 10.2 uV */
    for (size_t b = 0; b < SECONDS; b++)
        f->background[b] = 10.2; /* as high as the signal: the relative rule cannot fire */
    /* the clipped windows at the two signal ends are left out: a carrier's
     * partial period there does not average to the same value */
    size_t from = 25, to = N - 25;
    size_t above = rt_count_tonic(f->env, from, to, f->background, f->starts, SECONDS, 2.0, 10.0);
    assert_int_equal(above, to - from);
    build(f, 0.0, SECONDS, 9.8 / unit);
    for (size_t b = 0; b < SECONDS; b++)
        f->background[b] = 9.8;
    size_t below = rt_count_tonic(f->env, from, to, f->background, f->starts, SECONDS, 2.0, 10.0);
    assert_int_equal(below, 0);
    free(f);
}

/* Quantile: type 7 of Hyndman & Fan 1996 (numpy.quantile's default). */
static void quantile_matches_type7(void **state)
{
    (void)state;
    double v[] = {7, 1, 3, 5, 9};
    assert_true(fabs(rt_quantile(v, 5, 0.5) - 5.0) < 1e-12);
    double w[] = {4, 1, 3, 2};
    assert_true(fabs(rt_quantile(w, 4, 0.2) - 1.6) < 1e-12); /* numpy: 1.6 */
    double big[200];
    for (int i = 0; i < 200; i++)
        big[i] = (double)((i * 37) % 200);
    assert_true(fabs(rt_quantile(big, 200, 0.05) - 9.95) < 1e-12); /* numpy: 9.95 */
}

static int compare_doubles(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* The selection finds the order statistics of a sorted copy, bit for bit, so
 * the type-7 quantile is the formula on the sorted values (Hyndman & Fan
 * 1996): random sizes on both sides of the in-buffer partition limit, with
 * many repeated values, all-equal arrays and sorted and reversed input. */
static void quantile_equals_sorted_order_statistics(void **state)
{
    (void)state;
    uint64_t seed = rt_test_seed();
    rt_test_rng_seed(seed);
    const size_t sizes[] = {9, 10, 43, 384, 1023, 1024, 1025, 3840, 5000};
    for (size_t t = 0; t < sizeof sizes / sizeof sizes[0]; t++) {
        size_t n = sizes[t];
        double *v = malloc(n * sizeof *v), *sorted = malloc(n * sizeof *sorted);
        assert_non_null(v);
        assert_non_null(sorted);
        for (int shape = 0; shape < 5; shape++) {
            for (size_t i = 0; i < n; i++) {
                double u = rt_test_uniform();
                v[i] = shape == 0 ? u : shape == 1 ? floor(u * 5.0) /* repeats */
                     : shape == 2 ? 1.25 : shape == 3 ? (double)i : -(double)i;
            }
            memcpy(sorted, v, n * sizeof *v);
            qsort(sorted, n, sizeof *sorted, compare_doubles);
            const double qs[] = {0.0, 0.05, 0.5, 0.9, 1.0};
            for (size_t k = 0; k < 5; k++) {
                double pos = qs[k] * (double)(n - 1);
                size_t i = (size_t)floor(pos);
                double want = i >= n - 1 ? sorted[n - 1]
                                         : sorted[i] + (pos - (double)i) * (sorted[i + 1] - sorted[i]);
                double *w = malloc(n * sizeof *w);
                assert_non_null(w);
                memcpy(w, v, n * sizeof *v);
                double got = rt_quantile(w, n, qs[k]);
                if (memcmp(&got, &want, sizeof got) != 0)
                    fail_msg("seed %llu: n %zu, shape %d, q %g: %.17g, sorted %.17g",
                             (unsigned long long)seed, n, shape, qs[k], got, want);
                free(w);
            }
        }
        free(v);
        free(sorted);
    }
}

/* The envelope is a plain centred moving average of |x| (clipped ends). */
static void envelope_is_centred_average(void **state)
{
    (void)state;
    double x[7] = {1, -2, 3, -4, 5, -6, 7};
    double env[7], scratch[8];
    rt_envelope(x, 7, 3, env, scratch);
    assert_true(fabs(env[0] - 1.5) < 1e-12);
    assert_true(fabs(env[3] - 4.0) < 1e-12);
    assert_true(fabs(env[6] - 6.5) < 1e-12);
    rt_envelope(x, 7, 3, x, scratch); /* in place */
    assert_true(fabs(x[3] - 4.0) < 1e-12);
}

/* Several rules in one call find, rule by rule, exactly what each finds
 * alone (the contract of rt_find_bursts_rules, which shares the scan of rules
 * with the same amplitude): noise with bursts of random length and height,
 * varying background, the rect_cum edge refinement on. */
static void rules_together_equal_rules_alone(void **state)
{
    (void)state;
    uint64_t seed = rt_test_seed();
    rt_test_rng_seed(seed);
    fixture *f = make_fixture();
    double *cum = calloc(N + 1, sizeof *cum);
    assert_non_null(cum);
    for (size_t i = 0; i < N; i++)
        f->x[i] = rt_test_gauss();
    for (int b = 0; b < 40; b++) { /* bursts 0.05-12 s at 1-10 x */
        size_t a = (size_t)(rt_test_uniform() * (double)N);
        size_t len = (size_t)((0.05 + 12.0 * rt_test_uniform() * rt_test_uniform()) * FS);
        double gain = 1.0 + 9.0 * rt_test_uniform();
        for (size_t i = a; i < a + len && i < N; i++)
            f->x[i] *= gain;
    }
    for (size_t i = 0; i < N; i++)
        cum[i + 1] = cum[i] + fabs(f->x[i]);
    rt_envelope(f->x, N, (size_t)(0.05 * FS), f->env, f->scratch);
    for (size_t j = 0; j < SECONDS; j++)
        f->background[j] = 0.8 * (0.9 + 0.2 * rt_test_uniform());
    rt_burst_signal sig = {f->env, cum, N, f->background, f->starts, SECONDS, FS};
    size_t win = (size_t)(0.05 * FS);
    /* AASM, SINBAR and Montreal as the scorer sets them (two share k = 4),
     * and a fourth rule sharing SINBAR's k with other limits */
    const rt_burst_rule rules[4] = {{4.0, 0.1, 5.0, 0.05, win}, {2.0, 0.1, 5.0, 0.05, win},
                                    {4.0, 0.1, 10.0, 0.05, win}, {2.0, 0.5, 2.0, 0.0, win}};
    enum { CAP = 400 };
    rt_span *together[4], alone[CAP];
    size_t found[4];
    for (int r = 0; r < 4; r++) {
        together[r] = calloc(CAP, sizeof *together[r]);
        assert_non_null(together[r]);
    }
    rt_find_bursts_rules(&sig, rules, 4, (size_t)(0.25 * FS), together, CAP, found, f->scratch);
    size_t total = 0;
    for (int r = 0; r < 4; r++) {
        size_t n = rt_find_bursts(&sig, &rules[r], (size_t)(0.25 * FS), alone, CAP, f->scratch);
        if (n != found[r])
            fail_msg("seed %llu: rule %d finds %zu alone, %zu together", (unsigned long long)seed,
                     r, n, found[r]);
        assert_memory_equal(alone, together[r], (n < CAP ? n : CAP) * sizeof *alone);
        total += n;
        free(together[r]);
    }
    assert_true(total > 0); /* the signal has bursts for every check to bite on */
    free(cum);
    free(f);
}

/* Tonic counts block by block add up to the count over whole blocks
 * (rt_count_tonic), for relative, absolute and combined levels, including
 * samples exactly at k x background. */
static void tonic_blocks_add_up(void **state)
{
    (void)state;
    uint64_t seed = rt_test_seed();
    rt_test_rng_seed(seed);
    fixture *f = make_fixture();
    for (size_t j = 0; j < SECONDS; j++)
        f->background[j] = 0.5 + rt_test_uniform();
    for (size_t i = 0; i < N; i++) {
        f->env[i] = 3.0 * rt_test_uniform();
        if (i % 97 == 0) /* exactly at 2x: the slack must count it both ways */
            f->env[i] = 2.0 * f->background[i / FS_INT];
    }
    const double levels[3][2] = {{2.0, 0.0}, {0.0, 1.5}, {2.0, 1.5}};
    size_t counts[SECONDS];
    for (int l = 0; l < 3; l++) {
        rt_count_tonic_blocks(f->env, f->background, f->starts, SECONDS, levels[l][0],
                              levels[l][1], counts);
        for (size_t a = 0; a < SECONDS; a += 7) {
            size_t b = a + 20 < SECONDS ? a + 20 : SECONDS, sum = 0;
            for (size_t j = a; j < b; j++)
                sum += counts[j];
            size_t whole = rt_count_tonic(f->env, f->starts[a], f->starts[b], f->background,
                                          f->starts, SECONDS, levels[l][0], levels[l][1]);
            if (sum != whole)
                fail_msg("seed %llu: level %d, seconds %zu-%zu: %zu by blocks, %zu whole",
                         (unsigned long long)seed, l, a, b, sum, whole);
        }
    }
    free(f);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(aasm_duration_boundaries),
        cmocka_unit_test(aasm_amplitude_boundary),
        cmocka_unit_test(sinbar_amplitude_boundary),
        cmocka_unit_test(montreal_duration_boundary),
        cmocka_unit_test(tonic_share_boundary),
        cmocka_unit_test(tonic_absolute_level),
        cmocka_unit_test(quantile_matches_type7),
        cmocka_unit_test(quantile_equals_sorted_order_statistics),
        cmocka_unit_test(envelope_is_centred_average),
        cmocka_unit_test(rules_together_equal_rules_alone),
        cmocka_unit_test(tonic_blocks_add_up),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
