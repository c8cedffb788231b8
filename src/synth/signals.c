/* The EDF+ recording of a synthetic night: 20 channels in 1-s data records,
 * written with EDFlib. The five EMG channels carry the model that matters
 * (stationary band-limited Gaussian noise, or motor-unit spike trains,
 * scaled by the planned rectified level and the drift gain; emg_model.c);
 * EEG, EOG, ECG, respiration, SpO2, snore and position are cheap
 * placeholders that only need to look plausible and follow the stages and
 * events. Each channel draws from its own random stream. The file goes
 * through io/edf_writer.h (EDFlib's writer under the EDFlib lock, written to a
 * temporary name, checked and renamed). */
#include "synth_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "io/edf_writer.h"


enum {
    N_CHANNELS = 20,
    CH_EEG0 = 0,    /* six EEG derivations */
    CH_EOG0 = 6,    /* E1-M2, E2-M1 */
    CH_EMG0 = 8,    /* chin, FDS L, FDS R, Tib L, Tib R (role order) */
    CH_ECG = 13,
    CH_FLOW = 14,
    CH_THOR = 15,
    CH_ABDO = 16,
    CH_SPO2 = 17,
    CH_SNORE = 18,
    CH_POS = 19,
    ECG_RATE_HZ = SYNTH_ECG_RATE_HZ,
    ECG_TEMPLATE_N = 256
};

typedef struct channel_spec {
    const char *label;
    int rate_hz;
    const char *unit;
    double phys_min, phys_max;
    int dig_min, dig_max;
    const char *transducer;
    const char *prefilter;
} channel_spec;

/* EMG: +-500 uV on 16 bits is 0.0153 uV per step, fine for 1-uV atonia; the
 * rates and ranges of the EMG rows are the plan's (emg_rate_hz, emg_range). */
static const channel_spec channels[N_CHANNELS] = {
    {"F4-M1", 128, "uV", -1000, 1000, -32768, 32767, "AgAgCl electrode", "HP:0.3Hz LP:35Hz"},
    {"C4-M1", 128, "uV", -1000, 1000, -32768, 32767, "AgAgCl electrode", "HP:0.3Hz LP:35Hz"},
    {"O2-M1", 128, "uV", -1000, 1000, -32768, 32767, "AgAgCl electrode", "HP:0.3Hz LP:35Hz"},
    {"F3-M2", 128, "uV", -1000, 1000, -32768, 32767, "AgAgCl electrode", "HP:0.3Hz LP:35Hz"},
    {"C3-M2", 128, "uV", -1000, 1000, -32768, 32767, "AgAgCl electrode", "HP:0.3Hz LP:35Hz"},
    {"O1-M2", 128, "uV", -1000, 1000, -32768, 32767, "AgAgCl electrode", "HP:0.3Hz LP:35Hz"},
    {"E1-M2", 128, "uV", -1000, 1000, -32768, 32767, "AgAgCl electrode", "HP:0.3Hz LP:35Hz"},
    {"E2-M1", 128, "uV", -1000, 1000, -32768, 32767, "AgAgCl electrode", "HP:0.3Hz LP:35Hz"},
    {"Chin1-Chin2", 512, "uV", -500, 500, -32768, 32767, "AgAgCl electrode", "HP:10Hz LP:100Hz"},
    {"FDS L", 512, "uV", -500, 500, -32768, 32767, "AgAgCl electrode", "HP:10Hz LP:100Hz"},
    {"FDS R", 512, "uV", -500, 500, -32768, 32767, "AgAgCl electrode", "HP:10Hz LP:100Hz"},
    {"Tib L", 512, "uV", -500, 500, -32768, 32767, "AgAgCl electrode", "HP:10Hz LP:100Hz"},
    {"Tib R", 512, "uV", -500, 500, -32768, 32767, "AgAgCl electrode", "HP:10Hz LP:100Hz"},
    {"ECG", ECG_RATE_HZ, "mV", -5, 5, -32768, 32767, "AgAgCl electrode", "HP:0.3Hz LP:70Hz"},
    {"Airflow", 32, "uV", -1000, 1000, -32768, 32767, "Thermistor", ""},
    {"Thor", 32, "uV", -1000, 1000, -32768, 32767, "Inductance belt", ""},
    {"Abdo", 32, "uV", -1000, 1000, -32768, 32767, "Inductance belt", ""},
    {"SpO2", 1, "%", 0, 100, 0, 10000, "Pulse oximeter", ""},
    {"Snore", 128, "uV", -500, 500, -32768, 32767, "Microphone", "HP:10Hz"},
    {"Pos", 1, "", 0, 4, 0, 4, "Position sensor", ""},
};

