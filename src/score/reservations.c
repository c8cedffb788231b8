/* What limits a night's review level: how much of the night the staging
 * covers, and the reservations a reader must see beside the level. A level is
 * true only for what was scored; a "clear" from four staged hours of a
 * seven-hour recording, from staging with holes, from a night with frequent
 * apneas or from a handful of epochs is not the same statement as a clear
 * from a whole, clean night, and the reports say so (docs/scoring.md,
 * "Reservations"). */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "night_internal.h"

/* Times compared on the epoch grid forgive rounding of the decimal inputs. */
#define TIME_SLACK_S 1e-6
/* Cesari et al. 2023, Sleep: RSWA indices are less reliable from this REM
 * apnea-hypopnea index on (SAFETY.md, caution 5). */
#define REM_AHI_LIMIT 15.0

const char *rt_reservation_code_name(rt_reservation_code code)
{
    static const char *const NAMES[RT_RESERVE_COUNT] = {
        "partial-staging", "staging-gaps",         "rem-ahi-15",         "rem-excluded",
        "channel-partly-unusable", "few-units", "cutoff-not-verified"};
    return (int)code >= 0 && code < RT_RESERVE_COUNT ? NAMES[code] : "unknown";
}

/* ---- the staging against the recording ------------------------------------ */

static bool staged(unsigned char stage) { return stage != RT_STAGE_UNSCORED; }

rt_status rt_night_staging_summarise(rt_night *night, const rt_timeline *tl, rt_error *err)
{
    rt_staging_summary *s = &night->staging;
    const double ep = tl->epoch_s;
    memset(s, 0, sizeof *s);
    s->lights_off_given = tl->lights_off_s > 0.0;
    s->lights_on_given = tl->lights_on_s >= 0.0;
    s->expect_from_s = s->lights_off_given ? fmin(tl->lights_off_s, night->recording_s) : 0.0;
    s->expect_to_s = s->lights_on_given ? fmin(tl->lights_on_s, night->recording_s)
                                        : night->recording_s;
    if (s->expect_to_s < s->expect_from_s)
        s->expect_to_s = s->expect_from_s;
    /* the grid cannot follow a lights time closer than one epoch; a recording
     * edge may hold set-up and wake-up time nobody stages */
    double edge_s = night->params.staging_edge_tolerance_min * 60.0;
    s->tolerance_start_s = s->lights_off_given ? ep : edge_s;
    s->tolerance_end_s = s->lights_on_given ? ep : edge_s;

    size_t first = tl->n_epochs, last = 0;
    for (size_t e = 0; e < tl->n_epochs; e++) {
        if (!staged(tl->stages[e]))
            continue;
        s->staged_s += ep;
        if (first == tl->n_epochs)
            first = e;
        last = e;
    }
    if (first == tl->n_epochs) {
        s->first_staged_s = s->staged_end_s = NAN;
        s->unstaged_start_s = s->expect_to_s - s->expect_from_s;
        s->partial = true;
        return RT_OK;
    }
    s->first_staged_s = (double)first * ep;
    s->staged_end_s = (double)(last + 1) * ep;
    s->unstaged_start_s = fmax(0.0, fmin(s->first_staged_s, s->expect_to_s) - s->expect_from_s);
    s->unstaged_end_s = fmax(0.0, s->expect_to_s - fmax(s->staged_end_s, s->expect_from_s));
    s->partial = s->unstaged_start_s > s->tolerance_start_s + TIME_SLACK_S ||
                 s->unstaged_end_s > s->tolerance_end_s + TIME_SLACK_S;

    /* gaps: unstaged runs between the first and the last staged epoch, the
     * part inside the expected span (outside it nothing is scored anyway) */
    for (int pass = 0; pass < 2; pass++) {
        size_t n = 0;
        for (size_t e = first; e <= last;) {
            if (staged(tl->stages[e])) {
                e++;
                continue;
            }
            size_t f = e;
            while (e <= last && !staged(tl->stages[e]))
                e++;
            double a = fmax((double)f * ep, s->expect_from_s);
            double b = fmin((double)e * ep, s->expect_to_s);
            if (b <= a + TIME_SLACK_S)
                continue;
            if (pass == 1) {
                s->gaps[n].start_s = a;
                s->gaps[n].duration_s = b - a;
                s->gap_total_s += b - a;
            }
            n++;
        }
        if (pass == 0) {
            if (n == 0)
                break;
            s->gaps = rt_calloc(n, sizeof *s->gaps);
            if (!s->gaps)
                return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu staging gaps", n);
        }
        s->n_gaps = n;
    }
    return RT_OK;
}

/* ---- the reservations ------------------------------------------------------ */

static void reserve(rt_night *night, rt_reservation_code code, const char *fmt, ...)
    RT_PRINTF(3, 4);
