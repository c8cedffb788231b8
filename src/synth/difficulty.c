/* Difficulty switches of the synthetic night that change the placement:
 * single-epoch REM bouts, chin tonic runs and whole tonic bouts, short
 * bursts with onsets anywhere, and the burst ratio range; plus the phasic
 * rules the truth counts bursts with. Each switch draws from its own random
 * stream (synth_internal.h), so the hypnogram and the other switches keep
 * their numbers where the placement allows. docs/synthetic-nights.md,
 * "Difficulty switches", gives the rules and why. */
#include "synth_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"

/* As coded in the scorer (include/remtone/score.h RT_LABEL_*, docs/scoring.md
 * section 5): AASM 0.1-5 s at >= 4x background, SINBAR 0.1-5 s at >= 2x,
 * Montreal 0.1-10 s at >= 4x. */
static const synth_rule rules[SYNTH_RULES] = {
    {"aasm", 4.0, 0.1, 5.0},
    {"sinbar", 2.0, 0.1, 5.0},
    {"montreal", 4.0, 0.1, 10.0},
};

const synth_rule *rt_synth_rule(int rule)
{
    return rule >= 0 && rule < SYNTH_RULES ? &rules[rule] : NULL;
}

unsigned rt_synth_burst_rules(const synth_burst *b)
{
    unsigned bits = 0;
    for (int r = 0; r < SYNTH_RULES; r++) {
        /* the scorer's relative slack of 1e-9 (floating-point rounding only) */
        int loud = b->ratio >= rules[r].k * (1.0 - 1e-9);
        int fits = b->duration_s >= rules[r].min_s - 1e-9 && b->duration_s <= rules[r].max_s + 1e-9;
        if (loud && fits)
            bits |= 1u << r;
    }
    return bits;
}

void rt_synth_burst_ratio_range(const rt_synth_options *opt, double *lo, double *hi)
{
    if (opt->burst_ratio_lo == 0.0 && opt->burst_ratio_hi == 0.0) {
        *lo = 8.0;
        *hi = 15.0;
    } else {
        *lo = opt->burst_ratio_lo;
        *hi = opt->burst_ratio_hi;
    }
}

int rt_synth_tonic_runs_on(const rt_synth_options *opt)
{
    return opt->tonic_run_epochs > 0 || opt->tonic_whole_bout > 0;
}

void rt_synth_index_holds(synth_plan *plan)
{
    for (int r = 0; r < SYNTH_ROLES; r++)
        memset(plan->sec_hold[r], 0, (size_t)plan->n_seconds);
    for (size_t i = 0; i < plan->n_bursts; i++) {
        const synth_burst *b = &plan->bursts[i];
        unsigned bits = SYNTH_HOLD_ANY | (rt_synth_burst_rules(b) << 1);
        double end = b->onset_s + b->duration_s;
        for (long s = (long)floor(b->onset_s); (double)s < end && s < plan->n_seconds; s++)
            if (s >= 0)
                plan->sec_hold[b->role][s] |= (unsigned char)bits;
    }
}

/* --- single-epoch REM bouts ---------------------------------------------- */

static int cmp_int(const void *a, const void *b)
{
    int x = *(const int *)a, y = *(const int *)b;
    return (x > y) - (x < y);
}

/* An epoch with N2 on two epochs either side becomes R, at least 6 epochs
 * from any other chosen one: a short REM intrusion into N2 that never joins
 * a main bout. */
rt_status rt_synth_place_single_bouts(synth_plan *plan, rt_error *err)
{
    int want = plan->opt.single_epoch_bouts;
    if (want <= 0)
        return RT_OK;
    int n = plan->n_epochs;
    int *cand = rt_calloc((size_t)n + 1, sizeof *cand);
    plan->single_epochs = rt_calloc((size_t)want, sizeof *plan->single_epochs);
    if (!cand || !plan->single_epochs) {
        free(cand);
        return rt_fail(err, RT_ERR_NOMEM, "synthetic night: out of memory (single-epoch bouts)");
    }
    int n_cand = 0;
    for (int e = 2; e + 2 < n; e++) {
        int ok = 1;
        for (int k = e - 2; k <= e + 2; k++)
            ok &= plan->stage[k] == SYNTH_N2;
        if (ok)
            cand[n_cand++] = e;
    }
    synth_rng rng;
    rt_synth_rng_seed(&rng, plan->opt.seed, SYNTH_STREAM_SINGLE_BOUTS);
    rt_synth_shuffle(cand, n_cand, &rng);
    for (int i = 0; i < n_cand && plan->n_single < want; i++) {
        int clash = 0;
        for (int j = 0; j < plan->n_single; j++)
            clash |= abs(plan->single_epochs[j] - cand[i]) < 6;
        if (!clash)
            plan->single_epochs[plan->n_single++] = cand[i];
    }
    free(cand);
    if (plan->n_single < want)
        return rt_fail(err, RT_ERR_USAGE,
                       "synthetic night: room for only %d single-epoch REM bouts inside N2 (asked for %d)",
                       plan->n_single, want);
    qsort(plan->single_epochs, (size_t)plan->n_single, sizeof *plan->single_epochs, cmp_int);
    for (int i = 0; i < plan->n_single; i++)
        plan->stage[plan->single_epochs[i]] = SYNTH_R;
    return RT_OK;
}

