/* Difficulty switches of the synthetic night generator (src/synth/
 * difficulty.c, emg_model.c; docs/synthetic-nights.md, "Difficulty
 * switches"): for each switch, that truth.json lists what was placed, that
 * the indices count exactly the placed units under each rule's own k, and
 * that the written EDF carries it (rates, mains amplitude, drift gain, spiky
 * statistics, short-burst levels, tonic levels). 1-2 h nights keep the file
 * to a few seconds. */
#include "support.h"

#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/recording.h"
#include "remtone/synth.h"
#include "score/bandpass.h"
#include "score/fft_plans.h"

static const double PI = 3.14159265358979323846;
static const char *const role_names[5] = {"chin", "arm-left", "arm-right", "leg-left", "leg-right"};
static const char *const role_labels[5] = {"Chin1-Chin2", "FDS L", "FDS R", "Tib L", "Tib R"};
static uint64_t seed;

static int setup(void **state)
{
    (void)state;
    seed = rt_test_seed();
    return 0;
}

static int teardown(void **state)
{
    (void)state;
    rt_fft_plans_cleanup();
    return 0;
}

static rt_synth_options night_options(double hours)
{
    rt_synth_options o;
    rt_synth_options_default(&o);
    o.hours = hours;
    o.seed = seed;
    return o;
}

static void write_or_fail(const rt_synth_options *o, const char *dir)
{
    rt_error err;
    rt_error_clear(&err);
    if (rt_synth_write(o, dir, &err) != RT_OK)
        fail_msg("rt_synth_write: %s", err.message);
}

static int role_index(const char *name)
{
    for (int r = 0; r < 5; r++)
        if (strcmp(name, role_names[r]) == 0)
            return r;
    fail_msg("unknown role %s", name);
    return -1;
}

/* Reads [t0, t0 + dur) of a channel in uV (dur < 0: to the end). */
static double *read_channel(const char *dir, const char *label, double t0, double dur, size_t *n_out,
                            rt_channel_info *info)
{
    char path[4200];
    snprintf(path, sizeof path, "%s/night.edf", dir);
    rt_error err;
    rt_recording *rec = rt_recording_open(path, &err);
    if (!rec)
        fail_msg("%s", err.message);
    int ch = rt_recording_find_channel(rec, label);
    assert_true(ch >= 0);
    const rt_channel_info *ci = rt_recording_channel(rec, ch);
    if (info)
        *info = *ci;
    long long first = llround(t0 * ci->rate_hz);
    size_t n = dur < 0 ? (size_t)(ci->n_samples - first) : (size_t)llround(dur * ci->rate_hz);
    double *x = malloc(n * sizeof *x);
    assert_non_null(x);
    assert_int_equal(rt_recording_read_uv(rec, ch, first, n, x, &err), RT_OK);
    rt_recording_close(rec);
    *n_out = n;
    return x;
}

static double rect_mean(const double *x, size_t a, size_t b)
{
    double s = 0;
    for (size_t i = a; i < b; i++)
        s += fabs(x[i]);
    return b > a ? s / (double)(b - a) : NAN;
}

/* --- the truth lists ------------------------------------------------------ */

typedef struct burst_row {
    int role;
    double on, dur, rect, ratio, gain;
    int aasm, sinbar, montreal;
} burst_row;

typedef struct truth_view {
    int n_bouts, bout_first[64], bout_epochs[64];
    double bout_bg[64];
    size_t n_bursts;
    burst_row *b;
    size_t n_tonic;
    double t_on[128], t_dur[128], t_uv[128];
    size_t n_events;
    double ev_on[512], ev_dur[512];
    double drift_end, night_s;
} truth_view;

static double overlap(double a0, double a1, double b0, double b1);

static void view_load(json_t *t, truth_view *v)
{
    memset(v, 0, sizeof *v);
    json_t *bouts = json_object_get(json_object_get(t, "rem"), "bouts");
    v->n_bouts = (int)json_array_size(bouts);
    assert_true(v->n_bouts > 0 && v->n_bouts <= 64);
    for (int i = 0; i < v->n_bouts; i++) {
        json_t *b = json_array_get(bouts, (size_t)i);
        v->bout_first[i] = (int)json_integer_value(json_object_get(b, "first_epoch"));
        v->bout_epochs[i] = (int)json_integer_value(json_object_get(b, "epochs"));
        v->bout_bg[i] = json_number_value(json_object_get(b, "chin_bg_uv"));
    }
    json_t *bursts = json_object_get(t, "bursts");
    v->n_bursts = json_array_size(bursts);
    v->b = calloc(v->n_bursts + 1, sizeof *v->b);
    assert_non_null(v->b);
    for (size_t i = 0; i < v->n_bursts; i++) {
        json_t *j = json_array_get(bursts, i), *c = json_object_get(j, "counts");
        burst_row *b = &v->b[i];
        b->role = role_index(json_string_value(json_object_get(j, "role")));
        b->on = json_number_value(json_object_get(j, "onset_s"));
        b->dur = json_number_value(json_object_get(j, "duration_s"));
        b->rect = json_number_value(json_object_get(j, "rect_uv"));
        b->ratio = json_number_value(json_object_get(j, "ratio"));
        b->gain = json_number_value(json_object_get(j, "gain"));
        b->aasm = json_is_true(json_object_get(c, "aasm"));
        b->sinbar = json_is_true(json_object_get(c, "sinbar"));
        b->montreal = json_is_true(json_object_get(c, "montreal"));
    }
    json_t *tonic = json_object_get(t, "tonic");
    v->n_tonic = json_array_size(tonic);
    assert_true(v->n_tonic <= 128);
    for (size_t i = 0; i < v->n_tonic; i++) {
        json_t *j = json_array_get(tonic, i);
        v->t_on[i] = json_number_value(json_object_get(j, "onset_s"));
        v->t_dur[i] = json_number_value(json_object_get(j, "duration_s"));
        v->t_uv[i] = json_number_value(json_object_get(j, "rect_uv"));
    }
    json_t *events = json_object_get(t, "events");
    v->n_events = json_array_size(events);
    assert_true(v->n_events <= 512);
    for (size_t i = 0; i < v->n_events; i++) {
        json_t *j = json_array_get(events, i);
        v->ev_on[i] = json_number_value(json_object_get(j, "start_s"));
        v->ev_dur[i] = json_number_value(json_object_get(j, "duration_s"));
    }
    json_t *d = json_object_get(t, "difficulty");
    v->drift_end = json_number_value(json_object_get(d, "drift_end"));
    v->night_s = json_number_value(json_object_get(d, "night_s"));
}

