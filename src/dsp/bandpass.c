/* The conditioning band-pass: validates a spec, derives the impulse-response
 * margin and the block size from the response itself, and filters signals by
 * overlap-save with a real, non-negative spectrum (zero phase) and mirror
 * reflection at both ends. Plans come from fft_plans.c; each filter owns its
 * buffers and its response sampled at the block's bins. */
#include "bandpass.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "fft_plans.h"
#include "internal.h"


/* The margin keeps the impulse response's discarded tails (both sides) below
 * this fraction of its peak, which bounds the error of any output sample by
 * TAIL_FRACTION * peak * max|x| -- far below EMG quantisation (EDF steps are
 * ~1e-4 of full scale) and small enough that block placement is invisible. */
static const double TAIL_FRACTION = 1e-9;

/* Block sizes: the smallest power of two at least 8 margins long (so at least
 * 3/4 of each block is output) and at least MIN_BLOCK. Larger blocks waste
 * less on margins but leave the CPU caches: for the default response at
 * 512 Hz (margin 459) 4096-sample blocks were fastest, 65536 took twice as
 * long (docs/conditioning.md). */
enum { MIN_BLOCK = 4096, PROBE_FIRST = 4096, MARGIN_SHARE = 8 };

struct rt_bandpass {
    rt_bandpass_spec spec;   /* high_hz after clipping */
    double tan_low, tan_high; /* pre-warped corners tan(pi f / fs) */
    size_t block;            /* N */
    size_t margin;           /* M */
    const rt_fft_plan *plan;
    double *gain;            /* N/2+1 bins of G, scaled by 1/N for the inverse transform */
    double *in, *out;        /* N samples each, fftw_alloc_real */
    fftw_complex *spectrum;  /* N/2+1 bins, fftw_alloc_complex */
    double *saved;           /* M input samples the next block needs, overwritten by output */
    double *tail;            /* the last min(n, M+1) input samples, for the right reflection */
};

rt_bandpass_spec rt_bandpass_spec_defaults(double rate_hz)
{
    rt_bandpass_spec s;
    memset(&s, 0, sizeof s);
    s.rate_hz = rate_hz;
    s.low_hz = 10.0;
    s.high_hz = 100.0;
    s.order = 4;
    s.n_notches = 0;
    s.notch_width_hz = 2.0;
    return s;
}

static rt_status check_spec(const rt_bandpass_spec *in, rt_bandpass_spec *out, rt_error *err)
{
    if (!in)
        return rt_fail(err, RT_ERR_USAGE, "bandpass: no filter spec given");
    *out = *in;
    if (!isfinite(in->rate_hz) || in->rate_hz <= 0)
        return rt_fail(err, RT_ERR_USAGE, "bandpass: sampling rate %g Hz must be > 0", in->rate_hz);
    if (in->order < 1 || in->order > RT_BANDPASS_MAX_ORDER)
        return rt_fail(err, RT_ERR_USAGE, "bandpass: order %d must be in 1..%d", in->order,
                       RT_BANDPASS_MAX_ORDER);
    if (!isfinite(in->low_hz) || in->low_hz <= 0)
        return rt_fail(err, RT_ERR_USAGE, "bandpass: high-pass corner %g Hz must be > 0", in->low_hz);
    if (!isfinite(in->high_hz) || in->high_hz <= 0)
        return rt_fail(err, RT_ERR_USAGE, "bandpass: low-pass corner %g Hz must be > 0", in->high_hz);
    double limit = 0.45 * in->rate_hz;
    if (out->high_hz > limit)
        out->high_hz = limit;
    if (in->low_hz >= out->high_hz)
        return rt_fail(err, RT_ERR_USAGE,
                       "bandpass: high-pass corner %g Hz must be below the low-pass corner %g Hz%s",
                       in->low_hz, out->high_hz,
                       out->high_hz < in->high_hz ? " (clipped to 0.45 x sampling rate)" : "");
    if (in->n_notches < 0 || in->n_notches > RT_BANDPASS_MAX_NOTCHES)
        return rt_fail(err, RT_ERR_USAGE, "bandpass: %d notches, must be 0..%d", in->n_notches,
                       RT_BANDPASS_MAX_NOTCHES);
    if (in->n_notches > 0 && (!isfinite(in->notch_width_hz) || in->notch_width_hz <= 0))
        return rt_fail(err, RT_ERR_USAGE, "bandpass: notch width %g Hz must be > 0",
                       in->notch_width_hz);
    for (int i = 0; i < in->n_notches; i++) {
        double fc = in->notch_hz[i];
        if (!isfinite(fc) || fc <= 0 || fc >= in->rate_hz / 2)
            return rt_fail(err, RT_ERR_USAGE,
                           "bandpass: notch %d at %g Hz must lie between 0 and %g Hz (half the rate)",
                           i + 1, fc, in->rate_hz / 2);
    }
    return RT_OK;
}

