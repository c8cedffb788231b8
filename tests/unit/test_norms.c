/* A lab's norms file (docs/scoring.md, "Norms"; src/score/norms_file.c):
 *  - the loader reads a good file (leading comment lines, an optional method
 *    column) and refuses, naming the file and the line, an unknown index, a
 *    wrong unit, a missing unit column, a bad sex, an empty source, an age
 *    band the wrong way round, a percentile on the wrong side of the median,
 *    and two overlapping bands of one index, sex and percentile (with both
 *    lines);
 *  - the stratum choice: the band holds age_from <= age < age_to (both band
 *    edges tried), a row of the person's sex is used before one for either
 *    sex, the outermost percentile of the stratum (highest; lowest for the
 *    REM Atonia Index, where lower is further from atonia), and the reasons
 *    when no row applies: no age given, no row for this sex, the age outside
 *    every band. Choosing the most specific stratum and the band containing
 *    the age is common practice for normative tables;
 *  - placement on a night: an index the file lists is placed against its
 *    row (never the built-in value, even when no row applies), one it does
 *    not list keeps the built-in overall 95th percentile (Feemster et al.
 *    2019, Sleep 42(10) zsz124, abstract: submentalis "any" 9.1 %), and the
 *    level does not change.
 * Every number in the files below is invented for the test. */
#include "support.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/remtone.h"

#define HEADER "index,sex,age_from,age_to,percentile,value,unit,source,method\n"

static const char GOOD[] =
    "# invented numbers for this test only\n"
    "\n"
    HEADER
    "sinbar.chin_any_3s,any,20,60,95,8.0,%,invented A,visual\n"          /* line 4 */
    "sinbar.chin_any_3s,F,60,70,95,7.2,%,invented B,visual\n"            /* line 5 */
    "sinbar.chin_any_3s,F,60,70,90,5.0,%,invented C,\n"                  /* line 6 */
    "sinbar.chin_any_3s,any,60,70,95,9.5,%,invented D,\n"                /* line 7 */
    "sinbar.chin_any_3s,F,70,80,95,11,%,invented E,\n"                   /* line 8 */
    "sinbar.chin_phasic_3s,M,60,70,95,9.0,%,invented F,\n"               /* line 9 */
    "rai,any,20,90,5,0.80,ratio,invented G,\n"                           /* line 10 */
    "rai,any,20,90,2.5,0.70,ratio,invented H,\n"                         /* line 11 */
    "aasm.tonic_chin_epochs,any,0,130,95,3.0,%,invented I,\n";          /* line 12 */

static const char *write_norms(const char *name, const char *text)
{
    return rt_test_text_file(rt_test_dir(name), "norms.csv", text);
}

static void loads_a_good_file(void **state)
{
    (void)state;
    rt_error err;
    rt_norms *norms = NULL;
    const char *path = write_norms("norms_good", GOOD);
    assert_int_equal(rt_norms_load(path, &norms, &err), RT_OK);
    assert_string_equal(rt_norms_path(norms), path);
    rt_norm_stratum s;
    char why[200];
    assert_int_equal(rt_norms_choose(norms, RT_IX_SINBAR_CHIN_ANY_3S, 64, 'F', &s, why,
                                     sizeof why), 1);
    assert_int_equal(s.line, 5);
    assert_string_equal(s.source, "invented B");
    assert_string_equal(s.method, "visual");
    assert_string_equal(s.who, "women aged 60-69");
    assert_non_null(strstr(s.label, "95th percentile (7.2 %) of women aged 60-69"));
    assert_non_null(strstr(s.label, "norms.csv line 5"));
    /* every row in file order with its line (`remtone rules --norms`): the nine
     * data rows of GOOD are its lines 4 to 12 */
    assert_int_equal(rt_norms_count(norms), 9);
    assert_int_equal(rt_norms_count(NULL), 0);
    static const rt_index_id INDEX[9] = {
        RT_IX_SINBAR_CHIN_ANY_3S, RT_IX_SINBAR_CHIN_ANY_3S, RT_IX_SINBAR_CHIN_ANY_3S,
        RT_IX_SINBAR_CHIN_ANY_3S, RT_IX_SINBAR_CHIN_ANY_3S, RT_IX_SINBAR_CHIN_PHASIC_3S,
        RT_IX_RAI, RT_IX_RAI, RT_IX_AASM_TONIC_CHIN};
    for (size_t k = 0; k < 9; k++) {
        rt_index_id i = RT_IX_COUNT;
        assert_true(rt_norms_row(norms, k, &i, &s));
        assert_int_equal(i, INDEX[k]);
        assert_int_equal(s.line, (long)k + 4);
    }
    assert_true(rt_norms_row(norms, 2, NULL, &s));
    assert_int_equal(s.sex, 'F');
    assert_true(s.percentile == 90 && s.value == 5.0 && s.age_from == 60 && s.age_to == 70);
    assert_string_equal(s.source, "invented C");
    assert_string_equal(s.method, "");
    assert_non_null(strstr(s.label, "90th percentile (5 %) of women aged 60-69"));
    assert_true(rt_norms_row(norms, 7, NULL, &s));
    assert_non_null(strstr(s.label, "2.5th percentile (0.7) of women and men aged 20-89"));
    assert_false(rt_norms_row(norms, 9, NULL, &s));
    assert_false(rt_norms_row(NULL, 0, NULL, &s));
    rt_norms_free(norms);
    rt_norms_free(NULL);
}

