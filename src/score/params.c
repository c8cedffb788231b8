/* Scoring parameters: the one descriptor table (name, default, range, unit,
 * source) and everything driven by it: defaults, range checks, provenance
 * and the cohort resume key read the same rows. docs/parameters.md is
 * generated from it (`remtone rules --params`). */
#include <math.h>
#include <stddef.h>
#include <string.h>

#include "internal.h"
#include "remtone/score.h"

#define REAL(f, d, lo, hi, unit, src) \
    {#f, RT_PARAM_REAL, offsetof(rt_score_params, f), d, lo, hi, unit, src}
#define INT(f, d, lo, hi, unit, src) \
    {#f, RT_PARAM_INT, offsetof(rt_score_params, f), d, lo, hi, unit, src}
#define BOOL(f, d, src) {#f, RT_PARAM_BOOL, offsetof(rt_score_params, f), d, 0, 1, "", src}

static const rt_param_desc table[] = {
    REAL(band_low_hz, 10.0, 0.1, 200.0, "Hz",
         "AASM Manual for the Scoring of Sleep, EMG filter settings 10-100 Hz (from memory)"),
    REAL(band_high_hz, 100.0, 1.0, 5000.0, "Hz",
         "AASM Manual for the Scoring of Sleep, EMG filter settings 10-100 Hz (from memory)"),
    INT(band_order, 4, 1, 8, "",
        "our choice: 48 dB per octave outside the band after both passes (docs/conditioning.md)"),
    REAL(envelope_window_s, 0.1, 0.002, 0.2, "s",
         "our choice: the shortest burst any rule set counts (0.1 s), so a burst of that "
         "length just reaches its full height while noise is averaged over the longest "
         "window that allows (docs/scoring.md, Bursts)"),
    REAL(background_level_quantile, 0.5, 0.1, 0.9, "x",
         "our choice: the median envelope of a second, which no burst shorter than half a "
         "second can move"),
    REAL(background_quantile, 0.1, 0.01, 0.5, "x",
         "our choice: a low quantile of the night's REM minute levels, unmoved while at least "
         "this share of REM minutes is atonic (docs/scoring.md, Background)"),
    REAL(background_quiet_ratio, 1.5, 1.1, 3.0, "x",
         "our choice: below the 2x of every relative rule, above the spread of atonic seconds"),
    REAL(background_drift_max, 4.0, 1.0, 16.0, "x",
         "our choice: electrode impedance drift through a night stays within x0.5 to x2 "
         "(common practice); the fit allows twice that"),
    REAL(burst_merge_gap_s, 0.25, 0.0, 1.0, "s",
         "our choice: a dip this short does not end a burst on the screen"),
    REAL(burst_duration_tolerance_s, 0.03, 0.0, 0.05, "s",
         "our choice: two standard deviations of a burst edge measured on the 50-ms envelope "
         "(docs/scoring.md, Bursts)"),
    REAL(burst_min_s, 0.1, 0.05, 1.0, "s",
         "AASM Manual v2 transient muscle activity 0.1-5.0 s; Frauscher et al. 2012, Sleep "
         "35:835 (from memory)"),
    REAL(burst_max_s, 5.0, 1.0, 30.0, "s",
         "AASM Manual v2 transient muscle activity 0.1-5.0 s; Frauscher et al. 2012, Sleep "
         "35:835 (from memory)"),
    REAL(montreal_burst_max_s, 10.0, 1.0, 30.0, "s",
         "Montplaisir et al. 2010, Mov Disord 25:2044 (from memory)"),
    REAL(aasm_burst_k, 4.0, 1.0, 20.0, "x",
         "AASM Manual v2: at least 4 times the background EMG amplitude (from memory)"),
    REAL(sinbar_burst_k, 2.0, 1.0, 20.0, "x",
         "Frauscher et al. 2012, Sleep 35:835: twice the background (from memory)"),
    REAL(montreal_burst_k, 4.0, 1.0, 20.0, "x",
         "Montplaisir et al. 2010, Mov Disord 25:2044: 4 times the background (from memory)"),
    REAL(tonic_k, 2.0, 1.0, 20.0, "x",
         "Frauscher et al. 2012; Montplaisir et al. 2010: twice the background (from memory)"),
    REAL(tonic_abs_p2p_uv, 10.0, 0.0, 1000.0, "uV",
         "Frauscher et al. 2012; Montplaisir et al. 2010: above 10 uV, read peak-to-peak off "
         "the trace (from memory)"),
    REAL(aasm_nrem_quantile, 0.05, 0.0, 0.5, "x",
         "our choice: a robust \"minimum\" of the NREM chin epochs"),
    REAL(aasm_nrem_margin, 1.25, 1.0, 4.0, "x",
         "our choice: \"greater than\" the NREM minimum by a step a scorer sees "
         "(docs/scoring.md, AASM tonic)"),
    REAL(montreal_epoch_s, 20.0, 2.0, 30.0, "s", "Lapierre & Montplaisir 1992, Neurology (from memory)"),
    REAL(lm_min_s, 0.5, 0.1, 5.0, "s", "AASM Manual v2, limb movement rules: duration 0.5-10 s"),
    REAL(lm_max_s, 10.0, 1.0, 30.0, "s", "AASM Manual v2, limb movement rules: duration 0.5-10 s"),
    REAL(lm_rise_uv, 8.0, 0.0, 100.0, "uV",
         "AASM Manual v2, limb movement rules: onset at an 8-uV increase over resting EMG"),
    REAL(lm_offset_quiet_s, 0.5, 0.0, 5.0, "s",
         "AASM Manual v2, limb movement rules: offset at the start of 0.5 s within 2 uV of rest"),
    REAL(lm_bilateral_s, 5.0, 0.0, 30.0, "s",
         "AASM Manual v2, limb movement rules: two legs' movements with onsets less than 5 s "
         "apart are one"),
    REAL(min_rate_hz, 200.0, 0.0, 100000.0, "Hz",
         "AASM Manual: minimum EMG sampling rate 200 Hz (from memory)"),
    REAL(min_scorable_min, 5.0, 0.0, 600.0, "min", "common practice"),
    REAL(near_fraction, 0.8, 0.0, 1.0, "x", "our choice: the review list starts at 80 % of a cutoff"),
    REAL(staging_edge_tolerance_min, 30.0, 0.0, 240.0, "min",
         "our choice: a recording often starts before lights-off and runs past lights-on; "
         "longer unstaged ends without lights times make the staging partial"),
    REAL(index_min_epochs, 10.0, 0.0, 1000.0, "epochs",
         "our choice: below 10 REM epochs one epoch moves an epoch index by more than 10 "
         "points"),
    REAL(excluded_share_max, 1.0 / 3.0, 0.0, 1.0, "x",
         "our choice: with more than a third of REM left out, the indices describe a selection"),
    REAL(rem_period_gap_min, 15.0, 0.5, 240.0, "min",
         "common practice (from memory): REM episodes less than 15 min apart are one REM "
         "period, as in Feinberg and Floyd 1979 (Psychophysiology 16:283-291)"),
    BOOL(exclude_artifacts, 1, "common practice (docs/exclusions.md)"),
    BOOL(exclude_snoring, 1, "common practice (docs/exclusions.md)"),
    BOOL(exclude_respiratory, 1,
         "common practice: arousal-bound movements after respiratory events (docs/exclusions.md)"),
    REAL(event_margin_s, 0.0, 0.0, 60.0, "s", "our choice: events as scored, no widening"),
    REAL(resp_arousal_gap_s, 5.0, 0.0, 60.0, "s", "common practice"),
};

const rt_param_desc *rt_score_param_table(size_t *count)
{
    *count = sizeof table / sizeof table[0];
    return table;
}

double rt_score_param_get(const rt_score_params *p, const rt_param_desc *d)
{
    const char *base = (const char *)p + d->offset;
    switch (d->kind) {
    case RT_PARAM_INT: { int v; memcpy(&v, base, sizeof v); return (double)v; }
    case RT_PARAM_BOOL: { bool v; memcpy(&v, base, sizeof v); return v ? 1.0 : 0.0; }
    default: { double v; memcpy(&v, base, sizeof v); return v; }
    }
}

static void param_set(rt_score_params *p, const rt_param_desc *d, double v)
{
    char *base = (char *)p + d->offset;
    switch (d->kind) {
    case RT_PARAM_INT: { int x = (int)v; memcpy(base, &x, sizeof x); break; }
    case RT_PARAM_BOOL: { bool x = v != 0.0; memcpy(base, &x, sizeof x); break; }
    default: memcpy(base, &v, sizeof v); break;
    }
}

void rt_score_params_default(rt_score_params *p)
{
    memset(p, 0, sizeof *p);
    for (size_t i = 0; i < sizeof table / sizeof table[0]; i++)
        param_set(p, &table[i], table[i].def);
}

rt_status rt_score_params_check(const rt_score_params *p, rt_error *err)
{
    for (size_t i = 0; i < sizeof table / sizeof table[0]; i++) {
        double v = rt_score_param_get(p, &table[i]);
        if (!(isfinite(v) && v >= table[i].lo && v <= table[i].hi))
            return rt_fail(err, RT_ERR_USAGE, "parameter %s = %g is outside %g .. %g",
                           table[i].name, v, table[i].lo, table[i].hi);
    }
    if (p->band_low_hz >= p->band_high_hz)
        return rt_fail(err, RT_ERR_USAGE, "band_low_hz %g must be below band_high_hz %g",
                       p->band_low_hz, p->band_high_hz);
    if (p->burst_min_s >= p->burst_max_s || p->burst_max_s > p->montreal_burst_max_s)
        return rt_fail(err, RT_ERR_USAGE, "burst durations must satisfy burst_min_s < "
                       "burst_max_s <= montreal_burst_max_s");
    return RT_OK;
}
