/* Fitting the atonic background (background.h).
 *
 * 1. Minute levels: consecutive REM seconds are grouped in minutes (a gap in
 *    time starts a new group); a minute's level is the background_quantile of
 *    its seconds' levels, so bursts and part-minute activity leave it alone.
 * 2. Floor line: log(level) = a + s (t - ref). The slope s (the drift) is
 *    fitted to the NREM minute levels when an hour of NREM is there, by
 *    quantile regression at background_quantile (Koenker & Bassett 1978,
 *    Econometrica 46:33), on a grid within +-log(background_drift_max) per
 *    8 hours: impedance drift moves NREM and REM alike, tonic REM activity
 *    does not touch NREM. The intercept a is then the background_quantile of
 *    the detrended REM minute levels: tonic minutes sit above it whatever
 *    their number, as long as that share of the night's REM minutes is
 *    atonic. Without an hour of NREM the line is fitted to REM alone.
 * 3. Quiet median: a floor is lower than the typical atonic level by the
 *    spread of the minute levels; the seconds at most background_quiet_ratio
 *    times the line are the quiet ones, and their median ratio to the line
 *    lifts it to the atonic level a scorer sees: per REM bout (atonia is not
 *    equally deep in every REM period), or over the night for a bout with too
 *    few quiet seconds. Tonic seconds (at least twice the atonic level) are
 *    never quiet, so they cannot lift a bout's background. */
#include "background.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "detect.h"
#include "internal.h"

#define MINUTE_S 60
#define MIN_SECONDS_PER_MINUTE 10
#define SLOPE_STEPS 80          /* grid steps over the allowed slope range */
#define EIGHT_HOURS_S 28800.0
#define MIN_SPAN_FOR_SLOPE_S 3600.0

/* Quantile-regression loss of residuals r at quantile q (the "check" function). */
static double check_loss(const double *r, size_t n, double q)
{
    double sum = 0.0;
    for (size_t i = 0; i < n; i++)
        sum += r[i] >= 0 ? q * r[i] : (q - 1.0) * r[i];
    return sum;
}

/* Minute levels (log) and their times; returns how many. */
static size_t minute_levels(const rt_level_point *pts, size_t n, double q, double *t, double *y,
                            double *scratch)
{
    size_t m = 0, i = 0;
    while (i < n) {
        size_t j = i, len = 0;
        double tsum = 0.0;
        while (j < n && len < MINUTE_S && (j == i || pts[j].t_s - pts[j - 1].t_s < 1.5)) {
            scratch[len++] = pts[j].level_uv;
            tsum += pts[j].t_s;
            j++;
        }
        if (len >= MIN_SECONDS_PER_MINUTE) {
            t[m] = tsum / (double)len;
            y[m] = log(rt_quantile(scratch, len, q));
            m++;
        }
        i = j;
    }
    return m;
}

/* Low-quantile line through minute levels (t, y): the slope on a grid within
 * +-s_max (none when the minutes span less than an hour), the intercept at
 * ref the q-quantile of the detrended levels. r holds m doubles. */
static void fit_line(const double *t, const double *y, size_t m, double q, double s_max,
                     double ref, double *r, double *slope, double *intercept)
{
    double best_s = 0.0, best_a = 0.0, best_loss = INFINITY;
    int steps = m > 1 && t[m - 1] - t[0] >= MIN_SPAN_FOR_SLOPE_S ? SLOPE_STEPS : 0;
    for (int g = 0; g <= steps; g++) {
        /* from the middle outwards, so that equal losses keep the smaller slope */
        int h = (g + 1) / 2 * (g % 2 ? 1 : -1);
        double s = steps ? s_max * (double)h / (SLOPE_STEPS / 2) : 0.0;
        for (size_t i = 0; i < m; i++)
            r[i] = y[i] - s * (t[i] - ref);
        double a = rt_quantile(r, m, q);
        for (size_t i = 0; i < m; i++)
            r[i] = y[i] - s * (t[i] - ref) - a;
        double loss = check_loss(r, m, q);
        if (loss < best_loss - 1e-12) {
            best_loss = loss;
            best_s = s;
            best_a = a;
        }
    }
    *slope = best_s;
    *intercept = best_a;
}

/* The usable points of pts (level finite and > 0), copied; *n_out of them. */
static rt_level_point *usable_points(const rt_level_point *pts, size_t n, size_t *n_out)
{
    size_t k = 0;
    rt_level_point *ok = rt_calloc(n ? n : 1, sizeof *ok);
    if (ok)
        for (size_t i = 0; i < n; i++)
            if (pts[i].level_uv > 0 && isfinite(pts[i].level_uv))
                ok[k++] = pts[i];
    *n_out = k;
    return ok;
}