static int event_touches(const truth_view *v, double t0, double t1)
{
    for (size_t i = 0; i < v->n_events; i++)
        if (overlap(v->ev_on[i], v->ev_on[i] + v->ev_dur[i], t0, t1) > 0)
            return 1;
    return 0;
}

/* Integral of the drift gain drift_end^(t / night_s) over [a, b]. */
static double gain_integral(const truth_view *v, double a, double b)
{
    if (v->drift_end == 1.0)
        return b - a;
    double c = log(v->drift_end) / v->night_s;
    return (exp(c * b) - exp(c * a)) / c;
}

static void view_free(truth_view *v)
{
    free(v->b);
}

static int bout_of_time(const truth_view *v, double t)
{
    for (int b = 0; b < v->n_bouts; b++)
        if (t >= 30.0 * v->bout_first[b] && t < 30.0 * (v->bout_first[b] + v->bout_epochs[b]))
            return b;
    return -1;
}

static double overlap(double a0, double a1, double b0, double b1)
{
    double lo = fmax(a0, b0), hi = fmin(a1, b1);
    return hi > lo ? hi - lo : 0.0;
}

static int tonic_covers(const truth_view *v, double t0, double t1)
{
    for (size_t i = 0; i < v->n_tonic; i++)
        if (v->t_on[i] <= t0 && t1 <= v->t_on[i] + v->t_dur[i])
            return 1;
    return 0;
}

/* A quiet second of role r: no burst of the role within 1 s and (chin) no
 * tonic stretch; its planned level is the bout's atonia. */
static int quiet_second(const truth_view *v, int r, long s)
{
    if (r == 0 && (tonic_covers(v, s - 1.0, s) || tonic_covers(v, s, s + 1.0) || tonic_covers(v, s + 1.0, s + 2.0)))
        return 0;
    for (size_t i = 0; i < v->n_bursts; i++)
        if (v->b[i].role == r && overlap(v->b[i].on, v->b[i].on + v->b[i].dur, s - 1.0, s + 2.0) > 0)
            return 0;
    return 1;
}

/* The seconds of the last REM bout 3 s or more from its edges. */
static void last_bout_seconds(const truth_view *v, long *s0, long *s1)
{
    int b = v->n_bouts - 1;
    *s0 = 30L * v->bout_first[b] + 3;
    *s1 = 30L * (v->bout_first[b] + v->bout_epochs[b]) - 3;
}

/* The rules as docs/scoring.md section 5 defines them (BRIEF section 3):
 * AASM 0.1-5 s at >= 4x background on 3-s minis, SINBAR 0.1-5 s at >= 2x on
 * 3-s minis, Montreal 0.1-10 s at >= 4x on 2-s minis. Written out here, not
 * read from the truth, so the recount is independent. */
static int rule_counts(const burst_row *b, double k, double max_s)
{
    return b->ratio >= k * (1 - 1e-9) && b->dur >= 0.1 - 1e-9 && b->dur <= max_s + 1e-9;
}

/* Bit r set when a burst of role r counted by the rule overlaps [t0, t1). */
static int roles_in(const truth_view *v, double t0, double t1, double k, double max_s)
{
    int mask = 0;
    for (size_t i = 0; i < v->n_bursts; i++)
        if (rule_counts(&v->b[i], k, max_s) && overlap(v->b[i].on, v->b[i].on + v->b[i].dur, t0, t1) > 0)
            mask |= 1 << v->b[i].role;
    return mask;
}

static void check_index(json_t *ix, const char *group, const char *key, double want)
{
    double got = json_number_value(json_object_get(json_object_get(ix, group), key));
    /* truth.json prints 12 significant digits: 1e-8 of a percentage */
    if (fabs(got - want) > 1e-8)
        fail_msg("%s.%s: truth %.12g, recount %.12g", group, key, got, want);
}

/* Recounts the indices from the bursts, tonic, bouts and events lists, each
 * rule with its own k (docs/synthetic-nights.md, "Index formulas"; AASM
 * Manual 3-s minis and >= 5 of 10; Frauscher et al. 2012 SINBAR;
 * Montplaisir et al. 2010 2-s / 20-s; Ferri et al. 2010 RAI, on the designed
 * levels times the drift gain); exclude leaves out units touching an event. */
