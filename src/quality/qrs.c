/* ECG in EMG: a QRS detector after Pan & Tompkins 1985 (IEEE Trans Biomed
 * Eng 32:230-236), removal of ECG artifact from an EMG stretch by subtracting
 * the QRS-locked average, and the QRS windows used to refuse bursts that
 * coincide with heart beats.
 *
 * Departures from the 1985 paper, all because remtone works offline on a
 * whole stretch: the filters run forward and backward (zero phase, so no
 * delay bookkeeping) as Butterworth sections designed for any sampling rate
 * instead of the paper's integer filters for 200 Hz; the integration window
 * is centred; thresholds are applied to the integrated signal only (the
 * paper also runs a second set on the band-passed signal); and the search-back
 * uses the mean of the last eight R-R intervals (the paper's "RR average 1").
 *
 * "ECG artifact found" needs evidence (docs/quality.md): enough beats, a heart
 * rate, and a beat-locked template that explains far more of the EMG around
 * the beats than a template at pseudo-random times. Beats found in the chin
 * itself must also look like a heart's rhythm, because a detector that picks
 * its own times makes a template out of noise alone. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "quality.h"

#include "internal.h"


typedef struct biquad {
    double b0, b1, b2, a1, a2;
} biquad;

/* RBJ cookbook second-order Butterworth section (Q = 1/sqrt(2)). */
static biquad design(int highpass, double f0, double rate)
{
    double w0 = 2.0 * RT_PI * f0 / rate, cw = cos(w0), alpha = sin(w0) / (2.0 * 0.70710678118654752);
    double a0 = 1.0 + alpha;
    biquad b;
    b.b0 = (highpass ? (1.0 + cw) / 2.0 : (1.0 - cw) / 2.0) / a0;
    b.b1 = (highpass ? -(1.0 + cw) : (1.0 - cw)) / a0;
    b.b2 = b.b0;
    b.a1 = -2.0 * cw / a0;
    b.a2 = (1.0 - alpha) / a0;
    return b;
}

/* One section forward then backward over y (in place), started from the
 * steady state of the first sample so the ends do not ring. */
static void filtfilt(const biquad *b, double *y, size_t n)
{
    for (int pass = 0; pass < 2; pass++) {
        double x0 = pass == 0 ? y[0] : y[n - 1];
        double dc = (b->b0 + b->b1 + b->b2) / (1.0 + b->a1 + b->a2);
        /* transposed direct form II state for a constant input x0 */
        double z1 = x0 * dc - b->b0 * x0, z2 = b->b2 * x0 - b->a2 * x0 * dc;
        for (size_t k = 0; k < n; k++) {
            size_t i = pass == 0 ? k : n - 1 - k;
            double x = y[i];
            double out = b->b0 * x + z1;
            z1 = b->b1 * x - b->a1 * out + z2;
            z2 = b->b2 * x - b->a2 * out;
            y[i] = out;
        }
    }
}

static size_t samples(double s, double rate)
{
    long v = lround(s * rate);
    return v < 1 ? 1 : (size_t)v;
}

static int compare_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Median of v[0..k), k > 0; sorts v. */
static double median_of(double *v, size_t k)
{
    qsort(v, k, sizeof *v, compare_double);
    return k % 2 ? v[k / 2] : 0.5 * (v[k / 2 - 1] + v[k / 2]);
}

/* Heart rate (60 / median R-R) and rhythm irregularity (median |successive
 * R-R change| / median R-R) of increasing beat times; NAN below 2 (rate) or
 * 3 (irregularity) beats. scratch holds 2 nb doubles. */
static void rhythm(const double *r_s, size_t nb, double *scratch, double *rate_bpm,
                   double *irregularity)
{
    *rate_bpm = *irregularity = NAN;
    if (nb < 2)
        return;
    for (size_t k = 0; k + 1 < nb; k++)
        scratch[k] = r_s[k + 1] - r_s[k];
    size_t nrr = nb - 1;
    double *diffs = scratch + nrr;
    for (size_t k = 0; k + 1 < nrr; k++)
        diffs[k] = fabs(scratch[k + 1] - scratch[k]);
    double rr = median_of(scratch, nrr);
    if (!(rr > 0.0))
        return;
    *rate_bpm = 60.0 / rr;
    if (nrr >= 2)
        *irregularity = median_of(diffs, nrr - 1) / rr;
}

