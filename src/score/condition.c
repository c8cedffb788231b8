/* The one conditioning path (condition.h): padded read, quality marks,
 * notch + band-pass, ECG removal, envelope and per-second levels. */
#include "condition.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "detect.h"
#include "internal.h"
#include "pages.h"

/* The mains estimate needs a few seconds; 5 minutes of the first REM bout
 * give a stable spectrum at little cost (docs/quality.md), and at a high rate
 * no more than RT_NIGHT_BLOCK_SAMPLES samples are read for it (64 s at
 * 4096 Hz: still 64 averaged segments), so the probe is never the largest
 * stretch in memory. */
#define MAINS_PROBE_MAX_S 300.0

static size_t samples_of(double seconds, double rate_hz)
{
    size_t n = (size_t)llround(seconds * rate_hz);
    return n < 1 ? 1 : n;
}

static rt_status grow(void **p, size_t *cap, size_t need, size_t size, rt_error *err)
{
    if (need <= *cap)
        return RT_OK;
    void *q = realloc(*p, need * size);
    if (!q)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu conditioned values", need);
    *p = q;
    *cap = need;
    return RT_OK;
}

/* Grows *a and *b together to hold need doubles each; *cap is their common capacity. */
static rt_status grow_pair(double **a, double **b, size_t *cap, size_t need, rt_error *err)
{
    if (need <= *cap)
        return RT_OK;
    double *x = realloc(*a, need * sizeof *x);
    if (x)
        *a = x;
    double *y = x ? realloc(*b, need * sizeof *y) : NULL;
    if (y)
        *b = y;
    if (!x || !y)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu samples", need);
    *cap = need;
    return RT_OK;
}

/* Reads [first, first + n) of a role into *buf (with *scratch for a bipolar
 * derivation; both grown as pages.h arrays) through keep (may be NULL), or
 * fails with the reader's message. */
static rt_status read_raw(rt_recording *rec, rt_record_keep *keep, const rt_role_source *src,
                          long long first, size_t n, double **buf, size_t *buf_cap,
                          double **scratch, size_t *scratch_cap, rt_error *err)
{
    rt_status st = rt_pages_reserve(buf, buf_cap, n + 1, err);
    if (st == RT_OK)
        st = rt_pages_reserve(scratch, scratch_cap, n + 1, err);
    return st == RT_OK ? rt_role_read_uv_kept(rec, keep, src, first, n, *buf, *scratch, err) : st;
}

/* The per-second arrays of a stretch, grown together. */
static rt_status reserve_seconds(rt_stretch *s, size_t seconds, rt_error *err)
{
    size_t need = seconds + 1;
    if (need <= s->sec_cap)
        return RT_OK;
    size_t *starts = realloc(s->starts, need * sizeof *starts);
    if (starts)
        s->starts = starts;
    rt_status st = starts ? grow_pair(&s->level_uv, &s->rect_mean_uv, &s->sec_cap, need, err)
                          : rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu seconds", seconds);
    if (st != RT_OK)
        s->sec_cap = 0; /* starts may be shorter than the pair: grow all again next time */
    return st;
}