/* --- tonic runs ------------------------------------------------------------ */

/* One run per bout of tonic_run_epochs epochs (the whole bout when it is
 * shorter), starting at an even epoch of the bout chosen at random, so its
 * start lies on the 60-s grid of the bout and no 20-s window is split there;
 * the bout tonic_whole_bout is tonic throughout. The profile's blocks are
 * dropped. */
rt_status rt_synth_place_tonic_runs(synth_plan *plan, rt_error *err)
{
    const rt_synth_options *o = &plan->opt;
    if (!rt_synth_tonic_runs_on(o))
        return RT_OK;
    if (o->tonic_whole_bout > plan->n_bouts)
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: whole tonic bout %d asked for, the night has %d REM bouts",
                       o->tonic_whole_bout, plan->n_bouts);
    synth_tonic *v = realloc(plan->tonics, ((size_t)plan->n_bouts + 1) * sizeof *v);
    if (!v)
        return rt_fail(err, RT_ERR_NOMEM, "synthetic night: out of memory (tonic runs)");
    plan->tonics = v;
    plan->n_tonics = 0;
    memset(plan->tonic, 0, (size_t)plan->n_epochs);
    memset(plan->tonic_uv, 0, (size_t)plan->n_epochs * sizeof *plan->tonic_uv);
    synth_rng rng;
    rt_synth_rng_seed(&rng, o->seed, SYNTH_STREAM_TONIC_RUNS);
    for (int b = 0; b < plan->n_bouts; b++) {
        const synth_bout *bout = &plan->bouts[b];
        int start = 0, len = 0, source;
        if (o->tonic_whole_bout == b + 1) {
            len = bout->epochs;
            source = SYNTH_TONIC_WHOLE_BOUT;
        } else if (o->tonic_run_epochs > 0) {
            len = o->tonic_run_epochs < bout->epochs ? o->tonic_run_epochs : bout->epochs;
            start = 2 * rt_synth_rng_int(&rng, 0, (bout->epochs - len) / 2);
            source = SYNTH_TONIC_RUN;
        } else {
            continue;
        }
        /* drawn whether used or not, so the ratio option moves nothing else */
        double drawn = rt_synth_round3(rt_synth_rng_range(&rng, 15.0, 25.0));
        double level = o->tonic_ratio > 0.0 ? rt_synth_round3(o->tonic_ratio * bout->chin_bg_uv) : drawn;
        int e0 = bout->first_epoch + start;
        for (int e = e0; e < e0 + len; e++) {
            plan->tonic[e] = 1;
            plan->tonic_uv[e] = level;
        }
        synth_tonic *t = &plan->tonics[plan->n_tonics++];
        t->onset_s = (double)e0 * RT_EPOCH_WHOLE_S;
        t->duration_s = (double)len * RT_EPOCH_WHOLE_S;
        t->rect_uv = level;
        t->ratio = level / bout->chin_bg_uv;
        t->bout = b;
        t->source = source;
    }
    return RT_OK;
}

/* --- short bursts -------------------------------------------------------- */

/* Placement state: up to two burst onsets per role and second (bursts of a
 * role are at least 0.5 s apart and 0.1 s long, so no second holds three). */
typedef struct short_ctx {
    synth_plan *plan;
    synth_rng rng;
    int *slot; /* [role][second][2] burst index, -1 = free */
} short_ctx;

static int *slot_at(short_ctx *c, int role, long s)
{
    return &c->slot[((size_t)role * (size_t)c->plan->n_seconds + (size_t)s) * 2];
}

/* The rules of a short burst (docs, "Short bursts"): inside REM 0.5 s from
 * the bout's edges; at least 0.05 s on each side of a 2-s or 3-s mini-epoch
 * boundary it crosses (every epoch starts at a multiple of 30 s, so those
 * are the even seconds and the multiples of 3); chin: 0.5 s from any tonic
 * epoch; 0.5 s from every other burst of the role. */