static void recount_rules(json_t *t, int exclude)
{
    truth_view v;
    view_load(t, &v);
    long ep = 0, ep_tonic = 0, ep_pchin = 0, ep_pany = 0, ep_rswa = 0, ep_combo = 0;
    long m3 = 0, m3_chin = 0, m3_any = 0, m3_fds = 0, m3_combo = 0, m2 = 0, m2_chin = 0, w20 = 0, w20_t = 0;
    long secs = 0, p1 = 0, p2 = 0;
    for (int b = 0; b < v.n_bouts; b++) {
        for (int e = v.bout_first[b]; e < v.bout_first[b] + v.bout_epochs[b]; e++) {
            double e0 = 30.0 * e;
            int tonic = tonic_covers(&v, e0, e0 + 30), n_chin = 0, n_any = 0, combo = 0;
            for (int m = 0; m < 10; m++) {
                double s0 = e0 + 3 * m;
                int aasm = roles_in(&v, s0, s0 + 3, 4.0, 5.0), sinbar = roles_in(&v, s0, s0 + 3, 2.0, 5.0);
                n_chin += aasm & 1;
                n_any += aasm != 0;
                int chin = sinbar & 1, arm = (sinbar & 6) != 0;
                combo += chin || tonic || arm;
                if (exclude && event_touches(&v, s0, s0 + 3))
                    continue;
                m3++;
                m3_chin += chin;
                m3_any += chin || tonic;
                m3_fds += arm;
                m3_combo += chin || tonic || arm;
            }
            for (int m = 0; m < 15; m++) {
                if (exclude && event_touches(&v, e0 + 2 * m, e0 + 2 * m + 2))
                    continue;
                m2++;
                m2_chin += roles_in(&v, e0 + 2 * m, e0 + 2 * m + 2, 4.0, 10.0) & 1;
            }
            if (exclude && event_touches(&v, e0, e0 + 30))
                continue;
            ep++;
            ep_tonic += tonic;
            ep_pchin += n_chin >= 5;
            ep_pany += n_any >= 5;
            ep_rswa += tonic || n_any >= 5;
            ep_combo += combo >= 5; /* SINBAR 30-s: 5 of 10 minis (Frauscher et al. 2014) */
        }
        for (long w = 0; w < 30L * v.bout_epochs[b] / 20; w++) {
            double s0 = 30.0 * v.bout_first[b] + 20.0 * w;
            if (exclude && event_touches(&v, s0, s0 + 20))
                continue;
            w20++;
            w20_t += tonic_covers(&v, s0, s0 + 20);
        }
        /* RAI: per second the mean of level x gain, every chin burst piece
         * weighted by the gain's integral over it */
        double t0 = 30.0 * v.bout_first[b];
        long len = 30L * v.bout_epochs[b];
        double *val = calloc((size_t)len, sizeof *val);
        assert_non_null(val);
        for (long j = 0; j < len; j++) {
            double s0 = t0 + (double)j, base = v.bout_bg[b], fsum = 0, asum = 0;
            for (size_t i = 0; i < v.n_tonic; i++)
                if (v.t_on[i] <= s0 && s0 + 1 <= v.t_on[i] + v.t_dur[i])
                    base = v.t_uv[i];
            for (size_t i = 0; i < v.n_bursts; i++) {
                double a = fmax(v.b[i].on, s0), z = fmin(v.b[i].on + v.b[i].dur, s0 + 1);
                if (v.b[i].role == 0 && z > a) {
                    fsum += gain_integral(&v, a, z);
                    asum += v.b[i].rect * gain_integral(&v, a, z);
                }
            }
            val[j] = base * (gain_integral(&v, s0, s0 + 1) - fsum) + asum;
        }
        for (long j = 0; j < len; j++) {
            double lo = INFINITY;
            for (long k = j - 30; k <= j + 29; k++)
                if (k >= 0 && k < len)
                    lo = fmin(lo, val[k]);
            if (exclude && event_touches(&v, t0 + j, t0 + j + 1))
                continue;
            secs++;
            p1 += val[j] - lo <= 1.0;
            p2 += val[j] - lo > 1.0 && val[j] - lo <= 2.0;
        }
        free(val);
    }
    json_t *ix = json_object_get(t, exclude ? "indices_events_excluded" : "indices");
    check_index(ix, "aasm", "tonic_chin_epochs", 100.0 * ep_tonic / ep);
    check_index(ix, "aasm", "phasic_chin_epochs", 100.0 * ep_pchin / ep);
    check_index(ix, "aasm", "phasic_any_epochs", 100.0 * ep_pany / ep);
    check_index(ix, "aasm", "rswa_epochs", 100.0 * ep_rswa / ep);
    check_index(ix, "sinbar", "chin_phasic_3s", 100.0 * m3_chin / m3);
    check_index(ix, "sinbar", "chin_any_3s", 100.0 * m3_any / m3);
    check_index(ix, "sinbar", "fds_phasic_3s", 100.0 * m3_fds / m3);
    check_index(ix, "sinbar", "chin_any_fds_phasic_3s", 100.0 * m3_combo / m3);
    check_index(ix, "sinbar", "chin_any_fds_phasic_30s", 100.0 * ep_combo / ep);
    check_index(ix, "montreal", "tonic_chin", 100.0 * w20_t / w20);
    check_index(ix, "montreal", "phasic_chin", 100.0 * m2_chin / m2);
    double q1 = 100.0 * p1 / secs, q2 = 100.0 * p2 / secs;
    double got = json_number_value(json_object_get(ix, "rai")), want = q1 / (100.0 - q2);
    if (fabs(got - want) > 1e-8)
        fail_msg("rai: truth %.12g, recount %.12g", got, want);
    view_free(&v);
}

/* --- tonic runs, whole tonic bouts, single-epoch bouts --------------------- */