rt_status rt_conditioner_open(rt_recording *rec, const rt_role_source *src,
                              const rt_score_params *p, double probe_t0_s, double probe_s,
                              rt_conditioner *c, rt_error *err)
{
    memset(c, 0, sizeof *c);
    c->rec = rec;
    c->src = *src;
    c->info = rt_recording_channel(rec, src->channel);
    c->envelope_window = samples_of(p->envelope_window_s, src->rate_hz);
    c->level_quantile = p->background_level_quantile;
    c->mains.line_db = -99.0;
    c->mains.low_edge_db = c->mains.high_edge_db = NAN;
    rt_bandpass_spec spec = rt_bandpass_spec_defaults(src->rate_hz);
    spec.low_hz = p->band_low_hz;
    spec.high_hz = p->band_high_hz;
    spec.order = p->band_order;
    if (probe_s > 0) {
        double most = fmin(MAINS_PROBE_MAX_S, floor(RT_NIGHT_BLOCK_SAMPLES / src->rate_hz));
        double seconds = probe_s < most ? probe_s : most;
        long long first = llround(probe_t0_s * src->rate_hz);
        size_t n = (size_t)(llround((probe_t0_s + seconds) * src->rate_hz) - first);
        double *x = NULL, *scratch = NULL;
        size_t x_cap = 0, scratch_cap = 0;
        rt_status st = read_raw(rec, NULL, src, first, n, &x, &x_cap, &scratch, &scratch_cap, err);
        if (st == RT_OK)
            st = rt_mains_estimate(x, n, src->rate_hz, spec.low_hz, spec.high_hz, &c->mains, err);
        rt_pages_free(x, x_cap);
        rt_pages_free(scratch, scratch_cap);
        if (st != RT_OK)
            return st;
        rt_mains_apply(&c->mains, &spec);
    }
    return rt_bandpass_new(&spec, &c->bp, err);
}

rt_status rt_conditioner_copy(const rt_conditioner *from, rt_conditioner *c, rt_error *err)
{
    *c = *from;
    c->bp = NULL;
    return rt_bandpass_clone(from->bp, &c->bp, err);
}

void rt_conditioner_close(rt_conditioner *c)
{
    if (!c)
        return;
    rt_bandpass_free(c->bp);
    c->bp = NULL;
}

/* [first, last) widened by the padding, clipped to the channel. */
static void padded(long long first, long long last, double rate_hz, long long total,
                   long long *pf, long long *pl)
{
    long long pad = llround(RT_CONDITION_PAD_S * rate_hz);
    *pf = first - pad > 0 ? first - pad : 0;
    *pl = last + pad < total ? last + pad : total;
    if (*pl < last) /* past the end: the reader names the place */
        *pl = last;
    if (*pf > first)
        *pf = first;
}

rt_status rt_condition_beats(rt_recording *rec, const rt_role_map *roles, double t0_s,
                             size_t seconds, rt_qrs_beats *beats, int *source, rt_error *err)
{
    rt_beats_work work;
    memset(&work, 0, sizeof work);
    rt_status st = rt_condition_beats_with(rec, roles, t0_s, seconds, &work, beats, source, err);
    rt_beats_work_free(&work);
    return st;
}

void rt_beats_work_free(rt_beats_work *work)
{
    if (!work)
        return;
    rt_pages_free(work->x, work->x_cap);
    rt_pages_free(work->scratch, work->scratch_cap);
    rt_pages_free(work->detector, work->detector_cap);
    memset(work, 0, sizeof *work);
}

rt_status rt_condition_beats_with(rt_recording *rec, const rt_role_map *roles, double t0_s,
                                  size_t seconds, rt_beats_work *w, rt_qrs_beats *beats,
                                  int *source, rt_error *err)
{
    memset(beats, 0, sizeof *beats);
    *source = 0;
    const rt_role_source *ecg = &roles->role[RT_ROLE_ECG];
    const rt_role_source *chin = &roles->role[RT_ROLE_CHIN];
    bool from_chin = ecg->channel < 0;
    const rt_role_source *src = from_chin ? chin : ecg;
    if (src->channel < 0)
        return RT_OK;
    double rate = src->rate_hz;
    long long first = llround(t0_s * rate), last = llround((t0_s + (double)seconds) * rate);
    long long pf, pl;
    padded(first, last, rate, rt_recording_channel(rec, src->channel)->n_samples, &pf, &pl);
    size_t n = (size_t)(pl - pf);
    rt_status st = read_raw(rec, w->keep, src, pf, n, &w->x, &w->x_cap, &w->scratch,
                            &w->scratch_cap, err);
    if (st == RT_OK)
        st = rt_pages_reserve(&w->detector, &w->detector_cap, 3 * n, err);
    /* without an ECG channel the beats come from the raw chin, before the
     * 10-Hz high-pass takes most of the QRS band away */
    if (st == RT_OK)
        st = rt_qrs_detect_with(w->x, n, rate, from_chin, w->detector, beats, err);
    if (st != RT_OK)
        return st;
    double shift = (double)pf / rate;
    for (size_t i = 0; i < beats->n; i++)
        beats->r_s[i] += shift;
    if (beats->n > 0)
        *source = from_chin ? 2 : 1;
    return RT_OK;
}

