/* Scoring one night in two passes over the REM bouts (docs/scoring.md):
 *   pass 1 conditions every bout of every EMG role (condition.c) and keeps
 *          each scorable second's level;
 *   then   the atonic background of each role is fitted to the whole night's
 *          REM (background.c), so activity of any length cannot raise it;
 *   pass 2 conditions each bout again and labels its mini-epochs: phasic
 *          bursts and tonic shares against that background, quality marks,
 *          the REM Atonia Index counts.
 * The indices and the review level are computed from the labels in
 * indices.c. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "background.h"
#include "condition.h"
#include "detect.h"
#include "exclusions.h"
#include "internal.h"
#include "night_internal.h"
#include "quality/quality.h"
#include "rai.h"

#define MINI3_PER_EPOCH 10
#define MINI2_PER_EPOCH 15
#define PI 3.14159265358979323846

static bool is_emg(rt_role r) { return r != RT_ROLE_ECG; }
static bool is_nrem(unsigned char s) { return s == RT_STAGE_N1 || s == RT_STAGE_N2 || s == RT_STAGE_N3; }

/* What both passes share: the conditioners, the beats of each bout, the
 * stretch buffers and the per-second arrays of the bout being labelled. */
typedef struct pass_ctx {
    rt_recording *rec;
    const rt_role_map *roles;
    rt_night *night;
    scoring_state *ss;
    bout_span *bouts;
    rt_conditioner cond[RT_ROLE_COUNT];
    bool cond_open[RT_ROLE_COUNT];
    rt_qrs_beats *beats;     /* per bout */
    int *beats_source;       /* per bout */
    rt_stretch st;
    double *bg;              /* background per second of the current bout */
    size_t bg_cap;
    rt_span *spans;
    size_t span_cap;
    rt_level_point *points[RT_ROLE_COUNT]; /* pass 1: scorable REM seconds */
    size_t n_points[RT_ROLE_COUNT];
    size_t *bout_first_point[RT_ROLE_COUNT]; /* per bout: its first entry in points, */
                                             /* and (at n_bouts) the end */
    rt_level_point *nrem_points[RT_ROLE_COUNT]; /* NREM seconds (drift) */
    size_t n_nrem_points[RT_ROLE_COUNT];
    rt_atonic_model model[RT_ROLE_COUNT];
} pass_ctx;

static double abs_tonic_env_uv(const rt_score_params *p)
{
    /* a sine wave's peak-to-peak amplitude is pi times its rectified mean, so
     * a scorer's "10 uV" read peak-to-peak off the trace is an envelope of
     * 10 / pi = 3.2 uV (docs/scoring.md, "Tonic activity") */
    return p->tonic_abs_p2p_uv / PI;
}

/* Marks every mini-epoch of a grid that a burst overlaps. */
static void mark_minis(rt_mini *minis, size_t n_minis, double mini_s, double t0, double rate,
                       const rt_span *s, double bout_t0, rt_role role, unsigned label)
{
    double a = bout_t0 + s->start / rate, b = bout_t0 + s->end / rate;
    /* minis of this bout start at t0 and are contiguous */
    if (b <= t0)
        return;
    size_t first = a <= t0 ? 0 : (size_t)floor((a - t0) / mini_s);
    for (size_t k = first; k < n_minis; k++) {
        double ms = t0 + (double)k * mini_s;
        if (ms >= b)
            break;
        if (ms + mini_s > a)
            minis[k].labels[role] |= (unsigned char)label;
    }
}

static rt_status add_burst(rt_night *night, size_t *cap, rt_role role, double t0, double rate,
                           const rt_span *s, unsigned rules, rt_error *err)
{
    if (night->n_bursts == *cap) {
        size_t ncap = *cap ? 2 * *cap : 256;
        rt_burst *nb = realloc(night->bursts, ncap * sizeof *nb);
        if (!nb)
            return rt_fail(err, RT_ERR_NOMEM, "out of memory for bursts");
        night->bursts = nb;
        *cap = ncap;
    }
    rt_burst *b = &night->bursts[night->n_bursts++];
    b->role = role;
    b->onset_s = t0 + s->start / rate;
    b->duration_s = (s->end - s->start) / rate;
    b->peak_ratio = s->ratio;
    b->rules = rules;
    return RT_OK;
}

