/* The envelope a reviewer is shown: stretches of REM bouts conditioned on the
 * scorer's own path (condition.c), so the trace on the review page is the one
 * the labels came from. A long bout is conditioned in the scorer's blocks
 * (night.c, rt_bout_piece), each with its own beats, so memory does not grow
 * with the bout here either. A tracer keeps, per role, the last block it
 * conditioned: asking for several epochs of one block conditions it once. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "condition.h"
#include "internal.h"
#include "night_internal.h"

struct rt_night_tracer {
    rt_recording *rec;
    const rt_night *night;
    double first_t0;                  /* the first REM bout: the mains probe */
    size_t first_s;
    rt_conditioner cond[RT_ROLE_COUNT];
    bool open[RT_ROLE_COUNT];
    rt_stretch st[RT_ROLE_COUNT];
    double held_t0[RT_ROLE_COUNT];    /* start of the block held in st, NAN: none */
    rt_qrs_beats beats;               /* beats of the block starting at beats_t0 */
    double beats_t0;
};

/* Onset and length of a REM bout from the epochs list; false when none. */
static bool bout_extent(const rt_night *night, size_t bout, double *t0, size_t *seconds)
{
    bool any = false;
    double first = 0.0, last = 0.0;
    for (size_t e = 0; e < night->n_epochs; e++) {
        if (night->epochs[e].bout != bout)
            continue;
        if (!any)
            first = night->epochs[e].onset_s;
        last = night->epochs[e].onset_s + RT_EPOCH_S;
        any = true;
    }
    *t0 = first;
    *seconds = (size_t)llround(last - first);
    return any;
}

rt_status rt_night_tracer_open(rt_recording *rec, const rt_night *night, rt_night_tracer **out,
                               rt_error *err)
{
    if (!out)
        return rt_fail(err, RT_ERR_USAGE, "rt_night_tracer_open: no place for the result");
    *out = NULL;
    if (!rec || !night)
        return rt_fail(err, RT_ERR_USAGE, "rt_night_tracer_open: a recording and a night are needed");
    rt_night_tracer *t = rt_calloc(1, sizeof *t);
    if (!t)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for the review traces");
    t->rec = rec;
    t->night = night;
    t->beats_t0 = NAN;
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        t->held_t0[r] = NAN;
    if (night->n_epochs)
        bout_extent(night, night->epochs[0].bout, &t->first_t0, &t->first_s);
    *out = t;
    return RT_OK;
}

void rt_night_tracer_close(rt_night_tracer *t)
{
    if (!t)
        return;
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        rt_conditioner_close(&t->cond[r]);
        rt_stretch_free(&t->st[r]);
    }
    rt_qrs_beats_free(&t->beats);
    free(t);
}

/* Conditions the block [bt0, bt0 + bs) for a role exactly as the scorer's
 * second pass did. */
static rt_status condition_block(rt_night_tracer *t, rt_role role, double bt0, size_t bs,
                                 rt_error *err)
{
    const rt_night *night = t->night;
    rt_status st = RT_OK;
    if (!t->open[role]) {
        st = rt_conditioner_open(t->rec, &night->roles.role[role], &night->params, t->first_t0,
                                 (double)t->first_s, &t->cond[role], err);
        if (st != RT_OK)
            return st;
        t->open[role] = true;
    }
    if (!(t->beats_t0 == bt0)) {
        int source = 0;
        rt_qrs_beats_free(&t->beats);
        t->beats_t0 = NAN;
        st = rt_condition_beats(t->rec, &night->roles, bt0, bs, &t->beats, &source, err);
        if (st != RT_OK)
            return st;
        t->beats_t0 = bt0;
    }
    t->held_t0[role] = NAN;
    st = rt_condition_stretch(&t->cond[role], bt0, bs, &t->beats, &t->st[role], err);
    if (st == RT_OK)
        t->held_t0[role] = bt0;
    return st;
}

rt_status rt_night_tracer_envelope(rt_night_tracer *t, rt_role role, double t0_s, size_t seconds,
                                   double **env_out, size_t *n_out, double *rate_hz, rt_error *err)
{
    *env_out = NULL;
    *n_out = 0;
    const rt_night *night = t->night;
    if ((int)role < 0 || role >= RT_ROLE_COUNT || role == RT_ROLE_ECG ||
        !night->channel[role].present)
        return rt_fail(err, RT_ERR_USAGE, "no %s channel in this night",
                       (int)role >= 0 && role < RT_ROLE_COUNT ? rt_role_name(role) : "such");
    size_t bout = SIZE_MAX;
    for (size_t e = 0; e < night->n_epochs && bout == SIZE_MAX; e++)
        if (t0_s >= night->epochs[e].onset_s - 1e-9 && t0_s < night->epochs[e].onset_s + RT_EPOCH_S)
            bout = night->epochs[e].bout;
    double bt0 = 0.0;
    size_t bs = 0;
    if (bout == SIZE_MAX || !bout_extent(night, bout, &bt0, &bs) ||
        t0_s + (double)seconds > bt0 + (double)bs + 1e-9)
        return rt_fail(err, RT_ERR_USAGE, "%g s + %zu s is not inside one REM bout", t0_s, seconds);
    /* the scorer's block whose own seconds hold t0_s; a request reaching
     * past its view (longer than a minute beyond) is conditioned on its own */
    size_t rel = (size_t)llround(t0_s - bt0), view[2] = {0, bs}, own[2] = {0, bs};
    size_t core = night->block_s ? night->block_s : bs + 1;
    size_t k = rt_bout_piece(bs, core, 0, view, own);
    for (size_t j = 0; j < k; j++) {
        rt_bout_piece(bs, core, j, view, own);
        if (rel < own[1])
            break;
    }
    if (rel + seconds > view[1]) {
        view[0] = rel;
        view[1] = rel + seconds;
    }
    double vt0 = bt0 + (double)view[0];
    rt_status st = t->held_t0[role] == vt0 && t->st[role].seconds == view[1] - view[0]
                       ? RT_OK
                       : condition_block(t, role, vt0, view[1] - view[0], err);
    if (st != RT_OK)
        return st;
    const rt_stretch *s = &t->st[role];
    size_t first = rel - view[0];
    size_t a = s->starts[first], b = s->starts[first + seconds];
    *env_out = rt_calloc(b > a ? b - a : 1, sizeof **env_out);
    if (!*env_out)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for a trace of %zu samples", b - a);
    memcpy(*env_out, s->env + a, (b - a) * sizeof **env_out);
    *n_out = b - a;
    *rate_hz = s->rate_hz;
    return RT_OK;
}
