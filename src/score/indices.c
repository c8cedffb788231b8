/* From mini-epoch labels to the published indices, their statuses against
 * the cutoffs in force, the headline and the review level. */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "detect.h"
#include "night_internal.h"

/* Cutoff comparisons forgive rounding of the percentage arithmetic. */
#define CUTOFF_SLACK 1e-9

static const rt_role LIMBS[] = {RT_ROLE_ARM_LEFT, RT_ROLE_ARM_RIGHT, RT_ROLE_LEG_LEFT,
                                RT_ROLE_LEG_RIGHT};

void rt_night_warn(rt_night *night, const char *fmt, ...)
{
    if (night->n_warnings >= sizeof night->warnings / sizeof night->warnings[0])
        return;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(night->warnings[night->n_warnings++], sizeof night->warnings[0], fmt, ap);
    va_end(ap);
}

static void add_reason(rt_night *night, const char *fmt, ...) RT_PRINTF(2, 3);
static void add_reason(rt_night *night, const char *fmt, ...)
{
    if (night->n_reasons >= sizeof night->reasons / sizeof night->reasons[0])
        return;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(night->reasons[night->n_reasons++], sizeof night->reasons[0], fmt, ap);
    va_end(ap);
}

static bool has(const rt_mini *m, rt_role r, unsigned label)
{
    return !(m->labels[r] & (RT_LABEL_ABSENT | RT_LABEL_EXCLUDED)) && (m->labels[r] & label);
}

static bool arm_phasic(const rt_mini *m)
{
    return has(m, RT_ROLE_ARM_LEFT, RT_LABEL_SINBAR_PHASIC) ||
           has(m, RT_ROLE_ARM_RIGHT, RT_LABEL_SINBAR_PHASIC);
}

static bool any_aasm_phasic(const rt_mini *m)
{
    if (has(m, RT_ROLE_CHIN, RT_LABEL_AASM_PHASIC))
        return true;
    for (size_t i = 0; i < sizeof LIMBS / sizeof LIMBS[0]; i++)
        if (has(m, LIMBS[i], RT_LABEL_AASM_PHASIC))
            return true;
    return false;
}

static bool mini_scorable(const rt_mini *m) { return !(m->labels[RT_ROLE_CHIN] & RT_LABEL_EXCLUDED); }

/* Per-epoch counts of the 3-s minis (AASM 10 per epoch). */
static void aggregate_epochs(rt_night *night, bool arms)
{
    for (size_t e = 0; e < night->n_epochs; e++) {
        rt_epoch_result *er = &night->epochs[e];
        const rt_mini *m = &night->minis3[e * RT_MINIS3_PER_EPOCH];
        int scorable = 0;
        er->aasm_chin_minis = er->aasm_any_minis = er->sinbar_any_minis = 0;
        for (int k = 0; k < RT_MINIS3_PER_EPOCH; k++) {
            if (!mini_scorable(&m[k]))
                continue;
            scorable++;
            er->aasm_chin_minis += has(&m[k], RT_ROLE_CHIN, RT_LABEL_AASM_PHASIC);
            er->aasm_any_minis += any_aasm_phasic(&m[k]);
            er->sinbar_any_minis += has(&m[k], RT_ROLE_CHIN, RT_LABEL_SINBAR_ANY) ||
                                    (arms && arm_phasic(&m[k]));
        }
        /* an epoch touching an excluding event leaves the epoch-level counts */
        er->excluded = scorable < RT_MINIS3_PER_EPOCH;
        /* evidence ranking: active minis first, tonic epochs weigh as a full epoch */
        er->activity = er->sinbar_any_minis + (er->sinbar_tonic ? 10.0 : 0.0) +
                       0.5 * er->aasm_any_minis;
    }
}

static void set_value(rt_index_value *v, size_t num, size_t den, double scale)
{
    v->numerator = num;
    v->denominator = den;
    if (den == 0) {
        v->value = NAN;
        v->status = RT_STATUS_NOT_COMPUTED;
        rt_copy_string(v->reason, sizeof v->reason, "no scorable REM");
        return;
    }
    v->value = scale * (double)num / (double)den;
    v->status = RT_STATUS_NO_CUTOFF; /* decided against the cutoffs later */
}

