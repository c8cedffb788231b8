/* Agreement with a manual scoring: Cohen's kappa on published worked
 * examples and its defining cases, an algebraically equal closed form on
 * random tables, and the night-level comparison on a hand-built night
 * (which minis are compared, which are skipped, the counts and rates). */
#include "support.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "agreement.h"
#include "internal.h"
#include "remtone/score.h"
#include "report/report_internal.h"

/* Kappa values below are exact fractions; 1e-12 allows for the rounding of
 * one division in doubles. */
#define KAPPA_TOL 1e-12

static void kappa_worked_examples(void **state)
{
    (void)state;
    /* easycalculation.com, "Cohen's kappa index" worked example: two doctors,
     * 20 patients; both yes 12, doctor B only 2, doctor A only 4, both no 2;
     * Pr(a) = 0.7, Pr(e) = 0.62, kappa = 0.08 / 0.38 = 0.21. */
    double k = rt_cohen_kappa(12, 4, 2, 2);
    assert_true(fabs(k - 0.08 / 0.38) < KAPPA_TOL);
    assert_true(fabs(k - 0.21) < 0.005); /* the page's rounded result */
    /* The 2x2 example of the English Wikipedia article "Cohen's kappa" (from
     * memory): 50 grant proposals, yes/yes 20, A yes B no 5, A no B yes 10,
     * no/no 15; p_o = 0.7, p_e = 0.5, kappa = 0.4. */
    assert_true(fabs(rt_cohen_kappa(20, 5, 10, 15) - 0.4) < KAPPA_TOL);
    /* Kappa is symmetric in the two raters (Cohen 1960: it depends on the
     * table only through p_o and the margins). */
    assert_true(fabs(rt_cohen_kappa(20, 10, 5, 15) - 0.4) < KAPPA_TOL);
}

/* The cases Cohen 1960 defines kappa by: 1 for perfect agreement, 0 when the
 * observed agreement equals the chance agreement of the margins, negative
 * below chance (-1 for complete disagreement with balanced margins). */
static void kappa_defining_cases(void **state)
{
    (void)state;
    assert_true(rt_cohen_kappa(7, 0, 0, 13) == 1.0);
    /* Independent margins: 10 of 40 and 20 of 40 marked; expected "both" =
     * 40 * 0.25 * 0.5 = 5. */
    assert_true(fabs(rt_cohen_kappa(5, 5, 15, 15)) < KAPPA_TOL);
    assert_true(fabs(rt_cohen_kappa(10, 10, 10, 10)) < KAPPA_TOL);
    assert_true(fabs(rt_cohen_kappa(0, 5, 5, 0) - -1.0) < KAPPA_TOL);
    /* Undefined: nothing compared, or both raters use one category only
     * (p_e = 1, so 1 - p_e = 0). */
    assert_true(isnan(rt_cohen_kappa(0, 0, 0, 0)));
    assert_true(isnan(rt_cohen_kappa(0, 0, 0, 9)));
    assert_true(isnan(rt_cohen_kappa(9, 0, 0, 0)));
    /* One rater constant, the other not: p_o = p_e, kappa 0 (not undefined). */
    assert_true(fabs(rt_cohen_kappa(0, 0, 3, 7)) < KAPPA_TOL);
}

/* For a 2x2 table a b / c d, kappa = 2 (ad - bc) / ((a+b)(b+d) + (a+c)(c+d))
 * (from memory; it follows from Cohen's definition by expanding p_o - p_e
 * and 1 - p_e over n^2). Checked on random tables against the function,
 * which computes from p_o and p_e. */
