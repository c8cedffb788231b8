/* Marks of EMG stretches that cannot be scored (clipping, flat line or
 * detached lead, electrode pops) and the channel-level header checks
 * (sampling rate, prefilter text). Every detector works on the raw samples
 * in one or two passes with running sums, so it allocates nothing and costs
 * a few operations per sample. Thresholds and their reasons: docs/quality.md. */
#include <ctype.h>
#include <float.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "quality.h"

const char *rt_quality_reason_name(rt_quality_reason reason)
{
    static const char *const names[RT_QUALITY_REASON_COUNT] = {"clipping", "flat", "pop"};
    return (int)reason >= 0 && reason < RT_QUALITY_REASON_COUNT ? names[reason] : "unknown";
}

/* Collects marks of one reason, joining a new span with the previous one
 * when they lie closer than RT_QUALITY_MERGE_S. */
typedef struct mark_sink {
    rt_quality_mark *marks;
    size_t cap, count;
    double duration_s;
    rt_quality_reason reason;
    bool open;       /* a mark of this reason was added and may still grow */
    double last_end; /* its end */
} mark_sink;

static void sink_add(mark_sink *k, double a, double b)
{
    if (a < 0.0)
        a = 0.0;
    if (b > k->duration_s)
        b = k->duration_s;
    if (b <= a)
        return;
    if (k->open && a - k->last_end < RT_QUALITY_MERGE_S) {
        if (b > k->last_end) {
            k->last_end = b;
            if (k->count <= k->cap && k->count > 0)
                k->marks[k->count - 1].end_s = b;
        }
        return;
    }
    if (k->count < k->cap)
        k->marks[k->count] = (rt_quality_mark){a, b, k->reason};
    k->count++;
    k->open = true;
    k->last_end = b;
}

static void sink_begin(mark_sink *k, rt_quality_reason reason)
{
    k->reason = reason;
    k->open = false;
}

/* Two doubles compared at once (GCC's and Clang's vector extension, SSE2 on
 * x86-64): a comparison gives -1 (true) or 0 in each lane, 0 for a NaN. The
 * compilers leave a plain loop of floating-point comparisons scalar. */
typedef double double_pair __attribute__((vector_size(16)));
typedef int64_t mask_pair __attribute__((vector_size(16))); /* what a comparison gives */

/* Whether every one of x[0..len) (len even) lies strictly between lo and hi;
 * a NaN fails the test. */
static bool clear_run(const double *x, size_t len, double lo, double hi)
{
    const double_pair low = {lo, lo}, high = {hi, hi};
    mask_pair inside = {0, 0}; /* minus the count of samples inside, per lane */
    for (size_t q = 0; q < len; q += 2) {
        double_pair v;
        memcpy(&v, x + q, sizeof v);
        inside += (v < high) & (v > low);
    }
    return inside[0] + inside[1] == -(int64_t)len;
}

static void find_clipping(const double *x, size_t n, double rate, const rt_channel_info *ch,
                          mark_sink *k)
{
    double scale = ch->uv_per_unit > 0.0 ? ch->uv_per_unit : 1.0;
    double lo = ch->phys_min * scale, hi = ch->phys_max * scale;
    if (lo > hi) {
        double t = lo;
        lo = hi;
        hi = t;
    }
    double tol = RT_QUALITY_CLIP_FRACTION * (hi - lo);
    double inside_hi = hi - tol, inside_lo = lo + tol;
    /* With ordered limits a sample is clear exactly when it lies strictly
     * between them (a comparison with NaN or an infinity fails); runs of
     * clear samples are passed over 64, then 8, at a time. */
    bool skip = inside_lo <= inside_hi;
    size_t i = 0;
    while (i < n) {
        while (skip && i + 64 <= n && clear_run(x + i, 64, inside_lo, inside_hi))
            i += 64;
        while (skip && i + 8 <= n && clear_run(x + i, 8, inside_lo, inside_hi))
            i += 8;
        if (i >= n)
            break;
        bool clip = !isfinite(x[i]) || x[i] >= hi - tol || x[i] <= lo + tol;
        if (!clip) {
            i++;
            continue;
        }
        size_t j = i;
        while (j < n && (!isfinite(x[j]) || x[j] >= hi - tol || x[j] <= lo + tol))
            j++;
        sink_add(k, (double)i / rate - RT_QUALITY_CLIP_PAD_S, (double)j / rate + RT_QUALITY_CLIP_PAD_S);
        i = j;
    }
}

