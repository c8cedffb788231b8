/* The EMG signal models of the synthetic night: the band-limited Gaussian
 * noise of every night, the spiky motor-unit model of the spiky switch, the
 * slow gain drift of the drift switch and each role's sampling rate. Shared
 * by the plan (calibration, rates) and the signal writer; the design and its
 * numbers are in docs/synthetic-nights.md ("EMG model", "Difficulty
 * switches"). */
#include "synth_internal.h"

#include <math.h>
#include <string.h>


/* Calibration of the spiky model: long enough that the estimated rectified
 * mean is within ~0.2 % (per-second scatter ~5 %, 600 independent seconds),
 * with a fixed seed so the scale depends only on the unit parameters. */
enum { SPIKY_CALIBRATION_S = 600 };
static const uint64_t SPIKY_CALIBRATION_SEED = 0x5eedca11b4a7e000ULL;

/* RBJ audio-EQ-cookbook biquads (bilinear transform with pre-warping). */
static synth_biquad biquad_design(int highpass, double f0_hz, double rate_hz, double q)
{
    double w0 = 2.0 * RT_PI * f0_hz / rate_hz;
    double cw = cos(w0), alpha = sin(w0) / (2.0 * q), a0 = 1.0 + alpha;
    synth_biquad b;
    if (highpass) {
        b.b0 = (1.0 + cw) / 2.0 / a0;
        b.b1 = -(1.0 + cw) / a0;
    } else {
        b.b0 = (1.0 - cw) / 2.0 / a0;
        b.b1 = (1.0 - cw) / a0;
    }
    b.b2 = b.b0;
    b.a1 = -2.0 * cw / a0;
    b.a2 = (1.0 - alpha) / a0;
    return b;
}

static double cascade_step(const synth_biquad *bq, double z[4][2], double x)
{
    for (int k = 0; k < 4; k++) {
        double y = bq[k].b0 * x + z[k][0];
        z[k][0] = bq[k].b1 * x - bq[k].a1 * y + z[k][1];
        z[k][1] = bq[k].b2 * x - bq[k].a2 * y;
        x = y;
    }
    return x;
}

/* 4th-order Butterworth high-pass at 20 Hz then low-pass at 100 Hz (at most
 * 0.4 x the rate): surface EMG power spans about 20-150 Hz and is recorded
 * through a 10-100 Hz band (common practice), so the model is as broad as
 * the recording band allows (Q of the
 * two sections 1/(2cos(pi/8)) and 1/(2cos(3pi/8))). For white input of unit
 * variance the output variance is the impulse response energy, so dividing
 * by its square root makes the output unit-variance. */
void rt_synth_band_init(synth_band *band, double rate_hz)
{
    const double q[2] = {0.54119610014619701, 1.3065629648763766};
    memset(band, 0, sizeof *band);
    for (int k = 0; k < 2; k++) {
        band->bq[k] = biquad_design(1, 20.0, rate_hz, q[k]);
        band->bq[2 + k] = biquad_design(0, fmin(100.0, 0.4 * rate_hz), rate_hz, q[k]);
    }
    double energy = 0;
    for (int i = 0; i < (1 << 15); i++) {
        double y = cascade_step(band->bq, band->z, i == 0 ? 1.0 : 0.0);
        energy += y * y;
    }
    band->gain = 1.0 / sqrt(energy);
    memset(band->z, 0, sizeof band->z);
}

double rt_synth_band_step(synth_band *band, double x)
{
    return band->gain * cascade_step(band->bq, band->z, x);
}