const char *rt_synth_emg_label(int role)
{
    return role >= 0 && role < SYNTH_ROLES ? channels[CH_EMG0 + role].label : "unknown";
}

/* Rotating phasor: a sinusoid by complex multiplication, cheaper than sin()
 * per sample; renormalised once per second so rounding cannot drift. */
typedef struct osc {
    double c, s, cw, sw;
} osc;

typedef struct eeg_state {
    osc delta, theta, alpha, spindle;
    double ar; /* AR(1) background noise */
} eeg_state;

typedef struct writer {
    const synth_plan *plan;
    synth_rng rng[N_CHANNELS];
    synth_band band[SYNTH_ROLES];          /* band-limited noise of each EMG role */
    synth_spiky_state spiky[SYNTH_ROLES];  /* with the spiky option */
    size_t burst_cursor[SYNTH_ROLES];      /* first burst of the role not yet over */
    double emg_range_uv;                   /* physical range of the EMG rows */
    eeg_state eeg[6];
    double eye, eye_slow;                  /* EOG state: saccade level, slow rolling */
    osc eye_roll;
    double ecg_template[ECG_TEMPLATE_N];   /* one beat, R peak at index ECG_R_INDEX */
    size_t ecg_beat;                       /* index in plan->beats of the next R peak */
    long ecg_next_beat;                    /* sample index of the next R peak */
    long ecg_prev_beat;
    size_t art_beat[SYNTH_ROLES];          /* cursors of the artifact sums */
    size_t art_pop;
    double breath_phase;                   /* radians */
    double emg_peak_uv;                    /* largest |EMG| written, for the clipping check */
    double *buf[N_CHANNELS];
} writer;

enum { ECG_R_INDEX = 90 };

static void osc_init(osc *o, double f_hz, double rate_hz, double phase)
{
    double w = 2.0 * RT_PI * f_hz / rate_hz;
    o->c = cos(phase);
    o->s = sin(phase);
    o->cw = cos(w);
    o->sw = sin(w);
}

static double osc_step(osc *o)
{
    double c = o->c * o->cw - o->s * o->sw;
    double s = o->s * o->cw + o->c * o->sw;
    o->c = c;
    o->s = s;
    return s;
}

static void osc_renorm(osc *o)
{
    double m = sqrt(o->c * o->c + o->s * o->s);
    o->c /= m;
    o->s /= m;
}

/* Cheap unit-variance noise for placeholders: Irwin-Hall sum of four 16-bit
 * uniforms from one 64-bit draw (not Gaussian in the tails; EMG uses the
 * polar method instead). */
static double cheap_noise(synth_rng *rng)
{
    uint64_t x = rt_synth_rng_next(rng);
    double sum = (double)(x & 0xffff) + (double)((x >> 16) & 0xffff) + (double)((x >> 32) & 0xffff) +
                 (double)(x >> 48);
    return (sum / 65536.0 - 2.0) * 1.7320508075688772;
}

/* The band-limited noise of each EMG role at its rate (emg_model.c), with
 * two seconds of warm-up so the noise is stationary from sample 0; the spike
 * trains of the spiky option from their own streams. */
