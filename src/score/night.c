/* Scoring one night: REM bouts, per-role conditioning and detection, mini-epoch
 * labels, and the epoch and window counts the indices are made of. The
 * indices and the review level are computed from those labels in indices.c. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "bandpass.h"
#include "detect.h"
#include "exclusions.h"
#include "internal.h"
#include "quality/quality.h"
#include "night_internal.h"
#include "rai.h"

#define MINI3_PER_EPOCH 10
#define MINI2_PER_EPOCH 15

static bool is_emg(rt_role r) { return r != RT_ROLE_ECG; }
static bool is_nrem(unsigned char s) { return s == RT_STAGE_N1 || s == RT_STAGE_N2 || s == RT_STAGE_N3; }

/* Buffers reused across bouts and roles; grown on demand. */
typedef struct workspace {
    double *x, *scratch;
    size_t cap;                   /* samples */
    size_t *starts;
    double *medians, *background, *sec_mean, *floored;
    size_t sec_cap;               /* seconds */
    rt_span *spans;
    size_t span_cap;
    rt_quality_mark *marks;       /* quality marks of the current stretch */
    size_t n_marks, marks_cap;
    rt_time_span *qrs;            /* QRS windows of the current stretch (veto) */
    size_t n_qrs, qrs_cap;
    double *ecg;                  /* the ECG channel's samples for the current bout */
    size_t ecg_cap;
} workspace;

static void workspace_free(workspace *w)
{
    free(w->x);
    free(w->scratch);
    free(w->starts);
    free(w->medians);
    free(w->background);
    free(w->sec_mean);
    free(w->floored);
    free(w->spans);
    free(w->marks);
    free(w->qrs);
    free(w->ecg);
}

static rt_status workspace_reserve(workspace *w, size_t samples, size_t seconds, rt_error *err)
{
    if (samples > w->cap) {
        free(w->x);
        free(w->scratch);
        w->x = rt_calloc(samples, sizeof *w->x);
        w->scratch = rt_calloc(samples, sizeof *w->scratch);
        w->cap = (w->x && w->scratch) ? samples : 0;
        if (!w->cap)
            return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu samples", samples);
    }
    if (seconds + 1 > w->sec_cap) {
        size_t n = seconds + 1;
        free(w->starts);
        free(w->medians);
        free(w->background);
        free(w->sec_mean);
        free(w->floored);
        free(w->spans);
        w->starts = rt_calloc(n, sizeof *w->starts);
        w->medians = rt_calloc(n, sizeof *w->medians);
        w->background = rt_calloc(n, sizeof *w->background);
        w->sec_mean = rt_calloc(n, sizeof *w->sec_mean);
        w->floored = rt_calloc(n, sizeof *w->floored);
        w->span_cap = 4 * n; /* bursts are at least 0.1 s apart in practice; overflow is counted */
        w->spans = rt_calloc(w->span_cap, sizeof *w->spans);
        w->sec_cap = (w->starts && w->medians && w->background && w->sec_mean && w->floored &&
                      w->spans) ? n : 0;
        if (!w->sec_cap)
            return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu seconds", seconds);
    }
    return RT_OK;
}

/* Reads [t0, t0 + seconds) of a role into w->x, raw (uV); per-second
 * boundaries in w->starts. */
static rt_status read_stretch(rt_recording *rec, const rt_role_source *src, double t0,
                              size_t seconds, workspace *w, size_t *n_out, rt_error *err)
{
    double rate = src->rate_hz;
    long long first = llround(t0 * rate);
    long long last = llround((t0 + (double)seconds) * rate);
    size_t n = (size_t)(last - first);
    rt_status st = workspace_reserve(w, n, seconds, err);
    if (st == RT_OK)
        st = rt_role_read_uv(rec, src, first, n, w->x, w->scratch, err);
    if (st != RT_OK)
        return st;
    for (size_t j = 0; j <= seconds; j++)
        w->starts[j] = (size_t)(llround((t0 + (double)j) * rate) - first);
    *n_out = n;
    return RT_OK;
}

