/* Mains interference: which line frequency (50 or 60 Hz, or none) a raw EMG
 * stretch carries, how strong it is against the EMG band, and which notches
 * the band-pass should get. The spectrum is a Welch estimate (Hann window,
 * 50 % overlap) computed with FFTW plans from the shared cache, so planning
 * never races with the band-pass filters of other threads. */
#include <math.h>
#include <stdbool.h>
#include <stdlib.h>
#include <string.h>

#include "quality.h"

#include "dsp/fft_plans.h"
#include "internal.h"


enum { MIN_SEGMENTS = 4, LINE_HALF_BINS = 2, MAX_HARMONICS = 16 };

static const double line_freqs[2] = {50.0, 60.0};

/* One-sided power spectral density (uV^2/Hz) of x by Welch's method. */
static rt_status welch_psd(const double *x, size_t n, size_t nfft, double rate, double *psd,
                           rt_error *err)
{
    const rt_fft_plan *plan = NULL;
    rt_status st = rt_fft_plan_acquire(nfft, &plan, err);
    if (st != RT_OK)
        return st;
    double *seg = fftw_alloc_real(nfft), *win = malloc(nfft * sizeof *win);
    fftw_complex *spec = fftw_alloc_complex(nfft / 2 + 1);
    if (!seg || !win || !spec) {
        fftw_free(seg);
        fftw_free(spec);
        free(win);
        rt_fft_plan_release(plan);
        return rt_fail(err, RT_ERR_NOMEM, "mains estimate: out of memory for %zu-point spectra", nfft);
    }
    double wsum2 = 0.0;
    for (size_t i = 0; i < nfft; i++) {
        win[i] = 0.5 - 0.5 * cos(2.0 * RT_PI * (double)i / (double)nfft); /* periodic Hann */
        wsum2 += win[i] * win[i];
    }
    size_t bins = nfft / 2 + 1, hop = nfft / 2, segments = 0;
    memset(psd, 0, bins * sizeof *psd);
    for (size_t s0 = 0; s0 + nfft <= n; s0 += hop) {
        double mean = 0.0;
        for (size_t i = 0; i < nfft; i++)
            mean += x[s0 + i];
        mean /= (double)nfft;
        for (size_t i = 0; i < nfft; i++)
            seg[i] = (x[s0 + i] - mean) * win[i];
        fftw_execute_dft_r2c(plan->forward, seg, spec);
        for (size_t k = 0; k < bins; k++)
            psd[k] += spec[k][0] * spec[k][0] + spec[k][1] * spec[k][1];
        segments++;
    }
    /* density scaling: |X|^2 / (fs * sum w^2), doubled except at DC and Nyquist */
    for (size_t k = 0; k < bins; k++) {
        double f = (k == 0 || k == bins - 1) ? 1.0 : 2.0;
        psd[k] *= f / (rate * wsum2 * (double)segments);
    }
    fftw_free(seg);
    fftw_free(spec);
    free(win);
    rt_fft_plan_release(plan);
    return RT_OK;
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Median PSD 3-8 Hz away on both sides of f: the floor the line stands on. */
static double local_floor(const double *psd, size_t bins, double df, double f)
{
    double v[64];
    size_t m = 0;
    for (int side = -1; side <= 1; side += 2)
        for (double d = 3.0; d <= 8.0 + 1e-9 && m < 64; d += df) {
            long k = lround((f + side * d) / df);
            if (k > 0 && (size_t)k < bins - 1)
                v[m++] = psd[k];
        }
    if (m == 0)
        return 0.0;
    qsort(v, m, sizeof *v, cmp_double);
    return m % 2 ? v[m / 2] : 0.5 * (v[m / 2 - 1] + v[m / 2]);
}

typedef struct line_score {
    double excess_uv2;    /* line power above the floor, all harmonics below 0.45 rate */
    double in_band_uv2;   /* the same, harmonics inside the band only */
    double prominence_db; /* best harmonic */
} line_score;

static line_score score_line(const double *psd, size_t bins, double df, double line, double rate,
                             double band_lo, double band_hi)
{
    line_score s = {0.0, 0.0, -99.0};
    for (int h = 1; h <= MAX_HARMONICS && h * line < 0.45 * rate; h++) {
        double f = h * line;
        long c = lround(f / df);
        double floor = local_floor(psd, bins, df, f);
        double peak = 0.0, sum = 0.0;
        for (long k = c - LINE_HALF_BINS; k <= c + LINE_HALF_BINS; k++) {
            if (k <= 0 || (size_t)k >= bins - 1)
                continue;
            peak = fmax(peak, psd[k]);
            sum += psd[k] - floor;
        }
        double excess = fmax(sum, 0.0) * df;
        s.excess_uv2 += excess;
        if (f >= band_lo && f <= band_hi)
            s.in_band_uv2 += excess;
        double prom = floor > 0.0 ? 10.0 * log10(peak / floor) : (peak > 0.0 ? 99.0 : -99.0);
        if (prom > s.prominence_db)
            s.prominence_db = prom;
    }
    return s;
}

/* Mean PSD over [f0, f1], leaving out 2 Hz around mains lines and harmonics. */
static double band_mean(const double *psd, size_t bins, double df, double f0, double f1)
{
    double sum = 0.0;
    size_t count = 0;
    for (size_t k = 1; k + 1 < bins; k++) {
        double f = (double)k * df;
        if (f < f0 || f > f1)
            continue;
        bool line = false;
        for (int c = 0; c < 2 && !line; c++)
            line = fabs(f - line_freqs[c] * round(f / line_freqs[c])) < 2.0 && f > 40.0;
        if (line)
            continue;
        sum += psd[k];
        count++;
    }
    return count ? sum / (double)count : NAN;
}

static void band_edges(const double *psd, size_t bins, double df, double rate, rt_mains *out)
{
    double mid = band_mean(psd, bins, df, 25.0, 45.0);
    out->low_edge_db = out->high_edge_db = NAN;
    if (!(mid > 0.0))
        return;
    double lo = band_mean(psd, bins, df, 10.0, 15.0);
    if (lo >= 0.0)
        out->low_edge_db = 10.0 * log10(fmax(lo, 1e-30) / mid);
    if (95.0 < 0.45 * rate) {
        double hi = band_mean(psd, bins, df, 75.0, 95.0);
        if (hi >= 0.0)
            out->high_edge_db = 10.0 * log10(fmax(hi, 1e-30) / mid);
    }
}

rt_status rt_mains_estimate(const double *raw_uv, size_t n, double rate_hz, double band_low_hz,
                            double band_high_hz, rt_mains *out, rt_error *err)
{
    memset(out, 0, sizeof *out);
    out->low_edge_db = out->high_edge_db = NAN;
    out->line_db = -99.0;
    out->prominence_db = -99.0;
    if (!raw_uv || !(rate_hz > 0.0) || !isfinite(rate_hz) || !(band_low_hz >= 0.0) ||
        !(band_high_hz > band_low_hz))
        return rt_fail(err, RT_ERR_USAGE, "mains estimate: bad rate %g Hz or band %g-%g Hz", rate_hz,
                       band_low_hz, band_high_hz);
    size_t nfft = 2;
    while ((double)nfft < rate_hz && nfft < RT_FFT_MAX_SAMPLES)
        nfft *= 2;
    if (0.45 * rate_hz <= line_freqs[0] || n < nfft / 2 * (MIN_SEGMENTS + 1))
        return RT_OK;
    for (size_t i = 0; i < n; i++)
        if (!isfinite(raw_uv[i]))
            return rt_fail(err, RT_ERR_USAGE, "mains estimate: sample %zu is not finite", i);
    size_t bins = nfft / 2 + 1;
    double *psd = malloc(bins * sizeof *psd);
    if (!psd)
        return rt_fail(err, RT_ERR_NOMEM, "mains estimate: out of memory");
    rt_status st = welch_psd(raw_uv, n, nfft, rate_hz, psd, err);
    if (st != RT_OK) {
        free(psd);
        return st;
    }
    double df = rate_hz / (double)nfft;
    band_edges(psd, bins, df, rate_hz, out);
    line_score sc[2];
    for (int c = 0; c < 2; c++) {
        sc[c] = score_line(psd, bins, df, line_freqs[c], rate_hz, band_low_hz, band_high_hz);
        out->power_uv2[c] = sc[c].excess_uv2;
    }
    /* the family with more excess power wins; prominence decides "present" */
    int w = sc[1].excess_uv2 > sc[0].excess_uv2 ? 1 : 0;
    double band_power = 0.0;
    for (size_t k = 1; k + 1 < bins; k++) {
        double f = (double)k * df;
        if (f >= band_low_hz && f <= band_high_hz)
            band_power += psd[k] * df;
    }
    free(psd);
    double rest = band_power - sc[w].in_band_uv2;
    out->prominence_db = sc[w].prominence_db;
    out->line_uv_rms = sqrt(sc[w].excess_uv2);
    if (sc[w].in_band_uv2 > 0.0 && rest > 0.0)
        out->line_db = fmax(-99.0, 10.0 * log10(sc[w].in_band_uv2 / rest));
    out->present = sc[w].prominence_db >= RT_MAINS_PROMINENCE_DB && sc[w].excess_uv2 > 0.0;
    if (!out->present)
        return RT_OK;
    out->line_hz = line_freqs[w];
    for (int h = 1; out->n_notches < RT_BANDPASS_MAX_NOTCHES; h++) {
        double f = h * out->line_hz;
        if (f >= 0.45 * rate_hz || f >= 2.0 * band_high_hz)
            break;
        out->notch_hz[out->n_notches++] = f;
    }
    return RT_OK;
}

void rt_mains_apply(const rt_mains *mains, rt_bandpass_spec *spec)
{
    if (!mains || !spec || !mains->present || mains->n_notches == 0)
        return;
    spec->n_notches = mains->n_notches;
    for (int i = 0; i < mains->n_notches; i++)
        spec->notch_hz[i] = mains->notch_hz[i];
    if (!(spec->notch_width_hz > 0.0))
        spec->notch_width_hz = RT_MAINS_NOTCH_WIDTH_HZ;
}

void rt_quality_band_edges(const rt_mains *mains, rt_channel_quality *q)
{
    q->low_edge_db = mains->low_edge_db;
    q->high_edge_db = mains->high_edge_db;
    q->spectrum_narrow = (isfinite(q->low_edge_db) && q->low_edge_db < RT_BAND_EDGE_DB) ||
                         (isfinite(q->high_edge_db) && q->high_edge_db < RT_BAND_EDGE_DB);
}