static void tonic_runs_are_whole_epochs_as_placed(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("synth_diff_tonic");
    rt_synth_options o = night_options(2.0);
    o.single_epoch_bouts = 2;
    o.tonic_run_epochs = 3;
    o.tonic_ratio = 6.0;
    write_or_fail(&o, dir);
    json_t *t = rt_test_load_truth(dir);
    truth_view v;
    view_load(t, &v);
    /* Single-epoch bouts: the two epochs the truth names are bouts of one
     * epoch (construction). */
    json_t *singles = json_object_get(json_object_get(t, "difficulty"), "single_epoch_bouts");
    assert_int_equal(json_array_size(singles), 2);
    int n_single = 0;
    for (int b = 0; b < v.n_bouts; b++)
        if (v.bout_epochs[b] == 1) {
            n_single++;
            int listed = 0;
            for (size_t k = 0; k < 2; k++)
                listed |= json_integer_value(json_array_get(singles, k)) == v.bout_first[b];
            assert_true(listed);
        }
    assert_int_equal(n_single, 2);
    /* One run per bout of min(3, bout) epochs, starting on an even epoch of
     * the bout, at 6x the bout's atonia (construction, docs "Tonic runs"). */
    assert_int_equal(v.n_tonic, (size_t)v.n_bouts);
    long tonic_epochs = 0, rem_epochs = 0;
    for (size_t i = 0; i < v.n_tonic; i++) {
        int b = bout_of_time(&v, v.t_on[i]);
        assert_true(b >= 0);
        int len = v.bout_epochs[b] < 3 ? v.bout_epochs[b] : 3;
        assert_true(v.t_dur[i] == 30.0 * len);
        double rel = v.t_on[i] - 30.0 * v.bout_first[b];
        assert_true(fmod(rel, 60.0) == 0.0);
        assert_true(v.t_on[i] + v.t_dur[i] <= 30.0 * (v.bout_first[b] + v.bout_epochs[b]));
        assert_true(fabs(v.t_uv[i] - 6.0 * v.bout_bg[b]) <= 5e-4); /* on the 0.001-uV grid */
        json_t *jt = json_array_get(json_object_get(t, "tonic"), i);
        assert_string_equal(json_string_value(json_object_get(jt, "source")), "run");
        tonic_epochs += len;
    }
    for (int b = 0; b < v.n_bouts; b++)
        rem_epochs += v.bout_epochs[b];
    check_index(json_object_get(t, "indices"), "aasm", "tonic_chin_epochs", 100.0 * tonic_epochs / rem_epochs);
    recount_rules(t, 0);
    /* No chin burst within 0.5 s of a tonic stretch (construction). */
    for (size_t i = 0; i < v.n_bursts; i++)
        if (v.b[i].role == 0)
            for (size_t k = 0; k < v.n_tonic; k++)
                assert_true(overlap(v.b[i].on - 0.5, v.b[i].on + v.b[i].dur + 0.5, v.t_on[k],
                                    v.t_on[k] + v.t_dur[k]) == 0.0);
    /* The chin in the file: each run at its level, 10 % (a 30-90 s stretch
     * of band-limited noise estimates its rectified mean to ~1 %). */
    size_t n;
    rt_channel_info ci;
    double *x = read_channel(dir, "Chin1-Chin2", 0, -1, &n, &ci);
    for (size_t i = 0; i < v.n_tonic; i++) {
        double m = rect_mean(x, (size_t)((v.t_on[i] + 0.5) * ci.rate_hz),
                             (size_t)((v.t_on[i] + v.t_dur[i] - 0.5) * ci.rate_hz));
        print_message("# tonic run at %.0f s: %.2f uV, planned %.2f uV\n", v.t_on[i], m, v.t_uv[i]);
        assert_true(fabs(m - v.t_uv[i]) < 0.10 * v.t_uv[i]);
    }
    free(x);
    view_free(&v);
    json_decref(t);

    /* The whole second bout tonic, runs elsewhere; a bout the night lacks is
     * refused. */
    o.tonic_whole_bout = 2;
    dir = rt_test_dir("synth_diff_whole");
    write_or_fail(&o, dir);
    t = rt_test_load_truth(dir);
    view_load(t, &v);
    int whole = 0;
    for (size_t i = 0; i < v.n_tonic; i++) {
        const char *src = json_string_value(json_object_get(json_array_get(json_object_get(t, "tonic"), i), "source"));
        if (strcmp(src, "whole-bout") == 0) {
            whole++;
            assert_true(v.t_on[i] == 30.0 * v.bout_first[1] && v.t_dur[i] == 30.0 * v.bout_epochs[1]);
        }
    }
    assert_int_equal(whole, 1);
    recount_rules(t, 0);
    int n_bouts = v.n_bouts;
    view_free(&v);
    json_decref(t);
    rt_error err;
    o.tonic_whole_bout = n_bouts + 1;
    assert_int_equal(rt_synth_write(&o, rt_test_dir("synth_diff_bad_bout"), &err), RT_ERR_USAGE);
}

/* The quiet REM seconds of a role (no burst within 1 s, chin not tonic),
 * concatenated; their planned level is the bout's. */
static double *quiet_rem(const char *dir, const truth_view *v, int r, size_t *n_out, double *rate)
{
    size_t n;
    rt_channel_info ci;
    double *x = read_channel(dir, role_labels[r], 0, -1, &n, &ci);
    double *q = malloc(n * sizeof *q);
    assert_non_null(q);
    size_t k = 0;
    long s0, s1;
    last_bout_seconds(v, &s0, &s1);
    for (long s = s0; s < s1; s++) {
        if (!quiet_second(v, r, s))
            continue;
        for (size_t i = (size_t)(s * ci.rate_hz); i < (size_t)((s + 1) * ci.rate_hz); i++)
            q[k++] = x[i];
    }
    free(x);
    *n_out = k;
    *rate = ci.rate_hz;
    return q;
}

/* --- drift ------------------------------------------------------------------ */

/* Mean of drift_end^(t/T) over [a, b]. */
static double mean_gain(double g_end, double T, double a, double b)
{
    double c = log(g_end) / T;
    return (exp(c * b) - exp(c * a)) / (c * (b - a));
}