static void emg_init(writer *w)
{
    const synth_plan *plan = w->plan;
    for (int r = 0; r < SYNTH_ROLES; r++) {
        rt_synth_band_init(&w->band[r], plan->emg_rate_hz[r]);
        for (int i = 0; i < 2 * plan->emg_rate_hz[r]; i++)
            (void)rt_synth_band_step(&w->band[r], rt_synth_rng_gauss(&w->rng[CH_EMG0 + r]));
        if (plan->opt.spiky)
            rt_synth_spiky_start(&w->spiky[r], &plan->spiky[r], plan->opt.seed,
                                 SYNTH_STREAM_SPIKY_FIRING + (uint64_t)r);
    }
}

static int channel_rate(const synth_plan *plan, int c)
{
    return c >= CH_EMG0 && c < CH_EMG0 + SYNTH_ROLES ? plan->emg_rate_hz[c - CH_EMG0] : channels[c].rate_hz;
}

/* One beat sampled at the ECG rate (the waveform is in artifacts.c, shared
 * with the ECG bleed into the EMG channels). */
static void ecg_template_init(writer *w)
{
    for (int i = 0; i < ECG_TEMPLATE_N; i++)
        w->ecg_template[i] = rt_synth_ecg_wave((double)(i - ECG_R_INDEX) / ECG_RATE_HZ);
}

static rt_status writer_init(writer *w, const synth_plan *plan, rt_error *err)
{
    memset(w, 0, sizeof *w);
    w->plan = plan;
    for (int c = 0; c < N_CHANNELS; c++) {
        rt_synth_rng_seed(&w->rng[c], plan->opt.seed, 100 + (uint64_t)c);
        w->buf[c] = rt_calloc((size_t)channel_rate(plan, c), sizeof(double));
        if (!w->buf[c])
            return rt_fail(err, RT_ERR_NOMEM, "synthetic night: out of memory (sample buffers)");
    }
    w->emg_range_uv = rt_synth_emg_range_uv(plan);
    emg_init(w);
    for (int c = 0; c < 6; c++) {
        synth_rng *r = &w->rng[CH_EEG0 + c];
        eeg_state *e = &w->eeg[c];
        osc_init(&e->delta, rt_synth_rng_range(r, 0.7, 1.2), 128, rt_synth_rng_range(r, 0, 6.28));
        osc_init(&e->theta, rt_synth_rng_range(r, 5.0, 7.0), 128, rt_synth_rng_range(r, 0, 6.28));
        osc_init(&e->alpha, rt_synth_rng_range(r, 9.0, 11.0), 128, rt_synth_rng_range(r, 0, 6.28));
        osc_init(&e->spindle, rt_synth_rng_range(r, 12.0, 14.0), 128, rt_synth_rng_range(r, 0, 6.28));
    }
    osc_init(&w->eye_roll, 0.3, 128, 0.0);
    ecg_template_init(w);
    w->ecg_prev_beat = -ECG_TEMPLATE_N;
    w->ecg_beat = 0;
    w->ecg_next_beat = plan->n_beats > 0 ? plan->beats[0] : -1;
    return RT_OK;
}

static void writer_free(writer *w)
{
    for (int c = 0; c < N_CHANNELS; c++)
        free(w->buf[c]);
}

static int stage_at(const synth_plan *plan, long s)
{
    return plan->stage[s / RT_EPOCH_WHOLE_S];
}

