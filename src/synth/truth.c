/* truth.json: what the plan placed in every REM mini-epoch and the value
 * each index takes on it. Indices are counted from the placement (never
 * from the signal), with the formulas of docs/synthetic-nights.md: a burst
 * counts for a rule's phasic indices only when the rule counts it (ratio and
 * duration, rt_synth_burst_rules). */
#include "synth_internal.h"

#include <jansson.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "json_build.h"
#include "output.h"

/* Whether a burst of role with one of the SYNTH_HOLD_* bits overlaps
 * [s0, s0 + len); mini-epoch boundaries are whole seconds and a burst that
 * crosses one has 0.05 s or more on each side, so overlapping one of a
 * mini's seconds is overlapping the mini. */
static int span_holds(const synth_plan *plan, int role, long s0, int len, unsigned bits)
{
    for (long s = s0; s < s0 + len; s++)
        if (plan->sec_hold[role][s] & bits)
            return 1;
    return 0;
}

static int span_holds_any(const synth_plan *plan, long s0, int len, unsigned bits)
{
    for (int r = 0; r < SYNTH_ROLES; r++)
        if (span_holds(plan, r, s0, len, bits))
            return 1;
    return 0;
}

static int span_excluded(const synth_plan *plan, long s0, int len)
{
    for (long s = s0; s < s0 + len; s++)
        if (plan->sec_excluded[s])
            return 1;
    return 0;
}

static int span_tonic(const synth_plan *plan, long s0, int len)
{
    for (long s = s0; s < s0 + len; s++)
        if (!plan->tonic[s / RT_EPOCH_WHOLE_S])
            return 0;
    return 1;
}

static double percent(long num, long den)
{
    return den > 0 ? 100.0 * (double)num / (double)den : NAN;
}

/* Designed mean rectified chin level of every second of a bout (RAI input):
 * the mean over the second of level x drift gain, i.e. with f the weight of
 * a burst piece (its duration without drift, the integral of the gain over
 * it with drift) and G the gain's integral over the second,
 * v = base (G - sum f) + sum A f. Returns NULL when out of memory. */
static double *designed_chin_uv(const synth_plan *plan, const synth_bout *bout)
{
    long t0 = (long)bout->first_epoch * RT_EPOCH_WHOLE_S;
    long len = (long)bout->epochs * RT_EPOCH_WHOLE_S;
    double *v = malloc((size_t)len * sizeof *v);
    double *fsum = rt_calloc((size_t)len, sizeof *fsum);
    double *asum = rt_calloc((size_t)len, sizeof *asum);
    if (!v || !fsum || !asum) {
        free(v);
        free(fsum);
        free(asum);
        return NULL;
    }
    for (size_t i = 0; i < plan->n_bursts; i++) {
        const synth_burst *b = &plan->bursts[i];
        double end = b->onset_s + b->duration_s;
        if (b->role != SYNTH_CHIN || end <= (double)t0 || b->onset_s >= (double)(t0 + len))
            continue;
        for (long s = (long)floor(b->onset_s); (double)s < end; s++) {
            double a = fmax(b->onset_s, (double)s), z = fmin(end, (double)s + 1.0);
            if (s < t0 || s >= t0 + len || z <= a)
                continue;
            double f;
            if (plan->drift_per_s == 0.0)
                f = a == b->onset_s && z == end ? b->duration_s : z - a;
            else
                f = rt_synth_gain_integral(plan, a, z);
            fsum[s - t0] += f;
            asum[s - t0] += b->rect_uv * f;
        }
    }
    for (long j = 0; j < len; j++) {
        long s = t0 + j;
        long e = s / RT_EPOCH_WHOLE_S;
        double base = plan->tonic[e] ? plan->tonic_uv[e] : bout->chin_bg_uv;
        double g = rt_synth_gain_integral(plan, (double)s, (double)s + 1.0);
        v[j] = fsum[j] > 0.0 ? base * (g - fsum[j]) + asum[j] : base * g;
    }
    free(fsum);
    free(asum);
    return v;
}

