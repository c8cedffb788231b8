/* The parameter descriptor table is the only list of scoring parameters:
 * every field of rt_score_params has a row (so the defaults, checks, JSON
 * provenance and cohort resume key, all driven by the table, cover it), each
 * row's default lies in its range and passes the checks, and each row names
 * its source or reason. */
#include "support.h"

#include <stdalign.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/remtone.h"

static size_t kind_size(rt_param_kind k)
{
    return k == RT_PARAM_INT ? sizeof(int) : k == RT_PARAM_BOOL ? sizeof(bool) : sizeof(double);
}

static size_t kind_align(rt_param_kind k)
{
    return k == RT_PARAM_INT ? alignof(int) : k == RT_PARAM_BOOL ? alignof(bool) : alignof(double);
}

static int by_offset(const void *a, const void *b)
{
    const rt_param_desc *x = a, *y = b;
    return (x->offset > y->offset) - (x->offset < y->offset);
}

/* Rows sorted by offset must tile the struct with nothing between them but
 * alignment padding: a field without a row leaves a gap (construction). */
static void every_field_has_a_row(void **state)
{
    (void)state;
    size_t n = 0;
    const rt_param_desc *t = rt_score_param_table(&n);
    rt_param_desc *s = calloc(n, sizeof *s);
    assert_non_null(s);
    memcpy(s, t, n * sizeof *s);
    qsort(s, n, sizeof *s, by_offset);
    size_t end = 0;
    for (size_t i = 0; i < n; i++) {
        size_t a = kind_align(s[i].kind), expect = (end + a - 1) / a * a;
        if (s[i].offset != expect)
            fail_msg("a field between the end of the row before %s (byte %zu) and it (byte %zu) "
                     "has no row in the parameter table", s[i].name, end, s[i].offset);
        end = s[i].offset + kind_size(s[i].kind);
    }
    size_t tail = (end + alignof(rt_score_params) - 1) / alignof(rt_score_params) *
                  alignof(rt_score_params);
    assert_int_equal(tail, sizeof(rt_score_params));
    free(s);
}

static void defaults_in_range_with_sources(void **state)
{
    (void)state;
    size_t n = 0;
    const rt_param_desc *t = rt_score_param_table(&n);
    rt_score_params p;
    rt_score_params_default(&p);
    rt_error err;
    assert_int_equal(rt_score_params_check(&p, &err), RT_OK);
    for (size_t i = 0; i < n; i++) {
        double v = rt_score_param_get(&p, &t[i]);
        assert_true(v == t[i].def && v >= t[i].lo && v <= t[i].hi);
        assert_true(t[i].source && strlen(t[i].source) > 8);
        for (size_t j = 0; j < i; j++)
            assert_string_not_equal(t[i].name, t[j].name);
    }
    /* a value outside a row's range is refused with the row's name */
    for (size_t i = 0; i < n; i++) {
        if (t[i].kind != RT_PARAM_REAL)
            continue;
        rt_score_params q = p;
        double bad = t[i].hi + 1.0;
        memcpy((char *)&q + t[i].offset, &bad, sizeof bad);
        assert_int_equal(rt_score_params_check(&q, &err), RT_ERR_USAGE);
        assert_non_null(strstr(err.message, t[i].name));
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(every_field_has_a_row),
        cmocka_unit_test(defaults_in_range_with_sources),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