static void drift_multiplies_the_emg(void **state)
{
    (void)state;
    const double ends[2] = {2.0, 0.5};
    for (int d = 0; d < 2; d++) {
        char flat[4096], drifted[4096];
        rt_synth_options o = night_options(1.0);
        snprintf(flat, sizeof flat, "%s", rt_test_dir(d ? "synth_diff_flat2" : "synth_diff_flat"));
        write_or_fail(&o, flat);
        o.drift_end = ends[d];
        snprintf(drifted, sizeof drifted, "%s", rt_test_dir(d ? "synth_diff_drift2" : "synth_diff_drift"));
        write_or_fail(&o, drifted);
        /* The limbs are the same noise times the gain (drift changes no
         * random number), so the ratio of rectified means over the first and
         * last 5 minutes is the gain averaged with the undrifted |x| as
         * weights (construction); 1 %: the 0.015-uV steps of the file bias
         * rectified means of 1.25-5 uV by up to ~0.6 % (measured 0.3 %). */
        for (int r = 1; r < 5; r += 2) {
            size_t n;
            rt_channel_info ci;
            double *a = read_channel(flat, role_labels[r], 0, -1, &n, &ci);
            double *b = read_channel(drifted, role_labels[r], 0, -1, &n, NULL);
            size_t q = n / 12; /* 300 s */
            double early = rect_mean(b, 0, q) / rect_mean(a, 0, q);
            double late = rect_mean(b, n - q, n) / rect_mean(a, n - q, n);
            double we = 0, wl = 0, se = 0, sl = 0;
            for (size_t i = 0; i < q; i++) {
                we += fabs(a[i]) * pow(ends[d], (double)i / ci.rate_hz / 3600.0);
                se += fabs(a[i]);
                wl += fabs(a[n - q + i]) * pow(ends[d], (double)(n - q + i) / ci.rate_hz / 3600.0);
                sl += fabs(a[n - q + i]);
            }
            double want_e = we / se, want_l = wl / sl;
            print_message("# drift %.1f %s: early %.4f (%.4f), late %.4f (%.4f), late/early %.3f\n", ends[d],
                          role_names[r], early, want_e, late, want_l, late / early);
            assert_true(fabs(early / want_e - 1) < 0.01 && fabs(late / want_l - 1) < 0.01);
            free(a);
            free(b);
        }
        json_t *tf = rt_test_load_truth(flat), *td = rt_test_load_truth(drifted);
        /* Ratios are unchanged: same bursts in place and in ratio, same
         * rule indices (only the RAI, in absolute uV, may move). */
        truth_view vf, vd;
        view_load(tf, &vf);
        view_load(td, &vd);
        assert_int_equal(vf.n_bursts, vd.n_bursts);
        for (size_t i = 0; i < vf.n_bursts; i++) {
            assert_true(vf.b[i].on == vd.b[i].on && vf.b[i].dur == vd.b[i].dur);
            assert_true(fabs(vf.b[i].ratio - vd.b[i].ratio) < 0.002 * vf.b[i].ratio); /* 0.001-uV rounding */
            assert_true(fabs(vd.b[i].gain - mean_gain(ends[d], 3600, vd.b[i].on, vd.b[i].on + vd.b[i].dur)) < 1e-9);
        }
        static const char *const keys[][2] = {{"aasm", "phasic_any_epochs"}, {"sinbar", "chin_any_fds_phasic_3s"},
                                              {"montreal", "phasic_chin"}};
        for (int k = 0; k < 3; k++) {
            json_t *gf = json_object_get(json_object_get(tf, "indices"), keys[k][0]);
            json_t *gd = json_object_get(json_object_get(td, "indices"), keys[k][0]);
            assert_true(json_equal(json_object_get(gf, keys[k][1]), json_object_get(gd, keys[k][1])));
        }
        /* Atonia stays below 2.5 uV everywhere (docs "Drift": under the
         * scorer's 3.18-uV absolute tonic level, 10 uV peak to peak / pi). */
        for (int b = 0; b < vd.n_bouts; b++) {
            double g1 = pow(ends[d], 30.0 * (vd.bout_first[b] + vd.bout_epochs[b]) / 3600.0);
            assert_true(vd.bout_bg[b] * fmax(1.0, g1) < 2.5);
        }
        /* Within the drifted night alone: the atonic chin of the REM bout,
         * measured, over its planned level times the planned gain is 1
         * within 10 % (as emg_levels_follow_the_plan in test_synth.c). */
        size_t n;
        rt_channel_info ci;
        double *x = read_channel(drifted, "Chin1-Chin2", 0, -1, &n, &ci);
        double sum = 0, want = 0;
        long cnt = 0, s0, s1;
        last_bout_seconds(&vd, &s0, &s1);
        for (long s = s0; s < s1; s++) {
            if (!quiet_second(&vd, 0, s))
                continue;
            sum += rect_mean(x, (size_t)(s * ci.rate_hz), (size_t)((s + 1) * ci.rate_hz));
            want += vd.bout_bg[vd.n_bouts - 1] * mean_gain(ends[d], 3600, s, s + 1);
            cnt++;
        }
        assert_true(cnt > 100);
        print_message("# drift %.1f: REM chin %.3f uV, planned x gain %.3f uV\n", ends[d], sum / cnt, want / cnt);
        assert_true(fabs(sum / want - 1) < 0.10);
        free(x);
        if (ends[d] > 1)
            assert_true(json_real_value(json_object_get(json_object_get(td, "difficulty"), "chin_rem_scale")) < 1.0);
        view_free(&vf);
        view_free(&vd);
        json_decref(tf);
        json_decref(td);
    }
}

/* --- mains and rates ------------------------------------------------------- */

/* DFT amplitude of a sinusoid of frequency f in x (t0 the time of x[0]). */
static double sine_amplitude(const double *x, size_t n, double rate, double f, double t0)
{
    double sc = 0, ss = 0;
    for (size_t i = 0; i < n; i++) {
        double ph = 2.0 * PI * f * (t0 + (double)i / rate);
        sc += x[i] * cos(ph);
        ss += x[i] * sin(ph);
    }
    return 2.0 * sqrt(sc * sc + ss * ss) / (double)n;
}