typedef struct counts {
    long epochs, ep_tonic, ep_aasm_tonic, ep_aasm_unsure, ep_phasic_chin, ep_phasic_any, ep_rswa,
        ep_combo;
    long m3, m3_chin, m3_chin_any, m3_fds, m3_combo;
    long m2, m2_chin;
    long w20, w20_tonic;
    long secs, rai_p1, rai_p2;
} counts;

/* The placed chin level of epoch e (its middle) with the drift of the night. */
static double chin_level_uv(const synth_plan *plan, int e)
{
    double level = plan->tonic[e] ? plan->tonic_uv[e] : plan->bg_uv[SYNTH_CHIN][e];
    return level * rt_synth_gain(plan, ((double)e + 0.5) * RT_EPOCH_WHOLE_S);
}

/* The "minimum amplitude in NREM" of the AASM tonic rule (AASM Manual v2,
 * from memory): the lowest placed chin level of an N1-N3 epoch. */
static double nrem_chin_min_uv(const synth_plan *plan)
{
    double lo = INFINITY;
    for (int e = 0; e < plan->n_epochs; e++)
        if (plan->stage[e] >= SYNTH_N1 && plan->stage[e] <= SYNTH_N3)
            lo = fmin(lo, chin_level_uv(plan, e));
    return lo;
}

static void count_epoch(const synth_plan *plan, int e, int exclude, double nrem_min_uv,
                        counts *c)
{
    long t = (long)e * RT_EPOCH_WHOLE_S;
    int ep_excl = exclude && span_excluded(plan, t, RT_EPOCH_WHOLE_S);
    int tonic = plan->tonic[e];
    /* AASM tonic: the sustained tone must also be greater than the NREM
     * minimum (no NREM at all: nothing to compare it with, not counted) */
    double to_nrem = tonic ? chin_level_uv(plan, e) / nrem_min_uv : 0.0;
    int aasm_tonic = tonic && to_nrem > 1.0;
    int n_chin = 0, n_any = 0, combo = 0;
    for (int m = 0; m < RT_MINIS3_PER_EPOCH; m++) {
        long s0 = t + 3 * m;
        /* AASM counts its own bursts; SINBAR its own */
        n_chin += span_holds(plan, SYNTH_CHIN, s0, 3, SYNTH_HOLD_AASM);
        n_any += span_holds_any(plan, s0, 3, SYNTH_HOLD_AASM);
        int chin = span_holds(plan, SYNTH_CHIN, s0, 3, SYNTH_HOLD_SINBAR);
        int arm = span_holds(plan, SYNTH_ARM_L, s0, 3, SYNTH_HOLD_SINBAR) ||
                  span_holds(plan, SYNTH_ARM_R, s0, 3, SYNTH_HOLD_SINBAR);
        combo += chin || tonic || arm;
        if (exclude && span_excluded(plan, s0, 3))
            continue;
        c->m3++;
        c->m3_chin += chin;
        c->m3_chin_any += chin || tonic;
        c->m3_fds += arm;
        c->m3_combo += chin || tonic || arm;
    }
    for (int m = 0; m < RT_MINIS2_PER_EPOCH; m++) {
        long s0 = t + 2 * m;
        if (exclude && span_excluded(plan, s0, 2))
            continue;
        c->m2++;
        c->m2_chin += span_holds(plan, SYNTH_CHIN, s0, 2, SYNTH_HOLD_MONTREAL);
    }
    if (ep_excl)
        return;
    c->epochs++;
    c->ep_tonic += tonic;
    c->ep_aasm_tonic += aasm_tonic;
    c->ep_aasm_unsure += tonic && to_nrem >= SYNTH_AASM_UNSURE_LO && to_nrem <= SYNTH_AASM_UNSURE_HI;
    c->ep_phasic_chin += n_chin >= 5;
    c->ep_phasic_any += n_any >= 5;
    c->ep_rswa += aasm_tonic || n_any >= 5;
    /* SINBAR 30-s epochs: at least 5 of 10 active mini-epochs, the AASM
     * convention (Frauscher et al. 2014, Sleep 37:763; docs/scoring.md) */
    c->ep_combo += combo >= 5;
}

