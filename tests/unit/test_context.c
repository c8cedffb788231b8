/* The night in context (docs/scoring.md, "REM periods", "Sleep context",
 * "Norms"; docs/review-report.md, "In short"):
 *  - REM periods and halves: on a synthetic night whose last REM bout is
 *    tonic from its first to its last epoch (rt_synth_options.tonic_whole_bout),
 *    the periods' numerators and denominators add up to the night's for every
 *    count-based index, the halves' too, and the tonic index is high only in
 *    the period and the half that hold the tonic bout;
 *  - the sleep context of a hand-made hypnogram against values worked out by
 *    hand below (definitions of the AASM Manual for the Scoring of Sleep and
 *    Associated Events, v2.x, "Parameters to be reported"; from memory);
 *  - the norms: a value at the published 95th percentile (Feemster et al.
 *    2019, Sleep 42(10) zsz124, abstract: submentalis "any" 9.1 %, phasic
 *    8.6 %, tonic 0.99 %, REM Atonia Index 0.85) lands within it, a value
 *    above it beyond it, a value at the RBD cutoff (McCarter et al. 2014,
 *    Sleep 37(10):1649-1657, abstract: "any" 21.6 %) in the last band;
 *  - the plain-language sentence in the four cases: clear, flagged, not
 *    assessable, with reservations; never a diagnosis. */
#include "support.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "night_internal.h"
#include "remtone/remtone.h"

/* ---- REM periods ------------------------------------------------------------ */

/* Indices counted on units (mini-epochs, epochs, windows, seconds); the
 * leg-movement rate is per hour and not a sum. */
static bool additive(int i) { return i != RT_IX_MONTREAL_LM_PER_H; }

static void check_sums(const rt_night *n, const rt_rem_period *g, size_t count, const char *what)
{
    for (int i = 0; i < RT_IX_COUNT; i++) {
        if (!additive(i) || n->index[i].status == RT_STATUS_NOT_COMPUTED)
            continue;
        size_t num = 0, den = 0;
        for (size_t k = 0; k < count; k++) {
            num += g[k].index[i].numerator;
            den += g[k].index[i].denominator;
        }
        print_message("# %s %s: %zu/%zu, night %zu/%zu\n", what, rt_index_rules()[i].id, num, den,
                      n->index[i].numerator, n->index[i].denominator);
        assert_int_equal(num, n->index[i].numerator);
        assert_int_equal(den, n->index[i].denominator);
    }
}

static void periods_add_up_and_place_rswa(void **state)
{
    (void)state;
    /* a night whose REM bouts stand more than 15 min apart (so each bout is
     * one period), its last bout wholly tonic: RSWA late in the night only */
    rt_synth_options o = rt_test_synth_options(6, rt_test_seed());
    o.profile = RT_SYNTH_TYPICAL_OLDER;
    const char *probe = rt_test_dir("context_probe");
    rt_test_synth_write(&o, probe);
    json_t *t = rt_test_load_truth(probe);
    rt_test_truth v;
    rt_test_truth_load(t, &v);
    int bouts = v.n_bouts;
    rt_test_truth_free(&v);
    json_decref(t);
    assert_true(bouts >= 2);
    o.tonic_whole_bout = bouts;

    rt_recording *rec = NULL;
    rt_night *n = NULL;
    rt_test_score_synthetic(&o, rt_test_dir("context_late_tonic"), false, &rec, &n);
    assert_true(n->n_periods >= 2);
    assert_int_equal(n->sleep.rem_periods, n->n_periods);
    /* periods cover every bout once, in order, and never straddle the halves */
    size_t bouts_seen = 0, epochs_seen = 0;
    for (size_t k = 0; k < n->n_periods; k++) {
        const rt_rem_period *g = &n->periods[k];
        assert_int_equal(g->bout_first, bouts_seen);
        bouts_seen += g->n_bouts;
        epochs_seen += g->rem_epochs;
        assert_true(g->first_epoch <= g->last_epoch);
        assert_true(g->end_s > g->onset_s);
        if (k > 0) /* the rule: 15 min or more of other stages between periods */
            assert_true(g->onset_s - n->periods[k - 1].end_s >= 15 * 60 - 1e-6);
        assert_int_equal(g->half, g->onset_s >= n->sleep.half_split_s);
    }
    assert_int_equal(bouts_seen, n->n_bouts);
    assert_int_equal(epochs_seen, n->n_epochs);
    check_sums(n, n->periods, n->n_periods, "periods");
    check_sums(n, n->halves, 2, "halves");

    /* the tonic bout's period shows it; the periods before do not */
    const rt_rem_period *last = &n->periods[n->n_periods - 1];
    const int tonic = RT_IX_SINBAR_CHIN_TONIC_30S;
    print_message("# tonic: last period %.1f %%, night %.1f %%\n", last->index[tonic].value,
                  n->index[tonic].value);
    assert_true(last->index[tonic].value >= 80.0); /* the whole bout is tonic (our synthesis) */
    for (size_t k = 0; k + 1 < n->n_periods; k++)
        assert_true(n->periods[k].index[tonic].value < 20.0);
    assert_int_equal(last->half, 1);
    assert_true(n->halves[1].index[tonic].value > n->halves[0].index[tonic].value + 20.0);
    rt_night_free(n);
    rt_recording_close(rec);
}