static void reserve(rt_night *night, rt_reservation_code code, const char *fmt, ...)
{
    if (night->n_reservations >= RT_RESERVE_COUNT)
        return;
    rt_reservation *r = &night->reservations[night->n_reservations++];
    r->code = code;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(r->text, sizeof r->text, fmt, ap);
    va_end(ap);
}

/* Appends to a text being built, keeping it NUL-terminated when full. */
static void append(char *buf, size_t cap, const char *fmt, ...) RT_PRINTF(3, 4);
static void append(char *buf, size_t cap, const char *fmt, ...)
{
    size_t used = strlen(buf);
    if (used + 1 >= cap)
        return;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf + used, cap - used, fmt, ap);
    va_end(ap);
}

static void reserve_staging(rt_night *night)
{
    const rt_staging_summary *s = &night->staging;
    char a[32], b[32], tol[32];
    if (s->partial) {
        char why[320] = "";
        if (!isfinite(s->first_staged_s)) {
            append(why, sizeof why, "no epoch is staged");
        } else {
            if (s->unstaged_start_s > s->tolerance_start_s + TIME_SLACK_S) {
                rt_duration_text(s->unstaged_start_s, a, sizeof a);
                rt_duration_text(s->tolerance_start_s, tol, sizeof tol);
                append(why, sizeof why, "%s after %s are unstaged (%s allowed)", a,
                       s->lights_off_given ? "lights-off" : "the recording's start", tol);
            }
            if (s->unstaged_end_s > s->tolerance_end_s + TIME_SLACK_S) {
                rt_duration_text(s->unstaged_end_s, b, sizeof b);
                rt_duration_text(s->tolerance_end_s, tol, sizeof tol);
                append(why, sizeof why, "%s%s before %s are unstaged (%s allowed)",
                       why[0] ? "; " : "", b,
                       s->lights_on_given ? "lights-on" : "the recording's end", tol);
            }
        }
        reserve(night, RT_RESERVE_PARTIAL_STAGING,
                "The staging covers %.1f h of the %.1f-h recording: %s. REM in the unstaged time, "
                "if any, was not scored; the result describes the staged part only.",
                s->staged_s / 3600.0, night->recording_s / 3600.0, why);
    }
    if (s->n_gaps > 0) {
        rt_duration_text(s->gap_total_s, a, sizeof a);
        reserve(night, RT_RESERVE_STAGING_GAPS,
                "The staging has %zu unstaged gap%s inside it (%s in all, listed with the "
                "staging). REM in the gaps, if any, was not scored.",
                s->n_gaps, s->n_gaps == 1 ? "" : "s", a);
    }
}

static void reserve_ahi(rt_night *night)
{
    const rt_exclusion_summary *x = &night->exclusions;
    if (x->have_respiratory && isfinite(x->rem_ahi) && x->rem_ahi >= REM_AHI_LIMIT)
        reserve(night, RT_RESERVE_REM_AHI,
                "The REM apnea-hypopnea index is %.1f/h, 15/h or more: arousal-bound movements "
                "can mimic REM sleep without atonia, and the indices are less reliable "
                "(Cesari et al. 2023, Sleep; SAFETY.md, caution 5).", x->rem_ahi);
}

static void reserve_excluded(rt_night *night)
{
    const rt_exclusion_summary *x = &night->exclusions;
    double share = night->params.excluded_share_max;
    if (!night->channel[RT_ROLE_CHIN].present || !(night->rem_minutes > 0.0))
        return;
    double left_out = night->rem_minutes - night->scorable_minutes;
    if (!(left_out > share * night->rem_minutes + 1e-9))
        return;
    double events = 0.0;
    for (int t = 0; t < RT_EVENT_TYPE_COUNT; t++)
        events += x->minutes[t];
    double quality = fmax(0.0, x->total_minutes - events - x->outside_lights_minutes);
    reserve(night, RT_RESERVE_REM_EXCLUDED,
            "%.1f of %.1f REM minutes (%.0f %%) were left out, more than %.0f %% (our choice): "
            "events %.1f min, outside lights-off to lights-on %.1f min, chin not scorable "
            "%.1f min. The indices describe the REM that is left.",
            left_out, night->rem_minutes, 100.0 * left_out / night->rem_minutes, 100.0 * share,
            events, x->outside_lights_minutes, quality);
}

static void reserve_channels(rt_night *night)
{
    char list[400] = "";
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        const rt_channel_result *c = &night->channel[r];
        if (r == RT_ROLE_ECG || !c->present || !(c->quality.unscorable_total_min > 0.0))
            continue;
        append(list, sizeof list, "%s%s %.1f min (", list[0] ? "; " : "", rt_role_name((rt_role)r),
               c->quality.unscorable_total_min);
        const char *sep = "";
        for (int k = 0; k < RT_QUALITY_KINDS; k++) {
            if (!(c->quality.unscorable_min[k] > 0.0))
                continue;
            append(list, sizeof list, "%s%s %.1f", sep, rt_quality_kind_name(k),
                   c->quality.unscorable_min[k]);
            sep = ", ";
        }
        append(list, sizeof list, ")");
    }
    if (list[0])
        reserve(night, RT_RESERVE_CHANNEL_MARKED,
                "Part of REM could not be scored on a channel (clipping, flat lead or pops): "
                "%s of %.1f REM minutes. Mini-epochs there are left out for that channel.",
                list, night->rem_minutes);
}

