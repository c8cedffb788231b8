/* The night plan: hypnogram, background EMG levels, chin tonic blocks,
 * respiratory events and phasic bursts, all drawn from one seeded stream
 * before any sample is made, so the truth and the signal read the same
 * placement. The grid rules that keep every index unambiguous live here
 * (docs/synthetic-nights.md, "Grid rules"). */
#include "synth_internal.h"

#include <math.h>
#include <stdbool.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"

typedef struct profile_rates {
    double tonic_epochs;             /* target fraction of REM epochs chin-tonic */
    double burst_minis[SYNTH_ROLES]; /* target fraction of 3-s minis holding a burst
                                        (chin: of the non-tonic minis) */
    double leg_max_s;                /* longest spontaneous leg burst: healthy REM leg
                                        twitches stay under the 0.5-s limb-movement
                                        minimum, RBD movements do not */
    double active_epochs;            /* bursts fall only in this share of REM epochs:
                                        phasic activity comes in clusters (phasic REM),
                                        which keeps 30-s indices realistic */
    int resp_events;
} profile_rates;

static profile_rates rates_of(rt_synth_profile profile)
{
    /* Targets of each profile (docs/synthetic-nights.md, "Profiles"); exact
     * values come out of the placement and are written to truth.json. */
    profile_rates r;
    memset(&r, 0, sizeof r);
    switch (profile) {
    case RT_SYNTH_RBD:
        r.tonic_epochs = 0.35;
        r.burst_minis[SYNTH_CHIN] = 0.30;
        r.burst_minis[SYNTH_ARM_L] = r.burst_minis[SYNTH_ARM_R] = 0.25;
        r.burst_minis[SYNTH_LEG_L] = r.burst_minis[SYNTH_LEG_R] = 0.20;
        r.active_epochs = 1.0;
        r.leg_max_s = 0.70;
        break;
    case RT_SYNTH_BORDERLINE:
        /* chin "any" = 0.05 + 0.95 * 0.137 = 0.18, just under SINBAR's 18.2 %. */
        r.tonic_epochs = 0.05;
        r.burst_minis[SYNTH_CHIN] = 0.137;
        r.burst_minis[SYNTH_ARM_L] = r.burst_minis[SYNTH_ARM_R] = 0.08;
        r.burst_minis[SYNTH_LEG_L] = r.burst_minis[SYNTH_LEG_R] = 0.06;
        r.active_epochs = 0.40;
        r.leg_max_s = 0.70;
        break;
    case RT_SYNTH_APNEA:
    case RT_SYNTH_TYPICAL_OLDER:
    default:
        r.tonic_epochs = 0.02;
        r.burst_minis[SYNTH_CHIN] = 0.04;
        r.burst_minis[SYNTH_ARM_L] = r.burst_minis[SYNTH_ARM_R] = 0.03;
        r.burst_minis[SYNTH_LEG_L] = r.burst_minis[SYNTH_LEG_R] = 0.05;
        r.active_epochs = 0.12;
        r.leg_max_s = 0.45;
        r.resp_events = profile == RT_SYNTH_APNEA;
        break;
    }
    return r;
}

/* Values in truth.json are kept on a 1-ms / 0.001-uV grid so they read
 * cleanly and round-trip exactly through 12 significant digits. */
double rt_synth_round3(double x)
{
    return floor(x * 1000.0 + 0.5) / 1000.0;
}

static void fill_stage(synth_plan *plan, int from, int count, int stage)
{
    for (int e = from; e < from + count && e < plan->n_epochs; e++)
        if (e >= 0)
            plan->stage[e] = (unsigned char)stage;
}

/* Older-adult night: ~15 min latency, K cycles of ~90 min with the REM share
 * of each cycle growing from ~11 % to ~30 % (first bout 5-10 min, last
 * 20-30 min on an 8-h night), N3 mostly in the first two cycles, brief
 * awakenings inside NREM and between cycles. */