static void not_computed(rt_index_value *v, const char *reason)
{
    v->value = NAN;
    v->status = RT_STATUS_NOT_COMPUTED;
    v->numerator = v->denominator = 0;
    rt_copy_string(v->reason, sizeof v->reason, reason);
}

bool rt_index_mini_counts(int i, const rt_mini *m, bool arms, bool *in_denominator)
{
    *in_denominator = false;
    bool any;
    switch (i) {
    case RT_IX_SINBAR_CHIN_ANY_3S: any = has(m, RT_ROLE_CHIN, RT_LABEL_SINBAR_ANY); break;
    case RT_IX_SINBAR_CHIN_PHASIC_3S: any = has(m, RT_ROLE_CHIN, RT_LABEL_SINBAR_PHASIC); break;
    case RT_IX_SINBAR_FDS_PHASIC_3S: any = arms && arm_phasic(m); break;
    case RT_IX_SINBAR_COMBINED_3S:
        any = arms && (has(m, RT_ROLE_CHIN, RT_LABEL_SINBAR_ANY) || arm_phasic(m));
        break;
    case RT_IX_MONTREAL_PHASIC_CHIN: any = has(m, RT_ROLE_CHIN, RT_LABEL_MONTREAL_PHASIC); break;
    default: return false;
    }
    *in_denominator = mini_scorable(m);
    return *in_denominator && any;
}

bool rt_index_epoch_counts(int i, const rt_epoch_result *e, bool arms, bool *in_denominator)
{
    *in_denominator = false;
    /* AASM: >= 5 of 10 3-s mini-epochs hold bursts ("excessive transient") */
    bool pa = e->aasm_any_minis >= 5;
    bool counts;
    switch (i) {
    case RT_IX_AASM_TONIC_CHIN: counts = e->aasm_tonic; break;
    case RT_IX_AASM_PHASIC_CHIN: counts = e->aasm_chin_minis >= 5; break;
    case RT_IX_AASM_PHASIC_ANY: counts = pa; break;
    case RT_IX_AASM_RSWA: counts = e->aasm_tonic || pa; break;
    case RT_IX_SINBAR_CHIN_TONIC_30S: counts = e->sinbar_tonic; break;
    /* SINBAR 30-s epochs follow the AASM convention: an epoch counts when
     * at least 5 of its 10 3-s mini-epochs hold the activity (chin "any" or
     * phasic arm). Frauscher et al. 2014 (Sleep 37:763-773, abstract) score
     * "phasic mentalis EMG activity for 30-sec epochs according to AASM
     * recommendation" against the SINBAR cutoff; counting an epoch for a
     * single active mini would make the 30-s index at least the 3-s index,
     * impossible with a 30-s cutoff (27 %) below the 3-s one (32 %, Frauscher
     * et al. 2012, abstract) on the same nights. docs/scoring.md. */
    case RT_IX_SINBAR_COMBINED_30S: counts = arms && e->sinbar_any_minis >= 5; break;
    default: return false;
    }
    *in_denominator = !e->excluded;
    return *in_denominator && counts;
}

static const int MINI3_INDICES[] = {RT_IX_SINBAR_CHIN_ANY_3S, RT_IX_SINBAR_CHIN_PHASIC_3S,
                                    RT_IX_SINBAR_FDS_PHASIC_3S, RT_IX_SINBAR_COMBINED_3S};
static const int EPOCH_INDICES[] = {RT_IX_AASM_TONIC_CHIN, RT_IX_AASM_PHASIC_CHIN,
                                    RT_IX_AASM_PHASIC_ANY, RT_IX_AASM_RSWA,
                                    RT_IX_SINBAR_CHIN_TONIC_30S, RT_IX_SINBAR_COMBINED_30S};
#define COUNT_OF(a) (sizeof(a) / sizeof((a)[0]))