/* One notch and its images at -fc and fs - fc, so that G stays smooth where
 * the periodic spectrum wraps at 0 and fs/2 (a kink there would make the
 * impulse response decay slowly). 1 - 2^(-d^2) is 0.5 at d = 1 (half width). */
static double notch_factor(double f, double fc, double fs, double half_width)
{
    const double images[3] = { fc, -fc, fs - fc };
    double g = 1.0;
    for (int i = 0; i < 3; i++) {
        double d = (f - images[i]) / half_width;
        g *= 1.0 - exp2(-d * d);
    }
    return g;
}

double rt_bandpass_gain(const rt_bandpass *bp, double f_hz)
{
    if (!bp || !isfinite(f_hz))
        return 0.0;
    double fs = bp->spec.rate_hz;
    double f = fmod(fabs(f_hz), fs);
    if (f > fs / 2)
        f = fs - f;
    if (f == 0.0)
        return 0.0;
    double w = tan(RT_PI * f / fs);
    double two_n = 2.0 * bp->spec.order;
    double g = 1.0 / (1.0 + pow(bp->tan_low / w, two_n));
    g *= 1.0 / (1.0 + pow(w / bp->tan_high, two_n));
    for (int i = 0; i < bp->spec.n_notches; i++)
        g *= notch_factor(f, bp->spec.notch_hz[i], fs, bp->spec.notch_width_hz / 2);
    return g;
}

double rt_bandpass_low_hz(const rt_bandpass *bp) { return bp ? bp->spec.low_hz : 0.0; }
double rt_bandpass_high_hz(const rt_bandpass *bp) { return bp ? bp->spec.high_hz : 0.0; }
size_t rt_bandpass_block_samples(const rt_bandpass *bp) { return bp ? bp->block : 0; }
size_t rt_bandpass_margin_samples(const rt_bandpass *bp) { return bp ? bp->margin : 0; }

/* G at the n/2+1 bins of an n-point transform, scaled by 1/n so that the
 * unnormalised inverse transform returns the filtered signal. */
static void sample_gain(const rt_bandpass *bp, size_t n, double *gain)
{
    for (size_t k = 0; k <= n / 2; k++)
        gain[k] = rt_bandpass_gain(bp, (double)k * bp->spec.rate_hz / (double)n) / (double)n;
}

/* Impulse response of G at n points (circular, centred on index 0), and the
 * smallest margin m whose two discarded tails sum to <= TAIL_FRACTION * peak.
 * Returns 0 when even m = n/2 is not enough. */
static size_t margin_at(const rt_bandpass *bp, size_t n, double *gain, double *h,
                        fftw_complex *spec)
{
    sample_gain(bp, n, gain);
    for (size_t k = 0; k <= n / 2; k++) {
        spec[k][0] = gain[k];
        spec[k][1] = 0.0;
    }
    fftw_execute_dft_c2r(bp->plan->inverse, spec, h);
    double peak = 0.0;
    for (size_t k = 0; k < n; k++)
        if (fabs(h[k]) > peak)
            peak = fabs(h[k]);
    /* h is even: h[k] = h[n-k]; accumulate both tails from the middle in. */
    double tail = fabs(h[n / 2]);
    if (tail > TAIL_FRACTION * peak)
        return 0;
    size_t m = n / 2;
    while (m > 1) {
        double next = tail + fabs(h[m - 1]) + fabs(h[n - (m - 1)]);
        if (next > TAIL_FRACTION * peak)
            break;
        tail = next;
        m--;
    }
    return m;
}

static rt_status alloc_buffers(rt_bandpass *bp, size_t n)
{
    fftw_free(bp->gain);
    fftw_free(bp->in);
    fftw_free(bp->out);
    fftw_free(bp->spectrum);
    bp->gain = fftw_alloc_real(n / 2 + 1);
    bp->in = fftw_alloc_real(n);
    bp->out = fftw_alloc_real(n);
    bp->spectrum = fftw_alloc_complex(n / 2 + 1);
    if (!bp->gain || !bp->in || !bp->out || !bp->spectrum)
        return RT_ERR_NOMEM;
    return RT_OK;
}

static rt_status use_block(rt_bandpass *bp, size_t n, rt_error *err)
{
    if (bp->plan && bp->plan->n == n)
        return RT_OK;
    rt_fft_plan_release(bp->plan);
    bp->plan = NULL;
    rt_status st = rt_fft_plan_acquire(n, &bp->plan, err);
    if (st != RT_OK)
        return st;
    if (alloc_buffers(bp, n) != RT_OK)
        return rt_fail(err, RT_ERR_NOMEM, "bandpass: out of memory for a %zu-sample block", n);
    bp->block = n;
    return RT_OK;
}