/* Each refusal: RT_ERR_STAGING, the file and the line in the message. */
static void refuses_bad_rows(void **state)
{
    (void)state;
    static const struct { const char *row; const char *says; } BAD[] = {
        {"sinbar.nothing,any,20,60,95,8,%,x,\n", "is not an index id"},
        {"sinbar.chin_any_3s,any,20,60,95,0.08,ratio,x,\n", "does not fit"},
        {"rai,any,20,60,5,80,%,x,\n", "does not fit"},
        {"sinbar.chin_any_3s,X,20,60,95,8,%,x,\n", "is not F, M or any"},
        {"sinbar.chin_any_3s,any,20,60,95,8,%,,\n", "source is empty"},
        {"sinbar.chin_any_3s,any,60,20,95,8,%,x,\n", "age band"},
        {"sinbar.chin_any_3s,any,20,60,50,8,%,x,\n", "percentile must be between 50 and 100"},
        {"rai,any,20,60,95,0.8,ratio,x,\n", "percentile must be between 0 and 50"},
        {"sinbar.chin_any_3s,any,20,60,95,101,%,x,\n", "outside 0 .. 100"},
        {"sinbar.chin_any_3s,any,20,60,95,many,%,x,\n", "is not a number"},
    };
    for (size_t k = 0; k < sizeof BAD / sizeof BAD[0]; k++) {
        char text[512];
        snprintf(text, sizeof text, "%s%s", HEADER, BAD[k].row);
        rt_error err;
        rt_error_clear(&err);
        rt_norms *norms = (rt_norms *)1;
        const char *path = write_norms("norms_bad", text);
        assert_int_equal(rt_norms_load(path, &norms, &err), RT_ERR_STAGING);
        assert_null(norms);
        print_message("# %s", err.message);
        print_message("\n");
        assert_non_null(strstr(err.message, BAD[k].says));
        char where[300];
        snprintf(where, sizeof where, "%s line 2", path);
        assert_non_null(strstr(err.message, where));
    }
}

static void refuses_overlap_and_missing_unit(void **state)
{
    (void)state;
    rt_error err;
    rt_norms *norms = NULL;
    /* [60, 70) and [69, 75) overlap for women at the 95th percentile: both lines named */
    const char *path = write_norms("norms_overlap",
                                   HEADER "sinbar.chin_any_3s,F,60,70,95,7,%,x,\n"
                                          "sinbar.chin_any_3s,any,69,75,95,7,%,x,\n"
                                          "sinbar.chin_any_3s,F,70,80,95,7,%,x,\n"
                                          "sinbar.chin_any_3s,F,69,75,95,7,%,x,\n");
    assert_int_equal(rt_norms_load(path, &norms, &err), RT_ERR_STAGING);
    print_message("# %s\n", err.message);
    assert_non_null(strstr(err.message, "line 5"));
    assert_non_null(strstr(err.message, "of line 2"));
    /* touching bands ([60, 70) then [70, 80)) and another sex do not overlap: line 4 loaded */
    assert_null(strstr(err.message, "line 4:"));
    /* the unit column is required, as in a cutoff file */
    path = write_norms("norms_no_unit", "index,sex,age_from,age_to,percentile,value,source\n"
                                        "sinbar.chin_any_3s,F,60,70,95,7,x\n");
    assert_int_equal(rt_norms_load(path, &norms, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "no \"unit\" column"));
    assert_non_null(strstr(err.message, "line 1"));
    /* a file that lists nothing */
    path = write_norms("norms_empty", "# nothing yet\n" HEADER);
    assert_int_equal(rt_norms_load(path, &norms, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "lists no index"));
}