/* One rule's bursts on the conditioned bout, marked on the grids it applies to. */
static rt_status detect_rule(pass_ctx *c, rt_role role, const bout_span *bout,
                             const rt_burst_rule *rule, unsigned label, rt_error *err)
{
    rt_night *night = c->night;
    const rt_stretch *st = &c->st;
    double rate = st->rate_hz;
    size_t merge = (size_t)llround(night->params.burst_merge_gap_s * rate);
    size_t found = rt_find_bursts(st->env, st->n, c->bg, st->starts, st->seconds, rate, rule,
                                  merge < 1 ? 1 : merge, c->spans, c->span_cap, st->scratch);
    if (found > c->span_cap)
        found = c->span_cap;
    rt_channel_quality *q = &night->channel[role].quality;
    for (size_t i = 0; i < found; i++) {
        const rt_span *s = &c->spans[i];
        double a = s->start / rate, b = s->end / rate;
        if (rt_stretch_marked(st, a, b))
            continue; /* not scorable there: the mini-epochs are left out anyway */
        if (st->n_qrs && rt_qrs_overlap(st->qrs, st->n_qrs, a, b) >= 0.5) {
            q->bursts_vetoed += label == RT_LABEL_SINBAR_PHASIC;
            continue; /* an ECG complex, not muscle */
        }
        if (label == RT_LABEL_MONTREAL_PHASIC)
            mark_minis(night->minis2 + bout->mini2_first, bout->n_epochs * MINI2_PER_EPOCH, 2.0,
                       bout->t0, rate, s, bout->t0, role, label);
        else
            mark_minis(night->minis3 + bout->mini3_first, bout->n_epochs * MINI3_PER_EPOCH, 3.0,
                       bout->t0, rate, s, bout->t0, role, label);
        rt_status stt = add_burst(night, &c->ss->burst_cap, role, bout->t0, rate, s, label, err);
        if (stt != RT_OK)
            return stt;
    }
    return RT_OK;
}

/* Samples of [a, b) at the SINBAR/Montreal tonic level: at least tonic_k x
 * background, or above the absolute level. */
static size_t tonic_samples(const pass_ctx *c, size_t a, size_t b)
{
    const rt_score_params *p = &c->night->params;
    return rt_count_tonic(c->st.env, a, b, c->bg, c->st.starts, c->st.seconds, p->tonic_k,
                          abs_tonic_env_uv(p));
}

static double stretch_median(const rt_stretch *st, size_t a, size_t b, double *scratch)
{
    size_t len = 0;
    for (size_t i = a; i < b; i += 4)
        scratch[len++] = st->env[i];
    return len ? rt_quantile(scratch, len, 0.5) : 0.0;
}

/* Tonic shares and audit levels on the 3-s grid and the epochs of a bout. */
static void label_tonic(pass_ctx *c, rt_role role, const bout_span *bout)
{
    rt_night *night = c->night;
    const rt_score_params *p = &night->params;
    const rt_stretch *st = &c->st;
    size_t seconds = st->seconds;
    for (size_t k = 0; k < bout->n_epochs * MINI3_PER_EPOCH; k++) {
        rt_mini *m = &night->minis3[bout->mini3_first + k];
        size_t a = st->starts[3 * k], b = st->starts[3 * k + 3];
        size_t tonic = tonic_samples(c, a, b);
        if (b > a && 2 * tonic > b - a)
            m->labels[role] |= RT_LABEL_SINBAR_TONIC;
        if (m->labels[role] & (RT_LABEL_SINBAR_TONIC | RT_LABEL_SINBAR_PHASIC))
            m->labels[role] |= RT_LABEL_SINBAR_ANY;
        m->envelope_uv[role] = (float)stretch_median(st, a, b, st->scratch);
        m->background_uv[role] = (float)c->bg[3 * k + 1];
    }
    if (role != RT_ROLE_CHIN)
        return;
    double aasm_level = p->aasm_nrem_margin * night->nrem_reference_uv;
    for (size_t e = 0; e < bout->n_epochs; e++) {
        rt_epoch_result *er = &night->epochs[bout->epoch_first + e];
        size_t a = st->starts[30 * e], b = st->starts[30 * e + 30];
        size_t tonic = tonic_samples(c, a, b);
        er->tonic_share = b > a ? (double)tonic / (double)(b - a) : 0.0;
        er->sinbar_tonic = 2 * tonic > b - a;
        if (isfinite(night->nrem_reference_uv)) {
            /* "greater than the minimum NREM amplitude" for at least 50 % (AASM),
             * "greater" meaning by the margin a scorer sees */
            size_t above = rt_count_tonic(st->env, a, b, c->bg, st->starts, seconds, 0.0,
                                          aasm_level);
            er->aasm_tonic = 2 * above >= b - a;
        }
    }
    /* Montreal tonic: 20-s windows tiled from the bout start; the remainder is dropped */
    size_t win = (size_t)llround(p->montreal_epoch_s);
    size_t base = bout->epoch_first * 30;
    for (size_t s0 = 0; s0 + win <= seconds; s0 += win) {
        if (rt_exclusions_of(c->ss->masks, RT_ROLE_CHIN, base + s0, win))
            continue; /* a window touching an excluding event leaves the count */
        size_t a = st->starts[s0], b = st->starts[s0 + win];
        c->ss->montreal_windows++;
        c->ss->montreal_tonic += 2 * tonic_samples(c, a, b) > b - a;
    }
}