static void compute_mini_indices(rt_night *night, bool arms)
{
    for (size_t k = 0; k < COUNT_OF(MINI3_INDICES); k++) {
        size_t num = 0, den = 0;
        bool in_den;
        for (size_t i = 0; i < night->n_minis3; i++) {
            num += rt_index_mini_counts(MINI3_INDICES[k], &night->minis3[i], arms, &in_den);
            den += in_den;
        }
        set_value(&night->index[MINI3_INDICES[k]], num, den, 100.0);
    }
    size_t s2 = 0, m2 = 0;
    bool in_den;
    for (size_t i = 0; i < night->n_minis2; i++) {
        m2 += rt_index_mini_counts(RT_IX_MONTREAL_PHASIC_CHIN, &night->minis2[i], arms, &in_den);
        s2 += in_den;
    }
    set_value(&night->index[RT_IX_MONTREAL_PHASIC_CHIN], m2, s2, 100.0);
}

static void compute_epoch_indices(rt_night *night, bool arms)
{
    for (size_t k = 0; k < COUNT_OF(EPOCH_INDICES); k++) {
        size_t num = 0, den = 0;
        bool in_den;
        for (size_t e = 0; e < night->n_epochs; e++) {
            num += rt_index_epoch_counts(EPOCH_INDICES[k], &night->epochs[e], arms, &in_den);
            den += in_den;
        }
        set_value(&night->index[EPOCH_INDICES[k]], num, den, 100.0);
    }
}

/* Leg movements from the leg EMG when no limb-movement events were given,
 * by the AASM limb-movement rules (AASM Manual for the Scoring of Sleep and
 * Associated Events v2.x, movement rules, periodic limb movements in sleep;
 * as tabulated for v2.5 by PMC9619152, Table 3):
 *  - onset at an 8-uV increase in EMG voltage above resting EMG: a leg burst
 *    (Montreal rule, 4x background, 0.1-10 s: the longest the scorer keeps)
 *    counts when its level rises at least 8 uV above the background of its
 *    3-s mini-epoch, (peak_ratio - 1) x background_uv, in rectified-envelope
 *    microvolts (stricter than the manual's voltage; docs/scoring.md);
 *  - offset at the start of at least 0.5 s in which the EMG stays within
 *    2 uV of rest: bursts of one leg less than 0.5 s apart are one movement
 *    (the scorer's bursts end at their measured edges);
 *  - duration 0.5-10 s, of the joined movement (with the burst tolerance);
 *  - movements on the two legs whose onsets are less than 5 s apart count as
 *    one movement (each movement takes in at most one of the other leg).
 * Bursts whose 2-s mini-epoch is left out for that leg do not count. NaN
 * without leg channels. */
/* durations are compared within a microsecond, amplitudes within rounding */
#define LM_TIME_SLACK 1e-6

typedef struct leg_move {
    double onset_s, end_s, rise_uv;
    rt_role leg;
    bool absorbed;
} leg_move;

static int compare_move(const void *a, const void *b)
{
    const leg_move *x = a, *y = b;
    if (x->leg != y->leg)
        return (x->leg > y->leg) - (x->leg < y->leg);
    return (x->onset_s > y->onset_s) - (x->onset_s < y->onset_s);
}

static int compare_move_onset(const void *a, const void *b)
{
    const leg_move *x = a, *y = b;
    return (x->onset_s > y->onset_s) - (x->onset_s < y->onset_s);
}

/* Index of the mini-epoch (of len_s seconds, sorted by onset) holding t_s, or
 * count when none does. */
static size_t mini_holding(const rt_mini *m, size_t count, double len_s, double t_s)
{
    size_t lo = 0, hi = count;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (m[mid].onset_s + len_s <= t_s)
            lo = mid + 1;
        else
            hi = mid;
    }
    return lo < count && m[lo].onset_s <= t_s ? lo : count;
}

/* REM 3-s mini-epochs in which a leg movement could be counted: a leg
 * channel present and not excluded there. The denominator of the rate. */
static size_t leg_scorable_minis(const rt_night *night)
{
    size_t n = 0;
    for (size_t i = 0; i < night->n_minis3; i++)
        for (int r = RT_ROLE_LEG_LEFT; r <= RT_ROLE_LEG_RIGHT; r++)
            if (night->channel[r].present &&
                !(night->minis3[i].labels[r] & (RT_LABEL_EXCLUDED | RT_LABEL_ABSENT))) {
                n++;
                break;
            }
    return n;
}