/* Window centres spread by a fixed pseudo-random stream (xorshift64*, Vigna
 * 2016, constants from memory) over [lo_s, hi_s): the "random times" whose
 * template measures chance. Fixed seed: the same input gives the same result. */
static void pseudo_random_times(double *t_s, size_t k, double lo_s, double hi_s)
{
    uint64_t x = 0x9E3779B97F4A7C15ull;
    for (size_t i = 0; i < k; i++) {
        x ^= x >> 12;
        x ^= x << 25;
        x ^= x >> 27;
        double u = (double)((x * 0x2545F4914F6CDD1Dull) >> 11) / 9007199254740992.0;
        t_s[i] = lo_s + u * (hi_s - lo_s);
    }
    qsort(t_s, k, sizeof *t_s, compare_double);
}

/* First sample of the window [c - a, c + b] around t_s (c = t_s x rate,
 * rounded) when the whole window lies in [0, n). */
static bool window_start(double t_s, double rate, size_t a, size_t b, size_t n, size_t *s0)
{
    double c = t_s * rate;
    if (!isfinite(c) || c < (double)a || c + (double)b >= (double)n)
        return false;
    *s0 = (size_t)lround(c) - a;
    return *s0 + a + b + 1 <= n;
}

/* Share of the window energy explained by the average of the windows
 * [c - a, c + b] (samples) around t_s that fit in x: |mean window|^2 over the
 * mean |window|^2, 0..1; about 1 / windows for unrelated windows. tpl holds
 * a + b + 1 doubles. *used receives the windows averaged. 0 without energy. */
static double locked_share(const double *x, size_t n, double rate, const double *t_s, size_t nt,
                           size_t a, size_t b, double *tpl, size_t *used)
{
    size_t len = a + b + 1, k_used = 0;
    double energy = 0.0;
    memset(tpl, 0, len * sizeof *tpl);
    for (size_t k = 0; k < nt; k++) {
        size_t s0;
        if (!window_start(t_s[k], rate, a, b, n, &s0))
            continue;
        k_used++;
        for (size_t j = 0; j < len; j++) {
            tpl[j] += x[s0 + j];
            energy += x[s0 + j] * x[s0 + j];
        }
    }
    *used = k_used;
    if (k_used == 0 || !(energy > 0.0))
        return 0.0;
    double e_tpl = 0.0;
    for (size_t j = 0; j < len; j++) {
        double m = tpl[j] / (double)k_used;
        e_tpl += m * m;
    }
    return e_tpl / (energy / (double)k_used);
}

typedef struct detector {
    double spki, npki, thr1, thr2;
    double last_slope; /* largest |derivative| of the last QRS */
    long last_qrs;     /* sample, -1 before the first */
    double rr[8];
    int n_rr;
} detector;

static void update_thresholds(detector *d)
{
    d->thr1 = d->npki + 0.25 * (d->spki - d->npki);
    d->thr2 = 0.5 * d->thr1;
}

static double rr_average(const detector *d)
{
    double s = 0.0;
    for (int i = 0; i < d->n_rr; i++)
        s += d->rr[i];
    return d->n_rr ? s / d->n_rr : 0.0;
}

static void push_rr(detector *d, double rr)
{
    if (d->n_rr == 8)
        memmove(d->rr, d->rr + 1, 7 * sizeof *d->rr);
    else
        d->n_rr++;
    d->rr[d->n_rr - 1] = rr;
}

/* Largest |deriv| within +-half around i. */
static double slope_at(const double *deriv, size_t n, size_t i, size_t half)
{
    size_t a = i > half ? i - half : 0, b = i + half < n ? i + half : n - 1;
    double m = 0.0;
    for (size_t k = a; k <= b; k++)
        m = fmax(m, fabs(deriv[k]));
    return m;
}

/* R time: extreme of the band-passed signal near the integrator peak,
 * refined by a parabola through the three samples around it. */