static void count_rai(const synth_plan *plan, const synth_bout *bout, int exclude, counts *c)
{
    long t0 = (long)bout->first_epoch * RT_EPOCH_WHOLE_S;
    long len = (long)bout->epochs * RT_EPOCH_WHOLE_S;
    double *v = designed_chin_uv(plan, bout);
    if (!v) {
        c->secs = -1; /* reported as null rather than a wrong value */
        return;
    }
    for (long j = 0; j < len; j++) {
        long k0 = j - 30 < 0 ? 0 : j - 30;
        long k1 = j + 29 > len - 1 ? len - 1 : j + 29;
        double lo = v[k0];
        for (long k = k0 + 1; k <= k1; k++)
            lo = v[k] < lo ? v[k] : lo;
        double d = v[j] - lo;
        if (exclude && plan->sec_excluded[t0 + j])
            continue;
        if (c->secs < 0)
            continue;
        c->secs++;
        c->rai_p1 += d <= 1.0;
        c->rai_p2 += d > 1.0 && d <= 2.0;
    }
    free(v);
}

void rt_synth_indices_compute(const synth_plan *plan, int exclude_events, synth_indices *out)
{
    counts c;
    memset(&c, 0, sizeof c);
    double nrem_min = nrem_chin_min_uv(plan);
    for (int b = 0; b < plan->n_bouts; b++) {
        const synth_bout *bout = &plan->bouts[b];
        for (int e = bout->first_epoch; e < bout->first_epoch + bout->epochs; e++)
            count_epoch(plan, e, exclude_events, nrem_min, &c);
        long t0 = (long)bout->first_epoch * RT_EPOCH_WHOLE_S;
        long n_win = (long)bout->epochs * RT_EPOCH_WHOLE_S / 20;
        for (long w = 0; w < n_win; w++) {
            if (exclude_events && span_excluded(plan, t0 + 20 * w, 20))
                continue;
            c.w20++;
            c.w20_tonic += span_tonic(plan, t0 + 20 * w, 20);
        }
        count_rai(plan, bout, exclude_events, &c);
    }
    out->aasm_tonic_chin_epochs = percent(c.ep_aasm_tonic, c.epochs);
    out->aasm_tonic_unsure_epochs = percent(c.ep_aasm_unsure, c.epochs);
    out->aasm_phasic_chin_epochs = percent(c.ep_phasic_chin, c.epochs);
    out->aasm_phasic_any_epochs = percent(c.ep_phasic_any, c.epochs);
    out->aasm_rswa_epochs = percent(c.ep_rswa, c.epochs);
    out->sinbar_chin_phasic_3s = percent(c.m3_chin, c.m3);
    out->sinbar_chin_any_3s = percent(c.m3_chin_any, c.m3);
    out->sinbar_chin_tonic_30s = percent(c.ep_tonic, c.epochs);
    out->sinbar_fds_phasic_3s = percent(c.m3_fds, c.m3);
    out->sinbar_chin_any_fds_phasic_3s = percent(c.m3_combo, c.m3);
    out->sinbar_chin_any_fds_phasic_30s = percent(c.ep_combo, c.epochs);
    out->montreal_tonic_chin = percent(c.w20_tonic, c.w20);
    out->montreal_phasic_chin = percent(c.m2_chin, c.m2);
    double p1 = percent(c.rai_p1, c.secs), p2 = percent(c.rai_p2, c.secs);
    out->rai = c.secs > 0 && p2 < 100.0 ? p1 / (100.0 - p2) : NAN;
}

/* The builders below store every value through json_build.h and clear *ok
 * when jansson runs out of memory; the caller releases the tree then. */
static json_t *number(double x)
{
    return isfinite(x) ? json_real(x) : json_null();
}