static void chooses_the_stratum(void **state)
{
    (void)state;
    rt_error err;
    rt_norms *norms = NULL;
    assert_int_equal(rt_norms_load(write_norms("norms_choose", GOOD), &norms, &err), RT_OK);
    static const struct { rt_index_id ix; double age; char sex; int got; long line; } CASES[] = {
        /* band edges: from is in the band, to is the first age outside it */
        {RT_IX_SINBAR_CHIN_ANY_3S, 60.0, 'F', 1, 5},
        {RT_IX_SINBAR_CHIN_ANY_3S, 69.99, 'F', 1, 5},
        {RT_IX_SINBAR_CHIN_ANY_3S, 70.0, 'F', 1, 8},
        {RT_IX_SINBAR_CHIN_ANY_3S, 59.99, 'F', 1, 4},
        {RT_IX_SINBAR_CHIN_ANY_3S, 20.0, 'M', 1, 4},
        {RT_IX_SINBAR_CHIN_ANY_3S, 19.99, 'M', 0, 0},
        /* a man of 65 has no row of his own: the row for either sex */
        {RT_IX_SINBAR_CHIN_ANY_3S, 65.0, 'M', 1, 7},
        /* nor does a person whose sex is not given */
        {RT_IX_SINBAR_CHIN_ANY_3S, 65.0, 0, 1, 7},
        /* a woman of 75: her own band; 80 and over: no band for women or either sex */
        {RT_IX_SINBAR_CHIN_ANY_3S, 75.0, 'F', 1, 8},
        {RT_IX_SINBAR_CHIN_ANY_3S, 80.0, 'F', 0, 0},
        /* no age: no row applies */
        {RT_IX_SINBAR_CHIN_ANY_3S, NAN, 'F', 0, 0},
        /* rows for men only */
        {RT_IX_SINBAR_CHIN_PHASIC_3S, 65.0, 'F', 0, 0},
        {RT_IX_SINBAR_CHIN_PHASIC_3S, 65.0, 'M', 1, 9},
        /* the REM Atonia Index: the lowest percentile of the stratum */
        {RT_IX_RAI, 50.0, 'M', 1, 11},
        /* not listed */
        {RT_IX_MONTREAL_TONIC_CHIN, 50.0, 'M', -1, 0},
    };
    for (size_t k = 0; k < sizeof CASES / sizeof CASES[0]; k++) {
        rt_norm_stratum s;
        memset(&s, 0, sizeof s);
        char why[200];
        int got = rt_norms_choose(norms, CASES[k].ix, CASES[k].age, CASES[k].sex, &s, why,
                                  sizeof why);
        print_message("# %s age %g sex %c: %d line %ld %s\n", rt_index_rules()[CASES[k].ix].id,
                      CASES[k].age, CASES[k].sex ? CASES[k].sex : '-', got, s.line,
                      got == 0 ? why : s.label);
        assert_int_equal(got, CASES[k].got);
        if (got == 1)
            assert_int_equal(s.line, CASES[k].line);
    }
    /* the reasons, in words */
    rt_norm_stratum s;
    char why[200];
    rt_norms_choose(norms, RT_IX_SINBAR_CHIN_ANY_3S, NAN, 'F', &s, why, sizeof why);
    assert_non_null(strstr(why, "no age given"));
    rt_norms_choose(norms, RT_IX_SINBAR_CHIN_PHASIC_3S, 65, 'F', &s, why, sizeof why);
    assert_non_null(strstr(why, "no row of the norms file is for women"));
    rt_norms_choose(norms, RT_IX_SINBAR_CHIN_ANY_3S, 85, 'F', &s, why, sizeof why);
    assert_non_null(strstr(why, "age 85 is outside every band"));
    /* the highest percentile of the stratum (95 before 90 for women aged 60-69) */
    assert_int_equal(rt_norms_choose(norms, RT_IX_SINBAR_CHIN_ANY_3S, 65, 'F', &s, why,
                                     sizeof why), 1);
    assert_true(s.percentile == 95.0);
    rt_norms_free(norms);
}

