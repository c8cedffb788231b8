/* Status names and the small string helpers every module relies on. */
#include "support.h"

#include <string.h>

#include "internal.h"
#include "remtone/status.h"

static void status_names_are_stable(void **state)
{
    (void)state;
    /* The JSON results and exit-code table in the README use these names. */
    assert_string_equal(rt_status_name(RT_OK), "ok");
    assert_string_equal(rt_status_name(RT_ERR_RECORDING), "recording");
    assert_string_equal(rt_status_name(RT_ERR_STAGING), "staging");
    assert_string_equal(rt_status_name((rt_status)99), "unknown");
}

static void fail_fills_message(void **state)
{
    (void)state;
    rt_error err;
    rt_error_clear(&err);
    assert_int_equal(rt_fail(&err, RT_ERR_IO, "%s: line %d", "a.csv", 3), RT_ERR_IO);
    assert_int_equal(err.status, RT_ERR_IO);
    assert_string_equal(err.message, "a.csv: line 3");
    assert_int_equal(rt_fail(NULL, RT_ERR_IO, "ignored"), RT_ERR_IO);
}

static void parse_double_rejects_partial_and_nonfinite(void **state)
{
    (void)state;
    double v = 0;
    assert_int_equal(rt_parse_double(" 30.5 ", &v), 0);
    assert_true(v == 30.5);
    assert_int_equal(rt_parse_double("30s", &v), -1);
    assert_int_equal(rt_parse_double("", &v), -1);
    assert_int_equal(rt_parse_double("nan", &v), -1);
    assert_int_equal(rt_parse_double("1e999", &v), -1);
}

static void trim_and_compare(void **state)
{
    (void)state;
    char s[] = "  Chin1 \t";
    assert_string_equal(rt_trim(s), "Chin1");
    assert_true(rt_equal_nocase("EMG Chin", "emg chin"));
    assert_false(rt_equal_nocase("Chin", "Chin1"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(status_names_are_stable),
        cmocka_unit_test(fail_fills_message),
        cmocka_unit_test(parse_double_rejects_partial_and_nonfinite),
        cmocka_unit_test(trim_and_compare),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