static rt_status count_rai(pass_ctx *c, const bout_span *bout, rt_error *err)
{
    size_t seconds = c->st.seconds;
    double *floored = rt_calloc(seconds ? seconds : 1, sizeof *floored);
    bool *skip = rt_calloc(seconds ? seconds : 1, sizeof *skip);
    if (!floored || !skip) {
        free(floored);
        free(skip);
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for the REM Atonia Index");
    }
    /* the floor is taken over every second of the bout; excluded seconds are
     * then left out of the counts (as for the mini-epoch indices) */
    rt_rai_remove_floor(c->st.rect_mean_uv, seconds, 60, floored);
    size_t base = bout->epoch_first * 30;
    for (size_t j = 0; j < seconds; j++)
        skip[j] = rt_exclusions_of(c->ss->masks, RT_ROLE_CHIN, base + j, 1) != 0;
    rt_rai_count(floored, seconds, skip, &c->ss->rai);
    free(floored);
    free(skip);
    return RT_OK;
}

/* Leaves out the mini-epochs, seconds and minutes a quality mark covers, for
 * this role. */
static rt_status apply_marks(pass_ctx *c, rt_role role, const bout_span *bout, rt_error *err)
{
    rt_night *night = c->night;
    const rt_stretch *st = &c->st;
    rt_channel_quality *q = &night->channel[role].quality;
    size_t base = bout->epoch_first * 30;
    for (size_t k = 0; k < st->n_marks; k++) {
        const rt_quality_mark *m = &st->marks[k];
        size_t a = (size_t)floor(m->start_s), b = (size_t)ceil(m->end_s);
        if (b > st->seconds)
            b = st->seconds;
        if (a >= b)
            continue;
        unsigned bit = RT_EXCLUDED_BY_QUALITY(m->reason);
        rt_status s = rt_exclusions_mark_role(c->ss->masks, role, base + a, b - a, bit, err);
        if (s != RT_OK)
            return s;
        q->unscorable_min[m->reason] += (m->end_s - m->start_s) / 60.0;
        for (size_t i = a / 3; i * 3 < b; i++) {
            rt_mini *mi = &night->minis3[bout->mini3_first + i];
            mi->labels[role] |= RT_LABEL_EXCLUDED;
            if (role == RT_ROLE_CHIN)
                mi->excluded_by |= bit;
        }
        for (size_t i = a / 2; i * 2 < b; i++)
            night->minis2[bout->mini2_first + i].labels[role] |= RT_LABEL_EXCLUDED;
    }
    return RT_OK;
}

/* The per-second background of the current bout from the role's model, and
 * room for the bursts. */
static rt_status bout_background(pass_ctx *c, rt_role role, const bout_span *bout, rt_error *err)
{
    size_t seconds = c->st.seconds;
    if (seconds + 1 > c->bg_cap) {
        double *bg = realloc(c->bg, (seconds + 1) * sizeof *bg);
        if (!bg)
            return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu seconds", seconds);
        c->bg = bg;
        c->bg_cap = seconds + 1;
    }
    for (size_t j = 0; j < seconds; j++)
        c->bg[j] = rt_night_background_uv(c->night, role, bout->t0 + (double)j + 0.5);
    c->bg[seconds] = seconds ? c->bg[seconds - 1] : NAN;
    size_t need = 10 * seconds + 16; /* bursts are 0.1 s apart at the least */
    if (need > c->span_cap) {
        rt_span *sp = realloc(c->spans, need * sizeof *sp);
        if (!sp)
            return rt_fail(err, RT_ERR_NOMEM, "out of memory for bursts");
        c->spans = sp;
        c->span_cap = need;
    }
    return RT_OK;
}