static double locate_r(const double *bp, size_t n, size_t peak, size_t half, double rate)
{
    size_t a = peak > half ? peak - half : 0, b = peak + half < n ? peak + half : n - 1;
    size_t best = a;
    for (size_t k = a; k <= b; k++)
        if (fabs(bp[k]) > fabs(bp[best]))
            best = k;
    double t = (double)best;
    if (best > 0 && best + 1 < n) {
        double y0 = fabs(bp[best - 1]), y1 = fabs(bp[best]), y2 = fabs(bp[best + 1]);
        double den = y0 - 2.0 * y1 + y2;
        if (den < 0.0)
            t += 0.5 * (y0 - y2) / den;
    }
    return t / rate;
}

/* Chin-only mode (remtone's addition to the paper): muscle bursts put
 * energy into the 5-15 Hz band too, so a detection is kept only when the raw
 * signal within +-60 ms of it correlates with the average of all detections
 * (Pearson r >= 0.4). A QRS, 10 ms wide, dominates that window even inside
 * a burst of comparable amplitude, while broadband muscle noise gives r near
 * 0 (about +-0.13 for 60 independent samples). *nb becomes the number of
 * beats kept; RT_ERR_NOMEM without room for the template (never a silent
 * keep-all, which would change the result). */
static rt_status keep_shaped_beats(const double *x, size_t n, double rate, double *r_s,
                                   size_t *nb_io, rt_error *err)
{
    size_t nb = *nb_io;
    if (nb < 8)
        return RT_OK;
    size_t half = samples(0.060, rate), len = 2 * half + 1;
    double *tpl = rt_calloc(len, sizeof *tpl);
    if (!tpl)
        return rt_fail(err, RT_ERR_NOMEM, "QRS detector: out of memory for a template");
    size_t used = 0;
    for (size_t k = 0; k < nb; k++) {
        long c = lround(r_s[k] * rate);
        if (c < (long)half || (size_t)c + half >= n)
            continue;
        double m = 0.0;
        for (size_t j = 0; j < len; j++)
            m += x[(size_t)c - half + j];
        m /= (double)len;
        for (size_t j = 0; j < len; j++)
            tpl[j] += x[(size_t)c - half + j] - m;
        used++;
    }
    double tn = 0.0;
    for (size_t j = 0; j < len; j++)
        tn += tpl[j] * tpl[j];
    if (used < 8 || tn <= 0.0) {
        free(tpl);
        return RT_OK;
    }
    size_t kept = 0;
    for (size_t k = 0; k < nb; k++) {
        long c = lround(r_s[k] * rate);
        double r = 1.0; /* beats at the edges are kept */
        if (c >= (long)half && (size_t)c + half < n) {
            double m = 0.0, xy = 0.0, xx = 0.0;
            for (size_t j = 0; j < len; j++)
                m += x[(size_t)c - half + j];
            m /= (double)len;
            for (size_t j = 0; j < len; j++) {
                double v = x[(size_t)c - half + j] - m;
                xy += v * tpl[j];
                xx += v * v;
            }
            r = xx > 0.0 ? xy / sqrt(xx * tn) : 0.0;
        }
        if (r >= 0.4)
            r_s[kept++] = r_s[k];
    }
    free(tpl);
    *nb_io = kept;
    return RT_OK;
}

/* Chin-only mode: are the detections heart beats? The detector chose its own
 * times where the chin most resembles a QRS, so a template of pure noise
 * already stands above chance (selection bias: about 10-30 % of the window
 * energy at 30-120 "bpm" on band-limited noise, remtone's own measurement,
 * tests/unit/test_qrs.c). What noise does not give is a heart's rhythm: sinus
 * rhythm changes its R-R interval by a few per cent from beat to beat, noise
 * detections by about 30 % or more. An irregular rhythm (atrial fibrillation)
 * passes only with a template that explains most of the energy. The share is
 * measured on the chin band-passed 10-100 Hz like the scorer's EMG. */
