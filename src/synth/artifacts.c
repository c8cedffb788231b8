/* Artifacts of a synthetic night, for testing quality control: mains
 * interference with harmonics, ECG bleed into the EMG channels synchronous
 * with the ECG channel, a stretch of chin saturation, a detached chin lead
 * and electrode pops. The beat list is built for every night (the ECG
 * channel is drawn from it); pops come from a random stream of their own, so
 * switching artifacts on never moves the placed RSWA activity. */
#include "synth_internal.h"

#include <math.h>
#include <stdlib.h>

#include "internal.h"


enum { POP_STREAM = 900 };


double rt_synth_heart_rate_bpm(const rt_synth_options *opt)
{
    return opt->heart_rate_bpm > 0.0 ? opt->heart_rate_bpm : 62.0;
}

double rt_synth_ecg_wave(double t_s)
{
    /* PQRST as a sum of Gaussian waves (amplitudes mV, centres s from R,
     * widths s); a textbook-shaped placeholder, not a physiological model. */
    static const double wave[5][3] = {
        {0.15, -0.20, 0.025}, {-0.10, -0.03, 0.010}, {1.00, 0.0, 0.012}, {-0.25, 0.03, 0.010},
        {0.30, 0.26, 0.045}};
    if (t_s < -0.36 || t_s >= 0.66)
        return 0.0;
    double v = 0;
    for (int k = 0; k < 5; k++) {
        double d = (t_s - wave[k][1]) / wave[k][2];
        v += wave[k][0] * exp(-0.5 * d * d);
    }
    return v;
}

/* R-R interval after the beat at ECG sample n: the mean interval with a 3 %
 * respiratory-like modulation at 0.25 Hz. */
static long next_beat(long n, double bpm)
{
    double rr = 60.0 / bpm * (1.0 + 0.03 * sin(2.0 * RT_PI * 0.25 * (double)n / SYNTH_ECG_RATE_HZ));
    return n + lround(rr * SYNTH_ECG_RATE_HZ);
}

static rt_status build_beats(synth_plan *plan, rt_error *err)
{
    double bpm = rt_synth_heart_rate_bpm(&plan->opt);
    long end = plan->n_seconds * SYNTH_ECG_RATE_HZ;
    size_t cap = (size_t)((double)plan->n_seconds * bpm / 60.0 * 1.1) + 4;
    plan->beats = rt_calloc(cap, sizeof *plan->beats);
    if (!plan->beats)
        return rt_fail(err, RT_ERR_NOMEM, "synthetic night: out of memory (beats)");
    long n = SYNTH_ECG_FIRST_BEAT;
    plan->n_beats = 0;
    while (plan->n_beats < cap) {
        plan->beats[plan->n_beats++] = n;
        if (n >= end)
            break;
        n = next_beat(n, bpm);
    }
    return RT_OK;
}

static int cmp_pop(const void *a, const void *b)
{
    double x = ((const synth_pop *)a)->onset_s, y = ((const synth_pop *)b)->onset_s;
    return (x > y) - (x < y);
}

/* Pops fall in REM epochs (where the scorer reads), at least 5 s apart and
 * 2 s away from epoch edges so each lies inside one epoch; a night without
 * REM takes them anywhere. */
static rt_status place_pops(synth_plan *plan, rt_error *err)
{
    int want = plan->opt.pops;
    if (want <= 0)
        return RT_OK;
    plan->pops = rt_calloc((size_t)want, sizeof *plan->pops);
    if (!plan->pops)
        return rt_fail(err, RT_ERR_NOMEM, "synthetic night: out of memory (pops)");
    int rem = 0;
    for (int e = 0; e < plan->n_epochs; e++)
        rem += plan->stage[e] == SYNTH_R;
    synth_rng rng;
    rt_synth_rng_seed(&rng, plan->opt.seed, POP_STREAM);
    for (int tries = 0; (int)plan->n_pops < want && tries < 100 * want + 1000; tries++) {
        int e;
        if (rem > 0) {
            int k = rt_synth_rng_int(&rng, 0, rem - 1);
            for (e = 0; e < plan->n_epochs; e++)
                if (plan->stage[e] == SYNTH_R && k-- == 0)
                    break;
        } else {
            e = rt_synth_rng_int(&rng, 0, plan->n_epochs - 1);
        }
        double t = (double)e * RT_EPOCH_WHOLE_S + rt_synth_rng_range(&rng, 2.0, RT_EPOCH_WHOLE_S - 2.0);
        /* on the chin's sample grid, so the step is one sample wide */
        t = floor(t * plan->emg_rate_hz[SYNTH_CHIN]) / plan->emg_rate_hz[SYNTH_CHIN];
        double amp = rt_synth_rng_range(&rng, 100.0, 250.0) * (rt_synth_rng_uniform(&rng) < 0.5 ? -1 : 1);
        int clash = 0;
        for (size_t i = 0; i < plan->n_pops; i++)
            clash |= fabs(plan->pops[i].onset_s - t) < 5.0;
        if (clash)
            continue;
        plan->pops[plan->n_pops++] = (synth_pop){t, amp, SYNTH_POP_TAU_S};
    }
    if ((int)plan->n_pops < want)
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: no room for %d pops 5 s apart (placed %zu)",
                       want, plan->n_pops);
    qsort(plan->pops, plan->n_pops, sizeof *plan->pops, cmp_pop);
    return RT_OK;
}