/* Movements per hour of leg-scorable REM (minutes > 0) into *per_h and their
 * number into *count. RT_ERR_NOMEM when there is no room to sort them: never
 * a silent "not computed". */
static rt_status leg_movements_per_h(const rt_night *night, double minutes, double *per_h,
                                     size_t *count, rt_error *err)
{
    *count = 0;
    *per_h = NAN;
    const rt_score_params *p = &night->params;
    leg_move *mv = rt_calloc(night->n_bursts + 1, sizeof *mv);
    if (!mv)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu leg bursts", night->n_bursts);
    size_t n = 0;
    for (size_t i = 0; i < night->n_bursts; i++) {
        const rt_burst *b = &night->bursts[i];
        if ((b->role != RT_ROLE_LEG_LEFT && b->role != RT_ROLE_LEG_RIGHT) ||
            !(b->rules & RT_LABEL_MONTREAL_PHASIC))
            continue;
        size_t k2 = mini_holding(night->minis2, night->n_minis2, 2.0, b->onset_s);
        if (k2 < night->n_minis2 && (night->minis2[k2].labels[b->role] & RT_LABEL_EXCLUDED))
            continue;
        size_t k3 = mini_holding(night->minis3, night->n_minis3, 3.0, b->onset_s);
        double bg = k3 < night->n_minis3 ? night->minis3[k3].background_uv[b->role] : NAN;
        mv[n++] = (leg_move){b->onset_s, b->onset_s + b->duration_s,
                             isfinite(bg) ? (b->peak_ratio - 1.0) * bg : NAN, b->role, false};
    }
    /* one leg: bursts with less than 0.5 s between them are one movement */
    qsort(mv, n, sizeof *mv, compare_move);
    size_t m = 0;
    for (size_t i = 0; i < n; i++) {
        if (m > 0 && mv[m - 1].leg == mv[i].leg &&
            mv[i].onset_s - mv[m - 1].end_s < p->lm_offset_quiet_s - LM_TIME_SLACK) {
            mv[m - 1].end_s = fmax(mv[m - 1].end_s, mv[i].end_s);
            mv[m - 1].rise_uv = fmax(mv[m - 1].rise_uv, mv[i].rise_uv);
            continue;
        }
        mv[m++] = mv[i];
    }
    /* the AASM duration and amplitude of each leg's movements; the duration
     * with the same measuring tolerance as a burst's (docs/scoring.md) */
    size_t kept = 0;
    double slack = p->burst_duration_tolerance_s + LM_TIME_SLACK;
    for (size_t i = 0; i < m; i++) {
        double d = mv[i].end_s - mv[i].onset_s;
        if (d >= p->lm_min_s - slack && d <= p->lm_max_s + slack &&
            mv[i].rise_uv >= p->lm_rise_uv - 1e-9)
            mv[kept++] = mv[i];
    }
    /* both legs: onsets less than 5 s apart are one movement */
    qsort(mv, kept, sizeof *mv, compare_move_onset);
    for (size_t i = 0; i < kept; i++) {
        if (mv[i].absorbed)
            continue;
        (*count)++;
        for (size_t j = i + 1;
             j < kept && mv[j].onset_s - mv[i].onset_s < p->lm_bilateral_s - LM_TIME_SLACK; j++)
            if (!mv[j].absorbed && mv[j].leg != mv[i].leg) {
                mv[j].absorbed = true;
                break;
            }
    }
    free(mv);
    *per_h = (double)*count / (minutes / 60.0);
    return RT_OK;
}

/* REM minutes left out, each mini-epoch counted once for its first cause;
 * the leg-movement rate. */