static rt_status chin_evidence(const double *x, size_t n, double rate, rt_qrs_beats *beats,
                               size_t nb, double *y, bool *cardiac, rt_error *err)
{
    *cardiac = false;
    beats->candidates = nb;
    size_t a = (size_t)lround(RT_ECG_PRE_S * rate), b = (size_t)lround(RT_ECG_POST_S * rate);
    double *scratch = malloc(2 * (nb + 1) * sizeof *scratch),
           *tpl = malloc((a + b + 1) * sizeof *tpl);
    if (!scratch || !tpl) {
        free(scratch);
        free(tpl);
        return rt_fail(err, RT_ERR_NOMEM, "QRS detector: out of memory for %zu samples", n);
    }
    rhythm(beats->r_s, nb, scratch, &beats->rate_bpm, &beats->rr_irregularity);
    memcpy(y, x, n * sizeof *y);
    biquad hp = design(1, 10.0, rate), lp = design(0, fmin(100.0, 0.45 * rate), rate);
    for (int k = 0; k < 2; k++) {
        filtfilt(&hp, y, n);
        filtfilt(&lp, y, n);
    }
    size_t used = 0, used_random = 0;
    beats->locked_share = locked_share(y, n, rate, beats->r_s, nb, a, b, tpl, &used);
    pseudo_random_times(scratch, used, RT_ECG_PRE_S, (double)n / rate - RT_ECG_POST_S);
    beats->random_share = locked_share(y, n, rate, scratch, used, a, b, tpl, &used_random);
    double ratio2 = RT_ECG_FOUND_RATIO * RT_ECG_FOUND_RATIO;
    *cardiac = used >= RT_ECG_MIN_BEATS && beats->rate_bpm >= RT_ECG_MIN_BPM &&
               beats->rate_bpm <= RT_ECG_MAX_BPM && beats->locked_share > 0.0 &&
               beats->locked_share >= ratio2 * beats->random_share &&
               (beats->rr_irregularity <= RT_QRS_CHIN_MAX_IRREGULARITY ||
                beats->locked_share >= RT_QRS_CHIN_STRONG_SHARE);
    free(scratch);
    free(tpl);
    return RT_OK;
}

rt_status rt_qrs_detect(const double *x_uv, size_t n, double rate_hz, bool from_chin,
                        rt_qrs_beats *beats, rt_error *err)
{
    return rt_qrs_detect_with(x_uv, n, rate_hz, from_chin, NULL, beats, err);
}