static void build_hypnogram(synth_plan *plan, synth_rng *rng)
{
    int n = plan->n_epochs;
    fill_stage(plan, 0, n, SYNTH_W);
    int latency = rt_synth_rng_int(rng, 26, 34);
    int final_wake = rt_synth_rng_int(rng, 2, 6);
    int sleep = n - latency - final_wake;
    int k_cycles = (int)lround(sleep / 180.0);
    if (k_cycles < 1)
        k_cycles = 1;
    double weight[16], total = 0;
    for (int k = 0; k < k_cycles; k++) {
        weight[k] = 1.0 + rt_synth_rng_range(rng, -0.08, 0.08);
        total += weight[k];
    }
    static const double n3_share[] = {0.32, 0.20, 0.08};
    int pos = latency;
    double cum = 0;
    for (int k = 0; k < k_cycles; k++) {
        cum += weight[k];
        int end = latency + (int)lround(sleep * cum / total);
        int len = end - pos;
        double share = k_cycles == 1 ? 0.20 : 0.11 + 0.19 * k / (k_cycles - 1);
        share += rt_synth_rng_range(rng, -0.015, 0.015);
        int rem = (int)lround(share * len);
        if (rem < 6)
            rem = 6;
        int nrem = len - rem;
        int p = pos;
        if (k > 0 && rt_synth_rng_uniform(rng) < 0.4) {
            int w = rt_synth_rng_int(rng, 1, 2);
            fill_stage(plan, p, w, SYNTH_W);
            p += w;
        }
        int n1 = rt_synth_rng_int(rng, 2, 4);
        fill_stage(plan, p, n1, SYNTH_N1);
        p += n1;
        int rest = pos + nrem - p;
        double n3f = k_cycles == 1 ? 0.25 : (k < 3 ? n3_share[k] : 0.0);
        int n3 = (int)lround(n3f * rest);
        int n2a = (int)lround(0.35 * (rest - n3));
        fill_stage(plan, p, n2a, SYNTH_N2);
        fill_stage(plan, p + n2a, n3, SYNTH_N3);
        int n2b_start = p + n2a + n3;
        int n2b = pos + nrem - n2b_start;
        fill_stage(plan, n2b_start, n2b, SYNTH_N2);
        if (n2b >= 20 && rt_synth_rng_uniform(rng) < 0.6) {
            int w = rt_synth_rng_int(rng, 1, 3);
            int at = n2b_start + rt_synth_rng_int(rng, 2, n2b - 12);
            fill_stage(plan, at, w, SYNTH_W);
            fill_stage(plan, at + w, rt_synth_rng_int(rng, 1, 2), SYNTH_N1);
        }
        fill_stage(plan, pos + nrem, rem, SYNTH_R);
        pos = end;
    }
}

static rt_status find_bouts(synth_plan *plan, rt_error *err)
{
    int count = 0;
    for (int e = 0; e < plan->n_epochs; e++)
        if (plan->stage[e] == SYNTH_R && (e == 0 || plan->stage[e - 1] != SYNTH_R))
            count++;
    plan->bouts = rt_calloc((size_t)count + 1, sizeof *plan->bouts);
    if (!plan->bouts)
        return rt_fail(err, RT_ERR_NOMEM, "synthetic night: out of memory (REM bouts)");
    for (int e = 0; e < plan->n_epochs; e++) {
        if (plan->stage[e] != SYNTH_R)
            continue;
        if (e == 0 || plan->stage[e - 1] != SYNTH_R) {
            plan->bouts[plan->n_bouts].first_epoch = e;
            plan->n_bouts++;
        }
        plan->bouts[plan->n_bouts - 1].epochs++;
    }
    return RT_OK;
}

/* Per-epoch background: stage level times a slow random walk within +-15 %
 * (NREM and W); REM is constant per bout, chin drawn in 1.0-1.4 uV (times
 * chin_rem_scale, below 1 only when a rising drift must keep atonia under
 * 2.5 uV). */
static void build_backgrounds(synth_plan *plan, synth_rng *rng)
{
    static const double chin_uv[] = {10.0, 6.0, 4.5, 4.0};
    static const double limb_uv[] = {5.0, 2.5, 2.5, 2.5};
    for (int b = 0; b < plan->n_bouts; b++) {
        double drawn = rt_synth_rng_range(rng, 1.0, 1.4);
        plan->bouts[b].chin_bg_uv = rt_synth_round3(plan->chin_rem_scale < 1.0 ? drawn * plan->chin_rem_scale : drawn);
    }
    for (int role = 0; role < SYNTH_ROLES; role++) {
        double m = 1.0;
        int bout = -1;
        for (int e = 0; e < plan->n_epochs; e++) {
            int st = plan->stage[e];
            m += rt_synth_rng_range(rng, -0.05, 0.05);
            m = m < 0.85 ? 0.85 : (m > 1.15 ? 1.15 : m);
            if (st == SYNTH_R) {
                if (e == 0 || plan->stage[e - 1] != SYNTH_R)
                    bout++;
                plan->bg_uv[role][e] = role == SYNTH_CHIN ? plan->bouts[bout].chin_bg_uv : 1.0;
            } else {
                double base = role == SYNTH_CHIN ? chin_uv[st] : limb_uv[st];
                plan->bg_uv[role][e] = rt_synth_round3(base * m);
            }
        }
    }
}