static rt_status summarise_exclusions(rt_night *night, rt_error *err)
{
    rt_exclusion_summary *x = &night->exclusions;
    for (size_t i = 0; i < night->n_minis3; i++) {
        unsigned bits = night->minis3[i].excluded_by;
        if (!bits)
            continue;
        x->total_minutes += 3.0 / 60.0;
        if (bits & RT_EXCLUDED_BY_LIGHTS) {
            x->outside_lights_minutes += 3.0 / 60.0;
            continue;
        }
        if (bits & RT_EXCLUDED_BY_REVIEW) {
            x->review_minutes += 3.0 / 60.0;
            continue;
        }
        for (int t = 0; t < RT_EVENT_TYPE_COUNT; t++)
            if (bits & RT_EXCLUDED_BY_EVENT(t)) {
                x->minutes[t] += 3.0 / 60.0;
                break;
            }
    }
    /* a rate per hour needs as much REM as an assessable night (the least
     * scorable REM, min_scorable_min): over one 30-s epoch, 4 movements
     * would read 480/h */
    rt_index_value *lm = &night->index[RT_IX_MONTREAL_LM_PER_H];
    const double least_min = night->params.min_scorable_min;
    const bool legs = night->channel[RT_ROLE_LEG_LEFT].present ||
                      night->channel[RT_ROLE_LEG_RIGHT].present;
    char why[sizeof lm->reason];
    size_t minis = legs ? leg_scorable_minis(night) : 0;
    double minutes = (double)minis * 3.0 / 60.0;
    if (night->rem_minutes <= 0) {
        not_computed(lm, "no REM epochs");
    } else if (!isnan(x->rem_leg_movements_per_h)) {
        if (night->rem_minutes < least_min) {
            snprintf(why, sizeof why, "only %.1f min of REM; a rate per hour needs at least %.1f min",
                     night->rem_minutes, least_min);
            not_computed(lm, why);
        } else {
            lm->value = x->rem_leg_movements_per_h;
            lm->status = RT_STATUS_NO_CUTOFF;
            /* the events' count back from their rate, over every REM mini-epoch */
            lm->numerator = (size_t)llround(lm->value * night->rem_minutes / 60.0);
            lm->denominator = night->n_minis3;
            rt_copy_string(lm->reason, sizeof lm->reason,
                           "counted from the limb-movement events given, per hour of REM");
        }
    } else if (!legs) {
        not_computed(lm, "no limb-movement events were given and no leg EMG channel");
    } else if (minis == 0) {
        not_computed(lm, "no limb-movement events were given, and every REM mini-epoch is "
                         "excluded for the leg EMG");
    } else if (minutes < least_min) {
        snprintf(why, sizeof why, "only %.1f min of REM with scorable leg EMG; a rate per hour "
                 "needs at least %.1f min", minutes, least_min);
        not_computed(lm, why);
    } else {
        size_t count = 0;
        rt_status st = leg_movements_per_h(night, minutes, &lm->value, &count, err);
        if (st != RT_OK)
            return st;
        lm->numerator = count;
        lm->denominator = minis;
        lm->status = RT_STATUS_NO_CUTOFF;
        rt_copy_string(lm->reason, sizeof lm->reason,
                       "counted from the leg EMG by the AASM limb-movement rules: 0.5-10 s, "
                       "8 uV above the background, legs with onsets under 5 s apart once; per "
                       "hour of REM with scorable leg EMG");
    }
    return RT_OK;
}