rt_status rt_atonic_fit(const rt_level_point *rem, size_t n, const rt_level_point *nrem,
                        size_t n_nrem, const rt_score_params *p, rt_atonic_model *out,
                        rt_error *err)
{
    memset(out, 0, sizeof *out);
    out->level_uv = NAN;
    size_t usable = 0, usable_nrem = 0;
    size_t cap = (n > n_nrem ? n : n_nrem) + 1;
    rt_level_point *ok = usable_points(rem, n, &usable);
    rt_level_point *ok_nrem = usable_points(nrem, n_nrem, &usable_nrem);
    double *t = rt_calloc(cap, sizeof *t), *y = rt_calloc(cap, sizeof *y);
    double *r = rt_calloc(cap, sizeof *r);
    rt_status st = RT_OK;
    if (!t || !y || !r || !ok || !ok_nrem)
        st = rt_fail(err, RT_ERR_NOMEM, "out of memory for the background of %zu seconds", n);
    if (st != RT_OK || usable < MIN_SECONDS_PER_MINUTE)
        goto done;
    double q = p->background_quantile;
    double s_max = log(p->background_drift_max) / EIGHT_HOURS_S;
    double slope = 0.0, intercept = 0.0;
    /* the drift, from NREM when there is an hour of it: electrode impedance
     * moves NREM and REM alike, while tonic REM activity leaves NREM alone,
     * so a whole tonic REM period cannot pass for drift */
    size_t m = minute_levels(ok_nrem, usable_nrem, q, t, y, r);
    double ref = m ? 0.5 * (t[0] + t[m - 1]) : 0.0;
    bool from_nrem = m > 1 && t[m - 1] - t[0] >= MIN_SPAN_FOR_SLOPE_S;
    if (from_nrem)
        fit_line(t, y, m, q, s_max, ref, r, &slope, &intercept);
    m = minute_levels(ok, usable, q, t, y, r);
    if (m == 0) { /* only short scraps of REM: one group of everything */
        for (size_t i = 0; i < usable; i++)
            r[i] = ok[i].level_uv;
        t[0] = ok[usable / 2].t_s;
        y[0] = log(rt_quantile(r, usable, q));
        m = 1;
    }
    if (!from_nrem) {
        ref = 0.5 * (t[0] + t[m - 1]);
        fit_line(t, y, m, q, s_max, ref, r, &slope, &intercept);
    } else {
        /* the REM level on the NREM drift: the q-quantile of detrended minutes */
        for (size_t i = 0; i < m; i++)
            r[i] = y[i] - slope * (t[i] - ref);
        intercept = rt_quantile(r, m, q);
    }
    /* the quiet median: seconds near the floor line, relative to it */
    size_t quiet = 0;
    for (size_t i = 0; i < usable; i++) {
        double ratio = ok[i].level_uv / exp(intercept + slope * (ok[i].t_s - ref));
        if (ratio <= p->background_quiet_ratio)
            r[quiet++] = ratio;
    }
    double lift = quiet ? rt_quantile(r, quiet, 0.5) : 1.0;
    out->valid = true;
    out->level_uv = exp(intercept) * lift;
    out->floor_uv = exp(intercept);
    out->ref_s = ref;
    out->drift_per_s = slope;
    out->drift_from_nrem = from_nrem;
    out->seconds = usable;
    out->minutes = m;
done:
    free(t); free(y); free(r); free(ok); free(ok_nrem);
    return st;
}

double rt_atonic_at(const rt_atonic_model *m, double t_s)
{
    if (!m->valid)
        return NAN;
    return m->level_uv * exp(m->drift_per_s * (t_s - m->ref_s));
}

double rt_atonic_bout_lift(const rt_atonic_model *m, const rt_level_point *pts, size_t n,
                           const rt_score_params *p, double *scratch)
{
    if (!m->valid)
        return NAN;
    size_t quiet = 0;
    for (size_t i = 0; i < n; i++) {
        double line = m->floor_uv * exp(m->drift_per_s * (pts[i].t_s - m->ref_s));
        double ratio = pts[i].level_uv / line;
        if (ratio > 0 && ratio <= p->background_quiet_ratio)
            scratch[quiet++] = ratio;
    }
    return quiet >= MIN_SECONDS_PER_MINUTE ? rt_quantile(scratch, quiet, 0.5)
                                           : m->level_uv / m->floor_uv;
}