/* Appends the level of every unmarked second of the conditioned stretch to
 * *pts (growing it). */
static rt_status append_levels(const rt_stretch *st, rt_level_point **pts, size_t *n,
                               rt_error *err)
{
    rt_level_point *p = realloc(*pts, (*n + st->seconds + 1) * sizeof *p);
    if (!p)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for the per-second levels");
    *pts = p;
    for (size_t j = 0; j < st->seconds; j++) {
        if (rt_stretch_marked(st, (double)j, (double)j + 1.0))
            continue; /* a loose lead or clipping is not the muscle's level */
        p[*n].t_s = st->t0_s + (double)j + 0.5;
        p[*n].level_uv = st->level_uv[j];
        (*n)++;
    }
    return RT_OK;
}

/* Pass 1 for one role of one bout: the level of every scorable second. */
static rt_status collect_levels(pass_ctx *c, rt_role role, const bout_span *bout, size_t b,
                                rt_error *err)
{
    rt_status st = rt_condition_stretch(&c->cond[role], bout->t0, bout->n_epochs * 30,
                                        &c->beats[b], &c->st, err);
    c->bout_first_point[role][b] = c->n_points[role];
    if (st == RT_OK)
        st = append_levels(&c->st, &c->points[role], &c->n_points[role], err);
    c->bout_first_point[role][b + 1] = c->n_points[role];
    return st;
}

/* Pass 2 for one role of one bout: quality, bursts, tonic, RAI. */
static rt_status label_role_bout(pass_ctx *c, rt_role role, const bout_span *bout, size_t b,
                                 rt_error *err)
{
    rt_night *night = c->night;
    const rt_score_params *p = &night->params;
    rt_channel_quality *q = &night->channel[role].quality;
    size_t seconds = bout->n_epochs * 30;
    rt_status st = rt_condition_stretch(&c->cond[role], bout->t0, seconds, &c->beats[b], &c->st, err);
    if (st == RT_OK)
        st = apply_marks(c, role, bout, err);
    if (st == RT_OK)
        st = bout_background(c, role, bout, err);
    if (st != RT_OK)
        return st;
    q->ecg_source = c->beats_source[b] ? c->beats_source[b] : q->ecg_source;
    q->beats += role == RT_ROLE_CHIN ? c->beats[b].n : 0;
    q->ecg_found |= c->st.ecg.found;
    q->ecg_removed |= c->st.ecg.removed;
    double tol = p->burst_duration_tolerance_s;
    size_t win = c->cond[role].envelope_window;
    const rt_burst_rule aasm = {p->aasm_burst_k, p->burst_min_s, p->burst_max_s, tol, win};
    const rt_burst_rule sinbar = {p->sinbar_burst_k, p->burst_min_s, p->burst_max_s, tol, win};
    const rt_burst_rule montreal = {p->montreal_burst_k, p->burst_min_s, p->montreal_burst_max_s,
                                    tol, win};
    st = detect_rule(c, role, bout, &aasm, RT_LABEL_AASM_PHASIC, err);
    if (st == RT_OK)
        st = detect_rule(c, role, bout, &sinbar, RT_LABEL_SINBAR_PHASIC, err);
    if (st == RT_OK)
        st = detect_rule(c, role, bout, &montreal, RT_LABEL_MONTREAL_PHASIC, err);
    if (st != RT_OK)
        return st;
    label_tonic(c, role, bout);
    return role == RT_ROLE_CHIN ? count_rai(c, bout, err) : RT_OK;
}

/* Limb NREM runs read for the drift: one run in NREM_DRIFT_STRIDE (10 minutes
 * of every hour or so of NREM is plenty for a line through the night). */
#define NREM_DRIFT_STRIDE 6

/* NREM in runs of up to 20 epochs on the same conditioning path as REM: the
 * per-second levels of every role (the drift of its background; the chin's
 * from every run, the limbs' from every NREM_DRIFT_STRIDE-th) and, for the
 * chin, the AASM tonic reference: a low
 * quantile of the median envelope of each unmarked NREM epoch ("the minimum
 * amplitude in NREM"). */
