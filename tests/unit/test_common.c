/* Status names, the small string helpers every module relies on, and the
 * worker pool the night scorer shares its items with. */
#include "support.h"

#include <stdint.h>
#include <string.h>

#include "internal.h"
#include "parallel.h"
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

/* Items of the pool test: item i records that it ran; the items listed in
 * fail_at fail with a message naming them. */
typedef struct pool_test {
    int ran[64];
    size_t fail_at[3];
} pool_test;

static rt_status pool_item(void *ctx, unsigned worker, size_t item, rt_error *err)
{
    pool_test *t = ctx;
    (void)worker;
    t->ran[item]++;
    for (int k = 0; k < 3; k++)
        if (t->fail_at[k] == item)
            return rt_fail(err, RT_ERR_IO, "item %zu failed", item);
    return RT_OK;
}

static void pool_reports_the_first_failure_in_rank_order(void **state)
{
    (void)state;
    double cost[64];
    for (int i = 0; i < 64; i++)
        cost[i] = (double)(i % 7); /* the costliest start first: not rank order */
    for (unsigned threads = 1; threads <= 8; threads *= 2) {
        /* no failure: every item runs exactly once */
        pool_test t = {{0}, {SIZE_MAX, SIZE_MAX, SIZE_MAX}};
        rt_parallel_job job = {64, NULL, cost, pool_item, &t};
        rt_parallel_failure f;
        rt_parallel_failure_init(&f);
        assert_int_equal(rt_parallel_run(&job, threads, &f), RT_OK);
        assert_true(f.rank == SIZE_MAX);
        for (int i = 0; i < 64; i++)
            assert_int_equal(t.ran[i], 1);
        /* failures at 50, 20 and 40: the sequential loop would stop at 20, so
         * 20 is reported and every item before it has run, whatever the
         * threads did (the design of parallel.c) */
        pool_test u = {{0}, {50, 20, 40}};
        job.ctx = &u;
        rt_parallel_failure_init(&f);
        assert_int_equal(rt_parallel_run(&job, threads, &f), RT_ERR_IO);
        assert_int_equal(f.rank, 20);
        assert_string_equal(f.error.message, "item 20 failed");
        for (int i = 0; i <= 20; i++)
            assert_int_equal(u.ran[i], 1);
        /* the failure carries over: a second job runs only items ranked below it */
        pool_test v = {{0}, {SIZE_MAX, SIZE_MAX, SIZE_MAX}};
        size_t rank[64];
        for (size_t i = 0; i < 64; i++)
            rank[i] = 10 + i;
        rt_parallel_job next = {64, rank, cost, pool_item, &v};
        assert_int_equal(rt_parallel_run(&next, threads, &f), RT_ERR_IO);
        assert_int_equal(f.rank, 20);
        for (int i = 0; i < 64; i++)
            assert_int_equal(v.ran[i], i < 10 ? 1 : 0);
    }
}

static void cores_available_is_positive(void **state)
{
    (void)state;
    assert_true(rt_cores_available() >= 1);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(status_names_are_stable),
        cmocka_unit_test(fail_fills_message),
        cmocka_unit_test(parse_double_rejects_partial_and_nonfinite),
        cmocka_unit_test(trim_and_compare),
        cmocka_unit_test(pool_reports_the_first_failure_in_rank_order),
        cmocka_unit_test(cores_available_is_positive),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