static void mains_to_200_uv_and_mixed_rates(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("synth_diff_mains");
    rt_synth_options o = night_options(1.0);
    o.mains_hz = 50.0;
    o.mains_uv = 200.0;
    o.mains_harmonics = 2;
    o.mixed_rates = 1;
    write_or_fail(&o, dir);
    /* Rates: chin 512, arms 500, legs 200 (docs: mixed rates), a whole
     * number of samples in each 1-s record (EDF: Kemp et al. 1992). */
    const double want_rate[5] = {512, 500, 500, 200, 200};
    json_t *t = rt_test_load_truth(dir);
    json_t *rates = json_object_get(json_object_get(t, "difficulty"), "emg_rate_hz");
    for (int r = 0; r < 5; r++) {
        size_t n;
        rt_channel_info ci;
        double *x = read_channel(dir, role_labels[r], 600.0, 60.0, &n, &ci);
        assert_true(ci.rate_hz == want_rate[r]);
        assert_true(ci.n_samples == (long long)(3600 * want_rate[r]));
        assert_true((double)json_integer_value(json_object_get(rates, role_names[r])) == want_rate[r]);
        /* 60 s of 50 Hz is a whole number of cycles: the DFT amplitude is the
         * sinusoid's plus noise of ~sigma sqrt(2/N) (< 0.1 uV). */
        double a1 = sine_amplitude(x, n, ci.rate_hz, 50.0, 600.0);
        print_message("# %s at %.0f Hz: 50 Hz %.2f uV", role_names[r], ci.rate_hz, a1);
        /* At 200 Hz, 100 and 150 Hz are not below half the rate and are left
         * out, as an anti-aliasing filter would (construction): 150 Hz would
         * alias onto 50 Hz and move this amplitude by up to 50 uV. */
        assert_true(fabs(a1 - 200.0) < 0.01 * 200.0);
        if (ci.rate_hz > 300) {
            double a2 = sine_amplitude(x, n, ci.rate_hz, 100.0, 600.0);
            double a3 = sine_amplitude(x, n, ci.rate_hz, 150.0, 600.0);
            print_message(", 100 Hz %.2f uV, 150 Hz %.2f uV", a2, a3);
            assert_true(fabs(a2 - 100.0) < 1.0 && fabs(a3 - 50.0) < 1.0);
        }
        print_message("\n");
        free(x);
    }
    json_t *dropped = json_object_get(json_object_get(json_object_get(t, "artifacts"), "mains"), "dropped");
    assert_int_equal(json_array_size(dropped), 4); /* 100 and 150 Hz on both legs */
    json_decref(t);
    rt_error err;
    o.mains_uv = 201.0;
    assert_int_equal(rt_synth_write(&o, rt_test_dir("synth_diff_bad"), &err), RT_ERR_USAGE);
}

/* Each single rate: the header says it, and REM atonia is at its planned
 * level (the band-limited noise is designed per rate; 10 % as in
 * test_synth.c). */
static void every_emg_rate_keeps_the_levels(void **state)
{
    (void)state;
    const int rates[3] = {200, 256, 1000};
    for (int k = 0; k < 3; k++) {
        char name[64];
        snprintf(name, sizeof name, "synth_diff_rate%d", rates[k]);
        const char *dir = rt_test_dir(name);
        rt_synth_options o = night_options(1.0);
        o.emg_rate_hz = rates[k];
        write_or_fail(&o, dir);
        json_t *t = rt_test_load_truth(dir);
        truth_view v;
        view_load(t, &v);
        for (int r = 0; r < 5; r += 4) {
            size_t n;
            double rate;
            double *x = quiet_rem(dir, &v, r, &n, &rate);
            assert_true(rate == rates[k] && n > 100 * rate);
            double got = rect_mean(x, 0, n), want = r == 0 ? v.bout_bg[v.n_bouts - 1] : 1.0;
            print_message("# %d Hz %s: REM %.3f uV, planned %.3f\n", rates[k], role_names[r], got, want);
            assert_true(fabs(got - want) < 0.10 * want);
            free(x);
        }
        view_free(&v);
        json_decref(t);
    }
}

/* --- short bursts and burst ratios ----------------------------------------- */

static int is_mini_boundary(long s)
{
    /* epochs start at multiples of 30 s, so 2-s and 3-s mini boundaries are
     * the even seconds and the multiples of 3 (construction) */
    return s % 2 == 0 || s % 3 == 0;
}