void rt_synth_shuffle(int *v, int n, synth_rng *rng)
{
    for (int i = n - 1; i > 0; i--) {
        int j = rt_synth_rng_int(rng, 0, i);
        int t = v[i];
        v[i] = v[j];
        v[j] = t;
    }
}

/* Tonic blocks: each bout is cut into pairs of epochs from its first epoch
 * (a final single epoch when odd); a block is one whole unit, and two tonic
 * units are never adjacent, so 20-s windows tiled from the bout start are
 * wholly tonic or wholly not. */
static rt_status place_tonic(synth_plan *plan, const profile_rates *rates, synth_rng *rng,
                             rt_error *err)
{
    int n_units = 0, rem_epochs = 0;
    for (int b = 0; b < plan->n_bouts; b++) {
        n_units += (plan->bouts[b].epochs + 1) / 2;
        rem_epochs += plan->bouts[b].epochs;
    }
    int *unit_epoch = rt_calloc((size_t)n_units + 1, sizeof *unit_epoch);
    int *unit_size = rt_calloc((size_t)n_units + 1, sizeof *unit_size);
    int *order = rt_calloc((size_t)n_units + 1, sizeof *order);
    plan->tonics = rt_calloc((size_t)n_units + 1, sizeof *plan->tonics);
    if (!unit_epoch || !unit_size || !order || !plan->tonics) {
        free(unit_epoch);
        free(unit_size);
        free(order);
        return rt_fail(err, RT_ERR_NOMEM, "synthetic night: out of memory (tonic blocks)");
    }
    int u = 0;
    /* Units touching a bout's first or last epoch are left atonic: the REM
     * Atonia Index's 60-s floor window is clipped at bout edges, and a tonic
     * stretch filling it would become its own floor (docs/synthetic-nights.md). */
    for (int b = 0; b < plan->n_bouts; b++)
        for (int p = 0; p < plan->bouts[b].epochs; p += 2) {
            int size = plan->bouts[b].epochs - p >= 2 ? 2 : 1;
            if (p == 0 || p + size >= plan->bouts[b].epochs)
                continue;
            unit_epoch[u] = plan->bouts[b].first_epoch + p;
            unit_size[u] = size;
            order[u] = u;
            u++;
        }
    n_units = u;
    rt_synth_shuffle(order, n_units, rng);
    int target = (int)lround(rates->tonic_epochs * rem_epochs);
    int total = 0;
    for (int i = 0; i < n_units && total < target; i++) {
        int k = order[i];
        int e0 = unit_epoch[k], size = unit_size[k];
        /* Neighbouring units of the same bout are the epochs just outside. */
        if (e0 > 0 && plan->tonic[e0 - 1])
            continue;
        if (e0 + size < plan->n_epochs && plan->tonic[e0 + size])
            continue;
        if (total + size > target && total + size - target >= target - total)
            continue;
        double level = rt_synth_round3(rt_synth_rng_range(rng, 15.0, 25.0));
        if (plan->opt.tonic_ratio > 0.0)
            level = rt_synth_round3(plan->opt.tonic_ratio * plan->bg_uv[SYNTH_CHIN][e0]);
        for (int e = e0; e < e0 + size; e++) {
            plan->tonic[e] = 1;
            plan->tonic_uv[e] = level;
        }
        total += size;
    }
    for (int e = 0; e < plan->n_epochs; e++) {
        if (!plan->tonic[e])
            continue;
        /* Units are whole pairs aligned to the bout, so a new block starts
         * wherever the level or the bout pairing changes. */
        synth_tonic *last = plan->n_tonics ? &plan->tonics[plan->n_tonics - 1] : NULL;
        if (last && e > 0 && plan->tonic[e - 1] && plan->tonic_uv[e - 1] == plan->tonic_uv[e] &&
            last->duration_s < 2 * RT_EPOCH_WHOLE_S) {
            last->duration_s += RT_EPOCH_WHOLE_S;
        } else {
            synth_tonic *t = &plan->tonics[plan->n_tonics++];
            t->onset_s = (double)e * RT_EPOCH_WHOLE_S;
            t->duration_s = RT_EPOCH_WHOLE_S;
            t->rect_uv = plan->tonic_uv[e];
            t->bout = rt_synth_bout_of_epoch(plan, e);
            t->ratio = t->rect_uv / plan->bg_uv[SYNTH_CHIN][e];
            t->source = SYNTH_TONIC_PROFILE;
        }
    }
    free(unit_epoch);
    free(unit_size);
    free(order);
    return RT_OK;
}