/* The REM one unit of index i covers, seconds, and its name. */
static double unit_seconds(const rt_night *night, int i, char *name, size_t cap)
{
    switch ((rt_index_id)i) {
    case RT_IX_SINBAR_CHIN_ANY_3S:
    case RT_IX_SINBAR_CHIN_PHASIC_3S:
    case RT_IX_SINBAR_FDS_PHASIC_3S:
    case RT_IX_SINBAR_COMBINED_3S: snprintf(name, cap, "3-s mini-epochs"); return 3.0;
    case RT_IX_MONTREAL_TONIC_CHIN:
        snprintf(name, cap, "%g-s windows", night->params.montreal_epoch_s);
        return night->params.montreal_epoch_s;
    case RT_IX_MONTREAL_PHASIC_CHIN: snprintf(name, cap, "2-s mini-epochs"); return 2.0;
    case RT_IX_RAI: snprintf(name, cap, "seconds"); return 1.0;
    case RT_IX_MONTREAL_LM_PER_H: snprintf(name, cap, "REM minutes"); return 60.0;
    default: snprintf(name, cap, "epochs"); return RT_EPOCH_S;
    }
}

static void reserve_few_units(rt_night *night)
{
    const rt_index_rule *rules = rt_index_rules();
    double need_s = night->params.index_min_epochs * RT_EPOCH_S;
    char list[560] = "";
    size_t listed = 0, more = 0;
    for (int i = 0; i < RT_IX_COUNT; i++) {
        const rt_index_value *v = &night->index[i];
        if (v->status == RT_STATUS_NOT_COMPUTED)
            continue;
        char unit[32];
        double unit_s = unit_seconds(night, i, unit, sizeof unit);
        /* the leg-movement rate is per hour of REM, not a share of units */
        double units = i == RT_IX_MONTREAL_LM_PER_H ? night->rem_minutes : (double)v->denominator;
        if (!(units * unit_s < need_s - TIME_SLACK_S))
            continue;
        char item[128];
        snprintf(item, sizeof item, "%s%s on %g %s", listed ? ", " : "", rules[i].id, units, unit);
        if (strlen(list) + strlen(item) + 1 < sizeof list) {
            append(list, sizeof list, "%s", item);
            listed++;
        } else {
            more++;
        }
    }
    if (!listed)
        return;
    if (more)
        append(list, sizeof list, " and %zu more", more);
    reserve(night, RT_RESERVE_FEW_UNITS,
            "Counted on less scorable REM than %g epochs hold (%.1f min; our choice): %s. "
            "One unit more or less moves such an index by many points.",
            night->params.index_min_epochs, need_s / 60.0, list);
}

static void reserve_unverified(rt_night *night)
{
    const rt_index_rule *rules = rt_index_rules();
    if (night->level == RT_REVIEW_FLAGGED || night->level == RT_REVIEW_NOT_ASSESSABLE)
        return; /* a recalled cutoff could not raise these */
    char list[400] = "";
    size_t count = 0;
    for (int i = 0; i < RT_IX_COUNT; i++) {
        if (rt_night_cutoff_verified(night, i))
            continue;
        bool reached = rt_night_index_abnormal(night, i);
        bool nearing = !reached && night->level == RT_REVIEW_CLEAR && rt_night_index_near(night, i);
        if (!reached && !nearing)
            continue;
        char val[32], cut[32];
        rt_night_value_text(night, i, night->index[i].value, val, sizeof val);
        rt_night_value_text(night, i, night->cutoffs.value[i], cut, sizeof cut);
        /* "reached" / "not reached", the words of every report (src/report/words.c) */
        append(list, sizeof list, "%s%s is %s: %s%s %s", list[0] ? "; " : "", rules[i].id, val,
               rules[i].lower_is_worse ? "below " : "", cut,
               reached ? "reached" : "not reached, but near");
        count++;
    }
    if (count)
        reserve(night, RT_RESERVE_CUTOFF_UNVERIFIED,
                "%s: %s recalled but not verified against the published source "
                "(src/score/rules.c), so %s not decide the level; checked, %s could.",
                list, count == 1 ? "a cutoff" : "cutoffs", count == 1 ? "it did" : "they did",
                count == 1 ? "it" : "they");
}

void rt_night_reserve(rt_night *night)
{
    night->n_reservations = 0;
    reserve_staging(night);
    reserve_ahi(night);
    reserve_excluded(night);
    reserve_channels(night);
    reserve_few_units(night);
    reserve_unverified(night);
}