rt_status rt_qrs_detect_with(const double *x_uv, size_t n, double rate_hz, bool from_chin,
                             double *work, rt_qrs_beats *beats, rt_error *err)
{
    memset(beats, 0, sizeof *beats);
    beats->from_chin = from_chin;
    beats->mean_rr_s = beats->rate_bpm = beats->rr_irregularity = NAN;
    beats->locked_share = beats->random_share = NAN;
    if (!x_uv || !(rate_hz >= 100.0) || !isfinite(rate_hz))
        return rt_fail(err, RT_ERR_USAGE, "QRS detector: rate %g Hz is below 100 Hz or invalid", rate_hz);
    size_t refractory = samples(0.200, rate_hz);
    if (n < 2 * refractory)
        return RT_OK;
    for (size_t i = 0; i < n; i++)
        if (!isfinite(x_uv[i]))
            return rt_fail(err, RT_ERR_USAGE, "QRS detector: sample %zu is not finite", i);
    double *own = work ? NULL : malloc(3 * n * sizeof *own);
    double *bp = work ? work : own, *deriv = bp ? bp + n : NULL, *mwi = bp ? bp + 2 * n : NULL;
    size_t cap = n / refractory + 2;
    size_t *peaks = malloc(cap * sizeof *peaks);
    beats->r_s = malloc(cap * sizeof *beats->r_s);
    if (!bp || !peaks || !beats->r_s) {
        free(own);
        free(peaks);
        rt_qrs_beats_free(beats);
        return rt_fail(err, RT_ERR_NOMEM, "QRS detector: out of memory for %zu samples", n);
    }
    /* 1. band-pass 5-15 Hz: fourth-order Butterworth high-pass and low-pass
     * sections (two equal second-order ones each, a slightly steeper skirt
     * than the paper's filters so that muscle activity above 20 Hz stays
     * out), each run both ways */
    memcpy(bp, x_uv, n * sizeof *bp);
    biquad hp = design(1, 5.0, rate_hz), lp = design(0, 15.0, rate_hz);
    for (int k = 0; k < 2; k++) {
        filtfilt(&hp, bp, n);
        filtfilt(&lp, bp, n);
    }
    /* 2. five-point derivative, centred: (2x[i+2] + x[i+1] - x[i-1] - 2x[i-2]) fs / 8 */
    for (size_t i = 0; i < n; i++) {
        if (i < 2 || i + 2 >= n) {
            deriv[i] = 0.0;
            continue;
        }
        deriv[i] = (2.0 * bp[i + 2] + bp[i + 1] - bp[i - 1] - 2.0 * bp[i - 2]) * rate_hz / 8.0;
    }
    /* 3-4. squaring and moving-window integration over 150 ms, centred */
    size_t win = samples(0.150, rate_hz), half = win / 2;
    double acc = 0.0;
    size_t lo = 0, hi = 0; /* window [lo, hi) */
    for (size_t i = 0; i < n; i++) {
        size_t want_lo = i > half ? i - half : 0, want_hi = i + (win - half) < n ? i + (win - half) : n;
        while (hi < want_hi) {
            acc += deriv[hi] * deriv[hi];
            hi++;
        }
        while (lo < want_lo) {
            acc -= deriv[lo] * deriv[lo];
            lo++;
        }
        mwi[i] = fmax(acc, 0.0) / (double)win;
    }
    /* 5. candidate peaks: local maxima, at most one per refractory period
     * (the larger wins) */
    size_t n_peaks = 0;
    for (size_t i = 1; i + 1 < n; i++) {
        if (!(mwi[i] > mwi[i - 1] && mwi[i] >= mwi[i + 1]))
            continue;
        if (n_peaks > 0 && i - peaks[n_peaks - 1] < refractory) {
            if (mwi[i] > mwi[peaks[n_peaks - 1]])
                peaks[n_peaks - 1] = i;
            continue;
        }
        peaks[n_peaks++] = i;
    }
    /* 6. learning phase over the first 2 s: signal level a quarter of the
     * largest peak, noise level half the mean (from memory of the paper's
     * initialisation; any reasonable start converges within a few beats) */
    size_t learn = samples(2.0, rate_hz) < n ? samples(2.0, rate_hz) : n;
    double mx = 0.0, mean = 0.0;
    for (size_t i = 0; i < learn; i++) {
        mx = fmax(mx, mwi[i]);
        mean += mwi[i];
    }
    detector d = {0.25 * mx, 0.5 * mean / (double)learn, 0, 0, 0, -1, {0}, 0};
    update_thresholds(&d);
    size_t qrs_half = samples(0.075, rate_hz);
    size_t t_wave = samples(0.360, rate_hz);
    size_t *qrs = peaks; /* accepted peaks overwrite the candidate list from the front */
    size_t n_qrs = 0;
    long best_noise = -1; /* largest rejected candidate since the last QRS */
    for (size_t c = 0; c < n_peaks; c++) {
        size_t i = peaks[c];
        double p = mwi[i];
        /* search-back: no beat for 166 % of the average R-R interval */
        double rr_avg = rr_average(&d);
        if (d.last_qrs >= 0 && rr_avg > 0.0 && best_noise >= 0 &&
            (double)((long)i - d.last_qrs) > 1.66 * rr_avg && mwi[best_noise] > d.thr2) {
            size_t j = (size_t)best_noise;
            d.spki = 0.25 * mwi[j] + 0.75 * d.spki;
            push_rr(&d, (double)((long)j - d.last_qrs));
            d.last_qrs = (long)j;
            d.last_slope = slope_at(deriv, n, j, qrs_half);
            qrs[n_qrs++] = j;
            best_noise = -1;
            update_thresholds(&d);
        }
        bool is_qrs = p > d.thr1;
        if (is_qrs && d.last_qrs >= 0 && (long)i - d.last_qrs < (long)t_wave) {
            /* within 360 ms of the last beat: a T wave when its slope is
             * less than half that beat's */
            if (slope_at(deriv, n, i, qrs_half) < 0.5 * d.last_slope)
                is_qrs = false;
        }
        if (is_qrs) {
            d.spki = 0.125 * p + 0.875 * d.spki;
            if (d.last_qrs >= 0)
                push_rr(&d, (double)((long)i - d.last_qrs));
            d.last_qrs = (long)i;
            d.last_slope = slope_at(deriv, n, i, qrs_half);
            qrs[n_qrs++] = i;
            best_noise = -1;
        } else {
            d.npki = 0.125 * p + 0.875 * d.npki;
            if (d.last_qrs < 0 || (long)i - d.last_qrs >= (long)refractory)
                if (best_noise < 0 || p > mwi[best_noise])
                    best_noise = (long)i;
        }
        update_thresholds(&d);
    }
    for (size_t k = 0; k < n_qrs; k++)
        beats->r_s[k] = locate_r(bp, n, qrs[k], qrs_half, rate_hz);
    rt_status shaped = from_chin ? keep_shaped_beats(x_uv, n, rate_hz, beats->r_s, &n_qrs, err)
                                 : RT_OK;
    /* parabolic refinement may reorder beats closer than a sample: keep order */
    size_t m = 0;
    for (size_t k = 0; k < n_qrs; k++)
        if (m == 0 || beats->r_s[k] > beats->r_s[m - 1])
            beats->r_s[m++] = beats->r_s[k];
    free(peaks);
    if (shaped != RT_OK) {
        rt_qrs_beats_free(beats);
        return shaped;
    }
    beats->candidates = m;
    bool cardiac = true;
    rt_status st = RT_OK;
    /* the detector's arrays are free again: the first holds the filtered chin */
    if (from_chin && m > 0)
        st = chin_evidence(x_uv, n, rate_hz, beats, m, bp, &cardiac, err);
    free(own);
    if (st != RT_OK) {
        rt_qrs_beats_free(beats);
        return st;
    }
    if (!cardiac)
        m = 0; /* no evidence of a heart: nothing to remove, nothing to veto */
    beats->n = m;
    if (m >= 2)
        beats->mean_rr_s = (beats->r_s[m - 1] - beats->r_s[0]) / (double)(m - 1);
    return RT_OK;
}