static void apply_missing(rt_night *night, bool arms)
{
    if (!night->channel[RT_ROLE_CHIN].present) {
        for (int i = 0; i < RT_IX_COUNT; i++)
            not_computed(&night->index[i], "no chin EMG channel");
        return;
    }
    if (!arms) {
        const char *why = night->channel[RT_ROLE_ARM_LEFT].present ||
                                  night->channel[RT_ROLE_ARM_RIGHT].present
                              ? "needs both arm (FDS) channels; the SINBAR cutoff is for both"
                              : "no arm (FDS) channels";
        not_computed(&night->index[RT_IX_SINBAR_FDS_PHASIC_3S], why);
        not_computed(&night->index[RT_IX_SINBAR_COMBINED_3S], why);
        not_computed(&night->index[RT_IX_SINBAR_COMBINED_30S], why);
    }
    if (!isfinite(night->nrem_reference_uv)) {
        const char *why = "no NREM epochs to take the chin reference amplitude from";
        not_computed(&night->index[RT_IX_AASM_TONIC_CHIN], why);
        not_computed(&night->index[RT_IX_AASM_RSWA], why);
    }
    char missing[160] = "";
    for (size_t i = 0; i < sizeof LIMBS / sizeof LIMBS[0]; i++) {
        if (night->channel[LIMBS[i]].present)
            continue;
        size_t len = strlen(missing);
        snprintf(missing + len, sizeof missing - len, "%s%s", len ? ", " : "",
                 rt_role_name(LIMBS[i]));
    }
    if (missing[0] && night->index[RT_IX_AASM_PHASIC_ANY].status != RT_STATUS_NOT_COMPUTED)
        snprintf(night->index[RT_IX_AASM_PHASIC_ANY].reason,
                 sizeof night->index[RT_IX_AASM_PHASIC_ANY].reason,
                 "computed without %s", missing);
}

static void decide_status(rt_night *night)
{
    const rt_index_rule *rules = rt_index_rules();
    for (int i = 0; i < RT_IX_COUNT; i++) {
        rt_index_value *v = &night->index[i];
        if (v->status == RT_STATUS_NOT_COMPUTED)
            continue;
        if (!night->cutoffs.has[i]) {
            v->status = RT_STATUS_NO_CUTOFF;
            continue;
        }
        double c = night->cutoffs.value[i];
        if (rules[i].lower_is_worse) {
            if (v->value < c - CUTOFF_SLACK)
                v->status = RT_STATUS_BELOW;
            else if (v->value <= night->cutoffs.normal_from[i] + CUTOFF_SLACK)
                v->status = RT_STATUS_INTERMEDIATE;
            else
                v->status = RT_STATUS_ABOVE;
        } else {
            v->status = v->value >= c - CUTOFF_SLACK ? RT_STATUS_ABOVE : RT_STATUS_BELOW;
        }
    }
}

bool rt_night_index_abnormal(const rt_night *night, int i)
{
    const rt_index_value *v = &night->index[i];
    if (v->status == RT_STATUS_NOT_COMPUTED || v->status == RT_STATUS_NO_CUTOFF)
        return false;
    return rt_index_rules()[i].lower_is_worse ? v->status == RT_STATUS_BELOW
                                              : v->status == RT_STATUS_ABOVE;
}

bool rt_night_cutoff_verified(const rt_night *night, int i)
{
    const rt_index_rule *r = &rt_index_rules()[i];
    if (!r->has_cutoff || !r->from_memory)
        return true;
    /* a lab's own value (a row of its cutoff file) is the lab's responsibility */
    return rt_cutoff_is_lab(&night->cutoffs, i);
}

bool rt_night_index_near(const rt_night *night, int i)
{
    const rt_index_value *v = &night->index[i];
    if (v->status == RT_STATUS_NOT_COMPUTED || v->status == RT_STATUS_NO_CUTOFF)
        return false;
    if (rt_index_rules()[i].lower_is_worse)
        return v->status == RT_STATUS_INTERMEDIATE;
    return v->value >= night->params.near_fraction * night->cutoffs.value[i];
}

void rt_night_value_text(const rt_night *night, int i, double value, char *buf, size_t cap)
{
    if (strcmp(rt_index_rules()[i].unit, "%") == 0)
        snprintf(buf, cap, "%.1f %%", value);
    else if (strcmp(rt_index_rules()[i].unit, "/h") == 0)
        snprintf(buf, cap, "%.1f/h", value);
    else
        snprintf(buf, cap, "%.3f", value);
    (void)night;
}

const char *rt_quality_kind_name(int kind)
{
    static const char *const NAMES[RT_QUALITY_KINDS] = {"clipping", "flat", "pop"};
    return kind >= 0 && kind < RT_QUALITY_KINDS ? NAMES[kind] : "unknown";
}