/* Quality marks of the raw stretch in w->x (docs/quality.md). */
static rt_status find_marks(workspace *w, size_t n, double rate, const rt_channel_info *info,
                            rt_error *err)
{
    w->n_marks = rt_quality_marks(w->x, n, rate, info, w->marks, w->marks_cap);
    if (w->n_marks > w->marks_cap) {
        size_t cap = w->n_marks + 16;
        rt_quality_mark *m = realloc(w->marks, cap * sizeof *m);
        if (!m)
            return rt_fail(err, RT_ERR_NOMEM, "out of memory for quality marks");
        w->marks = m;
        w->marks_cap = cap;
        w->n_marks = rt_quality_marks(w->x, n, rate, info, w->marks, w->marks_cap);
    }
    return RT_OK;
}

/* Band-pass, then (with beats) ECG template subtraction before rectifying,
 * per-second rectified means when asked, and the envelope, in place. */
static rt_status finish_stretch(rt_bandpass *bp, workspace *w, size_t n, size_t seconds,
                                size_t window, bool want_sec_mean, const double *beats_s,
                                size_t n_beats, double rate, rt_ecg_removal *ecg, rt_error *err)
{
    rt_status st = rt_bandpass_apply(bp, w->x, n, err);
    if (st == RT_OK && ecg && n_beats > 0)
        st = rt_ecg_subtract(w->x, n, rate, beats_s, n_beats, RT_ECG_PRE_S, RT_ECG_POST_S, ecg,
                             err);
    if (st != RT_OK)
        return st;
    if (want_sec_mean) {
        for (size_t j = 0; j < seconds; j++) {
            double sum = 0.0;
            for (size_t i = w->starts[j]; i < w->starts[j + 1]; i++)
                sum += fabs(w->x[i]);
            size_t len = w->starts[j + 1] - w->starts[j];
            w->sec_mean[j] = len ? sum / (double)len : 0.0;
        }
    }
    rt_envelope(w->x, n, window, w->x, w->scratch);
    return RT_OK;
}

static size_t window_samples(double seconds, double rate)
{
    size_t n = (size_t)llround(seconds * rate);
    return n < 1 ? 1 : n;
}

/* AASM tonic reference: a low quantile of the median chin envelope of each
 * NREM epoch ("the minimum amplitude in NREM"), read in chunks of 20 epochs. */
