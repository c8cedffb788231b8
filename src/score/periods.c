/* REM periods and the halves of the night (docs/scoring.md, "REM periods").
 *
 * A REM period is a run of REM bouts (bouts: consecutive R epochs) in which
 * each bout starts less than params.rem_period_gap_min after the previous
 * one ends: common practice, as in the sleep-cycle criteria of Feinberg and
 * Floyd 1979 (Psychophysiology 16:283-291; from memory), where less than
 * 15 min of other stages between REM episodes does not end a REM period.
 * A half of the night holds the periods that start in it; the halves are
 * split at the middle of the sleep period (sleep onset to the end of the
 * last sleep epoch, night->sleep), the recording's time in bed when nothing
 * was asleep. A period never straddles the split, so its counts add up.
 *
 * The indices of a period are the night's own index code (rt_night_indices)
 * run on a view of the night whose epoch and mini-epoch arrays are the
 * period's slices: no rule is written twice. The Montreal tonic windows and
 * the REM Atonia Index seconds are counted per bout while scoring
 * (scoring_state.per_bout) and summed over the period's bouts; the REM
 * apnea-hypopnea index and the limb-movement events are counted on the
 * period's bouts (rt_exclusions_rates). */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "exclusions.h"
#include "night_internal.h"


/* A group of consecutive bouts [b0, b0 + nb) as a period (or a half). */
static void set_span(rt_rem_period *g, const rt_night *night, const bout_span *bouts, size_t b0,
                     size_t nb, double epoch_s)
{
    g->bout_first = b0;
    g->n_bouts = nb;
    g->rem_epochs = 0;
    for (size_t b = b0; b < b0 + nb; b++)
        g->rem_epochs += bouts[b].n_epochs;
    g->rem_minutes = (double)g->rem_epochs * epoch_s / 60.0;
    if (nb == 0) {
        g->onset_s = g->end_s = NAN;
        return;
    }
    g->result_first = bouts[b0].epoch_first;
    const rt_epoch_result *first = &night->epochs[g->result_first];
    const rt_epoch_result *last = &night->epochs[g->result_first + g->rem_epochs - 1];
    g->first_epoch = first->epoch;
    g->last_epoch = last->epoch;
    g->onset_s = first->onset_s;
    g->end_s = last->onset_s + epoch_s;
}

rt_status rt_night_periods_lay_out(rt_night *night, const rt_timeline *tl, const bout_span *bouts,
                                   rt_error *err)
{
    const double gap_s = night->params.rem_period_gap_min * 60.0;
    size_t n = 0;
    for (size_t b = 0; b < night->n_bouts; b++) {
        double prev_end = b ? bouts[b - 1].t0 + (double)bouts[b - 1].n_epochs * tl->epoch_s : 0.0;
        n += b == 0 || bouts[b].t0 - prev_end >= gap_s - 1e-9;
    }
    night->periods = rt_calloc(n + 1, sizeof *night->periods);
    if (!night->periods)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu REM periods", n);
    night->n_periods = n;
    night->sleep.rem_periods = n;
    const rt_sleep_context *sc = &night->sleep;
    double split = isfinite(sc->half_split_s) ? sc->half_split_s
                                              : 0.5 * (sc->in_bed_from_s + sc->in_bed_to_s);
    size_t p = 0, b0 = 0, half_first[2] = {0, 0}, half_bouts[2] = {0, 0};
    for (size_t b = 0; b < night->n_bouts; b++) {
        bool last = b + 1 == night->n_bouts;
        double end = bouts[b].t0 + (double)bouts[b].n_epochs * tl->epoch_s;
        if (!last && bouts[b + 1].t0 - end < gap_s - 1e-9)
            continue;
        rt_rem_period *g = &night->periods[p++];
        set_span(g, night, bouts, b0, b + 1 - b0, tl->epoch_s);
        g->half = g->onset_s >= split;
        if (half_bouts[g->half] == 0)
            half_first[g->half] = b0;
        half_bouts[g->half] += g->n_bouts;
        b0 = b + 1;
    }
    for (int h = 0; h < 2; h++) {
        rt_rem_period *g = &night->halves[h];
        memset(g, 0, sizeof *g);
        set_span(g, night, bouts, half_first[h], half_bouts[h], tl->epoch_s);
        g->half = h;
    }
    for (size_t i = 0; i <= night->n_periods + 1; i++) {
        rt_rem_period *g = i < night->n_periods ? &night->periods[i]
                                                : &night->halves[i - night->n_periods];
        rt_exclusions_rates(tl, bouts + g->bout_first, g->n_bouts, g->rem_minutes / 60.0,
                            &g->exclusions);
    }
    return RT_OK;
}