static json_t *indices_json(const synth_indices *ix, bool *ok)
{
    json_t *aasm = json_object(), *sinbar = json_object(), *montreal = json_object();
    rt_json_set(aasm, "tonic_chin_epochs", number(ix->aasm_tonic_chin_epochs), ok);
    rt_json_set(aasm, "phasic_chin_epochs", number(ix->aasm_phasic_chin_epochs), ok);
    rt_json_set(aasm, "phasic_any_epochs", number(ix->aasm_phasic_any_epochs), ok);
    rt_json_set(aasm, "rswa_epochs", number(ix->aasm_rswa_epochs), ok);
    rt_json_set(aasm, "tonic_unsure_epochs", number(ix->aasm_tonic_unsure_epochs), ok);
    rt_json_set(sinbar, "chin_phasic_3s", number(ix->sinbar_chin_phasic_3s), ok);
    rt_json_set(sinbar, "chin_any_3s", number(ix->sinbar_chin_any_3s), ok);
    rt_json_set(sinbar, "chin_tonic_30s", number(ix->sinbar_chin_tonic_30s), ok);
    rt_json_set(sinbar, "fds_phasic_3s", number(ix->sinbar_fds_phasic_3s), ok);
    rt_json_set(sinbar, "chin_any_fds_phasic_3s", number(ix->sinbar_chin_any_fds_phasic_3s), ok);
    rt_json_set(sinbar, "chin_any_fds_phasic_30s", number(ix->sinbar_chin_any_fds_phasic_30s), ok);
    rt_json_set(montreal, "tonic_chin", number(ix->montreal_tonic_chin), ok);
    rt_json_set(montreal, "phasic_chin", number(ix->montreal_phasic_chin), ok);
    json_t *o = json_object();
    rt_json_set(o, "aasm", aasm, ok);
    rt_json_set(o, "sinbar", sinbar, ok);
    rt_json_set(o, "montreal", montreal, ok);
    rt_json_set(o, "rai", number(ix->rai), ok);
    return o;
}

static json_t *minis_json(const synth_plan *plan, bool *ok)
{
    json_t *minis = json_array();
    for (int b = 0; b < plan->n_bouts; b++) {
        const synth_bout *bout = &plan->bouts[b];
        for (int e = bout->first_epoch; e < bout->first_epoch + bout->epochs; e++)
            for (int m = 0; m < RT_MINIS3_PER_EPOCH; m++) {
                long s0 = (long)e * RT_EPOCH_WHOLE_S + 3 * m;
                json_t *o = json_object(), *phasic = json_array(), *tonic = json_array();
                json_t *aasm = json_array(), *sinbar = json_array();
                for (int r = 0; r < SYNTH_ROLES; r++) {
                    if (span_holds(plan, r, s0, 3, SYNTH_HOLD_ANY))
                        rt_json_push(phasic, json_string(rt_synth_role_name(r)), ok);
                    if (span_holds(plan, r, s0, 3, SYNTH_HOLD_AASM))
                        rt_json_push(aasm, json_string(rt_synth_role_name(r)), ok);
                    if (span_holds(plan, r, s0, 3, SYNTH_HOLD_SINBAR))
                        rt_json_push(sinbar, json_string(rt_synth_role_name(r)), ok);
                }
                if (plan->tonic[e])
                    rt_json_push(tonic, json_string(rt_synth_role_name(SYNTH_CHIN)), ok);
                rt_json_set(o, "epoch", json_integer(e), ok);
                rt_json_set(o, "mini", json_integer(m), ok);
                rt_json_set(o, "onset_s", json_integer(s0), ok);
                rt_json_set(o, "phasic", phasic, ok);
                rt_json_set(o, "phasic_aasm", aasm, ok);
                rt_json_set(o, "phasic_sinbar", sinbar, ok);
                rt_json_set(o, "tonic", tonic, ok);
                rt_json_set(o, "excluded", json_boolean(span_excluded(plan, s0, 3)), ok);
                rt_json_push(minis, o, ok);
            }
    }
    return minis;
}

/* Exactly what rt_synth_artifact_uv and rt_synth_chin_override add; a
 * switched-off artifact is null. */