/* ---- sleep context -------------------------------------------------------------- */

static void sleep_context_by_hand(void **state)
{
    (void)state;
    /* 30-s epochs from the recording start (0 s), lights-off at 60 s (epoch
     * 2), lights-on at 900 s (epoch 30); the recording is 1000 s long:
     *   epochs 0-3   W   (2 of them in bed: 60-120 s)
     *   epochs 4-9   N1  (6)      sleep onset at 120 s
     *   epochs 10-13 N2  (4)
     *   epochs 14-15 W   (2)      wake after sleep onset
     *   epochs 16-19 N3  (4)
     *   epochs 20-23 R   (4)      first R at 600 s
     *   epochs 24-25 unstaged (2)
     *   epochs 26-27 N2  (2)
     *   epochs 28-29 W   (2)      in bed until lights-on at 900 s */
    rt_error err;
    rt_timeline *tl = NULL;
    assert_int_equal(rt_timeline_new(&tl, &err), RT_OK);
    static const struct { int first, count; rt_stage s; } RUNS[] = {
        {0, 4, RT_STAGE_W}, {4, 6, RT_STAGE_N1}, {10, 4, RT_STAGE_N2}, {14, 2, RT_STAGE_W},
        {16, 4, RT_STAGE_N3}, {20, 4, RT_STAGE_R}, {26, 2, RT_STAGE_N2}, {28, 2, RT_STAGE_W}};
    for (size_t i = 0; i < sizeof RUNS / sizeof RUNS[0]; i++)
        assert_int_equal(rt_timeline_add_stage_run(tl, 30.0 * RUNS[i].first, 30.0 * RUNS[i].count,
                                                   RUNS[i].s, "hand", 0, &err), RT_OK);
    tl->lights_off_s = 60.0;
    tl->lights_on_s = 900.0;
    rt_night *n = calloc(1, sizeof *n);
    assert_non_null(n);
    n->recording_s = 1000.0;
    rt_score_params_default(&n->params);
    assert_int_equal(rt_night_staging_summarise(n, tl, &err), RT_OK);
    rt_night_sleep_context(n, tl);
    const rt_sleep_context *c = &n->sleep;
    const double e = 0.5; /* one epoch, minutes */
    assert_true(fabs(c->recording_min - 1000.0 / 60.0) < 1e-9);
    assert_true(fabs(c->in_bed_min - 28 * e) < 1e-9);                 /* 60 .. 900 s */
    assert_true(fabs(c->stage_min[RT_STAGE_W] - (2 + 2 + 2) * e) < 1e-9);
    assert_true(fabs(c->stage_min[RT_STAGE_N1] - 6 * e) < 1e-9);
    assert_true(fabs(c->stage_min[RT_STAGE_N2] - (4 + 2) * e) < 1e-9);
    assert_true(fabs(c->stage_min[RT_STAGE_N3] - 4 * e) < 1e-9);
    assert_true(fabs(c->stage_min[RT_STAGE_R] - 4 * e) < 1e-9);
    assert_true(fabs(c->stage_min[RT_STAGE_UNSCORED] - 2 * e) < 1e-9);
    assert_true(fabs(c->sleep_min - 20 * e) < 1e-9);                  /* 6 + 6 + 4 + 4 */
    assert_true(fabs(c->efficiency_pct - 100.0 * 20 / 28) < 1e-9);
    assert_true(fabs(c->sleep_latency_min - 2 * e) < 1e-9);           /* 60 -> 120 s */
    assert_true(fabs(c->rem_latency_min - 16 * e) < 1e-9);            /* 120 -> 600 s */
    assert_true(fabs(c->waso_min - 4 * e) < 1e-9);                    /* epochs 14-15, 28-29 */
    assert_true(fabs(c->stage_pct[RT_STAGE_N2] - 100.0 * 6 / 20) < 1e-9);
    assert_true(fabs(c->stage_pct[RT_STAGE_R] - 100.0 * 4 / 20) < 1e-9);
    assert_true(isnan(c->stage_pct[RT_STAGE_W]));
    assert_true(fabs(c->sleep_onset_s - 120.0) < 1e-9);
    assert_true(fabs(c->sleep_end_s - 840.0) < 1e-9);                 /* end of epoch 27 */
    assert_true(fabs(c->half_split_s - 480.0) < 1e-9);
    assert_true(c->lights_off_given && c->lights_on_given);
    free(n->staging.gaps);
    free(n);
    rt_timeline_free(tl);
}