/* Whether a block is quiet: the mean absolute deviation from its mean below
 * RT_QUALITY_FLAT_UV, with both means running sums in sample order. The sums
 * are first taken in four interleaved parts (independent additions run about
 * four times as fast); the two ways differ by less than their rounding error,
 * at most 2 (len + 1) eps/2 (mean |x| + mad) by the usual bound on recursive
 * summation (Higham 2002, "Accuracy and Stability of Numerical Algorithms",
 * ch. 4), so when the interleaved mad is further than 8 times that from the
 * threshold it decides as the running sums would, and otherwise they are run. */
static bool block_quiet(const double *x, size_t len)
{
    double s[4] = {0.0, 0.0, 0.0, 0.0}, a[4] = {0.0, 0.0, 0.0, 0.0};
    size_t i = 0;
    for (; i + 4 <= len; i += 4)
        for (int q = 0; q < 4; q++) {
            s[q] += x[i + q];
            a[q] += fabs(x[i + q]);
        }
    for (; i < len; i++) {
        s[0] += x[i];
        a[0] += fabs(x[i]);
    }
    double mean = ((s[0] + s[1]) + (s[2] + s[3])) / (double)len;
    double abs_mean = ((a[0] + a[1]) + (a[2] + a[3])) / (double)len;
    double d[4] = {0.0, 0.0, 0.0, 0.0};
    for (i = 0; i + 4 <= len; i += 4)
        for (int q = 0; q < 4; q++)
            d[q] += fabs(x[i + q] - mean);
    for (; i < len; i++)
        d[0] += fabs(x[i] - mean);
    double mad = ((d[0] + d[1]) + (d[2] + d[3])) / (double)len;
    double margin = 8.0 * (double)(len + 2) * DBL_EPSILON * (abs_mean + mad + RT_QUALITY_FLAT_UV);
    if (isfinite(margin) && fabs(mad - RT_QUALITY_FLAT_UV) > margin)
        return mad < RT_QUALITY_FLAT_UV;
    mean = 0.0; /* near the threshold (or not finite): the running sums decide */
    for (i = 0; i < len; i++)
        mean += x[i];
    mean /= (double)len;
    mad = 0.0;
    for (i = 0; i < len; i++)
        mad += fabs(x[i] - mean);
    mad /= (double)len;
    return mad < RT_QUALITY_FLAT_UV;
}

/* Whether sample i (> 0) ends the constant run before it. */
static bool ends_run(const double *x, size_t i)
{
    return !(x[i] == x[i - 1] && isfinite(x[i]));
}

/* The constant runs of at least run_min samples that end in [b0, b1), from
 * *run_start (the first sample of the run going on), which it moves on to
 * the run going on at b1. A block no longer than run_min can only close a
 * long run at its first run end: a run that starts and ends inside the block
 * is shorter than the block. So only the first and the last run end of the
 * block are looked for, one from each side (on live EMG, the block's first
 * and last sample). */
static void constant_runs(const double *x, size_t b0, size_t b1, size_t block, double rate,
                          size_t run_min, size_t *run_start, mark_sink *k)
{
    size_t i = b0 > 0 ? b0 : 1;
    if (block > run_min) { /* every run end, in order */
        for (; i < b1; i++)
            if (ends_run(x, i)) {
                if (i - *run_start >= run_min)
                    sink_add(k, (double)*run_start / rate, (double)i / rate);
                *run_start = i;
            }
        return;
    }
    while (i < b1 && !ends_run(x, i))
        i++;
    if (i >= b1)
        return; /* the run goes on through the block */
    if (i - *run_start >= run_min)
        sink_add(k, (double)*run_start / rate, (double)i / rate);
    size_t last = b1 - 1;
    while (last > i && !ends_run(x, last))
        last--;
    *run_start = last;
}

/* Flat line: identical samples for RT_QUALITY_FLAT_RUN_S (a live electrode
 * on a 16-bit converter never holds one code that long), or blocks whose
 * mean absolute deviation from their own mean stays below RT_QUALITY_FLAT_UV
 * for RT_QUALITY_FLAT_MIN_S (a lead off the skin, amplifier noise only). */