/* Probes growing transform sizes until the impulse response has decayed
 * within 1/MARGIN_SHARE of the size; a smaller probe would alias the tail. */
static rt_status find_margin(rt_bandpass *bp, rt_error *err)
{
    for (size_t n = PROBE_FIRST; n <= (size_t)RT_FFT_MAX_SAMPLES; n *= 2) {
        rt_status st = use_block(bp, n, err);
        if (st != RT_OK)
            return st;
        size_t m = margin_at(bp, n, bp->gain, bp->out, bp->spectrum);
        if (m > 0 && m <= n / MARGIN_SHARE) {
            bp->margin = m;
            return RT_OK;
        }
    }
    return rt_fail(err, RT_ERR_USAGE,
                   "bandpass: the response (corner %g Hz, order %d, notch width %g Hz at %g Hz "
                   "sampling) rings longer than %d samples; raise the corner or widen the notches",
                   bp->spec.low_hz, bp->spec.order, bp->spec.notch_width_hz, bp->spec.rate_hz,
                   RT_FFT_MAX_SAMPLES / MARGIN_SHARE);
}

static size_t choose_block(size_t margin)
{
    size_t n = MIN_BLOCK;
    while (n < MARGIN_SHARE * margin)
        n *= 2;
    return n;
}

/* The last step of making a filter: its n-sample block, the response at the
 * block's bins (sampled, or copied from a filter of the same block) and the
 * overlap state. The filter in *out, or bp freed and the status returned. */
static rt_status with_block(rt_bandpass *bp, size_t n, const double *gain, rt_bandpass **out,
                            rt_error *err)
{
    rt_status st = use_block(bp, n, err);
    if (st != RT_OK)
        goto fail;
    if (gain)
        memcpy(bp->gain, gain, (n / 2 + 1) * sizeof *bp->gain);
    else
        sample_gain(bp, n, bp->gain);
    bp->saved = rt_calloc(bp->margin, sizeof *bp->saved);
    bp->tail = rt_calloc(bp->margin + 1, sizeof *bp->tail);
    if (!bp->saved || !bp->tail) {
        st = rt_fail(err, RT_ERR_NOMEM, "bandpass: out of memory");
        goto fail;
    }
    *out = bp;
    return RT_OK;
fail:
    rt_bandpass_free(bp);
    return st;
}

rt_status rt_bandpass_new_with_block(const rt_bandpass_spec *spec, size_t block_samples,
                                     rt_bandpass **out, rt_error *err)
{
    if (!out)
        return rt_fail(err, RT_ERR_USAGE, "bandpass: no place for the result");
    *out = NULL;
    rt_bandpass_spec checked;
    rt_status st = check_spec(spec, &checked, err);
    if (st != RT_OK)
        return st;
    rt_bandpass *bp = rt_calloc(1, sizeof *bp);
    if (!bp)
        return rt_fail(err, RT_ERR_NOMEM, "bandpass: out of memory");
    bp->spec = checked;
    bp->tan_low = tan(RT_PI * checked.low_hz / checked.rate_hz);
    bp->tan_high = tan(RT_PI * checked.high_hz / checked.rate_hz);
    if ((st = find_margin(bp, err)) != RT_OK)
        goto fail;
    size_t n = block_samples ? block_samples : choose_block(bp->margin);
    if (block_samples && ((n & (n - 1)) != 0 || n < 4 * bp->margin ||
                          n > (size_t)RT_FFT_MAX_SAMPLES)) {
        st = rt_fail(err, RT_ERR_USAGE,
                     "bandpass: block of %zu samples must be a power of two from %zu to %d",
                     n, 4 * bp->margin, RT_FFT_MAX_SAMPLES);
        goto fail;
    }
    return with_block(bp, n, NULL, out, err);
fail:
    rt_bandpass_free(bp);
    return st;
}

rt_status rt_bandpass_new(const rt_bandpass_spec *spec, rt_bandpass **out, rt_error *err)
{
    return rt_bandpass_new_with_block(spec, 0, out, err);
}

rt_status rt_bandpass_clone(const rt_bandpass *bp, rt_bandpass **out, rt_error *err)
{
    *out = NULL;
    rt_bandpass *c = rt_calloc(1, sizeof *c);
    if (!c)
        return rt_fail(err, RT_ERR_NOMEM, "bandpass: out of memory");
    c->spec = bp->spec;
    c->tan_low = bp->tan_low;
    c->tan_high = bp->tan_high;
    c->margin = bp->margin;
    return with_block(c, bp->block, bp->gain, out, err); /* the same response, bin for bin */
}