static json_t *artifacts_json(const synth_plan *plan, bool *ok)
{
    const rt_synth_options *o = &plan->opt;
    json_t *a = json_object();
    if (o->mains_hz > 0.0 && o->mains_uv > 0.0) {
        json_t *m = json_object(), *comp = json_array(), *chs = json_array();
        rt_json_set(m, "line_hz", number(o->mains_hz), ok);
        double amp = o->mains_uv;
        for (int h = 1; h <= 1 + o->mains_harmonics; h++, amp *= 0.5) {
            json_t *c = json_object();
            rt_json_set(c, "hz", number(o->mains_hz * h), ok);
            rt_json_set(c, "amplitude_uv", number(amp), ok);
            rt_json_push(comp, c, ok);
        }
        rt_json_set(m, "components", comp, ok);
        json_t *dropped = json_array();
        for (int h = 1; h <= 1 + o->mains_harmonics; h++)
            for (int r = 0; r < SYNTH_ROLES; r++)
                if (!rt_synth_mains_reaches(plan, r, h)) {
                    json_t *d = json_object();
                    rt_json_set(d, "hz", number(o->mains_hz * h), ok);
                    rt_json_set(d, "role", json_string(rt_synth_role_name(r)), ok);
                    rt_json_push(dropped, d, ok);
                }
        rt_json_set(m, "dropped", dropped, ok);
        rt_json_set(m, "phase", json_string("sine from 0 at the recording start"), ok);
        for (int r = 0; r < SYNTH_ROLES; r++)
            rt_json_push(chs, json_string(rt_synth_role_name(r)), ok);
        rt_json_set(m, "roles", chs, ok);
        rt_json_set(a, "mains", m, ok);
    } else {
        rt_json_set(a, "mains", json_null(), ok);
    }
    json_t *ecg = json_object(), *beats = json_array();
    rt_json_set(ecg, "heart_rate_bpm", number(rt_synth_heart_rate_bpm(o)), ok);
    rt_json_set(ecg, "chin_r_uv", number(o->ecg_bleed_uv), ok);
    rt_json_set(ecg, "limb_r_uv", number(o->ecg_bleed_limb_uv), ok);
    for (size_t k = 0; k < plan->n_beats; k++) {
        double t = (double)plan->beats[k] / SYNTH_ECG_RATE_HZ;
        if (t < (double)plan->n_seconds)
            rt_json_push(beats, number(t), ok);
    }
    rt_json_set(ecg, "r_s", beats, ok);
    rt_json_set(a, "ecg", ecg, ok);
    if (o->clip_duration_s > 0.0) {
        json_t *c = json_object();
        rt_json_set(c, "role", json_string(rt_synth_role_name(SYNTH_CHIN)), ok);
        rt_json_set(c, "start_s", number(o->clip_start_s), ok);
        rt_json_set(c, "end_s", number(o->clip_start_s + o->clip_duration_s), ok);
        rt_json_set(c, "swing_uv", number(SYNTH_CLIP_SWING_UV), ok);
        rt_json_set(c, "swing_hz", number(SYNTH_CLIP_SWING_HZ), ok);
        rt_json_set(c, "range_uv", number(rt_synth_emg_range_uv(plan)), ok);
        rt_json_set(a, "clipping", c, ok);
    } else {
        rt_json_set(a, "clipping", json_null(), ok);
    }
    if (o->detach_s > 0.0) {
        json_t *d = json_object();
        rt_json_set(d, "role", json_string(rt_synth_role_name(SYNTH_CHIN)), ok);
        rt_json_set(d, "from_s", number(o->detach_s), ok);
        rt_json_set(d, "value_uv", number(0.0), ok);
        rt_json_set(a, "detached", d, ok);
    } else {
        rt_json_set(a, "detached", json_null(), ok);
    }
    json_t *pops = json_array();
    for (size_t i = 0; i < plan->n_pops; i++) {
        json_t *p = json_object();
        rt_json_set(p, "role", json_string(rt_synth_role_name(SYNTH_CHIN)), ok);
        rt_json_set(p, "onset_s", number(plan->pops[i].onset_s), ok);
        rt_json_set(p, "amplitude_uv", number(plan->pops[i].amplitude_uv), ok);
        rt_json_set(p, "tau_s", number(plan->pops[i].tau_s), ok);
        rt_json_push(pops, p, ok);
    }
    rt_json_set(a, "pops", pops, ok);
    return a;
}