int rt_synth_role_rate_hz(const rt_synth_options *opt, int role)
{
    /* Mixed rates: chin at the chosen rate, arms at the rate before it in
     * this list and legs two after it (cyclically), so the three differ and
     * 512 Hz gives arms 500 Hz and legs 200 Hz. */
    static const int rates[5] = {200, 256, 500, 512, 1000};
    int base = opt->emg_rate_hz > 0 ? opt->emg_rate_hz : SYNTH_EMG_RATE_HZ;
    if (!opt->mixed_rates || role == SYNTH_CHIN)
        return base;
    int i = 0;
    while (i < 5 && rates[i] != base)
        i++;
    if (i == 5)
        return base;
    return role == SYNTH_ARM_L || role == SYNTH_ARM_R ? rates[(i + 4) % 5] : rates[(i + 2) % 5];
}

double rt_synth_gain(const synth_plan *plan, double t_s)
{
    return plan->drift_per_s == 0.0 ? 1.0 : exp(plan->drift_per_s * t_s);
}

double rt_synth_gain_integral(const synth_plan *plan, double a_s, double b_s)
{
    double c = plan->drift_per_s;
    if (c == 0.0)
        return b_s - a_s;
    /* expm1 keeps precision when c (b - a) is small */
    return exp(c * a_s) * expm1(c * (b_s - a_s)) / c;
}

/* --- spiky EMG ------------------------------------------------------------ */

/* Spike of unit peak per phase: -(u / sigma) exp(1/2 - u^2 / (2 sigma^2)),
 * extrema +-1 at u = -+sigma; cut at |u| = 4 sigma (value 0.2 % of the peak).
 * 95 % of its energy lies within +-2 sigma. */
static double spike(double u, double sigma)
{
    double v = u / sigma;
    return -v * exp(0.5 - 0.5 * v * v);
}

/* Intervals: mean 1 / rate with a 20 % Gaussian jitter (motor-unit firing is
 * fairly regular), kept in [0.6, 1.4] / rate, so two spikes of one unit are
 * at least 30 ms apart and never overlap (support 8 sigma <= 28 ms). */
static double next_interval(synth_rng *rng, double rate_hz)
{
    double u = 1.0 + 0.2 * rt_synth_rng_gauss(rng);
    u = u < 0.6 ? 0.6 : (u > 1.4 ? 1.4 : u);
    return u / rate_hz;
}

void rt_synth_spiky_start(synth_spiky_state *st, const synth_spiky *model, uint64_t seed, uint64_t stream)
{
    memset(st, 0, sizeof *st);
    st->model = model;
    rt_synth_rng_seed(&st->rng, seed, stream);
    /* first spikes at a random phase of each unit's interval */
    for (int k = 0; k < SYNTH_SPIKY_UNITS; k++)
        st->centre_s[k] = rt_synth_rng_uniform(&st->rng) / model->rate_hz[k];
}

double rt_synth_spiky_sample(synth_spiky_state *st, double t_s, double n)
{
    const synth_spiky *m = st->model;
    double v = m->noise_sd * n;
    for (int k = 0; k < SYNTH_SPIKY_UNITS; k++) {
        double reach = 4.0 * m->sigma_s[k];
        while (t_s > st->centre_s[k] + reach)
            st->centre_s[k] += next_interval(&st->rng, m->rate_hz[k]);
        double u = t_s - st->centre_s[k];
        if (u > -reach)
            v += m->amp[k] * spike(u, m->sigma_s[k]);
    }
    return m->scale * v;
}

/* Parameters per role from its own stream: widths sigma 2.5-3.5 ms (the two
 * phases peak 5-7 ms apart, the spike lasts ~10-14 ms), so the spectrum
 * (peak 1 / (2 pi sigma) = 45-64 Hz) stays inside the scorer's 10-100 Hz
 * band; peaks 0.5-1.0; rates 5-20 Hz; Gaussian part 10 % of the spike
 * trains' RMS (computed from the spike energy e sigma sqrt(pi) / 2). */