static rt_status add_event(synth_plan *plan, long start_s, long duration_s, int type, rt_error *err)
{
    if (plan->n_events == plan->cap_events) {
        size_t cap = plan->cap_events ? 2 * plan->cap_events : 64;
        synth_event *v = realloc(plan->events, cap * sizeof *v);
        if (!v)
            return rt_fail(err, RT_ERR_NOMEM, "synthetic night: out of memory (events)");
        plan->events = v;
        plan->cap_events = cap;
    }
    synth_event *ev = &plan->events[plan->n_events++];
    ev->start_s = start_s;
    ev->duration_s = duration_s;
    ev->type = type;
    for (long s = start_s; s < start_s + duration_s && s < plan->n_seconds; s++)
        plan->sec_excluded[s] = 1;
    return RT_OK;
}

rt_status rt_synth_push_burst(synth_plan *plan, const synth_burst *b, rt_error *err)
{
    if (plan->n_bursts == plan->cap_bursts) {
        size_t cap = plan->cap_bursts ? 2 * plan->cap_bursts : 256;
        synth_burst *v = realloc(plan->bursts, cap * sizeof *v);
        if (!v)
            return rt_fail(err, RT_ERR_NOMEM, "synthetic night: out of memory (bursts)");
        plan->bursts = v;
        plan->cap_bursts = cap;
    }
    plan->bursts[plan->n_bursts++] = *b;
    return RT_OK;
}

/* A grid burst inside second `second`: onset 0.10-0.20 s into it, 0.30 s to
 * max_s long, level the background times a factor in the ratio range. */
static rt_status add_burst(synth_plan *plan, int role, long second, double bg_uv, int arousal_bound,
                           double max_s, synth_rng *rng, rt_error *err)
{
    double lo, hi;
    rt_synth_burst_ratio_range(&plan->opt, &lo, &hi);
    synth_burst b;
    b.role = role;
    b.onset_s = (double)second + rt_synth_round3(rt_synth_rng_range(rng, 0.10, 0.20));
    b.duration_s = rt_synth_round3(rt_synth_rng_range(rng, 0.30, max_s));
    b.rect_uv = rt_synth_round3(bg_uv * rt_synth_rng_range(rng, lo, hi));
    b.ratio = b.rect_uv / bg_uv;
    b.arousal_bound = arousal_bound;
    rt_status st = rt_synth_push_burst(plan, &b, err);
    if (st == RT_OK)
        plan->sec_burst[role][second] = (int)plan->n_bursts - 1;
    return st;
}

/* A second may hold a burst of role when it is REM, at least 2 s from both
 * ends of its bout, free for that role, and (chin) outside tonic blocks. */
static int second_allows_burst(const synth_plan *plan, const synth_bout *bout, int role, long s)
{
    long t0 = (long)bout->first_epoch * RT_EPOCH_WHOLE_S;
    long t1 = t0 + (long)bout->epochs * RT_EPOCH_WHOLE_S;
    if (s < t0 + 2 || s > t1 - 3)
        return 0;
    if (plan->sec_burst[role][s] >= 0)
        return 0;
    if (role == SYNTH_CHIN && plan->tonic[s / RT_EPOCH_WHOLE_S])
        return 0;
    /* With tonic runs, chin bursts keep 0.5 s from the edges of a tonic
     * stretch: the seconds next to one are not used. */
    if (role == SYNTH_CHIN && rt_synth_tonic_runs_on(&plan->opt) &&
        (plan->tonic[(s - 1) / RT_EPOCH_WHOLE_S] || plan->tonic[(s + 1) / RT_EPOCH_WHOLE_S]))
        return 0;
    return 1;
}