static void kappa_closed_form(void **state)
{
    (void)state;
    uint64_t s = rt_test_seed();
    for (int round = 0; round < 2000; round++) {
        size_t t[4];
        for (int i = 0; i < 4; i++) {
            s = s * 6364136223846793005ULL + 1442695040888963407ULL;
            t[i] = (size_t)((s >> 33) % 500);
        }
        double a = (double)t[0], b = (double)t[1], c = (double)t[2], d = (double)t[3];
        double den = (a + b) * (b + d) + (a + c) * (c + d);
        double k = rt_cohen_kappa(t[0], t[1], t[2], t[3]);
        if (den == 0.0) {
            assert_true(isnan(k));
            continue;
        }
        double expect = 2.0 * (a * d - b * c) / den;
        if (!(fabs(k - expect) < 1e-9))
            fail_msg("table %zu %zu %zu %zu: kappa %.15g, closed form %.15g", t[0], t[1], t[2],
                     t[3], k, expect);
    }
}

/* A hand-built night: one REM epoch at 600 s, ten 3-s minis on the chin and
 * the left arm. remtone's chin labels: minis 0-2 phasic (and so "any"),
 * mini 3 tonic and "any", mini 9 excluded; the left arm is absent. */
static rt_night *hand_night(void)
{
    rt_night *n = rt_calloc(1, sizeof *n);
    n->n_minis3 = 10;
    n->minis3 = rt_calloc(10, sizeof *n->minis3);
    for (int k = 0; k < 10; k++) {
        n->minis3[k].epoch = 20;
        n->minis3[k].index = k;
        n->minis3[k].onset_s = 600.0 + 3.0 * k;
        n->minis3[k].labels[RT_ROLE_ARM_LEFT] = RT_LABEL_ABSENT;
    }
    for (int k = 0; k < 3; k++)
        n->minis3[k].labels[RT_ROLE_CHIN] = RT_LABEL_SINBAR_PHASIC | RT_LABEL_SINBAR_ANY;
    n->minis3[3].labels[RT_ROLE_CHIN] = RT_LABEL_SINBAR_TONIC | RT_LABEL_SINBAR_ANY;
    n->minis3[9].labels[RT_ROLE_CHIN] = RT_LABEL_EXCLUDED | RT_LABEL_SINBAR_PHASIC;
    return n;
}