static void short_bursts_follow_their_rules(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("synth_diff_short");
    rt_synth_options o = night_options(2.0);
    o.profile = RT_SYNTH_RBD;
    o.short_bursts = 1;
    o.burst_ratio_lo = 3.0; /* across AASM's and Montreal's k = 4, above SINBAR's 2 */
    o.burst_ratio_hi = 6.0;
    write_or_fail(&o, dir);
    json_t *t = rt_test_load_truth(dir);
    truth_view v;
    view_load(t, &v);
    assert_true(v.n_bursts > 100);
    int off_grid = 0, crossing = 0, below_k = 0;
    json_t *jb = json_object_get(t, "bursts");
    for (size_t i = 0; i < v.n_bursts; i++) {
        const burst_row *b = &v.b[i];
        double end = b->on + b->dur, u = b->on - floor(b->on);
        /* 0.10-0.30 s, ratio 3-6 (construction; 1e-9 for the 1-ms grid) */
        assert_true(b->dur >= 0.10 - 1e-9 && b->dur <= 0.30 + 1e-9);
        assert_true(b->ratio >= 3.0 - 1e-9 && b->ratio <= 6.0 + 1e-9);
        off_grid += u < 0.1 - 1e-9 || u > 0.2 + 1e-9;
        /* a crossed 2-s / 3-s boundary has >= 0.05 s of burst on each side */
        long s = (long)floor(b->on) + 1;
        if ((double)s < end && is_mini_boundary(s)) {
            crossing++;
            assert_true((double)s - b->on >= 0.05 - 1e-9 && end - (double)s >= 0.05 - 1e-9);
        }
        /* the minis listed for it are the ones it overlaps */
        json_t *m3 = json_object_get(json_array_get(jb, i), "minis_3s");
        json_t *m2 = json_object_get(json_array_get(jb, i), "minis_2s");
        assert_true(json_integer_value(json_array_get(m3, 0)) == (long)floor(b->on / 3) * 3);
        assert_int_equal(json_array_size(m3), floor(b->on / 3) == floor((end - 1e-9) / 3) ? 1 : 2);
        assert_int_equal(json_array_size(m2), floor(b->on / 2) == floor((end - 1e-9) / 2) ? 1 : 2);
        /* inside REM, 0.5 s from the bout's edges */
        int bt = bout_of_time(&v, b->on);
        assert_true(bt >= 0);
        assert_true(b->on >= 30.0 * v.bout_first[bt] + 0.5 - 1e-9 &&
                    end <= 30.0 * (v.bout_first[bt] + v.bout_epochs[bt]) - 0.5 + 1e-9);
        /* 0.5 s from tonic (chin) and from the role's other bursts */
        if (b->role == 0)
            for (size_t k = 0; k < v.n_tonic; k++)
                assert_true(overlap(b->on - 0.5, end + 0.5, v.t_on[k], v.t_on[k] + v.t_dur[k]) == 0.0);
        for (size_t j = i + 1; j < v.n_bursts; j++)
            if (v.b[j].role == b->role)
                assert_true(v.b[j].on >= end + 0.5 - 1e-9 || v.b[j].on + v.b[j].dur + 0.5 <= b->on + 1e-9);
        /* counted by a rule exactly when at or above its k (docs/scoring.md
         * section 5: AASM and Montreal 4, SINBAR 2) */
        assert_int_equal(b->aasm, b->ratio >= 4.0);
        assert_int_equal(b->montreal, b->ratio >= 4.0);
        assert_int_equal(b->sinbar, 1);
        below_k += b->ratio < 4.0;
    }
    print_message("# %zu short bursts: %d off the old onset grid, %d across a 2-s or 3-s boundary, %d below 4x\n",
                  v.n_bursts, off_grid, crossing, below_k);
    assert_true(off_grid > (int)v.n_bursts / 2 && crossing >= 10 && below_k >= 10);
    recount_rules(t, 0);

    /* The file: each burst's measured rectified level over its planned one.
     * A 0.1-0.3 s burst holds 50-150 samples, ~10-50 independent values
     * for the noise's 20-100 Hz band, so one estimate scatters by ~10-25 %
     * (measured sd 12 %): each must
     * exceed 0.4 x plan (still above 1.2x background here); pooled per role,
     * within 4 standard errors plus 2 %. */
    for (int r = 0; r < 5; r++) {
        size_t n;
        rt_channel_info ci;
        double *x = read_channel(dir, role_labels[r], 0, -1, &n, &ci);
        double sum = 0, sq = 0;
        long nb = 0;
        for (size_t i = 0; i < v.n_bursts; i++) {
            if (v.b[i].role != r)
                continue;
            size_t a = (size_t)ceil(v.b[i].on * ci.rate_hz), z = (size_t)floor((v.b[i].on + v.b[i].dur) * ci.rate_hz);
            double q = rect_mean(x, a, z) / v.b[i].rect;
            assert_true(q > 0.4);
            sum += q;
            sq += q * q;
            nb++;
        }
        double mean = sum / nb, sd = sqrt(fmax(0.0, sq / nb - mean * mean));
        print_message("# %s: %ld short bursts, measured/planned %.3f (sd %.3f)\n", role_names[r], nb, mean, sd);
        assert_true(fabs(mean - 1.0) <= 4.0 * sd / sqrt((double)nb) + 0.02);
        free(x);
    }
    view_free(&v);
    json_decref(t);

    /* Bursts below every rule's k are placed and listed, and counted by no
     * index (construction: a burst under k is not that rule's burst). */
    dir = rt_test_dir("synth_diff_quiet");
    o = night_options(1.0);
    o.profile = RT_SYNTH_RBD;
    o.burst_ratio_lo = 0.7;
    o.burst_ratio_hi = 1.5;
    o.tonic_run_epochs = 0;
    write_or_fail(&o, dir);
    t = rt_test_load_truth(dir);
    view_load(t, &v);
    assert_true(v.n_bursts > 50);
    for (size_t i = 0; i < v.n_bursts; i++)
        assert_true(!v.b[i].aasm && !v.b[i].sinbar && !v.b[i].montreal);
    json_t *ix = json_object_get(t, "indices");
    check_index(ix, "aasm", "phasic_any_epochs", 0.0);
    check_index(ix, "sinbar", "chin_phasic_3s", 0.0);
    check_index(ix, "sinbar", "fds_phasic_3s", 0.0);
    check_index(ix, "montreal", "phasic_chin", 0.0);
    recount_rules(t, 0);
    size_t listed = 0;
    json_t *minis = json_object_get(t, "minis_3s");
    for (size_t i = 0; i < json_array_size(minis); i++) {
        json_t *m = json_array_get(minis, i);
        listed += json_array_size(json_object_get(m, "phasic"));
        assert_int_equal(json_array_size(json_object_get(m, "phasic_aasm")), 0);
        assert_int_equal(json_array_size(json_object_get(m, "phasic_sinbar")), 0);
    }
    assert_true(listed > 0);
    view_free(&v);
    json_decref(t);
}

/* --- spiky EMG -------------------------------------------------------------- */

typedef struct moments {
    double rect, kurtosis;
} moments;

static moments moments_of(const double *x, size_t n)
{
    double m = 0, m2 = 0, m4 = 0, r = 0;
    for (size_t i = 0; i < n; i++)
        m += x[i];
    m /= (double)n;
    for (size_t i = 0; i < n; i++) {
        double d = x[i] - m, d2 = d * d;
        m2 += d2;
        m4 += d2 * d2;
        r += fabs(x[i]);
    }
    m2 /= (double)n;
    m4 /= (double)n;
    return (moments){r / (double)n, m4 / (m2 * m2)};
}

