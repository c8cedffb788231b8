/* From mini-epoch labels to indices and the review level, on hand-built
 * label sets: the AASM 5-of-10 rule, missing channels, cutoff statuses. */
#include "support.h"

#include <math.h>
#include <string.h>

#include "night_internal.h"

/* One REM epoch whose first `chin_minis` 3-s minis hold an AASM chin burst. */
static rt_night *one_epoch(int chin_minis, bool arms)
{
    rt_night *n = rt_calloc(1, sizeof *n);
    rt_score_params_default(&n->params);
    rt_cutoffs_published(&n->cutoffs);
    n->nrem_reference_uv = 3.0;
    n->n_epochs = 1;
    n->epochs = rt_calloc(1, sizeof *n->epochs);
    n->n_minis3 = 10;
    n->minis3 = rt_calloc(10, sizeof *n->minis3);
    n->n_minis2 = 15;
    n->minis2 = rt_calloc(15, sizeof *n->minis2);
    n->channel[RT_ROLE_CHIN].present = true;
    n->channel[RT_ROLE_ARM_LEFT].present = arms;
    n->channel[RT_ROLE_ARM_RIGHT].present = arms;
    for (int r = RT_ROLE_ARM_LEFT; r < RT_ROLE_ECG; r++)
        if (!n->channel[r].present)
            for (int k = 0; k < 10; k++)
                n->minis3[k].labels[r] = RT_LABEL_ABSENT;
    for (int k = 0; k < chin_minis; k++)
        n->minis3[k].labels[RT_ROLE_CHIN] = RT_LABEL_AASM_PHASIC;
    return n;
}

static double index_of(int chin_minis, rt_index_id id, rt_index_status *status)
{
    rt_night *n = one_epoch(chin_minis, true);
    scoring_state ss;
    memset(&ss, 0, sizeof ss);
    assert_int_equal(rt_night_summarise(n, &ss, NULL), RT_OK);
    double v = n->index[id].value;
    if (status)
        *status = n->index[id].status;
    rt_night_free(n);
    return v;
}

/* AASM Manual v2: excessive transient muscle activity when at least 5 of the
 * 10 3-s mini-epochs hold bursts [BRIEF section 3]. */
static void aasm_five_of_ten(void **state)
{
    (void)state;
    assert_true(index_of(4, RT_IX_AASM_PHASIC_CHIN, NULL) == 0.0);
    assert_true(index_of(5, RT_IX_AASM_PHASIC_CHIN, NULL) == 100.0);
    assert_true(index_of(5, RT_IX_AASM_PHASIC_ANY, NULL) == 100.0);
    assert_true(index_of(5, RT_IX_AASM_RSWA, NULL) == 100.0);
}

/* Indices needing a missing channel are not computed, never 0 (scoring issue). */
static void missing_arms_not_computed(void **state)
{
    (void)state;
    rt_night *n = one_epoch(0, false);
    scoring_state ss;
    memset(&ss, 0, sizeof ss);
    assert_int_equal(rt_night_summarise(n, &ss, NULL), RT_OK);
    assert_int_equal(n->index[RT_IX_SINBAR_FDS_PHASIC_3S].status, RT_STATUS_NOT_COMPUTED);
    assert_true(isnan(n->index[RT_IX_SINBAR_COMBINED_3S].value));
    assert_int_equal(n->headline, RT_IX_SINBAR_CHIN_ANY_3S);
    /* 0.5 min of REM is below the 5-min minimum (common practice): not assessable */
    assert_int_equal(n->level, RT_REVIEW_NOT_ASSESSABLE);
    rt_night_free(n);
}

/* A value exactly at a published cutoff is "above" (Frauscher et al. 2012
 * cutoffs are "at or above"); the REM Atonia Index is abnormal below 0.8 and
 * intermediate up to 0.9 (Ferri et al. 2010). */
static void statuses_at_the_cutoff(void **state)
{
    (void)state;
    rt_night *n = one_epoch(0, true);
    scoring_state ss;
    memset(&ss, 0, sizeof ss);
    ss.rai.total = 1000;
    ss.rai.at_most_1 = 850; /* 85 % <= 1 uV, none in (1, 2]: RAI 0.85 */
    assert_int_equal(rt_night_summarise(n, &ss, NULL), RT_OK);
    assert_int_equal(n->index[RT_IX_RAI].status, RT_STATUS_INTERMEDIATE);
    rt_night_free(n);

    n = one_epoch(0, true);
    memset(&ss, 0, sizeof ss);
    ss.rai.total = 1000;
    ss.rai.at_most_1 = 790;
    assert_int_equal(rt_night_summarise(n, &ss, NULL), RT_OK);
    assert_int_equal(n->index[RT_IX_RAI].status, RT_STATUS_BELOW);
    rt_night_free(n);

    /* SINBAR chin phasic: 5 of 10 minis = 50 %, far above 16.3 % */
    n = one_epoch(0, true);
    for (int k = 0; k < 5; k++)
        n->minis3[k].labels[RT_ROLE_CHIN] = RT_LABEL_SINBAR_PHASIC | RT_LABEL_SINBAR_ANY;
    memset(&ss, 0, sizeof ss);
    ss.montreal_windows = 1;
    n->cutoffs.value[RT_IX_SINBAR_CHIN_PHASIC_3S] = 50.0; /* exactly the value */
    assert_int_equal(rt_night_summarise(n, &ss, NULL), RT_OK);
    assert_int_equal(n->index[RT_IX_SINBAR_CHIN_PHASIC_3S].status, RT_STATUS_ABOVE);
    rt_night_free(n);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(aasm_five_of_ten),
        cmocka_unit_test(missing_arms_not_computed),
        cmocka_unit_test(statuses_at_the_cutoff),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