static void review(rt_night *night)
{
    const rt_index_rule *rules = rt_index_rules();
    const rt_channel_quality *cq = &night->channel[RT_ROLE_CHIN].quality;
    if (night->channel[RT_ROLE_CHIN].present && cq->unscorable_total_min > 0.5 * night->rem_minutes &&
        night->rem_minutes > 0) {
        night->level = RT_REVIEW_NOT_ASSESSABLE;
        add_reason(night, "chin EMG unusable for %.1f of %.1f REM minutes (flat or detached lead "
                          "%.1f, clipping %.1f, pops %.1f): re-prepare the electrodes or score by eye",
                   cq->unscorable_total_min, night->rem_minutes, cq->unscorable_min[1],
                   cq->unscorable_min[0], cq->unscorable_min[2]);
        return;
    }
    if (!night->channel[RT_ROLE_CHIN].present) {
        night->level = RT_REVIEW_NOT_ASSESSABLE;
        add_reason(night, "no usable chin EMG channel");
        return;
    }
    if (night->scorable_minutes < night->params.min_scorable_min) {
        night->level = RT_REVIEW_NOT_ASSESSABLE;
        add_reason(night, "only %.1f min of scorable REM (at least %.1f min needed)",
                   night->scorable_minutes, night->params.min_scorable_min);
        return;
    }
    /* Only cutoffs checked against the published text (or a lab's own) decide
     * the level; one recalled but not verified is context and never raises
     * the review flag on its own (docs/scoring.md, "Review level"). */
    bool flagged = false, nearing = false;
    for (int i = 0; i < RT_IX_COUNT; i++) {
        char val[32], cut[32], src[600];
        if (rt_night_index_abnormal(night, i) && rt_night_cutoff_verified(night, i)) {
            flagged = true;
            rt_night_value_text(night, i, night->index[i].value, val, sizeof val);
            rt_night_value_text(night, i, night->cutoffs.value[i], cut, sizeof cut);
            rt_cutoff_source(&night->cutoffs, i, src, sizeof src);
            add_reason(night, "%s is %s: the %s cutoff %s%s is reached (%s)", rules[i].id, val,
                       rt_cutoff_is_lab(&night->cutoffs, i) ? "lab's" : "published",
                       rules[i].lower_is_worse ? "below " : "", cut, src);
        }
    }
    if (!flagged) {
        for (int i = 0; i < RT_IX_COUNT; i++) {
            if (!rt_night_index_near(night, i) || !rt_night_cutoff_verified(night, i))
                continue;
            char val[32], cut[32];
            nearing = true;
            rt_night_value_text(night, i, night->index[i].value, val, sizeof val);
            rt_night_value_text(night, i, night->cutoffs.value[i], cut, sizeof cut);
            add_reason(night, "%s is %s: the %s cutoff %s is not reached, but near", rules[i].id,
                       val, rt_cutoff_is_lab(&night->cutoffs, i) ? "lab's" : "published", cut);
        }
    }
    night->level = flagged ? RT_REVIEW_FLAGGED : nearing ? RT_REVIEW_NEAR : RT_REVIEW_CLEAR;
    if (night->level == RT_REVIEW_CLEAR)
        add_reason(night, "no verified cutoff is reached or near");
    for (int i = 0; i < RT_IX_COUNT; i++) {
        if (!rt_night_index_abnormal(night, i) || rt_night_cutoff_verified(night, i))
            continue;
        char val[32], cut[32];
        rt_night_value_text(night, i, night->index[i].value, val, sizeof val);
        rt_night_value_text(night, i, night->cutoffs.value[i], cut, sizeof cut);
        add_reason(night, "context only: %s is %s: %s%s is reached, a cutoff recalled but not "
                          "verified against the published text: not a reason for review",
                   rules[i].id, val, rules[i].lower_is_worse ? "below " : "", cut);
    }
}