void rt_qrs_beats_free(rt_qrs_beats *beats)
{
    if (!beats)
        return;
    free(beats->r_s);
    memset(beats, 0, sizeof *beats);
    beats->mean_rr_s = beats->rate_bpm = beats->rr_irregularity = NAN;
    beats->locked_share = beats->random_share = NAN;
}

rt_status rt_ecg_subtract(double *emg_uv, size_t n, double rate_hz, const double *r_s,
                          size_t n_beats, double pre_s, double post_s, rt_ecg_removal *report,
                          rt_error *err)
{
    rt_ecg_removal rep;
    memset(&rep, 0, sizeof rep);
    rep.locked_db = -99.0;
    if (report)
        *report = rep;
    if (!emg_uv || !(rate_hz > 0.0) || !isfinite(rate_hz) || !(pre_s >= 0.0) || !(post_s >= 0.0) ||
        !isfinite(pre_s + post_s) || (n_beats > 0 && !r_s))
        return rt_fail(err, RT_ERR_USAGE, "ECG removal: bad rate %g Hz or window -%g..+%g s", rate_hz,
                       pre_s, post_s);
    size_t a = (size_t)lround(pre_s * rate_hz), b = (size_t)lround(post_s * rate_hz), len = a + b + 1;
    double *tpl = rt_calloc(len, sizeof *tpl), *var = rt_calloc(len, sizeof *var);
    if (!tpl || !var) {
        free(tpl);
        free(var);
        return rt_fail(err, RT_ERR_NOMEM, "ECG removal: out of memory");
    }
    /* mean and per-sample variance over beats whose window fits (Welford) */
    size_t used = 0;
    for (size_t k = 0; k < n_beats; k++) {
        size_t s0;
        if (!window_start(r_s[k], rate_hz, a, b, n, &s0))
            continue;
        used++;
        for (size_t j = 0; j < len; j++) {
            double v = emg_uv[s0 + j], delta = v - tpl[j];
            tpl[j] += delta / (double)used;
            var[j] += delta * (v - tpl[j]);
        }
    }
    rep.beats_used = used;
    rep.rate_bpm = rep.locked_share = rep.random_share = NAN;
    double *scratch = rt_calloc(2 * (n_beats + 1), sizeof *scratch);
    if (!scratch) {
        free(tpl);
        free(var);
        return rt_fail(err, RT_ERR_NOMEM, "ECG removal: out of memory");
    }
    double irregularity;
    rhythm(r_s, n_beats, scratch, &rep.rate_bpm, &irregularity);
    if (used >= 2) {
        double e_tpl = 0.0, e_noise = 0.0, e_windows = 0.0, mn = tpl[0], mxv = tpl[0];
        for (size_t j = 0; j < len; j++) {
            e_tpl += tpl[j] * tpl[j];
            e_noise += var[j] / (double)(used - 1);
            e_windows += tpl[j] * tpl[j] + var[j] / (double)used; /* mean of x^2 */
            mn = fmin(mn, tpl[j]);
            mxv = fmax(mxv, tpl[j]);
        }
        rep.template_rms_uv = sqrt(e_tpl / (double)len);
        rep.template_p2p_uv = mxv - mn;
        rep.noise_rms_uv = sqrt(e_noise / (double)len);
        if (e_tpl > 0.0 && e_noise > 0.0)
            rep.locked_db = fmax(-99.0, 10.0 * log10(e_tpl / e_noise));
        rep.locked_share = e_windows > 0.0 ? e_tpl / e_windows : 0.0;
        /* chance: the same number of windows at pseudo-random times; var holds
         * that template now (the beat template stays in tpl) */
        size_t used_random = 0;
        pseudo_random_times(scratch, used, pre_s, (double)n / rate_hz - post_s);
        rep.random_share = locked_share(emg_uv, n, rate_hz, scratch, used, a, b, var, &used_random);
        double ratio2 = RT_ECG_FOUND_RATIO * RT_ECG_FOUND_RATIO;
        rep.found = used >= RT_ECG_MIN_BEATS && rep.rate_bpm >= RT_ECG_MIN_BPM &&
                    rep.rate_bpm <= RT_ECG_MAX_BPM && rep.locked_share > 0.0 &&
                    rep.locked_share >= ratio2 * rep.random_share;
    }
    free(scratch);
    if (rep.found) {
        for (size_t k = 0; k < n_beats; k++) {
            double c = r_s[k] * rate_hz;
            if (!isfinite(c))
                continue;
            long s0 = lround(c) - (long)a;
            for (size_t j = 0; j < len; j++) {
                long i = s0 + (long)j;
                if (i >= 0 && (size_t)i < n)
                    emg_uv[i] -= tpl[j];
            }
        }
        rep.removed = true;
    }
    free(tpl);
    free(var);
    if (report)
        *report = rep;
    return RT_OK;
}