static double burst_background(const synth_plan *plan, int role, long s)
{
    return plan->bg_uv[role][s / RT_EPOCH_WHOLE_S];
}

/* Arousal-bound bursts: 1-3 each for chin and both legs inside every
 * respiratory arousal that falls in REM. */
static rt_status place_arousal_bursts(synth_plan *plan, const synth_bout *bout, const synth_event *ev,
                                      synth_rng *rng, rt_error *err)
{
    static const int roles[] = {SYNTH_CHIN, SYNTH_LEG_L, SYNTH_LEG_R};
    for (int r = 0; r < 3; r++) {
        int role = roles[r];
        long cand[16];
        int n = 0;
        for (long s = ev->start_s; s < ev->start_s + ev->duration_s && n < 16; s++)
            if (second_allows_burst(plan, bout, role, s))
                cand[n++] = s;
        int want = rt_synth_rng_int(rng, 1, 3);
        for (int i = 0; i < want && i < n; i++) {
            int j = rt_synth_rng_int(rng, i, n - 1);
            long t = cand[i];
            cand[i] = cand[j];
            cand[j] = t;
            rt_status st = add_burst(plan, role, cand[i], burst_background(plan, role, cand[i]), 1,
                                     0.70, rng, err);
            if (st != RT_OK)
                return st;
        }
    }
    return RT_OK;
}

/* Places apnea/hypopnea + arousal pairs in one region [r0, r1) of sleep at
 * about rate_per_h; in REM the arousal avoids chin tonic blocks so every
 * arousal can carry its chin bursts. */
static rt_status place_events_in(synth_plan *plan, long r0, long r1, double rate_per_h,
                                 const synth_bout *bout, synth_rng *rng, rt_error *err)
{
    double gap_mean = 3600.0 / rate_per_h - 25.5; /* mean event 20 s + arousal 5.5 s */
    if (gap_mean < 10)
        gap_mean = 10;
    long t = r0 + rt_synth_rng_int(rng, 0, (int)gap_mean);
    for (;;) {
        long d = rt_synth_rng_int(rng, 10, 30);
        long a = rt_synth_rng_int(rng, 3, 8);
        if (t + d + a > r1)
            break;
        long blocked = -1;
        if (bout)
            for (long s = t + d; s < t + d + a; s++)
                if (plan->tonic[s / RT_EPOCH_WHOLE_S]) {
                    blocked = s / RT_EPOCH_WHOLE_S;
                    break;
                }
        if (blocked >= 0) {
            while (blocked < plan->n_epochs && plan->tonic[blocked])
                blocked++;
            t = blocked * RT_EPOCH_WHOLE_S;
            continue;
        }
        int type = rt_synth_rng_uniform(rng) < 0.4 ? SYNTH_APNEA : SYNTH_HYPOPNEA;
        rt_status st = add_event(plan, t, d, type, err);
        if (st == RT_OK)
            st = add_event(plan, t + d, a, SYNTH_RESP_AROUSAL, err);
        if (st == RT_OK && bout)
            st = place_arousal_bursts(plan, bout, &plan->events[plan->n_events - 1], rng, err);
        if (st != RT_OK)
            return st;
        t += d + a + rt_synth_rng_int(rng, (int)(0.5 * gap_mean), (int)(1.5 * gap_mean));
    }
    return RT_OK;
}

static int is_nrem(int stage)
{
    return stage == SYNTH_N1 || stage == SYNTH_N2 || stage == SYNTH_N3;
}

/* Respiratory events: ~20/h in REM, ~10/h in NREM (apnea profile only). */
static rt_status place_events(synth_plan *plan, synth_rng *rng, rt_error *err)
{
    int b = 0;
    for (int e = 0; e < plan->n_epochs;) {
        int st = plan->stage[e];
        int end = e;
        while (end < plan->n_epochs && (st == SYNTH_R ? plan->stage[end] == SYNTH_R
                                                       : is_nrem(st) && is_nrem(plan->stage[end])))
            end++;
        if (end == e) {
            e++;
            continue;
        }
        long r0 = (long)e * RT_EPOCH_WHOLE_S, r1 = (long)end * RT_EPOCH_WHOLE_S;
        rt_status s = RT_OK;
        if (st == SYNTH_R)
            s = place_events_in(plan, r0 + 2, r1 - 2, 20.0, &plan->bouts[b++], rng, err);
        else
            s = place_events_in(plan, r0, r1, 10.0, NULL, rng, err);
        if (s != RT_OK)
            return s;
        e = end;
    }
    return RT_OK;
}