static int short_fits(short_ctx *c, int role, const synth_bout *bout, double on, double dur)
{
    const synth_plan *plan = c->plan;
    double end = on + dur, t0 = (double)bout->first_epoch * RT_EPOCH_WHOLE_S;
    double t1 = t0 + (double)bout->epochs * RT_EPOCH_WHOLE_S;
    const double eps = 1e-9;
    if (on < t0 + 0.5 - eps || end > t1 - 0.5 + eps)
        return 0;
    long b = (long)floor(on) + 1;
    if ((double)b < end && (b % 2 == 0 || b % 3 == 0) &&
        ((double)b - on < 0.05 - eps || end - (double)b < 0.05 - eps))
        return 0;
    if (role == SYNTH_CHIN) {
        long ea = (long)floor((on - 0.5) / RT_EPOCH_WHOLE_S);
        long eb = (long)floor((end + 0.5) / RT_EPOCH_WHOLE_S);
        for (long e = ea; e <= eb; e++)
            if (e >= 0 && e < plan->n_epochs && plan->tonic[e])
                return 0;
    }
    for (long s = (long)floor(on) - 1; s <= (long)floor(end) + 1; s++) {
        if (s < 0 || s >= plan->n_seconds)
            continue;
        const int *sl = slot_at(c, role, s);
        for (int k = 0; k < 2; k++) {
            if (sl[k] < 0)
                continue;
            const synth_burst *o = &plan->bursts[sl[k]];
            if (!(o->onset_s + o->duration_s + 0.5 <= on + eps || end + 0.5 <= o->onset_s + eps))
                return 0;
        }
    }
    return 1;
}

static int short_holds(short_ctx *c, int role, double t0, double t1)
{
    for (long s = (long)floor(t0) - 1; s <= (long)floor(t1); s++) {
        if (s < 0 || s >= c->plan->n_seconds)
            continue;
        const int *sl = slot_at(c, role, s);
        for (int k = 0; k < 2; k++)
            if (sl[k] >= 0) {
                const synth_burst *o = &c->plan->bursts[sl[k]];
                if (o->onset_s < t1 && o->onset_s + o->duration_s > t0)
                    return 1;
            }
    }
    return 0;
}

static rt_status short_add(short_ctx *c, int role, double on, double dur, int arousal_bound, rt_error *err)
{
    synth_plan *plan = c->plan;
    double lo, hi;
    rt_synth_burst_ratio_range(&plan->opt, &lo, &hi);
    double ratio = rt_synth_round3(rt_synth_rng_range(&c->rng, lo, hi));
    double bg = plan->bg_uv[role][(long)floor(on) / RT_EPOCH_WHOLE_S];
    synth_burst b = {role, on, dur, bg * ratio, ratio, arousal_bound};
    rt_status st = rt_synth_push_burst(plan, &b, err);
    if (st != RT_OK)
        return st;
    int *sl = slot_at(c, role, (long)floor(on));
    sl[sl[0] < 0 ? 0 : 1] = (int)plan->n_bursts - 1;
    return RT_OK;
}

static double short_duration(short_ctx *c)
{
    return rt_synth_round3(rt_synth_rng_range(&c->rng, 0.10, 0.30));
}

/* One burst for the 3-s mini starting at m0: a third straddle a 2-s or 3-s
 * boundary of it (m0, m0 + 3, or an even second inside) with 0.05 s to
 * dur - 0.05 s of the burst before the boundary; the others start anywhere
 * in the mini. Up to 30 draws; returns 1 when placed. */
static int short_in_mini(short_ctx *c, int role, const synth_bout *bout, long m0, rt_status *st,
                         rt_error *err)
{
    for (int tries = 0; tries < 30; tries++) {
        double dur = short_duration(c), on;
        if (rt_synth_rng_uniform(&c->rng) < 1.0 / 3.0) {
            long cand[4];
            int n = 0;
            cand[n++] = m0;
            cand[n++] = m0 + 3;
            for (long s = m0 + 1; s < m0 + 3; s++)
                if (s % 2 == 0)
                    cand[n++] = s;
            long b = cand[rt_synth_rng_int(&c->rng, 0, n - 1)];
            on = (double)b - rt_synth_round3(rt_synth_rng_range(&c->rng, 0.05, dur - 0.05));
        } else {
            on = (double)m0 + rt_synth_round3(rt_synth_rng_range(&c->rng, 0.0, 3.0));
        }
        if (short_fits(c, role, bout, on, dur)) {
            *st = short_add(c, role, on, dur, 0, err);
            return 1;
        }
    }
    return 0;
}

/* Arousal-bound short bursts: 1-3 for chin and both legs inside each
 * respiratory arousal that lies in a REM bout (as on the grid). */