static void find_flat(const double *x, size_t n, double rate, mark_sink *k)
{
    size_t run_min = (size_t)ceil(RT_QUALITY_FLAT_RUN_S * rate);
    /* Both tests give spans in samples; collect them in time order by
     * walking blocks and constant runs together. */
    size_t block = (size_t)llround(RT_QUALITY_FLAT_BLOCK_S * rate);
    if (block < 2)
        block = 2;
    size_t blocks_min = (size_t)ceil(RT_QUALITY_FLAT_MIN_S / RT_QUALITY_FLAT_BLOCK_S);
    size_t quiet_first = 0, quiet_count = 0;
    size_t run_start = 0;
    for (size_t b0 = 0; b0 < n; b0 += block) {
        size_t b1 = b0 + block < n ? b0 + block : n;
        constant_runs(x, b0, b1, block, rate, run_min, &run_start, k);
        bool quiet = b1 - b0 == block && block_quiet(x + b0, block);
        if (quiet) {
            if (quiet_count == 0)
                quiet_first = b0;
            quiet_count++;
        }
        if ((!quiet || b1 == n) && quiet_count > 0) {
            if (quiet_count >= blocks_min)
                sink_add(k, (double)quiet_first / rate,
                         (double)(quiet_first + quiet_count * block) / rate);
            quiet_count = 0;
        }
    }
    if (n > 0 && n - run_start >= run_min)
        sink_add(k, (double)run_start / rate, (double)n / rate);
}

/* The pop detector looks at the signal through boxes of h samples, h =
 * RT_QUALITY_POP_BOX_S x rate rounded (at least 1): box_mean(x, j, h) is the
 * mean of x[j .. j+h). A step is the difference of the box after a sample
 * boundary and the box before it, a derivative of fixed bandwidth: a pop's
 * step counts fully at any rate, while muscle activity, whose per-sample
 * change shrinks as the rate grows and whose broadband noise grows with the
 * recorder's band, is seen in the same band at every rate. Below 1.5 / box
 * (about 380 Hz) the box is one sample and the steps are the samples'. */
static double box_mean(const double *x, size_t j, size_t h)
{
    double s = 0.0;
    for (size_t q = 0; q < h; q++)
        s += x[j + q];
    return s / (double)h;
}

/* The box steps of the whole signal, once: d[j] = |box_mean(x, j, h) -
 * box_mean(x, j - h, h)|, the step into boundary j, for h <= j <= n - h
 * (other entries are left unset or hold box means). Two-sample boxes (the
 * common rates) take the difference in one pass; longer boxes put their means
 * into d first and turn them into steps from the top down, so each mean is
 * still there when the step above it needs it. */
static void box_steps(const double *x, size_t n, size_t h, double *d)
{
    if (h == 2) { /* 385-640 Hz, the common rates: s / 2 and s * 0.5 are the same number */
        for (size_t j = 2; j + 2 <= n; j++)
            d[j] = fabs((x[j] + x[j + 1]) * 0.5 - (x[j - 2] + x[j - 1]) * 0.5);
        return;
    }
    for (size_t j = 0; j + h <= n; j++)
        d[j] = box_mean(x, j, h);
    for (size_t j = n - h; j >= h; j--)
        d[j] = fabs(d[j] - d[j - h]);
}

/* Whether the step d into boundary i is an electrode's, not a muscle's (h:
 * the box length in samples; quality.h): the
 * level moves (the mean over RT_QUALITY_POP_SHIFT_S after the step differs
 * from the mean before it by RT_QUALITY_POP_SHIFT_SHARE of the peak-to-peak
 * range of both stretches: a pop is a step with a slow decay), or a single
 * box stands alone (the two boxes on each side of it within a quarter of the
 * step of each other). Both tests are in time units, so they do not depend
 * on the sampling rate. A motor-unit potential is biphasic and lasts a few
 * milliseconds: it does neither. */
bool rt_quality_electrode_step(const double *x, size_t n, size_t i, size_t h, double rate, double d)
{
    size_t w = (size_t)llround(RT_QUALITY_POP_SHIFT_S * rate);
    if (w < 2)
        w = 2;
    /* a lone box: flat on both sides of it, not the sampled crest of a
     * smooth wave (whose neighbours still climb towards it) */
    if (i >= 2 * h && i + 3 * h <= n) {
        double m_2 = box_mean(x, i - 2 * h, h), m_1 = box_mean(x, i - h, h);
        double m1 = box_mean(x, i + h, h), m2 = box_mean(x, i + 2 * h, h);
        if (fabs(m1 - m_1) < 0.25 * d && fabs(m_1 - m_2) < 0.25 * d && fabs(m2 - m1) < 0.25 * d)
            return true;
    }
    if (i < w + 1 || i + w > n)
        return false;
    double before = 0.0, after = 0.0, lo = x[i], hi = x[i];
    for (size_t j = 0; j < w; j++) {
        before += x[i - 1 - j];
        after += x[i + j];
        lo = fmin(lo, fmin(x[i - 1 - j], x[i + j]));
        hi = fmax(hi, fmax(x[i - 1 - j], x[i + j]));
    }
    return fabs(after - before) / (double)w >= RT_QUALITY_POP_SHIFT_SHARE * (hi - lo);
}

