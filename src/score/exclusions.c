/* Event-aware exclusion: mini-epochs under technical artifacts, snoring,
 * respiratory events and the arousals that follow them leave numerator and
 * denominator; so does REM outside lights-off .. lights-on. The policy and its
 * sources are in docs/exclusions.md. */
#include "exclusions.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static bool is_respiratory(rt_event_type t) { return t == RT_EVENT_APNEA || t == RT_EVENT_HYPOPNEA; }

/* An `arousal` is respiratory when it starts during, or within gap_s after
 * the end of, an apnea or hypopnea. */
static bool follows_respiratory(const rt_timeline *tl, const rt_event *a, double gap_s)
{
    for (size_t i = 0; i < tl->n_events; i++) {
        const rt_event *r = &tl->events[i];
        if (r->onset_s > a->onset_s)
            break; /* events are ordered by onset */
        if (is_respiratory(r->type) && a->onset_s <= r->onset_s + r->duration_s + gap_s)
            return true;
    }
    return false;
}

static bool excludes(const rt_timeline *tl, const rt_event *e, const rt_score_params *p)
{
    switch (e->type) {
    case RT_EVENT_ARTIFACT: return p->exclude_artifacts;
    case RT_EVENT_SNORE: return p->exclude_snoring;
    case RT_EVENT_APNEA:
    case RT_EVENT_HYPOPNEA:
    case RT_EVENT_RESP_AROUSAL: return p->exclude_respiratory;
    case RT_EVENT_AROUSAL:
        return p->exclude_respiratory && follows_respiratory(tl, e, p->resp_arousal_gap_s);
    default: return false;
    }
}

/* Marks the REM seconds that [a, b) overlaps (a point event marks the second
 * holding it). */
static void mark_interval(unsigned short *mask, const bout_span *bouts, size_t n_bouts,
                          double epoch_s, double a, double b, unsigned bit)
{
    for (size_t k = 0; k < n_bouts; k++) {
        const bout_span *bo = &bouts[k];
        double t0 = bo->t0, t1 = bo->t0 + (double)bo->n_epochs * epoch_s;
        if (b < t0 || a >= t1)
            continue;
        size_t base = bo->epoch_first * (size_t)llround(epoch_s);
        size_t secs = (size_t)llround(t1 - t0);
        size_t first = a <= t0 ? 0 : (size_t)floor(a - t0);
        for (size_t j = first; j < secs; j++) {
            double s0 = t0 + (double)j, s1 = s0 + 1.0;
            if (a >= s1)
                continue;
            bool overlap = b > s0 || (b == a && a >= s0);
            if (!overlap)
                break;
            mask[base + j] |= (unsigned short)bit;
        }
    }
}

rt_status rt_exclusions_build(const rt_timeline *tl, const rt_score_params *p,
                              const bout_span *bouts, size_t n_bouts, size_t rem_epochs,
                              rt_exclusion_masks *m, rt_error *err)
{
    memset(m, 0, sizeof *m);
    m->n_seconds = rem_epochs * (size_t)llround(tl->epoch_s);
    m->global = rt_calloc(m->n_seconds, sizeof *m->global);
    if (!m->global)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for exclusion masks");
    for (size_t i = 0; i < tl->n_events; i++) {
        const rt_event *e = &tl->events[i];
        if (!excludes(tl, e, p))
            continue;
        unsigned short *mask = m->global;
        if (e->role >= 0 && e->role < RT_ROLE_COUNT) {
            if (!m->role[e->role] && !(m->role[e->role] = rt_calloc(m->n_seconds, sizeof *mask)))
                return rt_fail(err, RT_ERR_NOMEM, "out of memory for exclusion masks");
            mask = m->role[e->role];
        }
        double a = e->onset_s - p->event_margin_s;
        double b = e->onset_s + e->duration_s + p->event_margin_s;
        mark_interval(mask, bouts, n_bouts, tl->epoch_s, a, b, RT_EXCLUDED_BY_EVENT(e->type));
    }
    if (tl->lights_off_s > 0.0)
        mark_interval(m->global, bouts, n_bouts, tl->epoch_s, -1.0, tl->lights_off_s,
                      RT_EXCLUDED_BY_LIGHTS);
    if (tl->lights_on_s >= 0.0)
        mark_interval(m->global, bouts, n_bouts, tl->epoch_s, tl->lights_on_s, INFINITY,
                      RT_EXCLUDED_BY_LIGHTS);
    return RT_OK;
}

void rt_exclusions_free(rt_exclusion_masks *m)
{
    free(m->global);
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        free(m->role[r]);
    memset(m, 0, sizeof *m);
}

rt_status rt_exclusions_reserve_role(rt_exclusion_masks *m, rt_role role, rt_error *err)
{
    if (!m->role[role] && !(m->role[role] = rt_calloc(m->n_seconds, sizeof *m->global)))
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for exclusion masks");
    return RT_OK;
}

rt_status rt_exclusions_mark_role(rt_exclusion_masks *m, rt_role role, size_t first, size_t n,
                                  unsigned bits, rt_error *err)
{
    rt_status st = rt_exclusions_reserve_role(m, role, err);
    if (st != RT_OK)
        return st;
    for (size_t j = first; j < first + n && j < m->n_seconds; j++)
        m->role[role][j] |= (unsigned short)bits;
    return RT_OK;
}

unsigned rt_exclusions_of(const rt_exclusion_masks *m, rt_role role, size_t first, size_t n)
{
    unsigned bits = 0;
    for (size_t j = first; j < first + n && j < m->n_seconds; j++) {
        bits |= m->global[j];
        if (role >= 0 && m->role[role])
            bits |= m->role[role][j];
    }
    return bits;
}

static bool in_rem(const bout_span *bouts, size_t n_bouts, double epoch_s, double t)
{
    for (size_t k = 0; k < n_bouts; k++)
        if (t >= bouts[k].t0 && t < bouts[k].t0 + (double)bouts[k].n_epochs * epoch_s)
            return true;
    return false;
}

void rt_exclusions_rates(const rt_timeline *tl, const bout_span *bouts, size_t n_bouts,
                         double rem_hours, rt_exclusion_summary *s)
{
    size_t resp = 0, lm = 0;
    bool any_resp = false, any_lm = false;
    for (size_t i = 0; i < tl->n_events; i++) {
        const rt_event *e = &tl->events[i];
        bool r = is_respiratory(e->type), l = e->type == RT_EVENT_LIMB_MOVEMENT;
        any_resp |= r;
        any_lm |= l;
        if ((r || l) && in_rem(bouts, n_bouts, tl->epoch_s, e->onset_s)) {
            resp += r;
            lm += l;
        }
    }
    s->have_respiratory = any_resp;
    s->rem_ahi = any_resp && rem_hours > 0 ? (double)resp / rem_hours : NAN;
    s->rem_leg_movements_per_h = any_lm && rem_hours > 0 ? (double)lm / rem_hours : NAN;
}
