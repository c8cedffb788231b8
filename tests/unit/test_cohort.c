/* Cohort module: the manifest reader and its row-naming errors, safe ids,
 * the part slicing (against libxxhash's XXH3), the merge of night files into
 * the cohort table and calibration, and a run's handling of failing nights
 * and of temporary files a killed run left behind. */
#include <math.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>
#include <xxhash.h>

#include "remtone/cohort.h"
#include "support.h"

static char *slurp(const char *path)
{
    FILE *f = fopen(path, "rb");
    if (!f)
        return NULL;
    static char buf[1 << 16];
    size_t n = fread(buf, 1, sizeof buf - 1, f);
    fclose(f);
    buf[n] = '\0';
    return buf;
}

static rt_manifest *load_text(const char *dir, const char *text, rt_error *err)
{
    char path[1024];
    snprintf(path, sizeof path, "%s", rt_test_text_file(dir, "manifest.csv", text));
    rt_error_clear(err);
    rt_manifest *m = NULL;
    rt_status st = rt_manifest_load(path, &m, err);
    /* the one convention: a result exactly when the status is RT_OK */
    assert_true((st == RT_OK) == (m != NULL));
    assert_true(st == RT_OK || err->status == st);
    return m;
}

static void test_manifest_reads_rows(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("cohort_manifest");
    rt_test_text_file(dir, "a.edf", "x");
    rt_test_text_file(dir, "a.csv", "x");
    rt_error err;
    /* tab-delimited, a role column, empty events and group, CRLF line ends */
    rt_manifest *m = load_text(dir, "id\trecording\tstages\tevents\tgroup\tchin\r\n"
                                    "n-1\ta.edf\ta.csv\t\tcase\tChin1-Chin2\r\n"
                                    "n_2\ta.edf\t\ta.csv\t\t\r\n", &err);
    assert_non_null(m);
    assert_int_equal(m->n_entries, 2);
    char want[1024];
    snprintf(want, sizeof want, "%s/a.edf", dir);
    assert_string_equal(m->entries[0].recording, want);   /* relative to the manifest */
    assert_string_equal(m->entries[0].group, "case");
    assert_string_equal(m->entries[0].role_override[RT_ROLE_CHIN], "Chin1-Chin2");
    assert_null(m->entries[0].events);
    assert_null(m->entries[1].stages);                    /* the recording's annotations */
    assert_non_null(m->entries[1].events);
    assert_string_equal(m->entries[1].group, "");
    assert_int_equal(m->entries[1].line, 3);
    /* no age or sex columns: not given */
    assert_true(isnan(m->entries[0].age_years) && m->entries[0].sex == 0);
    rt_manifest_free(m);
    rt_manifest_free(NULL);

    /* optional age and sex columns, for the norms (docs/cohort.md) */
    m = load_text(dir, "id,recording,stages,events,group,sex,age\n"
                       "n1,a.edf,,,case,f,67.5\n"
                       "n2,a.edf,,,case,M,\n"
                       "n3,a.edf,,,case,,40\n", &err);
    assert_non_null(m);
    assert_true(m->entries[0].sex == 'F' && m->entries[0].age_years == 67.5);
    assert_true(m->entries[1].sex == 'M' && isnan(m->entries[1].age_years));
    assert_true(m->entries[2].sex == 0 && m->entries[2].age_years == 40.0);
    rt_manifest_free(m);
}

static void expect_error(const char *dir, const char *text, rt_status status, const char *needle)
{
    rt_error err;
    rt_manifest *m = load_text(dir, text, &err);
    assert_null(m);
    assert_int_equal(err.status, status);
    if (!strstr(err.message, needle))
        fail_msg("message \"%s\" lacks \"%s\"", err.message, needle);
}