static void night_comparison(void **state)
{
    (void)state;
    rt_error err;
    rt_night *night = hand_night();
    rt_timeline *tl = rt_test_timeline();
    assert_int_equal(rt_timeline_add_stage_run(tl, 600, 30, RT_STAGE_R, "t", 0, &err), RT_OK);
    snprintf(tl->scorer, sizeof tl->scorer, "Scorer Z");
    /* The scorer's chin: phasic on minis 0, 1 and 4; tonic on minis 3 and 5;
     * mini 9 (excluded by remtone) marked phasic. */
    for (int k = 0; k < 10; k++) {
        bool phasic = k == 0 || k == 1 || k == 4 || k == 9;
        bool tonic = k == 3 || k == 5;
        assert_int_equal(rt_timeline_add_manual(tl, 600.0 + 3.0 * k, RT_ROLE_CHIN, phasic, tonic,
                                                "t", 0, &err), RT_OK);
    }
    /* Skipped: a mini outside the REM remtone scored, an absent channel. */
    assert_int_equal(rt_timeline_add_manual(tl, 300, RT_ROLE_CHIN, true, false, "t", 0, &err),
                     RT_OK);
    assert_int_equal(rt_timeline_add_manual(tl, 600, RT_ROLE_ARM_LEFT, true, false, "t", 0, &err),
                     RT_OK);
    rt_night_agreement(night, tl);
    const rt_agreement *ag = &night->agreement;
    assert_true(ag->present);
    assert_string_equal(ag->scorer, "Scorer Z");

    /* Compared: minis 0-8 (mini 9 excluded). Phasic: auto {0,1,2}, manual
     * {0,1,4}: both 2, manual only 1 (4), auto only 1 (2), neither 5. */
    const rt_agreement_cell *p = &ag->cell[RT_ROLE_CHIN][RT_AGREE_PHASIC];
    assert_int_equal(p->n, 9);
    assert_int_equal(p->both, 2);
    assert_int_equal(p->manual_only, 1);
    assert_int_equal(p->auto_only, 1);
    assert_int_equal(p->neither, 5);
    assert_true(fabs(p->percent - 700.0 / 9.0) < 1e-9);
    assert_true(fabs(p->manual_pct - 300.0 / 9.0) < 1e-9);
    assert_true(fabs(p->auto_pct - 300.0 / 9.0) < 1e-9);
    /* Cohen 1960: p_o = 7/9, p_e = (3*3 + 6*6)/81 = 45/81; kappa = (63-45)/(81-45) = 0.5. */
    assert_true(fabs(p->kappa - 0.5) < KAPPA_TOL);

    /* Tonic: auto {3}, manual {3,5}: both 1, manual only 1, neither 7. */
    const rt_agreement_cell *t = &ag->cell[RT_ROLE_CHIN][RT_AGREE_TONIC];
    assert_int_equal(t->both, 1);
    assert_int_equal(t->manual_only, 1);
    assert_int_equal(t->auto_only, 0);
    assert_int_equal(t->neither, 7);
    /* p_o = 8/9, p_e = (2*1 + 7*8)/81 = 58/81: kappa = (72-58)/(81-58) = 14/23. */
    assert_true(fabs(t->kappa - 14.0 / 23.0) < KAPPA_TOL);

    /* Any: auto {0,1,2,3}, manual {0,1,3,4,5}: both 3, manual only 2, auto
     * only 1, neither 3. */
    const rt_agreement_cell *a = &ag->cell[RT_ROLE_CHIN][RT_AGREE_ANY];
    assert_int_equal(a->both, 3);
    assert_int_equal(a->manual_only, 2);
    assert_int_equal(a->auto_only, 1);
    assert_int_equal(a->neither, 3);
    /* p_o = 6/9; p_e = (5*4 + 4*5)/81 = 40/81: kappa = (54-40)/(81-40) = 14/41. */
    assert_true(fabs(a->kappa - 14.0 / 41.0) < KAPPA_TOL);

    /* The absent left arm compared nothing: n 0 and every rate undefined. */
    const rt_agreement_cell *arm = &ag->cell[RT_ROLE_ARM_LEFT][RT_AGREE_ANY];
    assert_int_equal(arm->n, 0);
    assert_true(isnan(arm->percent) && isnan(arm->kappa) && isnan(arm->manual_pct));

    /* The JSON form (docs/agreement.md) carries the same counts, rounded
     * rates, and only the roles that compared something. */
    json_t *j = rt_agreement_json(ag);
    assert_non_null(j);
    assert_true(json_is_true(json_object_get(j, "present")));
    json_t *chin_phasic = json_object_get(json_object_get(json_object_get(j, "roles"), "chin"),
                                          "phasic");
    assert_int_equal(json_integer_value(json_object_get(chin_phasic, "both")), 2);
    assert_true(json_real_value(json_object_get(chin_phasic, "kappa")) == 0.5);
    assert_true(json_real_value(json_object_get(chin_phasic, "percent")) == 77.78);
    assert_null(json_object_get(json_object_get(j, "roles"), "arm-left"));
    json_decref(j);
    char *text = NULL;
    size_t text_len = 0;
    FILE *mem = open_memstream(&text, &text_len);
    rt_agreement_write_text(ag, mem);
    fclose(mem);
    assert_non_null(strstr(text, "Scorer Z"));
    assert_non_null(strstr(text, "77.8 %"));
    free(text);

    /* Without a manual scoring: not present, nothing compared. */
    rt_timeline *plain = rt_test_timeline();
    rt_night_agreement(night, plain);
    assert_false(night->agreement.present);
    assert_int_equal(night->agreement.cell[RT_ROLE_CHIN][RT_AGREE_ANY].n, 0);
    rt_night_agreement(night, NULL);
    assert_false(night->agreement.present);

    rt_timeline_free(plain);
    rt_timeline_free(tl);
    rt_night_free(night);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(kappa_worked_examples),
        cmocka_unit_test(kappa_defining_cases),
        cmocka_unit_test(kappa_closed_form),
        cmocka_unit_test(night_comparison),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