static rt_status short_arousals(short_ctx *c, rt_error *err)
{
    static const int roles[] = {SYNTH_CHIN, SYNTH_LEG_L, SYNTH_LEG_R};
    synth_plan *plan = c->plan;
    for (size_t i = 0; i < plan->n_events; i++) {
        const synth_event *ev = &plan->events[i];
        if (ev->type != SYNTH_RESP_AROUSAL)
            continue;
        int b = rt_synth_bout_of_epoch(plan, (int)(ev->start_s / RT_EPOCH_WHOLE_S));
        if (b < 0)
            continue;
        int last_epoch = (int)((ev->start_s + ev->duration_s - 1) / RT_EPOCH_WHOLE_S);
        if (rt_synth_bout_of_epoch(plan, last_epoch) != b)
            continue;
        for (int r = 0; r < 3; r++) {
            int want = rt_synth_rng_int(&c->rng, 1, 3), placed = 0;
            for (int tries = 0; tries < 30 && placed < want; tries++) {
                double dur = short_duration(c);
                double on = (double)ev->start_s +
                            rt_synth_round3(rt_synth_rng_range(&c->rng, 0.0, (double)ev->duration_s - dur));
                if (!short_fits(c, roles[r], &plan->bouts[b], on, dur))
                    continue;
                rt_status st = short_add(c, roles[r], on, dur, 1, err);
                if (st != RT_OK)
                    return st;
                placed++;
            }
        }
    }
    return RT_OK;
}

rt_status rt_synth_place_short_bursts(synth_plan *plan, const double burst_minis[SYNTH_ROLES],
                                      double active_epochs, rt_error *err)
{
    short_ctx c;
    c.plan = plan;
    rt_synth_rng_seed(&c.rng, plan->opt.seed, SYNTH_STREAM_SHORT_BURSTS);
    int rem_epochs = 0;
    for (int b = 0; b < plan->n_bouts; b++)
        rem_epochs += plan->bouts[b].epochs;
    size_t n_slots = (size_t)SYNTH_ROLES * (size_t)plan->n_seconds * 2;
    c.slot = malloc(n_slots * sizeof *c.slot);
    int *rem_list = rt_calloc((size_t)rem_epochs + 1, sizeof *rem_list);
    int *cand = rt_calloc((size_t)rem_epochs * RT_MINIS3_PER_EPOCH + 1, sizeof *cand);
    unsigned char *active = rt_calloc((size_t)plan->n_epochs + 1, 1);
    if (!c.slot || !rem_list || !cand || !active) {
        free(c.slot);
        free(rem_list);
        free(cand);
        free(active);
        return rt_fail(err, RT_ERR_NOMEM, "synthetic night: out of memory (short bursts)");
    }
    for (size_t i = 0; i < n_slots; i++)
        c.slot[i] = -1;
    /* The grid placement already drew its numbers (so the body positions
     * after it stay put); its bursts are replaced. */
    plan->n_bursts = 0;
    rt_status st = short_arousals(&c, err);
    int r_n = 0;
    for (int b = 0; b < plan->n_bouts; b++)
        for (int e = 0; e < plan->bouts[b].epochs; e++)
            rem_list[r_n++] = plan->bouts[b].first_epoch + e;
    rt_synth_shuffle(rem_list, r_n, &c.rng);
    int n_active = (int)lround(active_epochs * r_n);
    for (int i = 0; i < n_active; i++)
        active[rem_list[i]] = 1;
    for (int role = 0; role < SYNTH_ROLES && st == RT_OK; role++) {
        int base = 0, holding = 0, n_cand = 0;
        for (int b = 0; b < plan->n_bouts; b++)
            for (int e = plan->bouts[b].first_epoch; e < plan->bouts[b].first_epoch + plan->bouts[b].epochs; e++)
                for (int k = 0; k < RT_MINIS3_PER_EPOCH; k++) {
                    long m0 = (long)e * RT_EPOCH_WHOLE_S + 3 * k;
                    if (role == SYNTH_CHIN && plan->tonic[e])
                        continue;
                    base++;
                    if (short_holds(&c, role, (double)m0, (double)m0 + 3.0))
                        holding++;
                    else if (active[e])
                        cand[n_cand++] = (int)(m0 / 3); /* mini index in the night */
                }
        int quota = (int)lround(burst_minis[role] * base) - holding;
        for (int i = 0; i < quota && i < n_cand && st == RT_OK; i++) {
            int j = rt_synth_rng_int(&c.rng, i, n_cand - 1);
            int t = cand[i];
            cand[i] = cand[j];
            cand[j] = t;
            long m0 = 3L * cand[i];
            /* a burst that crossed into this mini earlier already fills it */
            if (short_holds(&c, role, (double)m0, (double)m0 + 3.0))
                continue;
            int b = rt_synth_bout_of_epoch(plan, (int)(m0 / RT_EPOCH_WHOLE_S));
            (void)short_in_mini(&c, role, &plan->bouts[b], m0, &st, err);
        }
    }
    free(c.slot);
    free(rem_list);
    free(cand);
    free(active);
    return st;
}