static void spiky_draw(synth_spiky *m, uint64_t seed, int role)
{
    synth_rng rng;
    rt_synth_rng_seed(&rng, seed, SYNTH_STREAM_SPIKY_UNITS + (uint64_t)role);
    double power = 0.0;
    for (int k = 0; k < SYNTH_SPIKY_UNITS; k++) {
        m->sigma_s[k] = rt_synth_rng_range(&rng, 0.0025, 0.0035);
        m->amp[k] = rt_synth_rng_range(&rng, 0.5, 1.0);
        m->rate_hz[k] = rt_synth_rng_range(&rng, 5.0, 20.0);
        power += m->rate_hz[k] * m->amp[k] * m->amp[k] * exp(1.0) * m->sigma_s[k] * sqrt(RT_PI) / 2.0;
    }
    m->noise_sd = 0.1 * sqrt(power);
    m->scale = 1.0;
}

/* Calibration: the mean rectified value of the unscaled process over a long
 * run at the role's rate, with a fixed seed; the scale is its inverse. */
static void spiky_calibrate(synth_spiky *m, int role, int rate_hz)
{
    synth_spiky_state st;
    rt_synth_spiky_start(&st, m, SPIKY_CALIBRATION_SEED, SYNTH_STREAM_SPIKY_CALIBRATION + (uint64_t)role);
    synth_rng noise;
    rt_synth_rng_seed(&noise, SPIKY_CALIBRATION_SEED, SYNTH_STREAM_SPIKY_CALIBRATION + 10 + (uint64_t)role);
    synth_band band;
    rt_synth_band_init(&band, rate_hz);
    for (int i = 0; i < 2 * rate_hz; i++)
        (void)rt_synth_band_step(&band, rt_synth_rng_gauss(&noise));
    double sum = 0.0;
    long n = (long)SPIKY_CALIBRATION_S * rate_hz;
    for (long i = 0; i < n; i++) {
        double g = rt_synth_band_step(&band, rt_synth_rng_gauss(&noise));
        sum += fabs(rt_synth_spiky_sample(&st, (double)i / rate_hz, g));
    }
    m->scale = (double)n / sum;
}

rt_status rt_synth_spiky_build(synth_plan *plan, rt_error *err)
{
    (void)err;
    if (!plan->opt.spiky)
        return RT_OK;
    for (int r = 0; r < SYNTH_ROLES; r++) {
        spiky_draw(&plan->spiky[r], plan->opt.seed, r);
        spiky_calibrate(&plan->spiky[r], r, plan->emg_rate_hz[r]);
    }
    return RT_OK;
}

/* The EMG rows' physical range: +-500 uV as on most recorders, widened
 * (1000, 2000, 5000 uV) only when the largest planned level times the drift
 * gain and a crest factor could reach 500 uV: 7.5 sigma for Gaussian noise
 * (a per-sample chance of 6e-14), the sum of all spike peaks plus 6 noise
 * sigma for the spiky model. Default nights keep +-500 uV. */
double rt_synth_emg_range_uv(const synth_plan *plan)
{
    double top = 0.0;
    for (int r = 0; r < SYNTH_ROLES; r++) {
        double crest = 1.2533141373155003 * 7.5;
        if (plan->opt.spiky) {
            const synth_spiky *m = &plan->spiky[r];
            crest = 6.0 * m->noise_sd;
            for (int k = 0; k < SYNTH_SPIKY_UNITS; k++)
                crest += m->amp[k];
            crest *= m->scale;
        }
        double level = 0.0;
        for (int e = 0; e < plan->n_epochs; e++) {
            level = fmax(level, plan->bg_uv[r][e]);
            if (r == SYNTH_CHIN && plan->tonic[e])
                level = fmax(level, plan->tonic_uv[e]);
        }
        for (size_t i = 0; i < plan->n_bursts; i++)
            if (plan->bursts[i].role == r)
                level = fmax(level, plan->bursts[i].rect_uv);
        top = fmax(top, level * crest);
    }
    top *= fmax(1.0, rt_synth_gain(plan, (double)plan->n_seconds));
    static const double ranges[] = {500.0, 1000.0, 2000.0, 5000.0};
    for (int i = 0; i < 4; i++)
        if (top < ranges[i])
            return ranges[i];
    return ranges[3];
}
