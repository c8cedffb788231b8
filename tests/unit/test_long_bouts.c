/* Long REM bouts in blocks: a night staged as one REM bout scored whole and
 * in blocks of whole minutes (each with a minute of context on either side)
 * gives the same labels, bursts, quality and indices, for 1 and 2 threads.
 * Blocks change only the rounding of the band-pass (about 1e-9 of the
 * signal's peak, docs/conditioning.md) and the beats an ECG template is
 * averaged over. Without ECG in the EMG every label and index must be equal,
 * and every burst's onset and duration within 1e-6 s (common practice: far
 * below one sample at 512 Hz, 2 ms); with ECG removed from the EMG, each
 * percentage within 0.5 points or one of its units (an epoch, a window) when
 * that is more, the REM Atonia Index within 0.005 (our stated tolerance,
 * docs/scoring.md, "Long bouts"). */
#include "support.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/remtone.h"

/* Differences between two nights: labels, epochs, bursts, quality, indices. */
static int differences(const rt_night *a, const rt_night *b, const char *what)
{
    int diff = 0;
    if (a->n_minis3 != b->n_minis3 || a->n_minis2 != b->n_minis2 || a->n_epochs != b->n_epochs) {
        print_message("# %s: grids differ\n", what);
        return 1;
    }
    for (size_t i = 0; i < a->n_minis3; i++)
        diff += memcmp(a->minis3[i].labels, b->minis3[i].labels, sizeof a->minis3[i].labels) != 0 ||
                a->minis3[i].excluded_by != b->minis3[i].excluded_by;
    for (size_t i = 0; i < a->n_minis2; i++)
        diff += memcmp(a->minis2[i].labels, b->minis2[i].labels, sizeof a->minis2[i].labels) != 0;
    for (size_t e = 0; e < a->n_epochs; e++)
        diff += a->epochs[e].sinbar_tonic != b->epochs[e].sinbar_tonic ||
                a->epochs[e].aasm_tonic != b->epochs[e].aasm_tonic;
    if (diff)
        print_message("# %s: %d mini-epochs or epochs differ\n", what, diff);
    if (a->n_bursts != b->n_bursts) {
        print_message("# %s: %zu bursts against %zu\n", what, a->n_bursts, b->n_bursts);
        diff++;
    } else {
        for (size_t i = 0; i < a->n_bursts; i++)
            diff += a->bursts[i].role != b->bursts[i].role || a->bursts[i].rules != b->bursts[i].rules ||
                    fabs(a->bursts[i].onset_s - b->bursts[i].onset_s) > 1e-6 ||
                    fabs(a->bursts[i].duration_s - b->bursts[i].duration_s) > 1e-6;
    }
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        const rt_channel_quality *qa = &a->channel[r].quality, *qb = &b->channel[r].quality;
        for (int k = 0; k < RT_QUALITY_KINDS; k++)
            diff += fabs(qa->unscorable_min[k] - qb->unscorable_min[k]) > 1e-9;
        diff += qa->beats != qb->beats || qa->ecg_found != qb->ecg_found ||
                qa->bursts_vetoed != qb->bursts_vetoed;
    }
    for (int i = 0; i < RT_IX_COUNT; i++) {
        double x = a->index[i].value, y = b->index[i].value;
        bool same = isfinite(x) == isfinite(y) && (!isfinite(x) || x == y) &&
                    a->index[i].numerator == b->index[i].numerator &&
                    a->index[i].denominator == b->index[i].denominator;
        if (!same)
            print_message("# %s: %s %.6f against %.6f\n", what, rt_index_rules()[i].id, x, y);
        diff += !same;
    }
    return diff;
}