/* Quality marks of the padded raw signal, moved to the stretch's clock and
 * clipped to it. */
static rt_status stretch_marks(const rt_conditioner *c, rt_stretch *s, size_t n_padded,
                               double offset_s, rt_error *err)
{
    size_t found = rt_quality_marks(s->buf, n_padded, s->rate_hz, c->info, s->scratch, s->marks,
                                    s->marks_cap);
    if (found > s->marks_cap) {
        rt_status st = grow((void **)&s->marks, &s->marks_cap, found + 16, sizeof *s->marks, err);
        if (st != RT_OK)
            return st;
        found = rt_quality_marks(s->buf, n_padded, s->rate_hz, c->info, s->scratch, s->marks,
                                    s->marks_cap);
    }
    size_t kept = 0;
    for (size_t k = 0; k < found; k++) {
        rt_quality_mark m = s->marks[k];
        m.start_s = fmax(m.start_s - offset_s, 0.0);
        m.end_s = fmin(m.end_s - offset_s, (double)s->seconds);
        if (m.end_s > m.start_s)
            s->marks[kept++] = m;
    }
    s->n_marks = kept;
    return RT_OK;
}

/* ECG template subtraction over the padded signal and the QRS windows of the
 * stretch, when the beats show ECG in this channel. */
static rt_status remove_ecg(rt_stretch *s, size_t n_padded, double padded_t0_s,
                            const rt_qrs_beats *beats, rt_error *err)
{
    memset(&s->ecg, 0, sizeof s->ecg);
    s->n_qrs = 0;
    if (!beats || beats->n == 0)
        return RT_OK;
    double *rel = rt_calloc(beats->n, sizeof *rel);
    if (!rel)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu beats", beats->n);
    for (size_t i = 0; i < beats->n; i++)
        rel[i] = beats->r_s[i] - padded_t0_s;
    rt_status st = rt_ecg_subtract(s->buf, n_padded, s->rate_hz, rel, beats->n, RT_ECG_PRE_S,
                                   RT_ECG_POST_S, &s->ecg, err);
    if (st == RT_OK && s->ecg.found) {
        for (size_t i = 0; i < beats->n; i++)
            rel[i] = beats->r_s[i] - s->t0_s;
        st = grow((void **)&s->qrs, &s->qrs_cap, beats->n + 1, sizeof *s->qrs, err);
        if (st == RT_OK)
            s->n_qrs = rt_qrs_windows(rel, beats->n, RT_QRS_VETO_PRE_S, RT_QRS_VETO_POST_S,
                                      s->qrs, s->qrs_cap);
    }
    free(rel);
    return st;
}

/* The marks a caller already has for this stretch. */
static rt_status known_marks(rt_stretch *s, const rt_stretch_request *req, rt_error *err)
{
    rt_status st = grow((void **)&s->marks, &s->marks_cap, req->n_marks + 1, sizeof *s->marks, err);
    if (st != RT_OK)
        return st;
    if (req->n_marks)
        memcpy(s->marks, req->marks, req->n_marks * sizeof *s->marks);
    s->n_marks = req->n_marks;
    return RT_OK;
}