/* ---- norms ------------------------------------------------------------------------- */

static rt_night *night_with(double chin_any, double rai)
{
    rt_night *n = rt_test_blank_night();
    n->index[RT_IX_SINBAR_CHIN_ANY_3S].value = chin_any;
    n->index[RT_IX_SINBAR_CHIN_ANY_3S].status = RT_STATUS_BELOW;
    n->index[RT_IX_RAI].value = rai;
    n->index[RT_IX_RAI].status = RT_STATUS_ABOVE;
    return n;
}

static void norms_bands_from_the_table(void **state)
{
    (void)state;
    rt_error err;
    static const struct { double any, rai; rt_norm_band any_band, rai_band; } CASES[] = {
        {9.1, 0.85, RT_NORM_WITHIN, RT_NORM_WITHIN},     /* at the published values */
        {9.2, 0.84, RT_NORM_BEYOND, RT_NORM_BEYOND},     /* just past them */
        {21.6, 0.5, RT_NORM_BEYOND_RBD_CUTOFF, RT_NORM_BEYOND}, /* at McCarter's cutoff */
        {0.0, 1.0, RT_NORM_WITHIN, RT_NORM_WITHIN}};
    for (size_t k = 0; k < sizeof CASES / sizeof CASES[0]; k++) {
        rt_night *n = night_with(CASES[k].any, CASES[k].rai);
        assert_int_equal(rt_night_place_norms(n, 64, 'F', &err), RT_OK);
        print_message("# any %.2f -> %s (%s)\n", CASES[k].any,
                      rt_norm_band_name(n->norms[RT_IX_SINBAR_CHIN_ANY_3S].band),
                      n->norms[RT_IX_SINBAR_CHIN_ANY_3S].text);
        assert_int_equal(n->norms[RT_IX_SINBAR_CHIN_ANY_3S].band, CASES[k].any_band);
        assert_int_equal(n->norms[RT_IX_RAI].band, CASES[k].rai_band);
        /* not computed: not placed, with the reason */
        assert_int_equal(n->norms[RT_IX_SINBAR_CHIN_TONIC_30S].band, RT_NORM_NOT_PLACED);
        assert_non_null(strstr(n->norms[RT_IX_SINBAR_CHIN_TONIC_30S].text, "not computed"));
        /* an index without a norm has no row */
        assert_int_equal(n->norms[RT_IX_MONTREAL_TONIC_CHIN].row, -1);
        free(n);
    }
    /* the table's rows: read from the published abstracts, none recalled */
    size_t count = 0;
    const rt_norm_row *t = rt_norm_table(&count);
    assert_true(count >= 4);
    for (size_t i = 0; i < count; i++) {
        assert_false(t[i].limit_from_memory);
        assert_non_null(strstr(t[i].limit_source, "Feemster et al. 2019"));
        assert_true(t[i].method[0] != '\0');
    }
    /* outside the ages of the norms (21-88 years): not placed */
    rt_night *n = night_with(30.0, 0.9);
    assert_int_equal(rt_night_place_norms(n, 15, 'M', &err), RT_OK);
    assert_int_equal(n->norms[RT_IX_SINBAR_CHIN_ANY_3S].band, RT_NORM_NOT_PLACED);
    assert_non_null(strstr(n->norms[RT_IX_SINBAR_CHIN_ANY_3S].text, "21-88"));
    /* norms never decide the level */
    assert_int_equal(n->level, RT_REVIEW_CLEAR);
    assert_int_equal(rt_night_place_norms(n, 140, 'M', &err), RT_ERR_USAGE);
    assert_int_equal(rt_night_place_norms(n, 50, 'X', &err), RT_ERR_USAGE);
    free(n);
}