/* The 3-s or 2-s minis (onsets) that [a, b) overlaps. */
static json_t *minis_of(double a, double b, int len, bool *ok)
{
    json_t *v = json_array();
    for (long m = (long)floor(a / len); (double)(m * len) < b; m++)
        rt_json_push(v, json_integer(m * len), ok);
    return v;
}

/* The mean drift gain over [a, b] (exactly 1 without drift). */
static double mean_gain(const synth_plan *plan, double a, double b)
{
    return plan->drift_per_s == 0.0 ? 1.0 : rt_synth_gain_integral(plan, a, b) / (b - a);
}

/* Every placed burst: where, how long, how loud (rect_uv before drift,
 * ratio to its background, mean gain over it), which rules count it and
 * which 3-s and 2-s minis it marks. */
static json_t *bursts_json(const synth_plan *plan, bool *ok)
{
    json_t *bursts = json_array();
    for (size_t i = 0; i < plan->n_bursts; i++) {
        const synth_burst *b = &plan->bursts[i];
        double end = b->onset_s + b->duration_s;
        json_t *o = json_object(), *by_rule = json_object();
        rt_json_set(o, "role", json_string(rt_synth_role_name(b->role)), ok);
        rt_json_set(o, "onset_s", number(b->onset_s), ok);
        rt_json_set(o, "duration_s", number(b->duration_s), ok);
        rt_json_set(o, "rect_uv", number(b->rect_uv), ok);
        rt_json_set(o, "arousal_bound", json_boolean(b->arousal_bound), ok);
        rt_json_set(o, "ratio", number(b->ratio), ok);
        rt_json_set(o, "gain", number(mean_gain(plan, b->onset_s, end)), ok);
        unsigned rules = rt_synth_burst_rules(b);
        for (int r = 0; r < SYNTH_RULES; r++)
            rt_json_set(by_rule, rt_synth_rule(r)->name, json_boolean(rules >> r & 1u), ok);
        rt_json_set(o, "counts", by_rule, ok);
        rt_json_set(o, "minis_3s", minis_of(b->onset_s, end, 3, ok), ok);
        rt_json_set(o, "minis_2s", minis_of(b->onset_s, end, 2, ok), ok);
        rt_json_push(bursts, o, ok);
    }
    return bursts;
}

/* Every tonic stretch; montreal_half_windows lists the 20-s windows (tiled
 * from the bout start) that the stretch covers by exactly half: not tonic by
 * either definition (> 50 % or whole), but a measurement can fall either way. */
static json_t *tonics_json(const synth_plan *plan, bool *ok)
{
    json_t *tonics = json_array();
    for (size_t i = 0; i < plan->n_tonics; i++) {
        const synth_tonic *t = &plan->tonics[i];
        json_t *o = json_object(), *half = json_array();
        rt_json_set(o, "role", json_string(rt_synth_role_name(SYNTH_CHIN)), ok);
        rt_json_set(o, "onset_s", number(t->onset_s), ok);
        rt_json_set(o, "duration_s", number(t->duration_s), ok);
        rt_json_set(o, "rect_uv", number(t->rect_uv), ok);
        rt_json_set(o, "ratio", number(t->ratio), ok);
        rt_json_set(o, "bout", json_integer(t->bout), ok);
        rt_json_set(o, "source", json_string(SYNTH_TONIC_SOURCE_NAMES[t->source]), ok);
        rt_json_set(o, "gain_start", number(rt_synth_gain(plan, t->onset_s)), ok);
        rt_json_set(o, "gain_end", number(rt_synth_gain(plan, t->onset_s + t->duration_s)), ok);
        if (t->bout >= 0) {
            const synth_bout *bout = &plan->bouts[t->bout];
            double b0 = (double)bout->first_epoch * RT_EPOCH_WHOLE_S;
            long n_win = (long)bout->epochs * RT_EPOCH_WHOLE_S / 20;
            for (long w = 0; w < n_win; w++) {
                double w0 = b0 + 20.0 * (double)w;
                double cover = fmin(w0 + 20.0, t->onset_s + t->duration_s) - fmax(w0, t->onset_s);
                if (cover == 10.0)
                    rt_json_push(half, number(w0), ok);
            }
        }
        rt_json_set(o, "montreal_half_windows", half, ok);
        rt_json_push(tonics, o, ok);
    }
    return tonics;
}