/* Prefix sums of the rectified stretch and each second's mean. */
static rt_status rectified_sums(rt_stretch *s, const double *x, rt_error *err)
{
    rt_status st = rt_pages_reserve(&s->rect_cum, &s->cum_cap, s->n + 1, err);
    if (st != RT_OK)
        return st;
    double sum = 0.0;
    s->rect_cum[0] = 0.0;
    for (size_t i = 0; i < s->n; i++) {
        sum += fabs(x[i]);
        s->rect_cum[i + 1] = sum;
    }
    for (size_t j = 0; j < s->seconds; j++) {
        size_t len = s->starts[j + 1] - s->starts[j];
        s->rect_mean_uv[j] =
            len ? (s->rect_cum[s->starts[j + 1]] - s->rect_cum[s->starts[j]]) / (double)len : 0.0;
    }
    return RT_OK;
}

rt_status rt_condition_stretch(const rt_conditioner *c, double t0_s, size_t seconds,
                               const rt_qrs_beats *beats, rt_stretch *s, rt_error *err)
{
    return rt_condition_stretch_for(c, t0_s, seconds, beats, NULL, s, err);
}

rt_status rt_condition_stretch_for(const rt_conditioner *c, double t0_s, size_t seconds,
                                   const rt_qrs_beats *beats, const rt_stretch_request *req,
                                   rt_stretch *s, rt_error *err)
{
    unsigned need = req ? req->need : RT_STRETCH_ALL;
    double rate = c->src.rate_hz;
    long long first = llround(t0_s * rate), last = llround((t0_s + (double)seconds) * rate);
    long long pf, pl;
    padded(first, last, rate, c->info->n_samples, &pf, &pl);
    size_t n_padded = (size_t)(pl - pf), off = (size_t)(first - pf);
    s->t0_s = t0_s;
    s->seconds = seconds;
    s->rate_hz = rate;
    s->n = (size_t)(last - first);
    rt_status st = read_raw(c->rec, s->keep, &c->src, pf, n_padded, &s->buf, &s->cap, &s->scratch,
                            &s->scratch_cap, err);
    if (st == RT_OK)
        st = reserve_seconds(s, seconds, err);
    if (st == RT_OK)
        st = req && req->marks ? known_marks(s, req, err)
                               : stretch_marks(c, s, n_padded, (double)off / rate, err);
    if (st == RT_OK)
        st = rt_bandpass_apply(c->bp, s->buf, n_padded, err);
    if (st == RT_OK)
        st = remove_ecg(s, n_padded, (double)pf / rate, beats, err);
    if (st != RT_OK)
        return st;
    for (size_t j = 0; j <= seconds; j++)
        s->starts[j] = (size_t)(llround((t0_s + (double)j) * rate) - first);
    if (need & RT_STRETCH_SUMS) {
        st = rectified_sums(s, s->buf + off, err);
        if (st != RT_OK)
            return st;
    }
    rt_envelope(s->buf, n_padded, c->envelope_window, s->buf, s->scratch);
    s->env = s->buf + off;
    /* a stride of a quarter window: the envelope barely moves in between */
    size_t stride = c->envelope_window / 4 ? c->envelope_window / 4 : 1;
    if (need & RT_STRETCH_LEVELS)
        rt_block_quantiles(s->env, s->starts, seconds, c->level_quantile, stride, s->level_uv,
                           s->scratch);
    return RT_OK;
}

void rt_stretch_free(rt_stretch *s)
{
    if (!s)
        return;
    rt_pages_free(s->buf, s->cap);
    rt_pages_free(s->scratch, s->scratch_cap);
    free(s->starts);
    free(s->level_uv);
    free(s->rect_mean_uv);
    rt_pages_free(s->rect_cum, s->cum_cap);
    free(s->marks);
    free(s->qrs);
    memset(s, 0, sizeof *s);
}

bool rt_stretch_marked(const rt_stretch *s, double a_s, double b_s)
{
    for (size_t k = 0; k < s->n_marks; k++)
        if (s->marks[k].start_s < b_s && s->marks[k].end_s > a_s)
            return true;
    return false;
}