static rt_status nrem_pass(pass_ctx *c, const rt_timeline *tl, double *ref, rt_error *err)
{
    *ref = NAN;
    size_t count = 0;
    for (size_t e = 0; e < tl->n_epochs; e++)
        count += is_nrem(tl->stages[e]);
    if (count == 0)
        return RT_OK;
    double *medians = rt_calloc(count, sizeof *medians);
    if (!medians)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu NREM epochs", count);
    size_t m = 0, e = 0, chunk = 0;
    rt_status st = RT_OK;
    while (e < tl->n_epochs && st == RT_OK) {
        if (!is_nrem(tl->stages[e])) {
            e++;
            continue;
        }
        size_t run = 0;
        while (e + run < tl->n_epochs && is_nrem(tl->stages[e + run]) && run < 20)
            run++;
        for (int r = 0; r < RT_ROLE_COUNT && st == RT_OK; r++) {
            if (!c->cond_open[r] || (r != RT_ROLE_CHIN && chunk % NREM_DRIFT_STRIDE != 0))
                continue;
            st = rt_condition_stretch(&c->cond[r], (double)e * tl->epoch_s, run * 30, NULL,
                                      &c->st, err);
            if (st == RT_OK)
                st = append_levels(&c->st, &c->nrem_points[r], &c->n_nrem_points[r], err);
            for (size_t k = 0; r == RT_ROLE_CHIN && k < run && st == RT_OK; k++) {
                double e0 = (double)(k * 30);
                if (rt_stretch_marked(&c->st, e0, e0 + 30.0))
                    continue; /* a loose lead or clipping would bend the reference */
                medians[m++] = stretch_median(&c->st, c->st.starts[k * 30],
                                              c->st.starts[k * 30 + 30], c->st.scratch);
            }
        }
        e += run;
        chunk++;
    }
    if (st == RT_OK && m > 0)
        *ref = rt_quantile(medians, m, c->night->params.aasm_nrem_quantile);
    free(medians);
    return st;
}

/* REM bouts and the mini-epoch grids laid over them. */
static rt_status lay_out_rem(rt_night *night, const rt_timeline *tl, bout_span **bouts_out,
                             rt_error *err)
{
    size_t rem = 0, bouts = 0;
    for (size_t e = 0; e < tl->n_epochs; e++) {
        if (tl->stages[e] != RT_STAGE_R)
            continue;
        rem++;
        bouts += (e == 0 || tl->stages[e - 1] != RT_STAGE_R);
    }
    night->rem_epochs = rem;
    night->n_bouts = bouts;
    night->epochs = rt_calloc(rem, sizeof *night->epochs);
    night->minis3 = rt_calloc(rem * MINI3_PER_EPOCH, sizeof *night->minis3);
    night->minis2 = rt_calloc(rem * MINI2_PER_EPOCH, sizeof *night->minis2);
    bout_span *b = rt_calloc(bouts, sizeof *b);
    if (!night->epochs || !night->minis3 || !night->minis2 || !b) {
        free(b);
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu REM epochs", rem);
    }
    night->n_epochs = rem;
    night->n_minis3 = rem * MINI3_PER_EPOCH;
    night->n_minis2 = rem * MINI2_PER_EPOCH;
    size_t k = 0, bi = 0;
    for (size_t e = 0; e < tl->n_epochs; e++) {
        if (tl->stages[e] != RT_STAGE_R)
            continue;
        if (e == 0 || tl->stages[e - 1] != RT_STAGE_R) {
            b[bi].t0 = (double)e * tl->epoch_s;
            b[bi].epoch_first = k;
            b[bi].mini3_first = k * MINI3_PER_EPOCH;
            b[bi].mini2_first = k * MINI2_PER_EPOCH;
            bi++;
        }
        b[bi - 1].n_epochs++;
        rt_epoch_result *er = &night->epochs[k];
        er->epoch = e;
        er->onset_s = (double)e * tl->epoch_s;
        er->bout = bi - 1;
        for (int m = 0; m < MINI3_PER_EPOCH; m++) {
            rt_mini *mi = &night->minis3[k * MINI3_PER_EPOCH + (size_t)m];
            mi->epoch = e;
            mi->index = m;
            mi->onset_s = er->onset_s + 3.0 * m;
        }
        for (int m = 0; m < MINI2_PER_EPOCH; m++) {
            rt_mini *mi = &night->minis2[k * MINI2_PER_EPOCH + (size_t)m];
            mi->epoch = e;
            mi->index = m;
            mi->onset_s = er->onset_s + 2.0 * m;
        }
        k++;
    }
    *bouts_out = b;
    return RT_OK;
}