/* The difficulty switches as used, and what they set. */
static json_t *difficulty_json(const synth_plan *plan, bool *ok)
{
    const rt_synth_options *o = &plan->opt;
    json_t *d = json_object(), *rates = json_object(), *rules = json_object(), *singles = json_array();
    rt_json_set(d, "tonic_run_epochs", json_integer(o->tonic_run_epochs), ok);
    rt_json_set(d, "tonic_whole_bout", json_integer(o->tonic_whole_bout), ok);
    rt_json_set(d, "tonic_ratio", o->tonic_ratio > 0.0 ? number(o->tonic_ratio) : json_null(), ok);
    rt_json_set(d, "drift_end", number(o->drift_end > 0.0 ? o->drift_end : 1.0), ok);
    rt_json_set(d, "drift_law", json_string("gain(t) = drift_end ^ (t / night_s)"), ok);
    rt_json_set(d, "night_s", json_integer(plan->n_seconds), ok);
    rt_json_set(d, "chin_rem_scale", number(plan->chin_rem_scale), ok);
    rt_json_set(d, "short_bursts", json_boolean(o->short_bursts), ok);
    double lo, hi;
    rt_synth_burst_ratio_range(o, &lo, &hi);
    json_t *range = json_array();
    rt_json_push(range, number(lo), ok);
    rt_json_push(range, number(hi), ok);
    rt_json_set(d, "burst_ratio", range, ok);
    for (int i = 0; i < plan->n_single; i++)
        rt_json_push(singles, json_integer(plan->single_epochs[i]), ok);
    rt_json_set(d, "single_epoch_bouts", singles, ok);
    for (int r = 0; r < SYNTH_ROLES; r++)
        rt_json_set(rates, rt_synth_role_name(r), json_integer(plan->emg_rate_hz[r]), ok);
    rt_json_set(d, "emg_rate_hz", rates, ok);
    rt_json_set(d, "mixed_rates", json_boolean(o->mixed_rates), ok);
    rt_json_set(d, "emg_range_uv", number(rt_synth_emg_range_uv(plan)), ok);
    if (o->spiky) {
        json_t *sp = json_object(), *scale = json_object();
        rt_json_set(sp, "model", json_string("motor-unit spike trains plus Gaussian noise"), ok);
        rt_json_set(sp, "units_per_channel", json_integer(SYNTH_SPIKY_UNITS), ok);
        rt_json_set(sp, "scale_method", json_string("calibration run, 600 s, fixed seed"), ok);
        for (int r = 0; r < SYNTH_ROLES; r++)
            rt_json_set(scale, rt_synth_role_name(r), number(plan->spiky[r].scale), ok);
        rt_json_set(sp, "scale", scale, ok);
        rt_json_set(d, "spiky", sp, ok);
    } else {
        rt_json_set(d, "spiky", json_null(), ok);
    }
    for (int r = 0; r < SYNTH_RULES; r++) {
        const synth_rule *ru = rt_synth_rule(r);
        json_t *x = json_object();
        rt_json_set(x, "k", number(ru->k), ok);
        rt_json_set(x, "min_s", number(ru->min_s), ok);
        rt_json_set(x, "max_s", number(ru->max_s), ok);
        rt_json_set(rules, ru->name, x, ok);
    }
    rt_json_set(d, "rules", rules, ok);
    return d;
}

