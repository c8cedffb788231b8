/* Scoring parameters: defaults and range checks (docs/scoring.md says why
 * each default was chosen). */
#include <math.h>

#include "internal.h"
#include "remtone/score.h"

void rt_score_params_default(rt_score_params *p)
{
    p->band_low_hz = 10.0;         /* AASM recording filters 10-100 Hz [from memory] */
    p->band_high_hz = 100.0;
    p->band_order = 4;
    p->envelope_window_s = 0.05;   /* shorter than the 0.1-s minimum burst */
    p->burst_merge_gap_s = 0.25;   /* a dip this short does not end a burst */
    p->background_level_quantile = 0.9; /* the visible top of the background trace */
    p->background_window_s = 60.0; /* same span as the REM Atonia Index floor */
    p->background_quantile = 0.2;
    p->aasm_nrem_quantile = 0.05;
    p->tonic_abs_uv = 10.0;        /* SINBAR / Montreal absolute level [from memory] */
    p->montreal_epoch_s = 20.0;    /* Lapierre & Montplaisir 1992 [from memory] */
    p->min_rate_hz = 200.0;        /* AASM minimum EMG sampling rate [from memory] */
    p->min_scorable_min = 5.0;     /* common practice */
    p->near_fraction = 0.8;
    p->exclude_artifacts = true;
    p->exclude_snoring = true;
    p->exclude_respiratory = true;
    p->event_margin_s = 0.0;
    p->resp_arousal_gap_s = 5.0;  /* common practice */
}

static int in_range(double v, double lo, double hi) { return isfinite(v) && v >= lo && v <= hi; }

rt_status rt_score_params_check(const rt_score_params *p, rt_error *err)
{
    struct { const char *name; double v, lo, hi; } checks[] = {
        {"band_low_hz", p->band_low_hz, 0.1, 200.0},
        {"band_high_hz", p->band_high_hz, 1.0, 5000.0},
        {"band_order", (double)p->band_order, 1, 8},
        {"envelope_window_s", p->envelope_window_s, 0.002, 0.099},
        {"burst_merge_gap_s", p->burst_merge_gap_s, 0.0, 1.0},
        {"background_level_quantile", p->background_level_quantile, 0.5, 1.0},
        {"background_window_s", p->background_window_s, 10.0, 600.0},
        {"background_quantile", p->background_quantile, 0.0, 0.5},
        {"aasm_nrem_quantile", p->aasm_nrem_quantile, 0.0, 0.5},
        {"tonic_abs_uv", p->tonic_abs_uv, 0.0, 1000.0},
        {"montreal_epoch_s", p->montreal_epoch_s, 2.0, 30.0},
        {"min_rate_hz", p->min_rate_hz, 0.0, 100000.0},
        {"min_scorable_min", p->min_scorable_min, 0.0, 600.0},
        {"near_fraction", p->near_fraction, 0.0, 1.0},
        {"event_margin_s", p->event_margin_s, 0.0, 60.0},
        {"resp_arousal_gap_s", p->resp_arousal_gap_s, 0.0, 60.0},
    };
    for (size_t i = 0; i < sizeof checks / sizeof checks[0]; i++)
        if (!in_range(checks[i].v, checks[i].lo, checks[i].hi))
            return rt_fail(err, RT_ERR_USAGE, "parameter %s = %g is outside %g .. %g",
                           checks[i].name, checks[i].v, checks[i].lo, checks[i].hi);
    if (p->band_low_hz >= p->band_high_hz)
        return rt_fail(err, RT_ERR_USAGE, "band_low_hz %g must be below band_high_hz %g",
                       p->band_low_hz, p->band_high_hz);
    return RT_OK;
}
