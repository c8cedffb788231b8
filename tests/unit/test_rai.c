/* REM Atonia Index: worked values from its formula (Ferri et al. 2010, Sleep
 * Med 11:947-949: RAI = % of 1-s values <= 1 uV / (100 - % in (1, 2] uV), after
 * removing the minimum of a 60-value window (Ferri et al. 2008, J Sleep Res; Ferri et al. 2010, Sleep Med 11:947; from memory)). */
#include "support.h"

#include <math.h>

#include "rai.h"

/* n seconds: a share at 0.5 uV, a share at 1.5 uV, the rest at 5 uV. */
static double rai_of(size_t n, double share_low, double share_mid)
{
    rt_rai_counts c = {0, 0, 0};
    double v[1000];
    size_t low = (size_t)llround(share_low * (double)n), mid = (size_t)llround(share_mid * (double)n);
    for (size_t j = 0; j < n; j++)
        v[j] = j < low ? 0.5 : j < low + mid ? 1.5 : 5.0;
    rt_rai_count(v, n, NULL, &c);
    return rt_rai_value(&c);
}

static void worked_values(void **state)
{
    (void)state;
    /* 95 % <= 1 uV and 3 % in (1, 2]: 95 / 97 = 0.979 */
    assert_true(fabs(rai_of(1000, 0.95, 0.03) - 0.979) < 0.0005);
    /* 80 % and 10 %: 80 / 90 = 0.889 */
    assert_true(fabs(rai_of(1000, 0.80, 0.10) - 0.889) < 0.0005);
    /* 50 % and 20 %: 50 / 80 = 0.625 */
    assert_true(fabs(rai_of(1000, 0.50, 0.20) - 0.625) < 0.0005);
}

/* The floor step removes a constant offset: a steady 1.7 uV (atonia riding
 * on a raised noise floor) gives RAI about 1, not 0. */
static void constant_offset_removed(void **state)
{
    (void)state;
    double v[600], out[600];
    for (int j = 0; j < 600; j++)
        v[j] = 1.7 + 0.05 * sin(0.37 * j);
    rt_rai_counts c = {0, 0, 0};
    rt_rai_count(v, 600, NULL, &c);
    assert_true(rt_rai_value(&c) < 0.01); /* without the floor step: no atonia */
    rt_rai_remove_floor(v, 600, 60, out);
    rt_rai_counts d = {0, 0, 0};
    rt_rai_count(out, 600, NULL, &d);
    assert_true(fabs(rt_rai_value(&d) - 1.0) < 1e-9);
}

/* The window is centred: second j sees j-30 .. j+29. */
static void floor_window_is_centred(void **state)
{
    (void)state;
    double v[100], out[100];
    for (int j = 0; j < 100; j++)
        v[j] = 10.0;
    v[70] = 1.0;
    rt_rai_remove_floor(v, 100, 60, out);
    assert_true(out[40] == 0.0);  /* 70 is outside 10 .. 69 */
    assert_true(out[41] == 9.0);  /* 70 is inside 11 .. 70 */
    assert_true(out[99] == 9.0);  /* 70 is inside 69 .. 99 (clipped) */
}

static void skipped_seconds_and_empty(void **state)
{
    (void)state;
    double v[4] = {0.2, 5.0, 5.0, 0.3};
    bool skip[4] = {false, true, true, false};
    rt_rai_counts c = {0, 0, 0};
    rt_rai_count(v, 4, skip, &c);
    assert_int_equal(c.total, 2);
    assert_true(rt_rai_value(&c) == 1.0);
    rt_rai_counts e = {0, 0, 0};
    assert_true(isnan(rt_rai_value(&e)));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(worked_values),
        cmocka_unit_test(constant_offset_removed),
        cmocka_unit_test(floor_window_is_centred),
        cmocka_unit_test(skipped_seconds_and_empty),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