static json_t *truth_json(const synth_plan *plan, bool *ok)
{
    json_t *root = json_object();
    rt_json_set(root, "schema", json_string("remtone-truth/1"), ok);
    rt_json_set(root, "profile", json_string(rt_synth_profile_name(plan->opt.profile)), ok);
    /* Seeds above INT64_MAX do not fit a JSON integer in jansson; they are
     * written as decimal strings. */
    if (plan->opt.seed <= (uint64_t)INT64_MAX) {
        rt_json_set(root, "seed", json_integer((json_int_t)plan->opt.seed), ok);
    } else {
        char buf[32];
        snprintf(buf, sizeof buf, "%llu", (unsigned long long)plan->opt.seed);
        rt_json_set(root, "seed", json_string(buf), ok);
    }
    rt_json_set(root, "hours", number(plan->opt.hours), ok);
    rt_json_set(root, "epoch_s", json_integer(RT_EPOCH_WHOLE_S), ok);

    json_t *ch = json_object();
    for (int r = 0; r < SYNTH_ROLES; r++)
        rt_json_set(ch, rt_synth_role_name(r), json_string(rt_synth_emg_label(r)), ok);
    rt_json_set(ch, "ecg", json_string("ECG"), ok);
    rt_json_set(root, "channels", ch, ok);

    int rem_epochs = 0;
    json_t *bouts = json_array();
    for (int b = 0; b < plan->n_bouts; b++) {
        json_t *o = json_object();
        rt_json_set(o, "first_epoch", json_integer(plan->bouts[b].first_epoch), ok);
        rt_json_set(o, "epochs", json_integer(plan->bouts[b].epochs), ok);
        rt_json_set(o, "chin_bg_uv", number(plan->bouts[b].chin_bg_uv), ok);
        rt_json_push(bouts, o, ok);
        rem_epochs += plan->bouts[b].epochs;
    }
    json_t *rem = json_object();
    rt_json_set(rem, "epochs", json_integer(rem_epochs), ok);
    rt_json_set(rem, "minutes", number(rem_epochs * 0.5), ok);
    rt_json_set(rem, "bouts", bouts, ok);
    rt_json_set(root, "rem", rem, ok);

    rt_json_set(root, "bursts", bursts_json(plan, ok), ok);
    rt_json_set(root, "tonic", tonics_json(plan, ok), ok);

    json_t *events = json_array();
    for (size_t i = 0; i < plan->n_events; i++) {
        json_t *o = json_object();
        rt_json_set(o, "type", json_string(rt_synth_event_name(plan->events[i].type)), ok);
        rt_json_set(o, "start_s", json_integer(plan->events[i].start_s), ok);
        rt_json_set(o, "duration_s", json_integer(plan->events[i].duration_s), ok);
        rt_json_push(events, o, ok);
    }
    rt_json_set(root, "events", events, ok);
    rt_json_set(root, "artifacts", artifacts_json(plan, ok), ok);
    rt_json_set(root, "difficulty", difficulty_json(plan, ok), ok);
    rt_json_set(root, "minis_3s", minis_json(plan, ok), ok);

    synth_indices ix, ix_ex;
    rt_synth_indices_compute(plan, 0, &ix);
    rt_synth_indices_compute(plan, 1, &ix_ex);
    rt_json_set(root, "indices", indices_json(&ix, ok), ok);
    rt_json_set(root, "indices_events_excluded", indices_json(&ix_ex, ok), ok);
    return root;
}

rt_status rt_synth_write_truth(const synth_plan *plan, const char *path, rt_error *err)
{
    bool ok = true;
    json_t *root = rt_json_done(truth_json(plan, &ok), ok);
    if (!root)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory building the truth", path);
    /* 12 significant digits: exact for the 1-ms / 0.001-uV grid of the
     * placement, and stable across platforms. */
    rt_status st = rt_json_write(root, path, JSON_INDENT(1) | JSON_REAL_PRECISION(12), err);
    json_decref(root);
    return st;
}