static int mini_holds(const synth_plan *plan, int role, long s0, int len)
{
    for (long s = s0; s < s0 + len; s++)
        if (plan->sec_burst[role][s] >= 0)
            return 1;
    return 0;
}

/* Spontaneous bursts: a quota of 3-s minis per role, drawn without
 * replacement, one burst per chosen mini on one of its allowed seconds. */
static rt_status place_bursts(synth_plan *plan, const profile_rates *rates, synth_rng *rng,
                              rt_error *err)
{
    int rem_epochs = 0;
    for (int b = 0; b < plan->n_bouts; b++)
        rem_epochs += plan->bouts[b].epochs;
    int n_minis = rem_epochs * RT_MINIS3_PER_EPOCH;
    long *mini_start = rt_calloc((size_t)n_minis + 1, sizeof *mini_start);
    int *mini_bout = rt_calloc((size_t)n_minis + 1, sizeof *mini_bout);
    int *cand = rt_calloc((size_t)n_minis + 1, sizeof *cand);
    if (!mini_start || !mini_bout || !cand) {
        free(mini_start);
        free(mini_bout);
        free(cand);
        return rt_fail(err, RT_ERR_NOMEM, "synthetic night: out of memory (mini-epochs)");
    }
    /* the REM epochs where phasic activity may fall (all of them for rbd) */
    unsigned char *active = rt_calloc((size_t)plan->n_epochs + 1, 1);
    int *rem_list = rt_calloc((size_t)rem_epochs + 1, sizeof *rem_list);
    if (!active || !rem_list) {
        free(active);
        free(rem_list);
        free(mini_start);
        free(mini_bout);
        free(cand);
        return rt_fail(err, RT_ERR_NOMEM, "synthetic night: out of memory (active epochs)");
    }
    int r_n = 0;
    for (int b = 0; b < plan->n_bouts; b++)
        for (int e = 0; e < plan->bouts[b].epochs; e++)
            rem_list[r_n++] = plan->bouts[b].first_epoch + e;
    rt_synth_shuffle(rem_list, r_n, rng);
    int n_active = (int)lround(rates->active_epochs * r_n);
    for (int i = 0; i < n_active; i++)
        active[rem_list[i]] = 1;
    int m = 0;
    for (int b = 0; b < plan->n_bouts; b++)
        for (int e = 0; e < plan->bouts[b].epochs; e++)
            for (int k = 0; k < RT_MINIS3_PER_EPOCH; k++, m++) {
                mini_start[m] = (long)(plan->bouts[b].first_epoch + e) * RT_EPOCH_WHOLE_S + 3 * k;
                mini_bout[m] = b;
            }
    rt_status st = RT_OK;
    for (int role = 0; role < SYNTH_ROLES && st == RT_OK; role++) {
        int base = 0, holding = 0, n_cand = 0;
        for (int i = 0; i < n_minis; i++) {
            if (role == SYNTH_CHIN && plan->tonic[mini_start[i] / RT_EPOCH_WHOLE_S])
                continue;
            base++;
            if (mini_holds(plan, role, mini_start[i], 3)) {
                holding++;
                continue;
            }
            if (!active[mini_start[i] / RT_EPOCH_WHOLE_S])
                continue;
            for (long s = mini_start[i]; s < mini_start[i] + 3; s++)
                if (second_allows_burst(plan, &plan->bouts[mini_bout[i]], role, s)) {
                    cand[n_cand++] = i;
                    break;
                }
        }
        int quota = (int)lround(rates->burst_minis[role] * base) - holding;
        for (int i = 0; i < quota && i < n_cand && st == RT_OK; i++) {
            int j = rt_synth_rng_int(rng, i, n_cand - 1);
            int t = cand[i];
            cand[i] = cand[j];
            cand[j] = t;
            int mi = cand[i];
            long secs[3];
            int n = 0;
            for (long s = mini_start[mi]; s < mini_start[mi] + 3; s++)
                if (second_allows_burst(plan, &plan->bouts[mini_bout[mi]], role, s))
                    secs[n++] = s;
            long s = secs[rt_synth_rng_int(rng, 0, n - 1)];
            bool leg = role == SYNTH_LEG_L || role == SYNTH_LEG_R;
            st = add_burst(plan, role, s, burst_background(plan, role, s), 0,
                           leg ? rates->leg_max_s : 0.70, rng, err);
        }
    }
    free(active);
    free(rem_list);
    free(mini_start);
    free(mini_bout);
    free(cand);
    return st;
}