rt_status rt_synth_artifacts_build(synth_plan *plan, rt_error *err)
{
    rt_status st = build_beats(plan, err);
    if (st == RT_OK)
        st = place_pops(plan, err);
    return st;
}

void rt_synth_artifacts_free(synth_plan *plan)
{
    free(plan->beats);
    free(plan->pops);
    plan->beats = NULL;
    plan->pops = NULL;
    plan->n_beats = plan->n_pops = 0;
}

/* A recorder's anti-aliasing filter removes what lies at or above half its
 * rate, so a mains component there is not added (truth.json lists it under
 * "dropped"). */
int rt_synth_mains_reaches(const synth_plan *plan, int role, int harmonic)
{
    return plan->opt.mains_hz * harmonic < 0.5 * plan->emg_rate_hz[role];
}

double rt_synth_artifact_uv(const synth_plan *plan, int role, double t_s, size_t *beat_cursor,
                            size_t *pop_cursor)
{
    const rt_synth_options *o = &plan->opt;
    double v = 0.0;
    if (o->mains_hz > 0.0 && o->mains_uv > 0.0) {
        double a = o->mains_uv;
        for (int h = 1; h <= 1 + o->mains_harmonics; h++, a *= 0.5)
            if (rt_synth_mains_reaches(plan, role, h))
                v += a * sin(2.0 * RT_PI * o->mains_hz * h * t_s);
    }
    double bleed = role == SYNTH_CHIN ? o->ecg_bleed_uv : o->ecg_bleed_limb_uv;
    if (bleed > 0.0 && plan->n_beats > 0) {
        double scale = bleed / rt_synth_ecg_wave(0.0);
        /* beats whose waveform (-0.36 .. +0.66 s) can reach t */
        while (*beat_cursor < plan->n_beats &&
               (double)plan->beats[*beat_cursor] / SYNTH_ECG_RATE_HZ < t_s - 0.66)
            (*beat_cursor)++;
        for (size_t k = *beat_cursor; k < plan->n_beats; k++) {
            double tb = (double)plan->beats[k] / SYNTH_ECG_RATE_HZ;
            if (tb > t_s + 0.36)
                break;
            v += scale * rt_synth_ecg_wave(t_s - tb);
        }
    }
    if (role == SYNTH_CHIN && plan->n_pops > 0) {
        while (*pop_cursor < plan->n_pops &&
               plan->pops[*pop_cursor].onset_s + 10.0 * plan->pops[*pop_cursor].tau_s < t_s)
            (*pop_cursor)++;
        for (size_t k = *pop_cursor; k < plan->n_pops && plan->pops[k].onset_s <= t_s; k++) {
            double dt = t_s - plan->pops[k].onset_s;
            if (dt < 10.0 * plan->pops[k].tau_s)
                v += plan->pops[k].amplitude_uv * exp(-dt / plan->pops[k].tau_s);
        }
    }
    return v;
}

double rt_synth_chin_override(const synth_plan *plan, double t_s, double x_uv)
{
    const rt_synth_options *o = &plan->opt;
    if (o->detach_s > 0.0 && t_s >= o->detach_s)
        return 0.0;
    if (o->clip_duration_s > 0.0 && t_s >= o->clip_start_s && t_s < o->clip_start_s + o->clip_duration_s)
        x_uv += SYNTH_CLIP_SWING_UV * sin(2.0 * RT_PI * SYNTH_CLIP_SWING_HZ * (t_s - o->clip_start_s));
    return x_uv;
}