/* Each channel's typical REM level: the median of its mini-epoch envelopes. */
static rt_status channel_levels(rt_night *night, rt_error *err)
{
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        rt_channel_quality *q = &night->channel[r].quality;
        q->unscorable_total_min = 0.0;
        for (int k = 0; k < RT_QUALITY_KINDS; k++)
            q->unscorable_total_min += q->unscorable_min[k];
    }
    if (night->n_minis3 == 0)
        return RT_OK;
    double *v = rt_calloc(night->n_minis3, sizeof *v);
    if (!v)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory");
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        if (!night->channel[r].present || r == RT_ROLE_ECG)
            continue;
        size_t n = 0;
        for (size_t i = 0; i < night->n_minis3; i++)
            if (!(night->minis3[i].labels[r] & (RT_LABEL_EXCLUDED | RT_LABEL_ABSENT)))
                v[n++] = night->minis3[i].envelope_uv[r];
        night->channel[r].rem_median_uv = n ? rt_quantile(v, n, 0.5) : NAN;
    }
    free(v);
    return RT_OK;
}

/* The indices of a night, or of a view of one REM period (periods.c), from
 * its mini-epochs and epochs. ss NULL keeps the Montreal tonic index and the
 * REM Atonia Index as they are: they are counted per second of the signal
 * while scoring, and a reviewer's decisions (corrections.c) do not reach
 * them. */
rt_status rt_night_indices(rt_night *night, const scoring_state *ss, rt_error *err)
{
    bool arms = night->channel[RT_ROLE_ARM_LEFT].present && night->channel[RT_ROLE_ARM_RIGHT].present;
    size_t scorable_minis = 0;
    for (size_t i = 0; i < night->n_minis3; i++)
        scorable_minis += mini_scorable(&night->minis3[i]);
    night->rem_minutes = (double)night->n_epochs * 0.5;
    night->scorable_minutes = night->channel[RT_ROLE_CHIN].present ? (double)scorable_minis * 3.0 / 60.0
                                                                 : 0.0;
    compute_mini_indices(night, arms);
    compute_epoch_indices(night, arms);
    if (ss)
        set_value(&night->index[RT_IX_MONTREAL_TONIC_CHIN], ss->montreal_tonic,
                  ss->montreal_windows, 100.0);
    rt_status st = summarise_exclusions(night, err);
    if (st != RT_OK)
        return st;
    rt_index_value *rai = &night->index[RT_IX_RAI];
    if (ss) {
        rai->numerator = ss->rai.at_most_1;
        rai->denominator = ss->rai.total;
        rai->value = rt_rai_value(&ss->rai);
        rai->status = isnan(rai->value) ? RT_STATUS_NOT_COMPUTED : RT_STATUS_NO_CUTOFF;
        if (isnan(rai->value))
            rt_copy_string(rai->reason, sizeof rai->reason, "no scorable REM");
    }
    apply_missing(night, arms);
    decide_status(night);
    return RT_OK;
}

/* The body of rt_night_summarise and rt_night_resummarise: ss NULL keeps
 * the Montreal tonic index and the REM Atonia Index as they are, of the
 * night and of each REM period. */
static rt_status summarise(rt_night *night, const scoring_state *ss, rt_error *err)
{
    night->n_reasons = 0;
    night->n_reservations = 0;
    memset(night->exclusions.minutes, 0, sizeof night->exclusions.minutes);
    night->exclusions.total_minutes = night->exclusions.outside_lights_minutes = 0.0;
    night->exclusions.review_minutes = 0.0;
    rt_status st = channel_levels(night, err);
    if (st != RT_OK)
        return st;
    bool arms = night->channel[RT_ROLE_ARM_LEFT].present && night->channel[RT_ROLE_ARM_RIGHT].present;
    aggregate_epochs(night, arms);
    if ((st = rt_night_indices(night, ss, err)) != RT_OK)
        return st;
    night->headline = night->index[RT_IX_SINBAR_COMBINED_3S].status != RT_STATUS_NOT_COMPUTED
                          ? RT_IX_SINBAR_COMBINED_3S
                          : RT_IX_SINBAR_CHIN_ANY_3S;
    review(night);
    rt_night_reserve(night);
    return rt_night_periods_score(night, ss, err);
}

rt_status rt_night_summarise(rt_night *night, const scoring_state *ss, rt_error *err)
{
    return summarise(night, ss, err);
}

rt_status rt_night_resummarise(rt_night *night, rt_error *err)
{
    return summarise(night, NULL, err);
}