static int burst_cmp(const void *a, const void *b)
{
    const synth_burst *x = a, *y = b;
    if (x->onset_s != y->onset_s)
        return x->onset_s < y->onset_s ? -1 : 1;
    return x->role - y->role;
}

static int event_cmp(const void *a, const void *b)
{
    const synth_event *x = a, *y = b;
    if (x->start_s != y->start_s)
        return x->start_s < y->start_s ? -1 : 1;
    return x->type - y->type;
}

static void index_bursts(synth_plan *plan)
{
    if (plan->n_bursts)
        qsort(plan->bursts, plan->n_bursts, sizeof *plan->bursts, burst_cmp);
    if (plan->n_events)
        qsort(plan->events, plan->n_events, sizeof *plan->events, event_cmp);
    for (int r = 0; r < SYNTH_ROLES; r++)
        for (long s = 0; s < plan->n_seconds; s++)
            plan->sec_burst[r][s] = -1;
    for (size_t i = 0; i < plan->n_bursts; i++)
        plan->sec_burst[plan->bursts[i].role][(long)floor(plan->bursts[i].onset_s)] = (int)i;
    rt_synth_index_holds(plan);
}

/* Body position (1..4, docs/synthetic-nights.md) changes only at awakenings. */
static void build_positions(synth_plan *plan, synth_rng *rng)
{
    int pos = 1;
    for (int e = 0; e < plan->n_epochs; e++) {
        if (e > 0 && plan->stage[e] == SYNTH_W && plan->stage[e - 1] != SYNTH_W &&
            rt_synth_rng_uniform(rng) < 0.5)
            pos = rt_synth_rng_int(rng, 1, 4);
        plan->position[e] = (unsigned char)pos;
    }
}