static void make_eeg(writer *w, long s)
{
    /* Amplitudes (uV) per stage: delta, theta, alpha, spindle, noise. */
    static const double amp[5][5] = {
        {5, 5, 20, 0, 8}, {10, 20, 4, 0, 8}, {20, 12, 3, 25, 8}, {90, 10, 2, 0, 10}, {8, 18, 4, 0, 8}};
    int st = stage_at(w->plan, s);
    for (int c = 0; c < 6; c++) {
        eeg_state *e = &w->eeg[c];
        synth_rng *r = &w->rng[CH_EEG0 + c];
        /* Occipital derivations carry more alpha, frontal more delta. */
        double alpha_gain = (c == 2 || c == 5) ? 1.5 : (c == 0 || c == 3 ? 0.5 : 1.0);
        double delta_gain = (c == 0 || c == 3) ? 1.2 : 1.0;
        int spindle = amp[st][3] > 0 && s % 9 == (c % 3);
        double *out = w->buf[CH_EEG0 + c];
        for (int i = 0; i < 128; i++) {
            e->ar = 0.9 * e->ar + 0.43588989435406736 * cheap_noise(r);
            double v = amp[st][0] * delta_gain * osc_step(&e->delta) + amp[st][1] * osc_step(&e->theta) +
                       amp[st][2] * alpha_gain * osc_step(&e->alpha) + amp[st][4] * e->ar;
            double sp = osc_step(&e->spindle);
            if (spindle)
                v += amp[st][3] * sin(RT_PI * i / 128.0) * sp;
            out[i] = v;
        }
        osc_renorm(&e->delta);
        osc_renorm(&e->theta);
        osc_renorm(&e->alpha);
        osc_renorm(&e->spindle);
    }
}

/* Conjugate eye movements: a saccade moves E1 and E2 in opposite directions;
 * rapid ones in REM, blinks and saccades in W, slow rolling in N1. */
static void make_eog(writer *w, long s)
{
    int st = stage_at(w->plan, s);
    synth_rng *r = &w->rng[CH_EOG0];
    double p = st == SYNTH_R ? 0.5 : (st == SYNTH_W ? 0.3 : 0.0);
    int saccade_at = rt_synth_rng_uniform(r) < p ? rt_synth_rng_int(r, 0, 127) : -1;
    double jump = rt_synth_rng_range(r, 50, 150) * (rt_synth_rng_uniform(r) < 0.5 ? -1 : 1);
    double roll = st == SYNTH_N1 ? 40.0 : 0.0;
    for (int i = 0; i < 128; i++) {
        if (i == saccade_at)
            w->eye += jump;
        w->eye *= 0.985; /* ~0.5-s decay at 128 Hz */
        double rl = roll * osc_step(&w->eye_roll);
        double n1 = 5.0 * cheap_noise(r), n2 = 5.0 * cheap_noise(&w->rng[CH_EOG0 + 1]);
        w->buf[CH_EOG0][i] = w->eye + rl + n1;
        w->buf[CH_EOG0 + 1][i] = -w->eye - rl + n2;
    }
    osc_renorm(&w->eye_roll);
}

enum { MAX_BURSTS_PER_SECOND = 4 };

/* The bursts of role r overlapping second s, as offsets from s; bursts are
 * sorted by onset and a role's are at least 0.5 s apart (short bursts) or
 * one per second (grid), so a few at most. */
static int bursts_in_second(writer *w, int r, long s, double *b0, double *b1, double *b_uv)
{
    const synth_plan *plan = w->plan;
    size_t *cur = &w->burst_cursor[r];
    while (*cur < plan->n_bursts && plan->bursts[*cur].onset_s < (double)s + 1.0 &&
           (plan->bursts[*cur].role != r ||
            plan->bursts[*cur].onset_s + plan->bursts[*cur].duration_s <= (double)s))
        (*cur)++;
    int n = 0;
    for (size_t i = *cur; i < plan->n_bursts && plan->bursts[i].onset_s < (double)s + 1.0; i++) {
        const synth_burst *b = &plan->bursts[i];
        if (b->role != r || b->onset_s + b->duration_s <= (double)s || n == MAX_BURSTS_PER_SECOND)
            continue;
        b0[n] = b->onset_s - (double)s;
        b1[n] = b0[n] + b->duration_s;
        b_uv[n] = b->rect_uv;
        n++;
    }
    return n;
}