size_t rt_qrs_windows(const double *r_s, size_t n_beats, double pre_s, double post_s,
                      rt_time_span *out, size_t cap)
{
    size_t count = 0;
    double last_end = -INFINITY;
    for (size_t k = 0; k < n_beats; k++) {
        double s = r_s[k] - pre_s, e = r_s[k] + post_s;
        if (!isfinite(s) || !isfinite(e) || e <= s)
            continue;
        if (count > 0 && s <= last_end) {
            if (e > last_end) {
                last_end = e;
                if (count <= cap && out)
                    out[count - 1].end_s = e;
            }
            continue;
        }
        if (count < cap && out)
            out[count] = (rt_time_span){s, e};
        count++;
        last_end = e;
    }
    return count;
}

double rt_qrs_overlap(const rt_time_span *windows, size_t n_windows, double start_s, double end_s)
{
    if (!(end_s > start_s) || !windows)
        return 0.0;
    /* binary search for the first window ending after start_s */
    size_t lo = 0, hi = n_windows;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (windows[mid].end_s <= start_s)
            lo = mid + 1;
        else
            hi = mid;
    }
    double covered = 0.0;
    for (size_t k = lo; k < n_windows && windows[k].start_s < end_s; k++)
        covered += fmin(end_s, windows[k].end_s) - fmax(start_s, windows[k].start_s);
    return fmin(1.0, covered / (end_s - start_s));
}