/* Indices further apart than 0.5 points or one unit (RAI: 0.005). */
static int indices_apart(const rt_night *a, const rt_night *b, const char *what)
{
    int diff = 0;
    for (int i = 0; i < RT_IX_COUNT; i++) {
        double x = a->index[i].value, y = b->index[i].value;
        size_t units = a->index[i].denominator;
        double tol = strcmp(rt_index_rules()[i].unit, "%") == 0
                         ? fmax(0.5, units ? 100.0 / (double)units + 1e-9 : 0.0)
                         : i == RT_IX_RAI ? 0.005 : 0.0;
        bool ok = isfinite(x) == isfinite(y) && (!isfinite(x) || fabs(x - y) <= tol);
        print_message("# %s: %-34s whole %9.4f blocks %9.4f (+-%.3f)%s\n", what,
                      rt_index_rules()[i].id, x, y, tol, ok ? "" : "  <-- apart");
        diff += !ok;
    }
    return diff;
}

/* A 3-hour night with pops, mains, an ECG channel and tonic runs (and, when
 * bleed_uv > 0, its ECG in the EMG), written into dir and staged as one REM
 * bout from start to end; the stage table's path in stages. */
static void one_bout_night(double bleed_uv, char dir[4096], char stages[4200])
{
    rt_synth_options o;
    rt_synth_options_default(&o);
    o.profile = RT_SYNTH_RBD;
    o.hours = 3.0;
    o.seed = 71;
    o.pops = 12;
    o.mains_hz = 50.0;
    o.mains_uv = 20.0;
    o.ecg_bleed_uv = bleed_uv;
    o.tonic_run_epochs = 6;
    snprintf(dir, 4096, "%s", rt_test_dir("long_bouts_unit"));
    rt_error err;
    if (rt_synth_write(&o, dir, &err) != RT_OK)
        fail_msg("%s", err.message);
    snprintf(stages, 4200, "%s",
             rt_test_text_file(dir, "one-bout.csv", "start_s,duration_s,stage\n0,10800,R\n"));
}

/* The night above without ECG in the EMG: scored whole (a block of 10^6 s),
 * in the default blocks, in 10-minute blocks and in 1-minute blocks (the
 * shortest, 180 of them), on one and two threads: all equal. */
static void blocks_change_nothing(void **state)
{
    (void)state;
    char dir[4096], stages_path[4200];
    one_bout_night(0.0, dir, stages_path);
    rt_night *whole = rt_test_score_dir(dir, stages_path, 1, 1e6);
    assert_int_equal(whole->n_epochs, 360);
    assert_true(whole->n_bursts > 100);
    int diff = 0;
    const double blocks[3] = {0.0, 60.0, 600.0};
    for (int b = 0; b < 3; b++)
        for (int threads = 1; threads <= 2; threads++) {
            rt_night *n = rt_test_score_dir(dir, stages_path, threads, blocks[b]);
            char what[64];
            snprintf(what, sizeof what, "block %g s, %d threads", blocks[b], threads);
            diff += differences(whole, n, what);
            rt_night_free(n);
        }
    rt_night_free(whole);
    rt_test_dir("long_bouts_unit");
    assert_int_equal(diff, 0);
}

/* With a 15-uV ECG bleed removed from the EMG: the default blocks against
 * the whole bout, each index within 0.5 points or one unit. */
static void blocks_with_ecg_removal(void **state)
{
    (void)state;
    char dir[4096], stages_path[4200];
    one_bout_night(15.0, dir, stages_path);
    rt_night *whole = rt_test_score_dir(dir, stages_path, 1, 1e6);
    rt_night *blocks = rt_test_score_dir(dir, stages_path, 1, 0.0);
    assert_true(whole->channel[RT_ROLE_CHIN].quality.ecg_removed);
    assert_true(blocks->channel[RT_ROLE_CHIN].quality.ecg_removed);
    int apart = indices_apart(whole, blocks, "ECG removed");
    rt_night_free(whole);
    rt_night_free(blocks);
    rt_test_dir("long_bouts_unit");
    assert_int_equal(apart, 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(blocks_change_nothing),
        cmocka_unit_test(blocks_with_ecg_removal),
    };
    /* REMTONE_TEST_FILTER=name runs only the tests whose names match (development) */
    if (getenv("REMTONE_TEST_FILTER"))
        cmocka_set_test_filter(getenv("REMTONE_TEST_FILTER"));
    return cmocka_run_group_tests(tests, NULL, NULL);
}