/* The indices of one period or half through a view of the night. */
static rt_status score_group(const rt_night *night, const scoring_state *ss, rt_night *view,
                             rt_rem_period *g, rt_error *err)
{
    if (g->n_bouts == 0) {
        for (int i = 0; i < RT_IX_COUNT; i++) {
            rt_index_value *v = &g->index[i];
            v->value = NAN;
            v->status = RT_STATUS_NOT_COMPUTED;
            v->numerator = v->denominator = 0;
            rt_copy_string(v->reason, sizeof v->reason, "no REM in this half of the night");
        }
        return RT_OK;
    }
    size_t nb = 0;
    for (size_t i = 0; i < night->n_bursts; i++)
        nb += night->bursts[i].onset_s >= g->onset_s && night->bursts[i].onset_s < g->end_s;
    rt_burst *bursts = rt_calloc(nb + 1, sizeof *bursts);
    if (!bursts)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for the bursts of a REM period");
    nb = 0;
    for (size_t i = 0; i < night->n_bursts; i++)
        if (night->bursts[i].onset_s >= g->onset_s && night->bursts[i].onset_s < g->end_s)
            bursts[nb++] = night->bursts[i];

    memcpy(view, night, sizeof *view);
    view->epochs = night->epochs + g->result_first;
    view->n_epochs = g->rem_epochs;
    view->minis3 = night->minis3 + g->result_first * RT_MINIS3_PER_EPOCH;
    view->n_minis3 = g->rem_epochs * RT_MINIS3_PER_EPOCH;
    view->minis2 = night->minis2 + g->result_first * RT_MINIS2_PER_EPOCH;
    view->n_minis2 = g->rem_epochs * RT_MINIS2_PER_EPOCH;
    view->bursts = bursts;
    view->n_bursts = nb;
    memset(view->index, 0, sizeof view->index);
    if (!ss) { /* rescoring with a reviewer's decisions: these two stay (rt_night_indices) */
        view->index[RT_IX_MONTREAL_TONIC_CHIN] = g->index[RT_IX_MONTREAL_TONIC_CHIN];
        view->index[RT_IX_RAI] = g->index[RT_IX_RAI];
    }
    memset(&view->exclusions, 0, sizeof view->exclusions);
    view->exclusions.have_respiratory = g->exclusions.have_respiratory;
    view->exclusions.rem_ahi = g->exclusions.rem_ahi;
    view->exclusions.rem_leg_movements_per_h = g->exclusions.rem_leg_movements_per_h;
    scoring_state sub;
    memset(&sub, 0, sizeof sub);
    for (size_t b = g->bout_first; ss && ss->per_bout && b < g->bout_first + g->n_bouts; b++) {
        const bout_counts *bc = &ss->per_bout[b];
        sub.montreal_windows += bc->montreal_windows;
        sub.montreal_tonic += bc->montreal_tonic;
        sub.rai.at_most_1 += bc->rai.at_most_1;
        sub.rai.from_1_to_2 += bc->rai.from_1_to_2;
        sub.rai.total += bc->rai.total;
    }
    rt_status st = rt_night_indices(view, ss ? &sub : NULL, err);
    if (st == RT_OK) {
        memcpy(g->index, view->index, sizeof g->index);
        g->scorable_minutes = view->scorable_minutes;
        g->exclusions = view->exclusions;
    }
    free(bursts);
    return st;
}

rt_status rt_night_periods_score(rt_night *night, const scoring_state *ss, rt_error *err)
{
    rt_night *view = rt_calloc(1, sizeof *view);
    if (!view)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for the REM periods");
    rt_status st = RT_OK;
    for (size_t i = 0; i < night->n_periods + 2 && st == RT_OK; i++) {
        rt_rem_period *g = i < night->n_periods ? &night->periods[i]
                                                : &night->halves[i - night->n_periods];
        st = score_group(night, ss, view, g, err);
    }
    free(view);
    return st;
}