rt_status rt_synth_plan_build(synth_plan *plan, const rt_synth_options *opt, rt_error *err)
{
    memset(plan, 0, sizeof *plan);
    plan->opt = *opt;
    plan->n_epochs = (int)floor(opt->hours * 3600.0 / RT_EPOCH_WHOLE_S + 1e-9);
    plan->n_seconds = (long)plan->n_epochs * RT_EPOCH_WHOLE_S;
    size_t ne = (size_t)plan->n_epochs, ns = (size_t)plan->n_seconds;
    plan->stage = rt_calloc(ne, 1);
    plan->tonic = rt_calloc(ne, 1);
    plan->tonic_uv = rt_calloc(ne, sizeof(double));
    plan->position = rt_calloc(ne, 1);
    plan->sec_excluded = rt_calloc(ns, 1);
    int ok = plan->stage && plan->tonic && plan->tonic_uv && plan->position && plan->sec_excluded;
    for (int r = 0; r < SYNTH_ROLES; r++) {
        plan->bg_uv[r] = rt_calloc(ne, sizeof(double));
        plan->sec_burst[r] = rt_calloc(ns, sizeof(int));
        plan->sec_hold[r] = rt_calloc(ns, 1);
        ok = ok && plan->bg_uv[r] && plan->sec_burst[r] && plan->sec_hold[r];
    }
    if (!ok) {
        rt_synth_plan_free(plan);
        return rt_fail(err, RT_ERR_NOMEM, "synthetic night: out of memory (%d epochs)", plan->n_epochs);
    }
    for (int r = 0; r < SYNTH_ROLES; r++)
        for (size_t s = 0; s < ns; s++)
            plan->sec_burst[r][s] = -1;

    for (int r = 0; r < SYNTH_ROLES; r++)
        plan->emg_rate_hz[r] = rt_synth_role_rate_hz(opt, r);
    /* Drift: gain exp(drift_per_s t), 1 at the start, drift_end at the end.
     * A rising drift scales the REM chin atonia down so that it stays below
     * 2.4 uV (1.4 uV x scale x drift_end) everywhere: under the scorer's
     * absolute tonic level of 10 uV peak to peak, 3.18 uV rectified. */
    double drift = opt->drift_end > 0.0 ? opt->drift_end : 1.0;
    plan->drift_per_s = drift == 1.0 ? 0.0 : log(drift) / (double)plan->n_seconds;
    plan->chin_rem_scale = drift > 1.0 ? fmin(1.0, 2.4 / (1.4 * drift)) : 1.0;

    synth_rng rng;
    rt_synth_rng_seed(&rng, opt->seed, SYNTH_STREAM_PLAN);
    profile_rates rates = rates_of(opt->profile);
    build_hypnogram(plan, &rng);
    rt_status st = rt_synth_place_single_bouts(plan, err);
    if (st == RT_OK)
        st = find_bouts(plan, err);
    if (st == RT_OK) {
        build_backgrounds(plan, &rng);
        st = place_tonic(plan, &rates, &rng, err);
    }
    if (st == RT_OK)
        st = rt_synth_place_tonic_runs(plan, err);
    if (st == RT_OK && rates.resp_events)
        st = place_events(plan, &rng, err);
    if (st == RT_OK)
        st = place_bursts(plan, &rates, &rng, err);
    if (st == RT_OK && opt->short_bursts)
        st = rt_synth_place_short_bursts(plan, rates.burst_minis, rates.active_epochs, err);
    if (st != RT_OK) {
        rt_synth_plan_free(plan);
        return st;
    }
    index_bursts(plan);
    build_positions(plan, &rng);
    st = rt_synth_artifacts_build(plan, err);
    if (st == RT_OK)
        st = rt_synth_spiky_build(plan, err);
    if (st != RT_OK)
        rt_synth_plan_free(plan);
    return st;
}

int rt_synth_bout_of_epoch(const synth_plan *plan, int e)
{
    for (int b = 0; b < plan->n_bouts; b++)
        if (e >= plan->bouts[b].first_epoch && e < plan->bouts[b].first_epoch + plan->bouts[b].epochs)
            return b;
    return -1;
}

void rt_synth_plan_free(synth_plan *plan)
{
    if (!plan)
        return;
    free(plan->stage);
    free(plan->tonic);
    free(plan->tonic_uv);
    free(plan->position);
    free(plan->sec_excluded);
    for (int r = 0; r < SYNTH_ROLES; r++) {
        free(plan->bg_uv[r]);
        free(plan->sec_burst[r]);
        free(plan->sec_hold[r]);
    }
    free(plan->single_epochs);
    free(plan->bouts);
    free(plan->bursts);
    free(plan->tonics);
    free(plan->events);
    rt_synth_artifacts_free(plan);
    memset(plan, 0, sizeof *plan);
}

double rt_synth_plan_background_uv(const synth_plan *plan, int role, double t_s)
{
    int n = plan->n_epochs;
    int e = (int)floor(t_s / RT_EPOCH_WHOLE_S);
    if (e < 0)
        e = 0;
    if (e >= n)
        e = n - 1;
    int boundary = (int)floor(t_s / RT_EPOCH_WHOLE_S + 0.5);
    if (boundary <= 0 || boundary >= n)
        return plan->bg_uv[role][e];
    int a = boundary - 1, b = boundary;
    if (plan->stage[a] == SYNTH_R && plan->stage[b] == SYNTH_R)
        return plan->bg_uv[role][e];
    double tb = (double)boundary * RT_EPOCH_WHOLE_S;
    /* The ramp stays outside REM so every REM level is constant per bout. */
    double r0 = tb - 0.25, r1 = tb + 0.25;
    if (plan->stage[b] == SYNTH_R) {
        r0 = tb - 0.5;
        r1 = tb;
    } else if (plan->stage[a] == SYNTH_R) {
        r0 = tb;
        r1 = tb + 0.5;
    }
    if (t_s < r0 || t_s >= r1)
        return plan->bg_uv[role][e];
    double w = (t_s - r0) / (r1 - r0);
    return plan->bg_uv[role][a] * (1.0 - w) + plan->bg_uv[role][b] * w;
}