/* Every mini-epoch whose seconds an excluding event touches is left out, for
 * the channels the event concerns. */
static void mark_exclusions(rt_night *night, const rt_exclusion_masks *m)
{
    struct grid { rt_mini *minis; size_t n; size_t len_s; } grids[2] = {
        {night->minis3, night->n_minis3, 3}, {night->minis2, night->n_minis2, 2}};
    for (int g = 0; g < 2; g++) {
        for (size_t i = 0; i < grids[g].n; i++) {
            rt_mini *mi = &grids[g].minis[i];
            size_t first = i * grids[g].len_s; /* minis are contiguous REM seconds */
            for (int r = 0; r < RT_ROLE_COUNT; r++) {
                unsigned bits = rt_exclusions_of(m, (rt_role)r, first, grids[g].len_s);
                if (!bits)
                    continue;
                mi->labels[r] |= RT_LABEL_EXCLUDED;
                if (r == RT_ROLE_CHIN)
                    mi->excluded_by |= bits;
            }
        }
    }
}

static void mark_absent(rt_night *night, rt_role role)
{
    for (size_t i = 0; i < night->n_minis3; i++)
        night->minis3[i].labels[role] = RT_LABEL_ABSENT;
    for (size_t i = 0; i < night->n_minis2; i++)
        night->minis2[i].labels[role] = RT_LABEL_ABSENT;
}

static void check_prefilter(rt_night *night, const rt_recording *rec, const rt_role_source *src,
                            rt_channel_quality *q)
{
    rt_channel_check check;
    rt_quality_check_channel(rt_recording_channel(rec, src->channel), night->params.band_low_hz,
                             night->params.band_high_hz, &check);
    q->hp_above_band = check.hp_above_band;
    q->lp_below_band = check.lp_below_band;
    q->notch_at_source = check.notch_at_source;
    if (check.hp_above_band || check.lp_below_band)
        rt_night_warn(night, "%s: the recording's own filters (%s) narrow the %g-%g Hz band: "
                      "amplitudes are not comparable with published values", src->label,
                      rt_recording_channel(rec, src->channel)->prefilter,
                      night->params.band_low_hz, night->params.band_high_hz);
}

/* The conditioners of the EMG roles, with the mains probe on the first REM bout. */
static rt_status open_channels(pass_ctx *c, rt_error *err)
{
    rt_night *night = c->night;
    const rt_score_params *p = &night->params;
    const bout_span *first = night->n_bouts ? &c->bouts[0] : NULL;
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        const rt_role_source *src = &c->roles->role[r];
        rt_channel_result *cr = &night->channel[r];
        if (!is_emg((rt_role)r) || src->channel < 0)
            continue;
        cr->present = true;
        rt_copy_string(cr->label, sizeof cr->label, src->label);
        cr->rate_hz = src->rate_hz;
        check_prefilter(night, c->rec, src, &cr->quality);
        rt_status st = rt_conditioner_open(c->rec, src, p, first ? first->t0 : 0.0,
                                           first ? (double)first->n_epochs * 30.0 : 0.0,
                                           &c->cond[r], err);
        if (st != RT_OK)
            return st;
        c->cond_open[r] = true;
        const rt_mains *mains = &c->cond[r].mains;
        rt_channel_quality *q = &cr->quality;
        q->line_db = -99.0;
        q->low_edge_db = q->high_edge_db = NAN;
        if (first) {
            rt_quality_band_edges(mains, q);
            if (mains->present) {
                q->line_hz = mains->line_hz;
                q->line_db = mains->line_db;
                q->notches = mains->n_notches;
            }
        }
        if (q->spectrum_narrow)
            rt_night_warn(night, "%s: its spectrum falls off inside the %g-%g Hz band (%.0f dB at "
                          "10-15 Hz, %.0f dB at 75-95 Hz against 25-45 Hz): it was filtered "
                          "narrower when recorded", src->label, p->band_low_hz, p->band_high_hz,
                          q->low_edge_db, q->high_edge_db);
        cr->band_high_hz = rt_bandpass_high_hz(c->cond[r].bp);
        if (src->rate_hz < p->min_rate_hz) {
            cr->low_rate = true;
            rt_night_warn(night, "%s (%s) is sampled at %g Hz, below the %g Hz minimum for EMG "
                          "(AASM): scored, but bursts may be missed", rt_role_name((rt_role)r),
                          src->label, src->rate_hz, p->min_rate_hz);
        }
        if (cr->band_high_hz < p->band_high_hz - 1e-9)
            rt_night_warn(night, "%s: low-pass corner lowered to %g Hz (below Nyquist at %g Hz)",
                          src->label, cr->band_high_hz, src->rate_hz);
    }
    return RT_OK;
}