static rt_night *night_with(double chin_any, double chin_phasic)
{
    rt_night *n = rt_test_blank_night();
    const struct { rt_index_id ix; double value; } SET[] = {
        {RT_IX_SINBAR_CHIN_ANY_3S, chin_any}, {RT_IX_SINBAR_CHIN_PHASIC_3S, chin_phasic},
        {RT_IX_SINBAR_CHIN_TONIC_30S, 0.5}};
    for (size_t k = 0; k < sizeof SET / sizeof SET[0]; k++) {
        n->index[SET[k].ix].value = SET[k].value;
        n->index[SET[k].ix].status = RT_STATUS_BELOW; /* no published cutoff reached */
    }
    return n;
}

static void places_a_night(void **state)
{
    (void)state;
    rt_error err;
    rt_norms *norms = NULL;
    assert_int_equal(rt_norms_load(write_norms("norms_night", GOOD), &norms, &err), RT_OK);
    /* 8.0 % is within the built-in 9.1 % but beyond this file's 7.2 % for women aged 60-69 */
    rt_night *n = night_with(8.0, 4.0);
    assert_int_equal(rt_night_place_norms_from(n, norms, 64, 'F', &err), RT_OK);
    const rt_norm_place *any = &n->norms[RT_IX_SINBAR_CHIN_ANY_3S];
    print_message("# %s\n", any->text);
    assert_true(any->lab && any->applied);
    assert_int_equal(any->band, RT_NORM_BEYOND);
    assert_int_equal(any->stratum.line, 5);
    assert_non_null(strstr(any->text, "women aged 60-69"));
    assert_non_null(strstr(n->norms_file, "norms.csv"));
    /* listed, but no row for women: not placed, and not against the built-in 8.6 % */
    const rt_norm_place *phasic = &n->norms[RT_IX_SINBAR_CHIN_PHASIC_3S];
    assert_true(phasic->lab && !phasic->applied);
    assert_int_equal(phasic->band, RT_NORM_NOT_PLACED);
    assert_non_null(strstr(phasic->text, "no row of the norms file is for women"));
    /* not listed: the built-in overall value (0.99 %), with its published source */
    const rt_norm_place *tonic = &n->norms[RT_IX_SINBAR_CHIN_TONIC_30S];
    assert_false(tonic->lab);
    assert_int_equal(tonic->stratum.line, 0);
    assert_non_null(strstr(tonic->stratum.source, "Feemster et al. 2019"));
    assert_int_equal(tonic->band, RT_NORM_WITHIN);
    /* listed although the built-in table has no row for it; not computed here */
    assert_true(n->norms[RT_IX_AASM_TONIC_CHIN].lab);
    assert_int_equal(n->norms[RT_IX_AASM_TONIC_CHIN].row, -1);
    assert_non_null(strstr(n->norms[RT_IX_AASM_TONIC_CHIN].text, "not computed"));
    /* the norms never decide the level */
    assert_int_equal(n->level, RT_REVIEW_CLEAR);
    /* without the file, the same value is within the built-in 95th percentile */
    assert_int_equal(rt_night_place_norms(n, 64, 'F', &err), RT_OK);
    assert_int_equal(n->norms[RT_IX_SINBAR_CHIN_ANY_3S].band, RT_NORM_WITHIN);
    assert_false(n->norms[RT_IX_SINBAR_CHIN_ANY_3S].lab);
    assert_string_equal(n->norms_file, "");
    free(n);
    rt_norms_free(norms);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(loads_a_good_file),
        cmocka_unit_test(refuses_bad_rows),
        cmocka_unit_test(refuses_overlap_and_missing_unit),
        cmocka_unit_test(chooses_the_stratum),
        cmocka_unit_test(places_a_night),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