/* Electrode pop: one box step d[i] far above the mean step on each side of
 * it (the larger of the two one-sided means over RT_QUALITY_POP_SIDE_S,
 * leaving out 4 boxes next to i so the pop's own decay does not hide it),
 * that rt_quality_electrode_step() calls an electrode's. Taking the larger side keeps
 * the onset of a real burst, loud on one side, from being called a pop. */
static void find_pops(const double *x, size_t n, double rate, double *d, mark_sink *k)
{
    size_t h = (size_t)llround(RT_QUALITY_POP_BOX_S * rate);
    if (h < 1)
        h = 1;
    size_t gap = 4 * h;
    size_t side = (size_t)llround(RT_QUALITY_POP_SIDE_S * rate);
    if (side == 0 || n < 2 * (side + gap + h) + 2)
        return;
    /* left window d[i-gap-side .. i-gap), right window d(i+gap .. i+gap+side] */
    box_steps(x, n, h, d);
    double left = 0.0, right = 0.0;
    size_t first = side + gap + h, last = n - side - gap - h; /* inclusive range of i */
    for (size_t j = first - gap - side; j < first - gap; j++)
        left += d[j];
    for (size_t j = first + gap + 1; j <= first + gap + side; j++)
        right += d[j];
    /* A loose first test without a branch on the data: the ratio test
     * multiplied out, with a slack far above its rounding, against each side
     * (a NaN side passes, as fmax would take the other), so every step the
     * exact tests below take passes it; on muscle activity almost none does. */
    double sided = (double)side, loose = RT_QUALITY_POP_RATIO * (1.0 - 1e-9);
    for (size_t i = first;; i++) {
        double step = d[i], scaled = step * sided;
        bool maybe = (step >= RT_QUALITY_POP_MIN_UV) & !(scaled <= loose * left) &
                     !(scaled <= loose * right);
        if (maybe && isfinite(step) &&
            step > RT_QUALITY_POP_RATIO * (fmax(left, right) / sided) &&
            rt_quality_electrode_step(x, n, i, h, rate, step)) {
            double t = (double)i / rate;
            sink_add(k, t - RT_QUALITY_POP_BEFORE_S, t + RT_QUALITY_POP_AFTER_S);
        }
        if (i == last)
            break;
        left += d[i - gap] - d[i - gap - side];
        right += d[i + 1 + gap + side] - d[i + 1 + gap];
    }
}

size_t rt_quality_marks(const double *raw_uv, size_t n, double rate_hz, const rt_channel_info *ch,
                        double *work, rt_quality_mark *marks, size_t cap)
{
    if (!raw_uv || n == 0 || !(rate_hz > 0.0) || !isfinite(rate_hz))
        return 0;
    mark_sink k = {marks, marks ? cap : 0, 0, (double)n / rate_hz, RT_QUALITY_CLIPPING, false, 0.0};
    if (ch) {
        sink_begin(&k, RT_QUALITY_CLIPPING);
        find_clipping(raw_uv, n, rate_hz, ch, &k);
    }
    sink_begin(&k, RT_QUALITY_FLAT);
    find_flat(raw_uv, n, rate_hz, &k);
    sink_begin(&k, RT_QUALITY_POP);
    find_pops(raw_uv, n, rate_hz, work, &k);
    return k.count;
}

static int cmp_start(const void *a, const void *b)
{
    double x = ((const rt_time_span *)a)->start_s, y = ((const rt_time_span *)b)->start_s;
    return (x > y) - (x < y);
}

double rt_quality_marked_s(const rt_quality_mark *marks, size_t n_marks, rt_quality_reason reason,
                           double duration_s)
{
    if (!marks || n_marks == 0)
        return 0.0;
    rt_time_span *s = malloc(n_marks * sizeof *s);
    size_t m = 0;
    double total = 0.0;
    if (!s) {
        /* without room to sort, the plain sum is an upper bound */
        for (size_t i = 0; i < n_marks; i++)
            if (reason == RT_QUALITY_REASON_COUNT || marks[i].reason == reason)
                total += fmin(marks[i].end_s, duration_s) - fmax(marks[i].start_s, 0.0);
        return fmin(total, duration_s);
    }
    for (size_t i = 0; i < n_marks; i++)
        if (reason == RT_QUALITY_REASON_COUNT || marks[i].reason == reason)
            s[m++] = (rt_time_span){fmax(marks[i].start_s, 0.0), fmin(marks[i].end_s, duration_s)};
    qsort(s, m, sizeof *s, cmp_start);
    double reach = 0.0;
    for (size_t i = 0; i < m; i++) {
        double a = fmax(s[i].start_s, reach), b = s[i].end_s;
        if (b > a)
            total += b - a;
        reach = fmax(reach, b);
    }
    free(s);
    return total;
}