/* Pass 1 over every bout, then the background fit of each role. */
static rt_status fit_backgrounds(pass_ctx *c, rt_error *err)
{
    rt_night *night = c->night;
    rt_status st = RT_OK;
    night->bout_lift = rt_calloc(night->n_bouts * RT_ROLE_COUNT + 1, sizeof *night->bout_lift);
    bool ok = night->bout_lift != NULL;
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        c->bout_first_point[r] = rt_calloc(night->n_bouts + 1, sizeof *c->bout_first_point[r]);
        ok = ok && c->bout_first_point[r];
    }
    if (!ok)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu REM bouts", night->n_bouts);
    for (size_t b = 0; b < night->n_bouts && st == RT_OK; b++) {
        st = rt_condition_beats(c->rec, c->roles, c->bouts[b].t0, c->bouts[b].n_epochs * 30,
                                &c->beats[b], &c->beats_source[b], err);
        for (int r = 0; r < RT_ROLE_COUNT && st == RT_OK; r++)
            if (c->cond_open[r])
                st = collect_levels(c, (rt_role)r, &c->bouts[b], b, err);
    }
    for (int r = 0; r < RT_ROLE_COUNT && st == RT_OK; r++) {
        if (!c->cond_open[r])
            continue;
        const rt_atonic_model *m = &c->model[r];
        st = rt_atonic_fit(c->points[r], c->n_points[r], c->nrem_points[r], c->n_nrem_points[r],
                           &night->params, &c->model[r], err);
        rt_channel_result *cr = &night->channel[r];
        cr->atonic_valid = m->valid;
        cr->atonic_uv = m->level_uv;
        cr->atonic_floor_uv = m->floor_uv;
        cr->atonic_ref_s = m->ref_s;
        cr->atonic_drift_per_h = m->drift_per_s * 3600.0;
        cr->atonic_minutes = m->minutes;
        double *scratch = rt_calloc(c->n_points[r] + 1, sizeof *scratch);
        if (st == RT_OK && !scratch)
            st = rt_fail(err, RT_ERR_NOMEM, "out of memory for the bout backgrounds");
        for (size_t b = 0; b < night->n_bouts && st == RT_OK; b++) {
            size_t first = c->bout_first_point[r][b], end = c->bout_first_point[r][b + 1];
            night->bout_lift[b * RT_ROLE_COUNT + (size_t)r] =
                rt_atonic_bout_lift(m, c->points[r] + first, end - first, &night->params, scratch);
        }
        free(scratch);
    }
    return st;
}

static void pass_ctx_free(pass_ctx *c)
{
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        rt_conditioner_close(&c->cond[r]);
        free(c->points[r]);
        free(c->nrem_points[r]);
        free(c->bout_first_point[r]);
    }
    if (c->beats)
        for (size_t b = 0; b < c->night->n_bouts; b++)
            rt_qrs_beats_free(&c->beats[b]);
    free(c->beats);
    free(c->beats_source);
    rt_stretch_free(&c->st);
    free(c->bg);
    free(c->spans);
}

static rt_status score_passes(pass_ctx *c, const rt_timeline *tl, rt_error *err)
{
    rt_night *night = c->night;
    rt_status st = open_channels(c, err);
    if (st == RT_OK && night->n_bouts) {
        c->beats = rt_calloc(night->n_bouts, sizeof *c->beats);
        c->beats_source = rt_calloc(night->n_bouts, sizeof *c->beats_source);
        if (!c->beats || !c->beats_source)
            st = rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu REM bouts", night->n_bouts);
    }
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        if (is_emg((rt_role)r) && !night->channel[r].present)
            mark_absent(night, (rt_role)r);
    if (st == RT_OK)
        st = nrem_pass(c, tl, &night->nrem_reference_uv, err);
    if (st == RT_OK)
        st = fit_backgrounds(c, err);
    for (size_t b = 0; b < night->n_bouts && st == RT_OK; b++)
        for (int r = 0; r < RT_ROLE_COUNT && st == RT_OK; r++)
            if (c->cond_open[r])
                st = label_role_bout(c, (rt_role)r, &c->bouts[b], b, err);
    return st;
}