static void test_manifest_errors_name_the_row(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("cohort_manifest_errors");
    rt_test_text_file(dir, "a.edf", "x");
    const char *head = "id,recording,stages,events,group\n";
    char text[1024];
    snprintf(text, sizeof text, "%sn1,a.edf,,,case\nn2,missing.edf,,,case\n", head);
    expect_error(dir, text, RT_ERR_IO, "line 3 (night n2): recording 'missing.edf'");
    snprintf(text, sizeof text, "%sn1,a.edf,,,case\nn2,a.edf,,nope.csv,case\n", head);
    expect_error(dir, text, RT_ERR_IO, "line 3 (night n2): events 'nope.csv'");
    snprintf(text, sizeof text, "%sn1,a.edf,,,case\nN1,a.edf,,,control\n", head);
    expect_error(dir, text, RT_ERR_STAGING, "line 3: duplicate id 'N1' (first on line 2");
    snprintf(text, sizeof text, "%sn1,a.edf,,,case\nn2,a.edf\n", head);
    expect_error(dir, text, RT_ERR_STAGING, "line 3");
    snprintf(text, sizeof text, "%sa/b,a.edf,,,case\n", head);
    expect_error(dir, text, RT_ERR_STAGING, "line 2: id 'a/b' is not a safe file name");
    snprintf(text, sizeof text, "%sn1,,,,case\n", head);
    expect_error(dir, text, RT_ERR_STAGING, "line 2 (night n1): the recording is empty");
    expect_error(dir, "id,recording,stages,group\nn1,a.edf,,case\n", RT_ERR_STAGING,
                 "no column \"events\"");
    expect_error(dir, head, RT_ERR_STAGING, "lists no nights");
    expect_error(dir, "id,recording,stages,events,group,age\nn1,a.edf,,,case,old\n",
                 RT_ERR_STAGING, "line 2 (night n1): age must be 0 to 130 years");
    expect_error(dir, "id,recording,stages,events,group,age\nn1,a.edf,,,case,131\n",
                 RT_ERR_STAGING, "line 2 (night n1): age must be 0 to 130 years");
    expect_error(dir, "id,recording,stages,events,group,sex\nn1,a.edf,,,case,X\n",
                 RT_ERR_STAGING, "line 2 (night n1): sex must be F or M");
}

static void test_safe_ids(void **state)
{
    (void)state;
    const char *good[] = {"n1", "P-0001_night.2", "a", "A.b-c_d"};
    const char *bad[] = {"", ".hidden", "-x", "a/b", "a b", "..", "x.error", "x.KEY", "caf\xc3\xa9",
                         "a\\b"};
    for (size_t i = 0; i < sizeof good / sizeof good[0]; i++)
        assert_true(rt_cohort_id_is_safe(good[i]));
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++)
        assert_false(rt_cohort_id_is_safe(bad[i]));
    char longest[RT_COHORT_ID_MAX + 2];
    memset(longest, 'a', sizeof longest);
    longest[RT_COHORT_ID_MAX] = '\0';
    assert_true(rt_cohort_id_is_safe(longest));
    longest[RT_COHORT_ID_MAX] = 'a';
    longest[RT_COHORT_ID_MAX + 1] = '\0';
    assert_false(rt_cohort_id_is_safe(longest));
}

/* The slice is XXH3-64 of the id modulo N (docs/cohort.md), computed here
 * with libxxhash directly, so a Slurm array task and a later merge agree on
 * every machine; slices cover 1000 ids and are roughly even. */
static void test_part_of_is_xxh3_mod_n(void **state)
{
    (void)state;
    size_t count[4] = {0};
    for (int i = 0; i < 1000; i++) {
        char id[32];
        snprintf(id, sizeof id, "night-%04d", i);
        unsigned k = rt_cohort_part_of(id, 4);
        assert_int_equal(k, (unsigned)(XXH3_64bits(id, strlen(id)) % 4));
        assert_int_equal(rt_cohort_part_of(id, 1), 0);
        count[k]++;
    }
    for (int k = 0; k < 4; k++) /* 250 expected; +-70 is over 5 binomial sd */
        assert_true(count[k] > 180 && count[k] < 320);
}

/* A hand-made night result: reservations NULL writes a remtone-night/1
 * result (which had no reservations), else a /2 one with these codes. */
static void write_night_with(const char *nights, const char *id, const char *group,
                             double combined, double rai, bool with_key, const char *reservations)
{
    char name[256], text[2048], list[512] = "";
    snprintf(name, sizeof name, "%s.json", id);
    if (reservations)
        snprintf(list, sizeof list, ",\"reservations\":[%s]", reservations);
    snprintf(text, sizeof text,
             "{\"schema\":\"remtone-night/%d\",\"rem\":{\"epochs\":20,\"minutes\":10,"
             "\"scorable_minutes\":9.5},\"review\":{\"flagged\":%s,\"level\":\"%s\"},"
             "\"indices\":{\"sinbar.chin_any_fds_phasic_3s\":{\"value\":%g},"
             "\"rai\":{\"value\":%g},\"sinbar.chin_any_3s\":{\"value\":null}},"
             "\"warnings\":[\"low rate\"]%s}",
             reservations ? 2 : 1, combined >= 31.9 ? "true" : "false",
             combined >= 31.9 ? "review" : "clear", combined, rai, list);
    rt_test_text_file(nights, name, text);
    if (!with_key)
        return;
    snprintf(name, sizeof name, "%s.key", id);
    snprintf(text, sizeof text, "{\"schema\":\"remtone-cohort-key/1\",\"id\":\"%s\",\"group\":\"%s\","
                                "\"identity\":{}}", id, group);
    rt_test_text_file(nights, name, text);
}