void rt_bandpass_free(rt_bandpass *bp)
{
    if (!bp)
        return;
    rt_fft_plan_release(bp->plan);
    fftw_free(bp->gain);
    fftw_free(bp->in);
    fftw_free(bp->out);
    fftw_free(bp->spectrum);
    free(bp->saved);
    free(bp->tail);
    free(bp);
}

/* numpy 'reflect': x[-k] = x[k], x[n-1+k] = x[n-1-k], bouncing between the
 * ends (period 2(n-1)) when the extension is longer than the signal. */
static size_t reflect_index(ptrdiff_t i, size_t n)
{
    if (n == 1)
        return 0;
    ptrdiff_t period = 2 * (ptrdiff_t)(n - 1);
    ptrdiff_t k = i % period;
    if (k < 0)
        k += period;
    if (k >= (ptrdiff_t)n)
        k = period - k;
    return (size_t)k;
}

/* The state of one pass over a signal: which part of x already holds output. */
typedef struct pass {
    const double *x;    /* the signal; x[0..written) already overwritten */
    size_t n;
    size_t written;
    size_t tail_start;  /* bp->tail holds the input x[tail_start..n) */
} pass;

static double reflected(const rt_bandpass *bp, const pass *p, ptrdiff_t i)
{
    size_t j = reflect_index(i, p->n);
    /* Reflections reach below tail_start only in the first block, before any
     * output has been written, so x[j] is still the input there. */
    return j >= p->tail_start ? bp->tail[j - p->tail_start] : p->x[j];
}

/* Fills bp->in with the extended signal from index start (may be negative). */
static void fill_block(rt_bandpass *bp, const pass *p, ptrdiff_t start)
{
    size_t nb = bp->block, m = bp->margin;
    ptrdiff_t n = (ptrdiff_t)p->n, written = (ptrdiff_t)p->written;
    size_t j = 0;
    for (; j < nb && start + (ptrdiff_t)j < 0; j++)
        bp->in[j] = reflected(bp, p, start + (ptrdiff_t)j);
    if (written > 0 && j == 0) {
        /* Input under the left margin was overwritten by the previous block's
         * output; start == written - m here. */
        memcpy(bp->in, bp->saved, m * sizeof *bp->in);
        j = m;
    }
    ptrdiff_t i = start + (ptrdiff_t)j;
    if (i < n) {
        size_t count = (size_t)(n - i) < nb - j ? (size_t)(n - i) : nb - j;
        memcpy(bp->in + j, p->x + i, count * sizeof *bp->in);
        j += count;
    }
    for (; j < nb && start + (ptrdiff_t)j < n + (ptrdiff_t)m; j++)
        bp->in[j] = reflected(bp, p, start + (ptrdiff_t)j);
    /* Beyond the reflected margin only discarded outputs are affected. */
    if (j < nb)
        memset(bp->in + j, 0, (nb - j) * sizeof *bp->in);
}

static void multiply_gain(rt_bandpass *bp)
{
    size_t bins = bp->block / 2 + 1;
    for (size_t k = 0; k < bins; k++) {
        bp->spectrum[k][0] *= bp->gain[k];
        bp->spectrum[k][1] *= bp->gain[k];
    }
}

rt_status rt_bandpass_apply(rt_bandpass *bp, double *x, size_t n, rt_error *err)
{
    if (!bp || (!x && n > 0))
        return rt_fail(err, RT_ERR_USAGE, "bandpass: no filter or no samples given");
    if (n == 0)
        return RT_OK;
    size_t nb = bp->block, m = bp->margin, step = nb - 2 * m;
    pass p = { x, n, 0, n > m + 1 ? n - (m + 1) : 0 };
    memcpy(bp->tail, x + p.tail_start, (n - p.tail_start) * sizeof *x);
    for (size_t first = 0; first < n; first += step) {
        fill_block(bp, &p, (ptrdiff_t)first - (ptrdiff_t)m);
        if (first + step < n)
            memcpy(bp->saved, bp->in + step, m * sizeof *bp->saved);
        fftw_execute_dft_r2c(bp->plan->forward, bp->in, bp->spectrum);
        /* Bin 0 is the block's sum: any NaN or infinity in the block shows here. */
        if (!isfinite(bp->spectrum[0][0]))
            return rt_fail(err, RT_ERR_USAGE,
                           "bandpass: a sample near samples %zu..%zu is not finite",
                           first, first + step < n ? first + step : n);
        multiply_gain(bp);
        fftw_execute_dft_c2r(bp->plan->inverse, bp->spectrum, bp->out);
        size_t count = n - first < step ? n - first : step;
        memcpy(x + first, bp->out + m, count * sizeof *x);
        p.written = first + count;
    }
    return RT_OK;
}