/* ---- the plain-language sentence ---------------------------------------------------- */

static void check_sentence(const rt_night *n, const char *must, char *out, size_t cap)
{
    rt_night_plain_sentence(n, out, cap);
    print_message("# %s\n", out);
    assert_non_null(strstr(out, must));
    assert_non_null(strstr(out, "this describes the EMG and is not a diagnosis."));
    /* one sentence: a single full stop, at the end (the values use decimal points) */
    assert_int_equal(out[strlen(out) - 1], '.');
    /* one sentence of measurement, then the disclaimer: no diagnosis words */
    assert_null(strstr(out, "has RBD"));
    assert_null(strstr(out, "diagnosed"));
    assert_null(strstr(out, "consistent with"));
}

static void sentence_in_four_cases(void **state)
{
    (void)state;
    char s[1600];
    rt_night *n = night_with(12.0, 0.95);
    n->headline = RT_IX_SINBAR_CHIN_ANY_3S;
    n->rem_minutes = 60;
    n->scorable_minutes = 58;
    rt_copy_string(n->cutoffs.origin, sizeof n->cutoffs.origin, "published");

    n->level = RT_REVIEW_CLEAR;
    check_sentence(n, "no index reaches or nears a verified cutoff", s, sizeof s);
    assert_non_null(strstr(s, "12.0 %"));
    assert_non_null(strstr(s, "below the published cutoff of 18.2 %"));
    assert_null(strstr(s, "limited"));

    n->index[RT_IX_SINBAR_CHIN_ANY_3S].value = 40.0;
    n->index[RT_IX_SINBAR_CHIN_ANY_3S].status = RT_STATUS_ABOVE;
    n->level = RT_REVIEW_FLAGGED;
    check_sentence(n, "a physician should review the recording", s, sizeof s);
    assert_non_null(strstr(s, "at or above the published cutoff"));
    assert_non_null(strstr(s, "1 index reaches a verified cutoff"));

    n->level = RT_REVIEW_NOT_ASSESSABLE;
    n->n_reasons = 1;
    rt_copy_string(n->reasons[0], sizeof n->reasons[0], "no usable chin EMG channel");
    check_sentence(n, "could not measure muscle tone", s, sizeof s);
    assert_non_null(strstr(s, "no usable chin EMG channel"));
    assert_null(strstr(s, "40.0 %")); /* no value is offered for a night not assessable */

    n->level = RT_REVIEW_CLEAR;
    n->index[RT_IX_SINBAR_CHIN_ANY_3S].value = 12.0;
    n->index[RT_IX_SINBAR_CHIN_ANY_3S].status = RT_STATUS_BELOW;
    n->n_reservations = 2;
    n->reservations[0].code = RT_RESERVE_PARTIAL_STAGING;
    n->reservations[1].code = RT_RESERVE_REM_AHI;
    check_sentence(n, "this is limited because the staging does not cover the whole night and "
                      "REM sleep holds many breathing events", s, sizeof s);

    /* with norms placed, the sentence says where the chin measures lie */
    rt_error err;
    assert_int_equal(rt_night_place_norms(n, 70, 'M', &err), RT_OK);
    check_sentence(n, "against adults without RBD, 1 of 2 compared chin measures lie beyond", s,
                   sizeof s);
    free(n);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(sleep_context_by_hand),
        cmocka_unit_test(norms_bands_from_the_table),
        cmocka_unit_test(sentence_in_four_cases),
        cmocka_unit_test(periods_add_up_and_place_rswa),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