static void write_night(const char *nights, const char *id, const char *group, double combined,
                        double rai, bool with_key)
{
    write_night_with(nights, id, group, combined, rai, with_key, "");
}

/* Merge of hand-made results. Cases score 40 and 20 on the combined SINBAR
 * index, controls 10 and 30: of 4 case/control pairs the case is higher in
 * 3, so AUC = 3/4 (hand computation). At the published 31.9 % (Frauscher et
 * al. 2012) sensitivity is 1/2 and specificity 2/2. */
static void test_merge_table_and_calibration(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("cohort_merge");
    char nights[1024], path[1024];
    snprintf(nights, sizeof nights, "%s/nights", dir);
    assert_int_equal(mkdir(nights, 0777), 0);
    write_night(nights, "c2", "case", 20, 0.95, true);
    write_night(nights, "c1", "case", 40, 0.5, true);
    write_night(nights, "k1", "control", 10, 0.97, true);
    /* a clear night whose staging stopped short and whose epoch indices
     * rest on few epochs (codes of docs/night-json.md) */
    write_night_with(nights, "k2", "control", 30, 0.92, true,
                     "{\"code\":\"partial-staging\",\"text\":\"a, b\"},"
                     "{\"code\":\"few-units\",\"text\":\"c\"}");
    /* JSON-escaped group; a remtone-night/1 result, whose reservations are unknown */
    write_night_with(nights, "x1", "other, \\\"quoted\\\"", 50, 0.3, true, NULL);
    write_night(nights, "half", "case", 99, 0.1, false); /* killed before its key */
    rt_test_text_file(nights, "bad.error.json", "{\"id\":\"bad\",\"group\":\"case\",\"status\":"
                                                "\"recording\",\"message\":\"broken, really\"}");
    rt_cohort_options o;
    rt_cohort_options_default(&o);
    o.out_dir = dir;
    rt_cohort_merge_summary s;
    rt_error err;
    assert_int_equal(rt_cohort_merge(&o, &s, &err), RT_OK);
    assert_int_equal(s.nights, 6);
    assert_int_equal(s.scored, 5);
    assert_int_equal(s.failed, 1);
    assert_int_equal(s.incomplete, 1);
    assert_int_equal(s.positives, 2);
    assert_int_equal(s.negatives, 2);
    snprintf(path, sizeof path, "%s/cohort.csv", dir);
    const char *csv = slurp(path);
    assert_non_null(csv);
    assert_non_null(strstr(csv, "id,group,subject,visit,flagged,level,reservations,rem_minutes,"
                                "scorable_minutes,"));
    /* rows in id order; RFC 4180 quoting of a group with a comma and quotes;
     * the reservation codes of each night (none, two, unknown for /1) */
    const char *bad = strstr(csv, "\nbad,case,,,,failed,,"),
               *c1 = strstr(csv, "\nc1,case,,,true,review,,10,9.5,");
    const char *x1 = strstr(csv, "\nx1,\"other, \"\"quoted\"\"\",,,true,review,unknown,10,");
    assert_non_null(strstr(csv, "\nk2,control,,,false,clear,partial-staging;few-units,10,9.5,"));
    assert_non_null(bad);
    assert_non_null(c1);
    assert_non_null(x1);
    assert_true(bad < c1 && c1 < x1);
    assert_non_null(strstr(bad, "\"broken, really\""));
    assert_null(strstr(csv, "half"));
    snprintf(path, sizeof path, "%s/calibration.csv", dir);
    csv = slurp(path);
    const char *row = strstr(csv, "\nsinbar.chin_any_fds_phasic_3s,");
    assert_non_null(row);
    double auc, lo, hi, youden, sens, spec;
    assert_int_equal(sscanf(row, "\nsinbar.chin_any_fds_phasic_3s,%lf,%lf,%lf,%lf,%lf,%lf", &auc, &lo,
                            &hi, &youden, &sens, &spec), 6);
    assert_true(fabs(auc - 0.75) < 1e-9);
    assert_true(sens == 0.5 && spec == 1.0);
    /* Youden by hand: calling >= 35 (between 30 and 40) gives J = 1/2, as
     * does >= 15 (sens 1, spec 1/2); the most specific is kept */
    assert_true(fabs(youden - 35) < 1e-9);
    /* RAI, lower is worse: cases 0.5, 0.95; controls 0.97, 0.92: 3 of 4 pairs */
    row = strstr(csv, "\nrai,");
    assert_non_null(row);
    assert_int_equal(sscanf(row, "\nrai,%lf", &auc), 1);
    assert_true(fabs(auc - 0.75) < 1e-9);
    snprintf(path, sizeof path, "%s/calibrated-cutoffs.csv", dir);
    csv = slurp(path);
    assert_non_null(strstr(csv, "index,cutoff,unit\n"));
    assert_non_null(strstr(csv, "sinbar.chin_any_fds_phasic_3s,35,%\n"));
    rt_cutoffs cut;
    rt_cutoffs_published(&cut);
    assert_int_equal(rt_cutoffs_load(&cut, path, &err), RT_OK);
    snprintf(path, sizeof path, "%s/cohort.html", dir);
    const char *html = slurp(path);
    assert_non_null(strstr(html, "other, &quot;quoted&quot;"));
    assert_null(strstr(html, "<script"));
}