static void spiky_emg_is_heavy_tailed_at_the_planned_level(void **state)
{
    (void)state;
    char spiky[4096], plain[4096];
    rt_synth_options o = night_options(1.0);
    o.mixed_rates = 1; /* 512, 500 and 200 Hz in one night */
    snprintf(plain, sizeof plain, "%s", rt_test_dir("synth_diff_gauss"));
    write_or_fail(&o, plain);
    o.spiky = 1;
    snprintf(spiky, sizeof spiky, "%s", rt_test_dir("synth_diff_spiky"));
    write_or_fail(&o, spiky);
    json_t *t = rt_test_load_truth(spiky);
    assert_string_equal(json_string_value(json_object_get(json_object_get(json_object_get(t, "difficulty"), "spiky"),
                                                          "scale_method")),
                        "calibration run, 600 s, fixed seed");
    truth_view v;
    view_load(t, &v);
    for (int r = 0; r < 5; r++) {
        size_t n, ng;
        double rate, rate_g;
        double *x = quiet_rem(spiky, &v, r, &n, &rate), *g = quiet_rem(plain, &v, r, &ng, &rate_g);
        assert_true(n > 100 * rate);
        double want = r == 0 ? v.bout_bg[v.n_bouts - 1] : 1.0;
        moments ms = moments_of(x, n), mg = moments_of(g, ng);
        /* After the scorer's default conditioning (10-100 Hz zero-phase,
         * docs/scoring.md section 2) the level stays near plan, the spikes'
         * spectrum peaking at 45-64 Hz: measured over seeds 11-18, 93-97 %
         * at 500-512 Hz and 102-111 % at 200 Hz (aliasing and the 90-Hz
         * corner there); 15 % allowed. */
        rt_bandpass_spec spec = rt_bandpass_spec_defaults(rate);
        rt_error err;
        rt_bandpass *bp = rt_bandpass_new(&spec, &err);
        assert_non_null(bp);
        assert_int_equal(rt_bandpass_apply(bp, x, n, &err), RT_OK);
        rt_bandpass_free(bp);
        double filtered = rect_mean(x, (size_t)rate, n - (size_t)rate);
        print_message("# %s %.0f Hz: spiky kurtosis %.2f, rect/plan %.3f, band-passed/plan %.3f; "
                      "Gaussian kurtosis %.2f\n",
                      role_names[r], rate, ms.kurtosis, ms.rect / want, filtered / want, mg.kurtosis);
        /* Gaussian noise has kurtosis 3 (its estimate over > 50 000 samples
         * of band-limited noise scatters by < 0.1); spike trains are clearly
         * heavier-tailed (measured over seeds 11-18: 3.85-7.1). */
        assert_true(fabs(mg.kurtosis - 3.0) < 0.2);
        assert_true(ms.kurtosis > 3.5);
        /* Rectified mean within 5 % of plan (brief; calibration ~0.2 %,
         * per-second scatter ~5 % over > 100 s). */
        assert_true(fabs(ms.rect - want) < 0.05 * want);
        assert_true(fabs(filtered - want) < 0.15 * want);
        free(x);
        free(g);
    }
    /* Spikes change no placement: the same bursts as the Gaussian night. */
    json_t *tg = rt_test_load_truth(plain);
    assert_true(json_equal(json_object_get(t, "bursts"), json_object_get(tg, "bursts")));
    assert_true(json_equal(json_object_get(t, "indices"), json_object_get(tg, "indices")));
    json_decref(tg);
    view_free(&v);
    json_decref(t);
}

/* --- determinism and option checks ----------------------------------------- */

static rt_synth_options everything_on(void)
{
    rt_synth_options o = night_options(1.0);
    o.profile = RT_SYNTH_APNEA;
    o.tonic_run_epochs = 4;
    o.tonic_ratio = 5.0;
    o.drift_end = 1.5;
    o.short_bursts = 1;
    o.burst_ratio_lo = 1.5;
    o.burst_ratio_hi = 9.0;
    o.single_epoch_bouts = 1;
    o.emg_rate_hz = 256;
    o.mixed_rates = 1;
    o.spiky = 1;
    o.mains_hz = 60;
    o.mains_uv = 150;
    o.mains_harmonics = 1;
    return o;
}

static void all_switches_are_deterministic(void **state)
{
    (void)state;
    static const char *const files[] = {"night.edf", "stages.csv", "events.csv", "truth.json"};
    char a[4096], b[4096];
    rt_synth_options o = everything_on();
    snprintf(a, sizeof a, "%s", rt_test_dir("synth_diff_all_a"));
    snprintf(b, sizeof b, "%s", rt_test_dir("synth_diff_all_b"));
    write_or_fail(&o, a);
    write_or_fail(&o, b);
    for (int i = 0; i < 4; i++) {
        char pa[4200], pb[4200];
        snprintf(pa, sizeof pa, "%s/%s", a, files[i]);
        snprintf(pb, sizeof pb, "%s/%s", b, files[i]);
        size_t na, nb;
        char *x = rt_test_read_all(pa, &na), *y = rt_test_read_all(pb, &nb);
        assert_int_equal(na, nb);
        assert_memory_equal(x, y, na);
        free(x);
        free(y);
    }
    json_t *t = rt_test_load_truth(a);
    /* An apnea night with short bursts, tonic runs, drift and ratios on both
     * sides of each k: both index sets follow the recount. */
    recount_rules(t, 0);
    recount_rules(t, 1);
    json_decref(t);
}

static void rejects_out_of_range_switches(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("synth_diff_bad");
    for (int c = 0; c < 11; c++) {
        rt_synth_options o = night_options(1.0);
        switch (c) {
        case 0: o.tonic_run_epochs = 41; break;
        case 1: o.tonic_whole_bout = -1; break;
        case 2: o.tonic_ratio = 2.5; break;
        case 3: o.drift_end = 2.5; break;
        case 4: o.drift_end = 0.4; break;
        case 5: o.burst_ratio_lo = 0.4; o.burst_ratio_hi = 2; break;
        case 6: o.burst_ratio_lo = 5; o.burst_ratio_hi = 4; break;
        case 7: o.single_epoch_bouts = 21; break;
        case 8: o.emg_rate_hz = 128; break;
        case 9: o.short_bursts = 2; break;
        default: o.single_epoch_bouts = 20; break; /* no room on a 1-h night */
        }
        rt_error err;
        assert_int_equal(rt_synth_write(&o, dir, &err), RT_ERR_USAGE);
        assert_non_null(strstr(err.message, "synthetic night"));
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(rejects_out_of_range_switches),
        cmocka_unit_test(tonic_runs_are_whole_epochs_as_placed),
        cmocka_unit_test(drift_multiplies_the_emg),
        cmocka_unit_test(mains_to_200_uv_and_mixed_rates),
        cmocka_unit_test(every_emg_rate_keeps_the_levels),
        cmocka_unit_test(short_bursts_follow_their_rules),
        cmocka_unit_test(spiky_emg_is_heavy_tailed_at_the_planned_level),
        cmocka_unit_test(all_switches_are_deterministic),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