/* EMG: x = sqrt(pi/2) * r(t) * n(t) (Gaussian) or r(t) * m(t) (spiky, m of
 * unit rectified mean), r the planned rectified level, times the drift gain. */
static void make_emg(writer *w, long s)
{
    const synth_plan *plan = w->plan;
    const double k = 1.2533141373155003; /* sqrt(pi/2): E|x| = sigma * sqrt(2/pi) */
    long e = s / RT_EPOCH_WHOLE_S;
    int near_boundary = (s % RT_EPOCH_WHOLE_S == 0) || (s % RT_EPOCH_WHOLE_S == RT_EPOCH_WHOLE_S - 1);
    const rt_synth_options *o = &plan->opt;
    int artifacts = (o->mains_hz > 0.0 && o->mains_uv > 0.0) || o->ecg_bleed_uv > 0.0 ||
                    o->ecg_bleed_limb_uv > 0.0 || o->clip_duration_s > 0.0 || o->detach_s > 0.0 ||
                    plan->n_pops > 0;
    for (int r = 0; r < SYNTH_ROLES; r++) {
        int rate = plan->emg_rate_hz[r];
        double level = plan->bg_uv[r][e];
        if (r == SYNTH_CHIN && plan->tonic[e])
            level = plan->tonic_uv[e];
        double b0[MAX_BURSTS_PER_SECOND], b1[MAX_BURSTS_PER_SECOND], b_uv[MAX_BURSTS_PER_SECOND];
        int nb = bursts_in_second(w, r, s, b0, b1, b_uv);
        double *out = w->buf[CH_EMG0 + r];
        synth_rng *rng = &w->rng[CH_EMG0 + r];
        for (int i = 0; i < rate; i++) {
            double t = (double)i / rate;
            double lv = level;
            if (near_boundary && !plan->tonic[e])
                lv = rt_synth_plan_background_uv(plan, r, (double)s + t);
            for (int j = 0; j < nb; j++)
                if (t >= b0[j] && t < b1[j])
                    lv = b_uv[j];
            double n = rt_synth_band_step(&w->band[r], rt_synth_rng_gauss(rng));
            double x = o->spiky ? lv * rt_synth_spiky_sample(&w->spiky[r], (double)s + t, n) : k * lv * n;
            if (plan->drift_per_s != 0.0)
                x *= rt_synth_gain(plan, (double)s + t);
            double ax = fabs(x);
            if (ax > w->emg_peak_uv)
                w->emg_peak_uv = ax;
            if (artifacts) {
                double ts = (double)s + t;
                x += rt_synth_artifact_uv(plan, r, ts, &w->art_beat[r], &w->art_pop);
                if (r == SYNTH_CHIN)
                    x = rt_synth_chin_override(plan, ts, x);
                /* saturation as the recorder would show it */
                x = fmax(-w->emg_range_uv, fmin(w->emg_range_uv, x));
            }
            out[i] = x;
        }
    }
}

static void make_ecg(writer *w, long s)
{
    synth_rng *r = &w->rng[CH_ECG];
    double *out = w->buf[CH_ECG];
    for (int i = 0; i < ECG_RATE_HZ; i++) {
        long n = s * ECG_RATE_HZ + i;
        if (n == w->ecg_next_beat) {
            /* beats from the plan: ~62 bpm (or the option) with a slow
             * respiratory-like modulation of the interval */
            w->ecg_prev_beat = n;
            w->ecg_beat++;
            w->ecg_next_beat = w->ecg_beat < w->plan->n_beats ? w->plan->beats[w->ecg_beat] : -1;
        }
        double v = 0.01 * cheap_noise(r);
        long a = n - w->ecg_prev_beat + ECG_R_INDEX, b = n - w->ecg_next_beat + ECG_R_INDEX;
        if (a >= 0 && a < ECG_TEMPLATE_N)
            v += w->ecg_template[a];
        if (b >= 0 && b < ECG_TEMPLATE_N)
            v += w->ecg_template[b];
        out[i] = v;
    }
}