/* A night that cannot be scored leaves an error record and the run goes on;
 * temporary files of this slice left by a killed run are cleared, those of
 * other slices (maybe being written by another array task) are not. */
static void test_run_records_failures_and_clears_temporaries(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("cohort_run");
    rt_test_text_file(dir, "text.edf", "this is not an EDF file");
    /* find one id in slice 1 of 2 and one in slice 2 */
    char mine[32] = "", other[32] = "";
    for (int i = 0; i < 100 && (!mine[0] || !other[0]); i++) {
        char id[32];
        snprintf(id, sizeof id, "n%d", i);
        if (rt_cohort_part_of(id, 2) == 0 && !mine[0])
            strcpy(mine, id);
        if (rt_cohort_part_of(id, 2) == 1 && !other[0])
            strcpy(other, id);
    }
    char text[512], out[1024], nights[1100], name[256];
    snprintf(text, sizeof text, "id,recording,stages,events,group\n%s,text.edf,,,case\n"
                                "%s,text.edf,,,control\n", mine, other);
    rt_error err;
    rt_manifest *m = load_text(dir, text, &err);
    assert_non_null(m);
    snprintf(out, sizeof out, "%s/out", dir);
    snprintf(nights, sizeof nights, "%s/nights", out);
    assert_int_equal(mkdir(out, 0777), 0);
    assert_int_equal(mkdir(nights, 0777), 0);
    snprintf(name, sizeof name, "%s.json.tmp-AbC123", mine);
    rt_test_text_file(nights, name, "{\"half");
    snprintf(name, sizeof name, "%s.key.tmp-AbC123", other);
    rt_test_text_file(nights, name, "{\"half");
    rt_cohort_options o;
    rt_cohort_options_default(&o);
    o.out_dir = out;
    o.jobs = 2;
    o.part = 1;
    o.part_count = 2;
    rt_cohort_progress p;
    assert_int_equal(rt_cohort_run(m, &o, &p, &err), RT_OK);
    assert_int_equal(p.total, 1);
    assert_int_equal(p.failed, 1);
    char path[1400];
    snprintf(path, sizeof path, "%s/%s.json.tmp-AbC123", nights, mine);
    assert_int_not_equal(access(path, F_OK), 0);
    snprintf(path, sizeof path, "%s/%s.key.tmp-AbC123", nights, other);
    assert_int_equal(access(path, F_OK), 0);
    snprintf(path, sizeof path, "%s/%s.error.json", nights, mine);
    const char *rec = slurp(path);
    assert_non_null(rec);
    assert_non_null(strstr(rec, "\"status\": \"recording\""));
    assert_non_null(strstr(rec, "\"exit_code\": 4"));
    snprintf(path, sizeof path, "%s/%s.error.json", nights, other);
    assert_int_not_equal(access(path, F_OK), 0);
    /* a part outside 1..N is refused before anything is written */
    o.part = 3;
    assert_int_equal(rt_cohort_run(m, &o, &p, &err), RT_ERR_USAGE);
    rt_manifest_free(m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_manifest_reads_rows),
        cmocka_unit_test(test_manifest_errors_name_the_row),
        cmocka_unit_test(test_safe_ids),
        cmocka_unit_test(test_part_of_is_xxh3_mod_n),
        cmocka_unit_test(test_merge_table_and_calibration),
        cmocka_unit_test(test_run_records_failures_and_clears_temporaries),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
