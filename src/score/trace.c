/* The envelope a reviewer is shown: one stretch of a REM bout conditioned on
 * the scorer's own path (condition.c), so the trace on the review page is the
 * one the labels came from. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "condition.h"
#include "internal.h"

/* The REM bout holding [t0_s, t0_s + seconds): its onset and length. */
static bool find_bout(const rt_night *night, double t0_s, size_t seconds, size_t bout,
                      double *bout_t0, size_t *bout_s)
{
    bool any = false;
    double first = 0.0, last = 0.0;
    for (size_t e = 0; e < night->n_epochs; e++) {
        if (night->epochs[e].bout != bout)
            continue;
        if (!any)
            first = night->epochs[e].onset_s;
        last = night->epochs[e].onset_s + 30.0;
        any = true;
    }
    *bout_t0 = first;
    *bout_s = (size_t)llround(last - first);
    return any && t0_s >= first - 1e-9 && t0_s + (double)seconds <= last + 1e-9;
}

rt_status rt_night_envelope(rt_recording *rec, const rt_night *night, rt_role role, double t0_s,
                            size_t seconds, double **env_out, size_t *n_out, double *rate_hz,
                            rt_error *err)
{
    *env_out = NULL;
    *n_out = 0;
    if ((int)role < 0 || role >= RT_ROLE_COUNT || role == RT_ROLE_ECG ||
        !night->channel[role].present)
        return rt_fail(err, RT_ERR_USAGE, "no %s channel in this night", rt_role_name(role));
    size_t bout = SIZE_MAX;
    for (size_t e = 0; e < night->n_epochs && bout == SIZE_MAX; e++)
        if (t0_s >= night->epochs[e].onset_s - 1e-9 && t0_s < night->epochs[e].onset_s + 30.0)
            bout = night->epochs[e].bout;
    double bt0 = 0.0, first_t0 = 0.0;
    size_t bs = 0, first_s = 0;
    if (bout == SIZE_MAX || !find_bout(night, t0_s, seconds, bout, &bt0, &bs) ||
        !find_bout(night, night->epochs[0].onset_s, 0, 0, &first_t0, &first_s))
        return rt_fail(err, RT_ERR_USAGE, "%g s + %zu s is not inside one REM bout", t0_s, seconds);
    rt_conditioner c;
    rt_status st = rt_conditioner_open(rec, &night->roles.role[role], &night->params, first_t0,
                                       (double)first_s, &c, err);
    if (st != RT_OK)
        return st;
    rt_qrs_beats beats;
    int source = 0;
    rt_stretch s;
    memset(&s, 0, sizeof s);
    st = rt_condition_beats(rec, &night->roles, bt0, bs, &beats, &source, err);
    if (st == RT_OK)
        st = rt_condition_stretch(&c, bt0, bs, &beats, &s, err);
    if (st == RT_OK) {
        size_t a = s.starts[(size_t)llround(t0_s - bt0)];
        size_t b = s.starts[(size_t)llround(t0_s - bt0) + seconds];
        *env_out = rt_calloc(b > a ? b - a : 1, sizeof **env_out);
        if (!*env_out) {
            st = rt_fail(err, RT_ERR_NOMEM, "out of memory for a trace of %zu samples", b - a);
        } else {
            memcpy(*env_out, s.env + a, (b - a) * sizeof **env_out);
            *n_out = b - a;
            *rate_hz = s.rate_hz;
        }
    }
    rt_stretch_free(&s);
    rt_qrs_beats_free(&beats);
    rt_conditioner_close(&c);
    return st;
}