/* Event state of one second: 0 none, else the synth_event_type + 1. */
static int event_at(const synth_plan *plan, long s, size_t *cursor)
{
    while (*cursor < plan->n_events &&
           plan->events[*cursor].start_s + plan->events[*cursor].duration_s <= s)
        (*cursor)++;
    for (size_t i = *cursor; i < plan->n_events && plan->events[i].start_s <= s; i++)
        if (s < plan->events[i].start_s + plan->events[i].duration_s)
            return plan->events[i].type + 1;
    return 0;
}

/* Oxygen desaturation after each apnea (4 %) or hypopnea (3 %): a triangle
 * from 10 s after onset to 30 s after the end, deepest 15 s after the end. */
static double spo2_at(const synth_plan *plan, long s)
{
    double dip = 0;
    for (size_t i = 0; i < plan->n_events; i++) {
        const synth_event *ev = &plan->events[i];
        if (ev->type == SYNTH_RESP_AROUSAL)
            continue;
        if (ev->start_s > s)
            break;
        double a = (double)ev->start_s + 10, m = (double)(ev->start_s + ev->duration_s) + 15, b = m + 15;
        double depth = ev->type == SYNTH_APNEA ? 4.0 : 3.0, d = 0;
        if (s > a && s < m)
            d = depth * (s - a) / (m - a);
        else if (s >= m && s < b)
            d = depth * (b - s) / (b - m);
        dip = d > dip ? d : dip;
    }
    return 95.5 + 0.5 * sin(2.0 * RT_PI * (double)s / 600.0) - dip;
}

static void make_resp(writer *w, long s, size_t *cursor)
{
    const synth_plan *plan = w->plan;
    int st = stage_at(plan, s);
    int ev = event_at(plan, s, cursor);
    double f_hz = st == SYNTH_W ? 0.28 : (st == SYNTH_R ? 0.27 : 0.24);
    double flow = 1.0, belt = 1.0;
    int paradox = 0;
    if (ev == SYNTH_APNEA + 1) {
        flow = 0.05;
        paradox = 1; /* obstructive: effort continues against a closed airway */
    } else if (ev == SYNTH_HYPOPNEA + 1) {
        flow = 0.4;
        belt = 0.6;
    } else if (ev == SYNTH_RESP_AROUSAL + 1) {
        flow = belt = 1.6;
    }
    synth_rng *r = &w->rng[CH_FLOW];
    for (int i = 0; i < 32; i++) {
        double ph = w->breath_phase + 2.0 * RT_PI * f_hz * i / 32.0;
        w->buf[CH_FLOW][i] = 200.0 * flow * sin(ph) + 5.0 * cheap_noise(r);
        w->buf[CH_THOR][i] = 150.0 * belt * sin(ph - 0.3) + 3.0 * cheap_noise(&w->rng[CH_THOR]);
        w->buf[CH_ABDO][i] = 150.0 * belt * sin(ph - 0.3 + (paradox ? RT_PI : 0.2)) +
                             3.0 * cheap_noise(&w->rng[CH_ABDO]);
    }
    /* Snoring rides on inspiration in sleep when the airway is open. */
    int snoring = plan->opt.profile == RT_SYNTH_APNEA && st != SYNTH_W && ev != SYNTH_APNEA + 1;
    for (int i = 0; i < 128; i++) {
        double ph = w->breath_phase + 2.0 * RT_PI * f_hz * i / 128.0;
        double env = snoring ? 15.0 * fmax(0.0, sin(ph)) : 0.0;
        w->buf[CH_SNORE][i] = (2.0 + env) * cheap_noise(&w->rng[CH_SNORE]);
    }
    w->breath_phase = fmod(w->breath_phase + 2.0 * RT_PI * f_hz, 2.0 * RT_PI);
    w->buf[CH_SPO2][0] = spo2_at(plan, s);
    w->buf[CH_POS][0] = plan->position[s / RT_EPOCH_WHOLE_S];
}