static rt_status nrem_reference(rt_recording *rec, const rt_role_source *chin, rt_bandpass *bp,
                                const rt_timeline *tl, const rt_score_params *p, workspace *w,
                                double *ref, rt_error *err)
{
    *ref = NAN;
    size_t count = 0;
    for (size_t e = 0; e < tl->n_epochs; e++)
        count += is_nrem(tl->stages[e]);
    if (count == 0)
        return RT_OK;
    double *medians = rt_calloc(count, sizeof *medians);
    if (!medians)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory");
    size_t m = 0, e = 0;
    size_t per_epoch = (size_t)llround(tl->epoch_s);
    rt_status st = RT_OK;
    while (e < tl->n_epochs && st == RT_OK) {
        if (!is_nrem(tl->stages[e])) {
            e++;
            continue;
        }
        size_t run = 0;
        while (e + run < tl->n_epochs && is_nrem(tl->stages[e + run]) && run < 20)
            run++;
        size_t n = 0;
        st = read_stretch(rec, chin, (double)e * tl->epoch_s, run * per_epoch, w, &n, err);
        if (st == RT_OK)
            st = find_marks(w, n, chin->rate_hz, rt_recording_channel(rec, chin->channel), err);
        if (st == RT_OK)
            st = finish_stretch(bp, w, n, run * per_epoch,
                                window_samples(p->envelope_window_s, chin->rate_hz), false, NULL, 0,
                                chin->rate_hz, NULL, err);
        for (size_t k = 0; k < run && st == RT_OK; k++) {
            /* an epoch with a loose lead or clipping would bend the reference */
            double e0 = (double)(k * per_epoch), e1 = e0 + (double)per_epoch;
            bool marked = false;
            for (size_t q = 0; q < w->n_marks && !marked; q++)
                marked = w->marks[q].start_s < e1 && w->marks[q].end_s > e0;
            if (marked)
                continue;
            /* every 4th envelope sample: the envelope is smooth over 0.05 s */
            size_t a = w->starts[k * per_epoch], b = w->starts[(k + 1) * per_epoch], len = 0;
            for (size_t i = a; i < b; i += 4)
                w->scratch[len++] = w->x[i];
            medians[m++] = len ? rt_quantile(w->scratch, len, 0.5) : 0.0;
        }
        e += run;
    }
    if (st == RT_OK && m > 0)
        *ref = rt_quantile(medians, m, p->aasm_nrem_quantile);
    (void)count;
    free(medians);
    return st;
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

/* One rule's bursts on one role of one bout, marked on the grids it applies to. */
static rt_status detect_rule(rt_night *night, scoring_state *ss, workspace *w, size_t n,
                             size_t seconds, const rt_role_source *src, rt_role role,
                             const bout_span *bout, const rt_burst_rule *rule, unsigned label,
                             rt_error *err)
{
    double rate = src->rate_hz;
    size_t merge = window_samples(night->params.burst_merge_gap_s, rate);
    size_t found = rt_find_bursts(w->x, n, w->background, w->starts, seconds, rate, rule, merge,
                                  w->spans, w->span_cap, w->scratch);
    if (found > w->span_cap)
        found = w->span_cap;
    rt_channel_quality *q = &night->channel[role].quality;
    for (size_t i = 0; i < found; i++) {
        const rt_span *s = &w->spans[i];
        double a = s->start / rate, b = s->end / rate;
        bool on_mark = false;
        for (size_t k = 0; k < w->n_marks && !on_mark; k++)
            on_mark = w->marks[k].start_s < b && w->marks[k].end_s > a;
        if (on_mark)
            continue; /* not scorable there: the mini-epochs are left out anyway */
        if (w->n_qrs && rt_qrs_overlap(w->qrs, w->n_qrs, a, b) >= 0.5) {
            q->bursts_vetoed += label == RT_LABEL_SINBAR_PHASIC;
            continue; /* an ECG complex, not muscle */
        }
        if (label == RT_LABEL_MONTREAL_PHASIC)
            mark_minis(night->minis2 + bout->mini2_first, bout->n_epochs * MINI2_PER_EPOCH, 2.0,
                       bout->t0, rate, s, bout->t0, role, label);
        else
            mark_minis(night->minis3 + bout->mini3_first, bout->n_epochs * MINI3_PER_EPOCH, 3.0,
                       bout->t0, rate, s, bout->t0, role, label);
        rt_status st = add_burst(night, &ss->burst_cap, role, bout->t0, rate, s, label, err);
        if (st != RT_OK)
            return st;
    }
    return RT_OK;
}

static double stretch_median(const workspace *w, size_t a, size_t b, double *scratch)
{
    size_t len = 0;
    for (size_t i = a; i < b; i += 4)
        scratch[len++] = w->x[i];
    return len ? rt_quantile(scratch, len, 0.5) : 0.0;
}

/* Tonic shares and audit levels on the 3-s grid and the epochs of a bout. */
static void label_tonic(rt_night *night, scoring_state *ss, workspace *w, size_t seconds,
                        rt_role role, const bout_span *bout, double *scratch)
{
    const rt_score_params *p = &night->params;
    for (size_t k = 0; k < bout->n_epochs * MINI3_PER_EPOCH; k++) {
        rt_mini *m = &night->minis3[bout->mini3_first + k];
        size_t a = w->starts[3 * k], b = w->starts[3 * k + 3];
        size_t tonic = rt_count_tonic(w->x, a, b, w->background, w->starts, seconds, 2.0,
                                      p->tonic_abs_uv);
        if (b > a && 2 * tonic > b - a)
            m->labels[role] |= RT_LABEL_SINBAR_TONIC;
        if (m->labels[role] & (RT_LABEL_SINBAR_TONIC | RT_LABEL_SINBAR_PHASIC))
            m->labels[role] |= RT_LABEL_SINBAR_ANY;
        m->envelope_uv[role] = (float)stretch_median(w, a, b, scratch);
        m->background_uv[role] = (float)w->background[3 * k + 1];
    }
    if (role != RT_ROLE_CHIN)
        return;
    for (size_t e = 0; e < bout->n_epochs; e++) {
        rt_epoch_result *er = &night->epochs[bout->epoch_first + e];
        size_t a = w->starts[30 * e], b = w->starts[30 * e + 30];
        size_t tonic = rt_count_tonic(w->x, a, b, w->background, w->starts, seconds, 2.0,
                                      p->tonic_abs_uv);
        er->tonic_share = b > a ? (double)tonic / (double)(b - a) : 0.0;
        er->sinbar_tonic = 2 * tonic > b - a;
        if (isfinite(night->nrem_reference_uv)) {
            /* "greater than the minimum NREM amplitude" for at least 50 % (AASM) */
            size_t above = rt_count_tonic(w->x, a, b, w->background, w->starts, seconds, 0.0,
                                          night->nrem_reference_uv);
            er->aasm_tonic = 2 * above >= b - a;
        }
    }
    /* Montreal tonic: 20-s windows tiled from the bout start; the remainder is dropped */
    size_t win = (size_t)llround(p->montreal_epoch_s);
    size_t base = bout->epoch_first * 30;
    for (size_t s0 = 0; s0 + win <= seconds; s0 += win) {
        if (rt_exclusions_of(ss->masks, RT_ROLE_CHIN, base + s0, win))
            continue; /* a window touching an excluding event leaves the count */
        size_t a = w->starts[s0], b = w->starts[s0 + win];
        size_t tonic = rt_count_tonic(w->x, a, b, w->background, w->starts, seconds, 2.0,
                                      p->tonic_abs_uv);
        ss->montreal_windows++;
        ss->montreal_tonic += 2 * tonic > b - a;
    }
}

static void count_rai(scoring_state *ss, workspace *w, size_t seconds, const bout_span *bout)
{
    /* the floor is taken over every second of the bout; excluded seconds are
     * then left out of the counts (as for the mini-epoch indices) */
    rt_rai_remove_floor(w->sec_mean, seconds, 60, w->floored);
    bool *skip = (bool *)w->scratch; /* free again after the envelope passes */
    size_t base = bout->epoch_first * 30;
    for (size_t j = 0; j < seconds; j++)
        skip[j] = rt_exclusions_of(ss->masks, RT_ROLE_CHIN, base + j, 1) != 0;
    rt_rai_count(w->floored, seconds, skip, &ss->rai);
}

/* Leaves out the mini-epochs, seconds and minutes a quality mark covers, for
 * this role. */
static rt_status apply_marks(rt_night *night, scoring_state *ss, const workspace *w, rt_role role,
                             const bout_span *bout, size_t seconds, rt_error *err)
{
    rt_channel_quality *q = &night->channel[role].quality;
    size_t base = bout->epoch_first * 30;
    for (size_t k = 0; k < w->n_marks; k++) {
        const rt_quality_mark *m = &w->marks[k];
        size_t a = (size_t)floor(m->start_s), b = (size_t)ceil(m->end_s);
        if (b > seconds)
            b = seconds;
        if (a >= b)
            continue;
        unsigned bit = RT_EXCLUDED_BY_QUALITY(m->reason);
        rt_status st = rt_exclusions_mark_role(ss->masks, role, base + a, b - a, bit, err);
        if (st != RT_OK)
            return st;
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

/* R peaks for a bout: from the ECG channel when there is one. */
static rt_status bout_beats_from_ecg(rt_recording *rec, const rt_role_source *ecg,
                                     const bout_span *bout, workspace *w, rt_qrs_beats *beats,
                                     rt_error *err)
{
    size_t seconds = bout->n_epochs * 30;
    long long first = llround(bout->t0 * ecg->rate_hz);
    size_t n = (size_t)(llround((bout->t0 + (double)seconds) * ecg->rate_hz) - first);
    if (n > w->ecg_cap) {
        double *x = realloc(w->ecg, 2 * n * sizeof *x);
        if (!x)
            return rt_fail(err, RT_ERR_NOMEM, "out of memory for the ECG");
        w->ecg = x;
        w->ecg_cap = n;
    }
    rt_status st = rt_role_read_uv(rec, ecg, first, n, w->ecg, w->ecg + n, err);
    if (st == RT_OK)
        st = rt_qrs_detect(w->ecg, n, ecg->rate_hz, false, beats, err);
    return st;
}

/* QRS windows of the current beats, for the burst veto. */
static rt_status qrs_windows(workspace *w, const scoring_state *ss, rt_error *err)
{
    size_t need = ss->n_beats + 1;
    if (need > w->qrs_cap) {
        rt_time_span *q = realloc(w->qrs, need * sizeof *q);
        if (!q)
            return rt_fail(err, RT_ERR_NOMEM, "out of memory for QRS windows");
        w->qrs = q;
        w->qrs_cap = need;
    }
    w->n_qrs = rt_qrs_windows(ss->beats_s, ss->n_beats, RT_QRS_VETO_PRE_S, RT_QRS_VETO_POST_S,
                              w->qrs, w->qrs_cap);
    return RT_OK;
}

static rt_status score_role_bout(rt_recording *rec, rt_night *night, scoring_state *ss,
                                 workspace *w, rt_role role, const rt_role_source *src,
                                 rt_bandpass *bp, const bout_span *bout, rt_qrs_beats *chin_beats,
                                 rt_error *err)
{
    const rt_score_params *p = &night->params;
    rt_channel_quality *q = &night->channel[role].quality;
    size_t seconds = bout->n_epochs * 30;
    size_t n = 0;
    rt_status st = read_stretch(rec, src, bout->t0, seconds, w, &n, err);
    if (st == RT_OK)
        st = find_marks(w, n, src->rate_hz, rt_recording_channel(rec, src->channel), err);
    if (st == RT_OK)
        st = apply_marks(night, ss, w, role, bout, seconds, err);
    if (st == RT_OK && role == RT_ROLE_CHIN && ss->beats_source == 0) {
        /* no ECG channel: find the heart beats in the raw chin itself, before the
         * 10-Hz high-pass takes most of the QRS band away (Pan & Tompkins 1985) */
        st = rt_qrs_detect(w->x, n, src->rate_hz, true, chin_beats, err);
        if (st == RT_OK && chin_beats->n > 0) {
            ss->beats_s = chin_beats->r_s;
            ss->n_beats = chin_beats->n;
            ss->beats_source = 2;
        }
    }
    if (st != RT_OK)
        return st;
    rt_ecg_removal ecg;
    memset(&ecg, 0, sizeof ecg);
    st = finish_stretch(bp, w, n, seconds, window_samples(p->envelope_window_s, src->rate_hz),
                        role == RT_ROLE_CHIN, ss->beats_s, ss->n_beats, src->rate_hz, &ecg, err);
    if (st != RT_OK)
        return st;
    q->ecg_source = ss->beats_source;
    q->beats += role == RT_ROLE_CHIN ? ss->n_beats : 0;
    q->ecg_found |= ecg.found;
    q->ecg_removed |= ecg.removed;
    w->n_qrs = 0;
    if (ecg.found && (st = qrs_windows(w, ss, err)) != RT_OK)
        return st;
    size_t bg_window = (size_t)llround(p->background_window_s);
    /* a stride of a quarter window: the envelope barely moves in between */
    size_t stride = window_samples(p->envelope_window_s / 4.0, src->rate_hz);
    rt_block_quantiles(w->x, w->starts, seconds, p->background_level_quantile, stride, w->medians,
                       w->scratch);
    rt_background(w->medians, seconds, bg_window, p->background_quantile, w->background,
                  w->scratch);
    /* AASM and SINBAR: 0.1-5.0 s at 4x and 2x; Montreal: 0.1-10 s at 4x (BRIEF section 3) */
    const rt_burst_rule aasm = {4.0, 0.1, 5.0}, sinbar = {2.0, 0.1, 5.0}, montreal = {4.0, 0.1, 10.0};
    st = detect_rule(night, ss, w, n, seconds, src, role, bout, &aasm, RT_LABEL_AASM_PHASIC, err);
    if (st == RT_OK)
        st = detect_rule(night, ss, w, n, seconds, src, role, bout, &sinbar,
                         RT_LABEL_SINBAR_PHASIC, err);
    if (st == RT_OK)
        st = detect_rule(night, ss, w, n, seconds, src, role, bout, &montreal,
                         RT_LABEL_MONTREAL_PHASIC, err);
    if (st != RT_OK)
        return st;
    label_tonic(night, ss, w, seconds, role, bout, w->scratch);
    if (role == RT_ROLE_CHIN)
        count_rai(ss, w, seconds, bout);
    return RT_OK;
}

/* Every EMG role of one bout, with the bout's heart beats. */
static rt_status score_bout(rt_recording *rec, rt_night *night, scoring_state *ss, workspace *w,
                            const rt_role_map *roles, rt_bandpass **bp, const bout_span *bout,
                            rt_error *err)
{
    rt_qrs_beats ecg_beats, chin_beats;
    memset(&ecg_beats, 0, sizeof ecg_beats);
    memset(&chin_beats, 0, sizeof chin_beats);
    ss->beats_s = NULL;
    ss->n_beats = 0;
    ss->beats_source = 0;
    rt_status st = RT_OK;
    if (roles->role[RT_ROLE_ECG].channel >= 0) {
        st = bout_beats_from_ecg(rec, &roles->role[RT_ROLE_ECG], bout, w, &ecg_beats, err);
        if (st == RT_OK && ecg_beats.n > 0) {
            ss->beats_s = ecg_beats.r_s;
            ss->n_beats = ecg_beats.n;
            ss->beats_source = 1;
        }
    }
    for (int r = 0; r < RT_ROLE_COUNT && st == RT_OK; r++)
        if (night->channel[r].present)
            st = score_role_bout(rec, night, ss, w, (rt_role)r, &roles->role[r], bp[r], bout,
                                 &chin_beats, err);
    rt_qrs_beats_free(&ecg_beats);
    rt_qrs_beats_free(&chin_beats);
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

/* Mains interference of a channel, estimated on up to 5 minutes of the first
 * REM bout (docs/quality.md); fills the notches of spec when a line is there. */
static rt_status estimate_mains(rt_recording *rec, const rt_role_source *src,
                                const bout_span *first_bout, workspace *w, rt_bandpass_spec *spec,
                                rt_channel_quality *q, rt_error *err)
{
    q->line_db = -99.0;
    q->low_edge_db = q->high_edge_db = NAN;
    if (!first_bout)
        return RT_OK;
    size_t seconds = first_bout->n_epochs * 30;
    if (seconds > 300)
        seconds = 300;
    size_t n = 0;
    rt_status st = read_stretch(rec, src, first_bout->t0, seconds, w, &n, err);
    rt_mains mains;
    if (st == RT_OK)
        st = rt_mains_estimate(w->x, n, src->rate_hz, spec->low_hz, spec->high_hz, &mains, err);
    if (st != RT_OK)
        return st;
    rt_quality_band_edges(&mains, q);
    if (!mains.present)
        return RT_OK;
    rt_mains_apply(&mains, spec);
    q->line_hz = mains.line_hz;
    q->line_db = mains.line_db;
    q->notches = mains.n_notches;
    return RT_OK;
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

static rt_status open_filters(rt_night *night, rt_recording *rec, const rt_role_map *roles,
                              const bout_span *first_bout, workspace *w, rt_bandpass **bp,
                              rt_error *err)
{
    const rt_score_params *p = &night->params;
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        const rt_role_source *src = &roles->role[r];
        rt_channel_result *cr = &night->channel[r];
        if (!is_emg((rt_role)r) || src->channel < 0)
            continue;
        cr->present = true;
        rt_copy_string(cr->label, sizeof cr->label, src->label);
        cr->rate_hz = src->rate_hz;
        rt_bandpass_spec spec = rt_bandpass_spec_defaults(src->rate_hz);
        spec.low_hz = p->band_low_hz;
        spec.high_hz = p->band_high_hz;
        spec.order = p->band_order;
        check_prefilter(night, rec, src, &cr->quality);
        rt_status st = estimate_mains(rec, src, first_bout, w, &spec, &cr->quality, err);
        if (st != RT_OK)
            return st;
        if (cr->quality.spectrum_narrow)
            rt_night_warn(night, "%s: its spectrum falls off inside the %g-%g Hz band (%.0f dB at "
                          "10-15 Hz, %.0f dB at 75-95 Hz against 25-45 Hz): it was filtered "
                          "narrower when recorded", src->label, p->band_low_hz, p->band_high_hz,
                          cr->quality.low_edge_db, cr->quality.high_edge_db);
        bp[r] = rt_bandpass_new(&spec, err);
        if (!bp[r])
            return err ? err->status : RT_ERR_USAGE;
        cr->band_high_hz = rt_bandpass_high_hz(bp[r]);
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

rt_status rt_night_score(rt_recording *rec, const rt_role_map *roles, const rt_timeline *tl,
                         const rt_score_params *params, const rt_cutoffs *cutoffs,
                         rt_night **out, rt_error *err)
{
    *out = NULL;
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
    workspace w;
    memset(&w, 0, sizeof w);
    rt_bandpass *bp[RT_ROLE_COUNT] = {0};
    bout_span *bouts = NULL;

    rt_exclusion_masks masks;
    memset(&masks, 0, sizeof masks);
    st = lay_out_rem(night, tl, &bouts, err);
    if (st == RT_OK)
        st = rt_exclusions_build(tl, &night->params, bouts, night->n_bouts, night->rem_epochs,
                                 &masks, err);
    if (st == RT_OK) {
        mark_exclusions(night, &masks);
        rt_exclusions_rates(tl, bouts, night->n_bouts, (double)night->rem_epochs * tl->epoch_s / 3600.0,
                            &night->exclusions);
        ss.masks = &masks;
        st = open_filters(night, rec, roles, night->n_bouts ? &bouts[0] : NULL, &w, bp, err);
    }
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        if (is_emg((rt_role)r) && !night->channel[r].present)
            mark_absent(night, (rt_role)r);
    const rt_role_source *chin = &roles->role[RT_ROLE_CHIN];
    if (st == RT_OK && night->channel[RT_ROLE_CHIN].present)
        st = nrem_reference(rec, chin, bp[RT_ROLE_CHIN], tl, &night->params, &w,
                            &night->nrem_reference_uv, err);
    for (size_t b = 0; b < night->n_bouts && st == RT_OK; b++)
        st = score_bout(rec, night, &ss, &w, roles, bp, &bouts[b], err);
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        rt_bandpass_free(bp[r]);
    rt_exclusions_free(&masks);
    workspace_free(&w);
    free(bouts);
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

void rt_night_free(rt_night *night)
{
    if (!night)
        return;
    free(night->epochs);
    free(night->minis3);
    free(night->minis2);
    free(night->bursts);
    free(night);
}