/* ---- header checks ---- */

/* Reads a number with '.' or ',' as decimal mark; returns chars used, 0 if none. */
static size_t read_number(const char *s, double *out)
{
    char buf[32];
    size_t i = 0, k = 0;
    while (s[i] && k + 1 < sizeof buf &&
           (isdigit((unsigned char)s[i]) || s[i] == '.' || s[i] == ',' ||
            (i == 0 && (s[i] == '-' || s[i] == '+')))) {
        buf[k++] = s[i] == ',' ? '.' : s[i];
        i++;
    }
    buf[k] = '\0';
    if (k == 0)
        return 0;
    char *end = NULL;
    double v = strtod(buf, &end);
    if (end == buf || !isfinite(v))
        return 0;
    *out = v;
    return (size_t)(end - buf);
}

static bool key_is(const char *s, size_t len, const char *key)
{
    if (strlen(key) != len)
        return false;
    for (size_t i = 0; i < len; i++)
        if (tolower((unsigned char)s[i]) != key[i])
            return false;
    return true;
}

int rt_prefilter_parse(const char *text, rt_prefilter *out)
{
    out->hp_hz = out->lp_hz = out->notch_hz = NAN;
    if (!text)
        return 0;
    int found = 0;
    const char *p = text;
    while (*p) {
        while (*p && !isalpha((unsigned char)*p))
            p++;
        const char *key = p;
        while (isalpha((unsigned char)*p))
            p++;
        size_t klen = (size_t)(p - key);
        if (klen == 0)
            break;
        double *field = NULL;
        if (key_is(key, klen, "hp"))
            field = &out->hp_hz;
        else if (key_is(key, klen, "lp"))
            field = &out->lp_hz;
        else if (key_is(key, klen, "n") || key_is(key, klen, "notch"))
            field = &out->notch_hz;
        if (!field)
            continue;
        while (*p == ' ' || *p == ':' || *p == '=')
            p++;
        if ((p[0] == 'D' || p[0] == 'd') && (p[1] == 'C' || p[1] == 'c') && !isalpha((unsigned char)p[2])) {
            if (field == &out->hp_hz) {
                *field = 0.0;
                found++;
            }
            p += 2;
            continue;
        }
        double v;
        size_t used = read_number(p, &v);
        if (used == 0)
            continue; /* "N:off", "N:none" */
        p += used;
        while (*p == ' ')
            p++;
        if ((p[0] == 'H' || p[0] == 'h') && (p[1] == 'Z' || p[1] == 'z')) {
            p += 2;
        } else if ((p[0] == 's' || p[0] == 'S') && !isalpha((unsigned char)p[1]) && field == &out->hp_hz) {
            /* a time constant: first-order corner 1 / (2 pi tau) */
            p++;
            if (v <= 0.0)
                continue;
            v = 1.0 / (2.0 * RT_PI * v);
        } else if ((p[0] == 'k' || p[0] == 'K') && (p[1] == 'H' || p[1] == 'h') && (p[2] == 'z' || p[2] == 'Z')) {
            p += 3;
            v *= 1000.0;
        }
        if (v < 0.0)
            continue;
        if (isnan(*field))
            found++;
        *field = v;
    }
    return found;
}

void rt_quality_check_channel(const rt_channel_info *ch, double band_low_hz, double band_high_hz,
                              rt_channel_check *out)
{
    memset(out, 0, sizeof *out);
    rt_prefilter_parse(ch ? ch->prefilter : NULL, &out->prefilter);
    if (!ch)
        return;
    out->rate_below_min = !(ch->rate_hz >= RT_QUALITY_MIN_RATE_HZ);
    const rt_prefilter *f = &out->prefilter;
    out->hp_above_band = isfinite(f->hp_hz) && f->hp_hz > band_low_hz;
    out->lp_below_band = isfinite(f->lp_hz) && f->lp_hz > 0.0 && f->lp_hz < band_high_hz;
    out->notch_at_source = isfinite(f->notch_hz) && f->notch_hz > 0.0;
}