static rt_status begin_file(rt_edf_writer **out, const synth_plan *plan, const char *path, rt_error *err)
{
    rt_edf_writer_signal sig[N_CHANNELS];
    double emg_range = rt_synth_emg_range_uv(plan);
    for (int c = 0; c < N_CHANNELS; c++) {
        const channel_spec *cs = &channels[c];
        int emg = c >= CH_EMG0 && c < CH_EMG0 + SYNTH_ROLES;
        sig[c] = (rt_edf_writer_signal){.label = cs->label, .unit = cs->unit, .transducer = cs->transducer,
                                        .prefilter = cs->prefilter, .rate_hz = channel_rate(plan, c),
                                        .phys_min = emg ? -emg_range : cs->phys_min,
                                        .phys_max = emg ? emg_range : cs->phys_max,
                                        .dig_min = cs->dig_min, .dig_max = cs->dig_max};
    }
    const rt_synth_options *o = &plan->opt;
    /* A fixed fictional date keeps the file byte-identical between runs. */
    rt_edf_writer_header header = {
        .year = 2024, .month = 1, .day = 1, .hour = o->start_hour, .minute = o->start_minute,
        .patient_name = o->patient ? o->patient : "X",
        .recording_additional = o->recording ? o->recording : rt_synth_profile_name(o->profile),
        .equipment = "remtone-synth"};
    return rt_edf_writer_begin(out, path, &header, sig, N_CHANNELS, err);
}

static rt_status write_annotations(rt_edf_writer *w, const synth_plan *plan, rt_error *err)
{
    rt_status st = RT_OK;
    for (int e = 0; e < plan->n_epochs && st == RT_OK;) {
        int end = e;
        while (end < plan->n_epochs && plan->stage[end] == plan->stage[e])
            end++;
        st = rt_edf_writer_annotation(w, (double)e * RT_EPOCH_WHOLE_S, (double)(end - e) * RT_EPOCH_WHOLE_S,
                                      rt_synth_stage_edf_text(plan->stage[e]), err);
        e = end;
    }
    for (size_t i = 0; i < plan->n_events && st == RT_OK; i++)
        st = rt_edf_writer_annotation(w, (double)plan->events[i].start_s, (double)plan->events[i].duration_s,
                                      rt_synth_event_edf_text(plan->events[i].type), err);
    return st;
}

static rt_status write_records(rt_edf_writer *w, writer *g, const char *path, rt_error *err)
{
    size_t cursor = 0;
    for (long s = 0; s < g->plan->n_seconds; s++) {
        make_eeg(g, s);
        make_eog(g, s);
        make_emg(g, s);
        make_ecg(g, s);
        make_resp(g, s, &cursor);
        rt_status st = rt_edf_writer_record(w, (const double *const *)g->buf, err);
        if (st != RT_OK)
            return st;
    }
    if (g->emg_peak_uv >= g->emg_range_uv)
        return rt_fail(err, RT_ERR_INTERNAL, "%s: EMG reached %.1f uV and would clip at +-%g uV", path,
                       g->emg_peak_uv, g->emg_range_uv);
    return RT_OK;
}

rt_status rt_synth_write_edf(const synth_plan *plan, const char *path, rt_error *err)
{
    writer *g = malloc(sizeof *g);
    if (!g)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", path);
    rt_edf_writer *w = NULL;
    rt_status st = writer_init(g, plan, err);
    if (st == RT_OK)
        st = begin_file(&w, plan, path, err);
    if (st == RT_OK)
        st = write_annotations(w, plan, err);
    if (st == RT_OK)
        st = write_records(w, g, path, err);
    writer_free(g);
    free(g);
    if (st != RT_OK) {
        rt_edf_writer_abort(w);
        return st;
    }
    return rt_edf_writer_finish(w, err);
}
