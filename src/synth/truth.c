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
        if (!plan->tonic[s / SYNTH_EPOCH_S])
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
    long t0 = (long)bout->first_epoch * SYNTH_EPOCH_S;
    long len = (long)bout->epochs * SYNTH_EPOCH_S;
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
        double base = plan->tonic[s / SYNTH_EPOCH_S] ? plan->tonic_uv[s / SYNTH_EPOCH_S] : bout->chin_bg_uv;
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
    return level * rt_synth_gain(plan, ((double)e + 0.5) * SYNTH_EPOCH_S);
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
    long t = (long)e * SYNTH_EPOCH_S;
    int ep_excl = exclude && span_excluded(plan, t, SYNTH_EPOCH_S);
    int tonic = plan->tonic[e];
    /* AASM tonic: the sustained tone must also be greater than the NREM
     * minimum (no NREM at all: nothing to compare it with, not counted) */
    double to_nrem = tonic ? chin_level_uv(plan, e) / nrem_min_uv : 0.0;
    int aasm_tonic = tonic && to_nrem > 1.0;
    int n_chin = 0, n_any = 0, combo = 0;
    for (int m = 0; m < 10; m++) {
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
    for (int m = 0; m < 15; m++) {
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
    long t0 = (long)bout->first_epoch * SYNTH_EPOCH_S;
    long len = (long)bout->epochs * SYNTH_EPOCH_S;
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
        long t0 = (long)bout->first_epoch * SYNTH_EPOCH_S;
        long n_win = (long)bout->epochs * SYNTH_EPOCH_S / 20;
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

/* Builders below return NULL only when jansson runs out of memory; the
 * caller checks the finished tree once. */
static json_t *number(double x)
{
    return isfinite(x) ? json_real(x) : json_null();
}

static json_t *indices_json(const synth_indices *ix)
{
    json_t *aasm = json_object(), *sinbar = json_object(), *montreal = json_object();
    json_object_set_new(aasm, "tonic_chin_epochs", number(ix->aasm_tonic_chin_epochs));
    json_object_set_new(aasm, "phasic_chin_epochs", number(ix->aasm_phasic_chin_epochs));
    json_object_set_new(aasm, "phasic_any_epochs", number(ix->aasm_phasic_any_epochs));
    json_object_set_new(aasm, "rswa_epochs", number(ix->aasm_rswa_epochs));
    json_object_set_new(aasm, "tonic_unsure_epochs", number(ix->aasm_tonic_unsure_epochs));
    json_object_set_new(sinbar, "chin_phasic_3s", number(ix->sinbar_chin_phasic_3s));
    json_object_set_new(sinbar, "chin_any_3s", number(ix->sinbar_chin_any_3s));
    json_object_set_new(sinbar, "chin_tonic_30s", number(ix->sinbar_chin_tonic_30s));
    json_object_set_new(sinbar, "fds_phasic_3s", number(ix->sinbar_fds_phasic_3s));
    json_object_set_new(sinbar, "chin_any_fds_phasic_3s", number(ix->sinbar_chin_any_fds_phasic_3s));
    json_object_set_new(sinbar, "chin_any_fds_phasic_30s", number(ix->sinbar_chin_any_fds_phasic_30s));
    json_object_set_new(montreal, "tonic_chin", number(ix->montreal_tonic_chin));
    json_object_set_new(montreal, "phasic_chin", number(ix->montreal_phasic_chin));
    json_t *o = json_object();
    json_object_set_new(o, "aasm", aasm);
    json_object_set_new(o, "sinbar", sinbar);
    json_object_set_new(o, "montreal", montreal);
    json_object_set_new(o, "rai", number(ix->rai));
    return o;
}

static json_t *minis_json(const synth_plan *plan)
{
    json_t *minis = json_array();
    for (int b = 0; b < plan->n_bouts; b++) {
        const synth_bout *bout = &plan->bouts[b];
        for (int e = bout->first_epoch; e < bout->first_epoch + bout->epochs; e++)
            for (int m = 0; m < 10; m++) {
                long s0 = (long)e * SYNTH_EPOCH_S + 3 * m;
                json_t *o = json_object(), *phasic = json_array(), *tonic = json_array();
                json_t *aasm = json_array(), *sinbar = json_array();
                for (int r = 0; r < SYNTH_ROLES; r++) {
                    if (span_holds(plan, r, s0, 3, SYNTH_HOLD_ANY))
                        json_array_append_new(phasic, json_string(rt_synth_role_name(r)));
                    if (span_holds(plan, r, s0, 3, SYNTH_HOLD_AASM))
                        json_array_append_new(aasm, json_string(rt_synth_role_name(r)));
                    if (span_holds(plan, r, s0, 3, SYNTH_HOLD_SINBAR))
                        json_array_append_new(sinbar, json_string(rt_synth_role_name(r)));
                }
                if (plan->tonic[e])
                    json_array_append_new(tonic, json_string(rt_synth_role_name(SYNTH_CHIN)));
                json_object_set_new(o, "epoch", json_integer(e));
                json_object_set_new(o, "mini", json_integer(m));
                json_object_set_new(o, "onset_s", json_integer(s0));
                json_object_set_new(o, "phasic", phasic);
                json_object_set_new(o, "phasic_aasm", aasm);
                json_object_set_new(o, "phasic_sinbar", sinbar);
                json_object_set_new(o, "tonic", tonic);
                json_object_set_new(o, "excluded", json_boolean(span_excluded(plan, s0, 3)));
                json_array_append_new(minis, o);
            }
    }
    return minis;
}

/* Exactly what rt_synth_artifact_uv and rt_synth_chin_override add; a
 * switched-off artifact is null. */
static json_t *artifacts_json(const synth_plan *plan)
{
    const rt_synth_options *o = &plan->opt;
    json_t *a = json_object();
    static const char *const emg[SYNTH_ROLES] = {"chin", "arm-left", "arm-right", "leg-left", "leg-right"};
    if (o->mains_hz > 0.0 && o->mains_uv > 0.0) {
        json_t *m = json_object(), *comp = json_array(), *chs = json_array();
        json_object_set_new(m, "line_hz", json_real(o->mains_hz));
        double amp = o->mains_uv;
        for (int h = 1; h <= 1 + o->mains_harmonics; h++, amp *= 0.5) {
            json_t *c = json_object();
            json_object_set_new(c, "hz", json_real(o->mains_hz * h));
            json_object_set_new(c, "amplitude_uv", json_real(amp));
            json_array_append_new(comp, c);
        }
        json_object_set_new(m, "components", comp);
        json_t *dropped = json_array();
        for (int h = 1; h <= 1 + o->mains_harmonics; h++)
            for (int r = 0; r < SYNTH_ROLES; r++)
                if (!rt_synth_mains_reaches(plan, r, h)) {
                    json_t *d = json_object();
                    json_object_set_new(d, "hz", json_real(o->mains_hz * h));
                    json_object_set_new(d, "role", json_string(rt_synth_role_name(r)));
                    json_array_append_new(dropped, d);
                }
        json_object_set_new(m, "dropped", dropped);
        json_object_set_new(m, "phase", json_string("sine from 0 at the recording start"));
        for (int r = 0; r < SYNTH_ROLES; r++)
            json_array_append_new(chs, json_string(emg[r]));
        json_object_set_new(m, "roles", chs);
        json_object_set_new(a, "mains", m);
    } else {
        json_object_set_new(a, "mains", json_null());
    }
    json_t *ecg = json_object(), *beats = json_array();
    json_object_set_new(ecg, "heart_rate_bpm", json_real(rt_synth_heart_rate_bpm(o)));
    json_object_set_new(ecg, "chin_r_uv", json_real(o->ecg_bleed_uv));
    json_object_set_new(ecg, "limb_r_uv", json_real(o->ecg_bleed_limb_uv));
    for (size_t k = 0; k < plan->n_beats; k++) {
        double t = (double)plan->beats[k] / SYNTH_ECG_RATE_HZ;
        if (t < (double)plan->n_seconds)
            json_array_append_new(beats, json_real(t));
    }
    json_object_set_new(ecg, "r_s", beats);
    json_object_set_new(a, "ecg", ecg);
    if (o->clip_duration_s > 0.0) {
        json_t *c = json_object();
        json_object_set_new(c, "role", json_string("chin"));
        json_object_set_new(c, "start_s", json_real(o->clip_start_s));
        json_object_set_new(c, "end_s", json_real(o->clip_start_s + o->clip_duration_s));
        json_object_set_new(c, "swing_uv", json_real(SYNTH_CLIP_SWING_UV));
        json_object_set_new(c, "swing_hz", json_real(SYNTH_CLIP_SWING_HZ));
        json_object_set_new(c, "range_uv", json_real(rt_synth_emg_range_uv(plan)));
        json_object_set_new(a, "clipping", c);
    } else {
        json_object_set_new(a, "clipping", json_null());
    }
    if (o->detach_s > 0.0) {
        json_t *d = json_object();
        json_object_set_new(d, "role", json_string("chin"));
        json_object_set_new(d, "from_s", json_real(o->detach_s));
        json_object_set_new(d, "value_uv", json_real(0.0));
        json_object_set_new(a, "detached", d);
    } else {
        json_object_set_new(a, "detached", json_null());
    }
    json_t *pops = json_array();
    for (size_t i = 0; i < plan->n_pops; i++) {
        json_t *p = json_object();
        json_object_set_new(p, "role", json_string("chin"));
        json_object_set_new(p, "onset_s", json_real(plan->pops[i].onset_s));
        json_object_set_new(p, "amplitude_uv", json_real(plan->pops[i].amplitude_uv));
        json_object_set_new(p, "tau_s", json_real(plan->pops[i].tau_s));
        json_array_append_new(pops, p);
    }
    json_object_set_new(a, "pops", pops);
    return a;
}

/* The 3-s or 2-s minis (onsets) that [a, b) overlaps. */
static json_t *minis_of(double a, double b, int len)
{
    json_t *v = json_array();
    for (long m = (long)floor(a / len); (double)(m * len) < b; m++)
        json_array_append_new(v, json_integer(m * len));
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
static json_t *bursts_json(const synth_plan *plan)
{
    json_t *bursts = json_array();
    for (size_t i = 0; i < plan->n_bursts; i++) {
        const synth_burst *b = &plan->bursts[i];
        double end = b->onset_s + b->duration_s;
        json_t *o = json_object(), *by_rule = json_object();
        json_object_set_new(o, "role", json_string(rt_synth_role_name(b->role)));
        json_object_set_new(o, "onset_s", json_real(b->onset_s));
        json_object_set_new(o, "duration_s", json_real(b->duration_s));
        json_object_set_new(o, "rect_uv", json_real(b->rect_uv));
        json_object_set_new(o, "arousal_bound", json_boolean(b->arousal_bound));
        json_object_set_new(o, "ratio", json_real(b->ratio));
        json_object_set_new(o, "gain", json_real(mean_gain(plan, b->onset_s, end)));
        unsigned rules = rt_synth_burst_rules(b);
        for (int r = 0; r < SYNTH_RULES; r++)
            json_object_set_new(by_rule, rt_synth_rule(r)->name, json_boolean(rules >> r & 1u));
        json_object_set_new(o, "counts", by_rule);
        json_object_set_new(o, "minis_3s", minis_of(b->onset_s, end, 3));
        json_object_set_new(o, "minis_2s", minis_of(b->onset_s, end, 2));
        json_array_append_new(bursts, o);
    }
    return bursts;
}

/* Every tonic stretch; montreal_half_windows lists the 20-s windows (tiled
 * from the bout start) that the stretch covers by exactly half: not tonic by
 * either definition (> 50 % or whole), but a measurement can fall either way. */
static json_t *tonics_json(const synth_plan *plan)
{
    static const char *const sources[] = {"profile", "run", "whole-bout"};
    json_t *tonics = json_array();
    for (size_t i = 0; i < plan->n_tonics; i++) {
        const synth_tonic *t = &plan->tonics[i];
        json_t *o = json_object(), *half = json_array();
        json_object_set_new(o, "role", json_string(rt_synth_role_name(SYNTH_CHIN)));
        json_object_set_new(o, "onset_s", json_real(t->onset_s));
        json_object_set_new(o, "duration_s", json_real(t->duration_s));
        json_object_set_new(o, "rect_uv", json_real(t->rect_uv));
        json_object_set_new(o, "ratio", json_real(t->ratio));
        json_object_set_new(o, "bout", json_integer(t->bout));
        json_object_set_new(o, "source", json_string(sources[t->source]));
        json_object_set_new(o, "gain_start", json_real(rt_synth_gain(plan, t->onset_s)));
        json_object_set_new(o, "gain_end", json_real(rt_synth_gain(plan, t->onset_s + t->duration_s)));
        if (t->bout >= 0) {
            const synth_bout *bout = &plan->bouts[t->bout];
            double b0 = (double)bout->first_epoch * SYNTH_EPOCH_S;
            long n_win = (long)bout->epochs * SYNTH_EPOCH_S / 20;
            for (long w = 0; w < n_win; w++) {
                double w0 = b0 + 20.0 * (double)w;
                double cover = fmin(w0 + 20.0, t->onset_s + t->duration_s) - fmax(w0, t->onset_s);
                if (cover == 10.0)
                    json_array_append_new(half, json_real(w0));
            }
        }
        json_object_set_new(o, "montreal_half_windows", half);
        json_array_append_new(tonics, o);
    }
    return tonics;
}

/* The difficulty switches as used, and what they set. */
static json_t *difficulty_json(const synth_plan *plan)
{
    const rt_synth_options *o = &plan->opt;
    json_t *d = json_object(), *rates = json_object(), *rules = json_object(), *singles = json_array();
    json_object_set_new(d, "tonic_run_epochs", json_integer(o->tonic_run_epochs));
    json_object_set_new(d, "tonic_whole_bout", json_integer(o->tonic_whole_bout));
    json_object_set_new(d, "tonic_ratio", o->tonic_ratio > 0.0 ? json_real(o->tonic_ratio) : json_null());
    json_object_set_new(d, "drift_end", json_real(o->drift_end > 0.0 ? o->drift_end : 1.0));
    json_object_set_new(d, "drift_law", json_string("gain(t) = drift_end ^ (t / night_s)"));
    json_object_set_new(d, "night_s", json_integer(plan->n_seconds));
    json_object_set_new(d, "chin_rem_scale", json_real(plan->chin_rem_scale));
    json_object_set_new(d, "short_bursts", json_boolean(o->short_bursts));
    double lo, hi;
    rt_synth_burst_ratio_range(o, &lo, &hi);
    json_t *range = json_array();
    json_array_append_new(range, json_real(lo));
    json_array_append_new(range, json_real(hi));
    json_object_set_new(d, "burst_ratio", range);
    for (int i = 0; i < plan->n_single; i++)
        json_array_append_new(singles, json_integer(plan->single_epochs[i]));
    json_object_set_new(d, "single_epoch_bouts", singles);
    for (int r = 0; r < SYNTH_ROLES; r++)
        json_object_set_new(rates, rt_synth_role_name(r), json_integer(plan->emg_rate_hz[r]));
    json_object_set_new(d, "emg_rate_hz", rates);
    json_object_set_new(d, "mixed_rates", json_boolean(o->mixed_rates));
    json_object_set_new(d, "emg_range_uv", json_real(rt_synth_emg_range_uv(plan)));
    if (o->spiky) {
        json_t *sp = json_object(), *scale = json_object();
        json_object_set_new(sp, "model", json_string("motor-unit spike trains plus Gaussian noise"));
        json_object_set_new(sp, "units_per_channel", json_integer(SYNTH_SPIKY_UNITS));
        json_object_set_new(sp, "scale_method", json_string("calibration run, 600 s, fixed seed"));
        for (int r = 0; r < SYNTH_ROLES; r++)
            json_object_set_new(scale, rt_synth_role_name(r), json_real(plan->spiky[r].scale));
        json_object_set_new(sp, "scale", scale);
        json_object_set_new(d, "spiky", sp);
    } else {
        json_object_set_new(d, "spiky", json_null());
    }
    for (int r = 0; r < SYNTH_RULES; r++) {
        const synth_rule *ru = rt_synth_rule(r);
        json_t *x = json_object();
        json_object_set_new(x, "k", json_real(ru->k));
        json_object_set_new(x, "min_s", json_real(ru->min_s));
        json_object_set_new(x, "max_s", json_real(ru->max_s));
        json_object_set_new(rules, ru->name, x);
    }
    json_object_set_new(d, "rules", rules);
    return d;
}

static json_t *truth_json(const synth_plan *plan)
{
    json_t *root = json_object();
    json_object_set_new(root, "schema", json_string("remtone-truth/1"));
    json_object_set_new(root, "profile", json_string(rt_synth_profile_name(plan->opt.profile)));
    /* Seeds above INT64_MAX do not fit a JSON integer in jansson; they are
     * written as decimal strings. */
    if (plan->opt.seed <= (uint64_t)INT64_MAX) {
        json_object_set_new(root, "seed", json_integer((json_int_t)plan->opt.seed));
    } else {
        char buf[32];
        snprintf(buf, sizeof buf, "%llu", (unsigned long long)plan->opt.seed);
        json_object_set_new(root, "seed", json_string(buf));
    }
    json_object_set_new(root, "hours", json_real(plan->opt.hours));
    json_object_set_new(root, "epoch_s", json_integer(SYNTH_EPOCH_S));

    json_t *ch = json_object();
    static const char *labels[] = {"Chin1-Chin2", "FDS L", "FDS R", "Tib L", "Tib R"};
    for (int r = 0; r < SYNTH_ROLES; r++)
        json_object_set_new(ch, rt_synth_role_name(r), json_string(labels[r]));
    json_object_set_new(ch, "ecg", json_string("ECG"));
    json_object_set_new(root, "channels", ch);

    int rem_epochs = 0;
    json_t *bouts = json_array();
    for (int b = 0; b < plan->n_bouts; b++) {
        json_t *o = json_object();
        json_object_set_new(o, "first_epoch", json_integer(plan->bouts[b].first_epoch));
        json_object_set_new(o, "epochs", json_integer(plan->bouts[b].epochs));
        json_object_set_new(o, "chin_bg_uv", json_real(plan->bouts[b].chin_bg_uv));
        json_array_append_new(bouts, o);
        rem_epochs += plan->bouts[b].epochs;
    }
    json_t *rem = json_object();
    json_object_set_new(rem, "epochs", json_integer(rem_epochs));
    json_object_set_new(rem, "minutes", json_real(rem_epochs * 0.5));
    json_object_set_new(rem, "bouts", bouts);
    json_object_set_new(root, "rem", rem);

    json_object_set_new(root, "bursts", bursts_json(plan));
    json_object_set_new(root, "tonic", tonics_json(plan));

    json_t *events = json_array();
    for (size_t i = 0; i < plan->n_events; i++) {
        json_t *o = json_object();
        json_object_set_new(o, "type", json_string(rt_synth_event_name(plan->events[i].type)));
        json_object_set_new(o, "start_s", json_integer(plan->events[i].start_s));
        json_object_set_new(o, "duration_s", json_integer(plan->events[i].duration_s));
        json_array_append_new(events, o);
    }
    json_object_set_new(root, "events", events);
    json_object_set_new(root, "artifacts", artifacts_json(plan));
    json_object_set_new(root, "difficulty", difficulty_json(plan));
    json_object_set_new(root, "minis_3s", minis_json(plan));

    synth_indices ix, ix_ex;
    rt_synth_indices_compute(plan, 0, &ix);
    rt_synth_indices_compute(plan, 1, &ix_ex);
    json_object_set_new(root, "indices", indices_json(&ix));
    json_object_set_new(root, "indices_events_excluded", indices_json(&ix_ex));
    return root;
}

rt_status rt_synth_write_truth(const synth_plan *plan, const char *path, rt_error *err)
{
    json_t *root = truth_json(plan);
    if (!root)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory building the truth", path);
    rt_output out;
    rt_status st = rt_output_begin(&out, path, 1, err);
    if (st != RT_OK) {
        json_decref(root);
        return st;
    }
    /* 12 significant digits: exact for the 1-ms / 0.001-uV grid of the
     * placement, and stable across platforms. */
    int rc = json_dumpf(root, out.file, JSON_INDENT(1) | JSON_REAL_PRECISION(12));
    json_decref(root);
    if (rc != 0 || fputc('\n', out.file) == EOF) {
        rt_output_abort(&out);
        return rt_fail(err, RT_ERR_IO, "%s: cannot write the truth", path);
    }
    return rt_output_commit(&out, err);
}