rt_status rt_night_score(rt_recording *rec, const rt_role_map *roles, const rt_timeline *tl,
                         const rt_score_params *params, const rt_cutoffs *cutoffs,
                         rt_night **out, rt_error *err)
{
    if (!out)
        return rt_fail(err, RT_ERR_USAGE, "rt_night_score: no place for the result");
    *out = NULL;
    if (!rec || !roles || !tl)
        return rt_fail(err, RT_ERR_USAGE, "rt_night_score: a recording, roles and a timeline are "
                                          "needed");
    if (fabs(tl->epoch_s - 30.0) > 1e-9)
        return rt_fail(err, RT_ERR_STAGING, "scoring needs 30-s epochs; the staging has %g-s epochs",
                       tl->epoch_s);
    rt_night *night = rt_calloc(1, sizeof *night);
    if (!night)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory");
    if (params)
        night->params = *params;
    else
        rt_score_params_default(&night->params);
    rt_status st = rt_score_params_check(&night->params, err);
    if (st != RT_OK) {
        free(night);
        return st;
    }
    if (cutoffs)
        night->cutoffs = *cutoffs;
    else
        rt_cutoffs_published(&night->cutoffs);
    rt_copy_string(night->recording_path, sizeof night->recording_path, rt_recording_path(rec));
    night->recording_s = rt_recording_duration_s(rec);
    night->nrem_reference_uv = NAN;

    scoring_state ss;
    memset(&ss, 0, sizeof ss);
    pass_ctx c;
    memset(&c, 0, sizeof c);
    night->roles = *roles;
    c.rec = rec;
    c.roles = roles;
    c.night = night;
    c.ss = &ss;
    rt_exclusion_masks masks;
    memset(&masks, 0, sizeof masks);
    st = lay_out_rem(night, tl, &c.bouts, err);
    if (st == RT_OK)
        st = rt_exclusions_build(tl, &night->params, c.bouts, night->n_bouts, night->rem_epochs,
                                 &masks, err);
    if (st == RT_OK) {
        mark_exclusions(night, &masks);
        rt_exclusions_rates(tl, c.bouts, night->n_bouts,
                            (double)night->rem_epochs * tl->epoch_s / 3600.0, &night->exclusions);
        ss.masks = &masks;
        st = score_passes(&c, tl, err);
    }
    pass_ctx_free(&c);
    rt_exclusions_free(&masks);
    free(c.bouts);
    if (st == RT_OK)
        st = rt_night_summarise(night, &ss, err);
    if (st == RT_OK)
        rt_night_agreement(night, tl);
    if (st != RT_OK) {
        rt_night_free(night);
        return st;
    }
    *out = night;
    return RT_OK;
}

double rt_night_background_uv(const rt_night *night, rt_role role, double t_s)
{
    if (!night || (int)role < 0 || role >= RT_ROLE_COUNT || !night->channel[role].present ||
        !night->channel[role].atonic_valid || !night->bout_lift)
        return NAN;
    const rt_channel_result *cr = &night->channel[role];
    /* the REM epoch holding t_s gives the bout (epochs are in time order) */
    size_t lo = 0, hi = night->n_epochs;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (night->epochs[mid].onset_s + 30.0 <= t_s)
            lo = mid + 1;
        else
            hi = mid;
    }
    if (lo == night->n_epochs || night->epochs[lo].onset_s > t_s)
        return NAN; /* not in scored REM */
    double lift = night->bout_lift[night->epochs[lo].bout * RT_ROLE_COUNT + (size_t)role];
    return cr->atonic_floor_uv * lift *
           exp(cr->atonic_drift_per_h * (t_s - cr->atonic_ref_s) / 3600.0);
}

void rt_night_free(rt_night *night)
{
    if (!night)
        return;
    free(night->epochs);
    free(night->minis3);
    free(night->minis2);
    free(night->bursts);
    free(night->bout_lift);
    free(night);
}
