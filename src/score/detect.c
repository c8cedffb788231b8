/* Bursts and tonic share: the signal definitions that turn the published
 * visual rules into measurements (docs/scoring.md). */
#include "detect.h"

#include <math.h>
#include <stdbool.h>
#include <stdlib.h>
#include <string.h>

/* Thresholds are compared with this relative slack so that a burst built at
 * exactly k x background is not lost to floating-point rounding. */
#define RT_RATIO_SLACK 1e-9

/* Block index of sample i, advancing a cursor over a sequential scan. */
static size_t block_of(size_t i, const size_t *starts, size_t n_blocks, size_t *cursor)
{
    size_t b = *cursor;
    while (b + 1 < n_blocks && i >= starts[b + 1])
        b++;
    while (b > 0 && i < starts[b])
        b--;
    *cursor = b;
    return b;
}

static int at_threshold(double env, double bg, double k)
{
    return env >= k * bg * (1.0 - RT_RATIO_SLACK);
}

/* Where the envelope falls below `level` for good, searching outward from a
 * run: dips shorter than `gap` samples do not end it (as a run is grown).
 * Returns a fractional sample position on the half-sample grid, so that a
 * rectangular burst of N samples measures exactly N samples. */
static double edge_before(const double *env, size_t from, double level, size_t gap)
{
    size_t i = from, below = 0;
    for (size_t j = from; j > 0 && below < gap; j--) {
        if (env[j - 1] >= level) {
            i = j - 1;
            below = 0;
        } else {
            below++;
        }
    }
    if (i == 0)
        return 0.0;
    /* env[i-1] < level <= env[i]: interpolate, then shift by half a sample
     * because a centred moving average crosses half height at edge - 0.5 */
    double a = env[i - 1], b = env[i];
    double frac = (b > a) ? (level - a) / (b - a) : 0.0;
    return (double)(i - 1) + frac + 0.5;
}

static double edge_after(const double *env, size_t n, size_t last, double level, size_t gap)
{
    size_t i = last, below = 0;
    for (size_t j = last + 1; j < n && below < gap; j++) {
        if (env[j] >= level) {
            i = j;
            below = 0;
        } else {
            below++;
        }
    }
    if (i + 1 >= n)
        return (double)n;
    double a = env[i], b = env[i + 1];
    double frac = (a > b) ? (a - level) / (a - b) : 0.0;
    return (double)i + frac + 0.5;
}

/* q-quantile of the envelope over [a, b) samples (at least one sample). */
static double span_quantile(const double *env, size_t n, double a, double b, double q,
                            double *scratch)
{
    size_t i0 = a <= 0 ? 0 : (size_t)floor(a), i1 = (size_t)ceil(b);
    if (i1 > n)
        i1 = n;
    if (i1 <= i0)
        i1 = i0 + 1 <= n ? i0 + 1 : n;
    size_t len = 0;
    for (size_t i = i0; i < i1; i++)
        scratch[len++] = env[i];
    return len ? rt_quantile(scratch, len, q) : 0.0;
}

/* Rectified amplitude of a burst measured from start to end (samples) on an
 * envelope of `window` samples: the mean envelope over the extent, corrected
 * for its ramps. A rectangle of amplitude A on background B, D samples long
 * (D >= window), has half-height edges at its true edges, and its envelope
 * averages A - (A - B) window / (4 D) between them (two linear ramps of half a
 * window each, from (A + B) / 2 to A); solving for A removes the bias that
 * would otherwise make short bursts look weaker than long ones. */
static double burst_amplitude(const double *env, size_t n, double start, double end, double bg,
                              size_t window)
{
    size_t i0 = start <= 0 ? 0 : (size_t)floor(start + 0.5), i1 = (size_t)floor(end + 0.5);
    if (i1 > n)
        i1 = n;
    if (i1 <= i0)
        return i0 < n ? env[i0] : 0.0;
    double sum = 0.0;
    for (size_t i = i0; i < i1; i++)
        sum += env[i];
    double mean = sum / (double)(i1 - i0);
    double c = (double)window / (4.0 * (end - start));
    if (c > 0.25)
        c = 0.25; /* shorter than the window: the ramps meet; keep the bound of D = window */
    return (mean - bg * c) / (1.0 - c);
}

/* Moving mean of |x| over [i - h, i + h] from the prefix sums (clipped to the
 * stretch). */
static double short_mean(const double *cum, size_t n, size_t i, size_t h)
{
    size_t lo = i >= h ? i - h : 0, hi = i + h + 1 < n ? i + h + 1 : n;
    return (cum[hi] - cum[lo]) / (double)(hi - lo);
}

/* From `from` (inside a burst), the last sample outward (step -1 or +1,
 * never past `limit`) where the short mean is still at `half`, dips shorter
 * than gap samples bridged. */
static size_t last_inside(const double *cum, size_t n, size_t h, size_t from, size_t limit,
                          int step, double half, size_t gap)
{
    size_t i = from, inside = from, below = 0;
    while ((step < 0 ? i > limit : i < limit) && below < gap) {
        i = step < 0 ? i - 1 : i + 1;
        if (short_mean(cum, n, i, h) >= half) {
            inside = i;
            below = 0;
        } else {
            below++;
        }
    }
    return inside;
}

/* The burst's edges measured again on a moving mean half the envelope's
 * window long, crossing the same half height: the crossing of a shorter mean
 * moves less with the noise of the burst's own amplitude (its ramp is steeper
 * than its noise grows). Each edge is searched outward from half a window
 * inside the burst (at most its middle), within one window of the first
 * estimate; dips shorter than the short mean are bridged. Edges on the
 * half-sample grid, as edge_before and edge_after. */
static void refine_edges(const double *cum, size_t n, size_t window, double half, double *start,
                         double *end)
{
    size_t h = window / 4;
    if (h < 1 || n < 2)
        return;
    size_t gap = 2 * h;
    double mid = 0.5 * (*start + *end);
    size_t from = (size_t)fmin(mid, *start + 0.5 * (double)window);
    size_t to = (size_t)fmax(mid, *end - 0.5 * (double)window);
    if (to >= n || short_mean(cum, n, from, h) < half || short_mean(cum, n, to, h) < half)
        return;
    size_t a = last_inside(cum, n, h, from, (size_t)fmax(0.0, *start - (double)window), -1,
                           half, gap);
    size_t b = last_inside(cum, n, h, to, (size_t)fmin((double)n - 1.0, *end + (double)window),
                           1, half, gap);
    double s = 0.0, e = (double)n;
    if (a > 0) {
        double lo = short_mean(cum, n, a - 1, h), hi = short_mean(cum, n, a, h);
        s = (double)(a - 1) + (hi > lo ? (half - lo) / (hi - lo) : 0.0) + 0.5;
    }
    if (b + 1 < n) {
        double hi = short_mean(cum, n, b, h), lo = short_mean(cum, n, b + 1, h);
        e = (double)b + (hi > lo ? (hi - half) / (hi - lo) : 0.0) + 0.5;
    }
    if (e > s) {
        *start = s;
        *end = e;
    }
}

/* The first sample from i on at k x background, or n: block by block, with
 * the block's threshold computed once (at_threshold's own expression). */
static size_t next_at_threshold(const rt_burst_signal *sig, size_t i, double k, size_t *cursor)
{
    const double *env = sig->env;
    size_t n = sig->n;
    size_t b = block_of(i, sig->starts, sig->n_blocks, cursor);
    while (i < n) {
        size_t end = b + 1 < sig->n_blocks ? sig->starts[b + 1] : n;
        double level = k * sig->background[b] * (1.0 - RT_RATIO_SLACK);
        for (; i < end; i++)
            if (env[i] >= level)
                return i;
        if (b + 1 >= sig->n_blocks)
            break;
        b++;
        *cursor = b;
    }
    return n;
}

/* The rules of one scan: they share k and the envelope window, so they share
 * every candidate run and its measured edges and amplitude; only the
 * duration limits differ. */
enum { MAX_RULES = 8 };

static void scan_group(const rt_burst_signal *sig, const rt_burst_rule *rules,
                       const size_t *members, size_t n_members, size_t merge_gap,
                       rt_span *const *spans, size_t cap, size_t *found, double *scratch)
{
    const double *env = sig->env, *background = sig->background;
    const size_t *starts = sig->starts;
    size_t n = sig->n, n_blocks = sig->n_blocks;
    double rate_hz = sig->rate_hz;
    double k = rules[members[0]].k;
    size_t window = rules[members[0]].window;
    size_t cursor = 0;
    size_t i = 0;
    while (i < n) {
        i = next_at_threshold(sig, i, k, &cursor);
        if (i >= n)
            break;
        /* grow the run, bridging gaps shorter than merge_gap */
        size_t first = i, last = i, j = i + 1, gap = 0;
        while (j < n) {
            size_t bj = block_of(j, starts, n_blocks, &cursor);
            if (at_threshold(env[j], background[bj], k)) {
                last = j;
                gap = 0;
            } else if (++gap >= merge_gap) {
                break;
            }
            j++;
        }
        /* edges at half the height of the run above the background: for a
         * rectangular burst the moving average crosses it at the true edge;
         * dips shorter than merge_gap do not end the search, as they do not
         * end a run */
        double bg = background[block_of((first + last) / 2, starts, n_blocks, &cursor)];
        double level = span_quantile(env, n, (double)first, (double)last + 1.0, 0.5, scratch);
        double half = bg + 0.5 * (level - bg);
        double start = edge_before(env, first, half, merge_gap);
        double end = edge_after(env, n, last, half, merge_gap);
        if (sig->rect_cum)
            refine_edges(sig->rect_cum, n, window, half, &start, &end);
        double dur = end - start;
        /* the burst's own amplitude must reach k: noise peaks on a stretch
         * below k cross the threshold only briefly (docs/scoring.md, "Bursts") */
        double amplitude = burst_amplitude(env, n, start, end, bg, window);
        for (size_t m = 0; m < n_members; m++) {
            size_t r = members[m];
            const rt_burst_rule *rule = &rules[r];
            double tolerance = rule->tolerance_s * rate_hz + 0.5; /* samples */
            if (at_threshold(amplitude, bg, rule->k) && dur >= rule->min_s * rate_hz - tolerance &&
                dur <= rule->max_s * rate_hz + tolerance) {
                if (found[r] < cap) {
                    spans[r][found[r]].start = start;
                    spans[r][found[r]].end = end;
                    spans[r][found[r]].ratio = bg > 0 ? amplitude / bg : INFINITY;
                }
                found[r]++;
            }
        }
        /* continue after the measured extent so one burst is counted once */
        size_t next = (size_t)ceil(end);
        i = next > last + 1 ? next : last + 1;
    }
}

void rt_find_bursts_rules(const rt_burst_signal *sig, const rt_burst_rule *rules, size_t n_rules,
                          size_t merge_gap, rt_span *const *spans, size_t cap, size_t *found,
                          double *scratch)
{
    bool done[MAX_RULES] = {false};
    for (size_t r = 0; r < n_rules; r++)
        found[r] = 0;
    for (size_t r = 0; r < n_rules && r < MAX_RULES; r++) {
        if (done[r])
            continue;
        size_t members[MAX_RULES], n_members = 0;
        for (size_t q = r; q < n_rules && q < MAX_RULES; q++)
            if (!done[q] && rules[q].k == rules[r].k && rules[q].window == rules[r].window) {
                members[n_members++] = q;
                done[q] = true;
            }
        scan_group(sig, rules, members, n_members, merge_gap, spans, cap, found, scratch);
    }
}

size_t rt_find_bursts(const rt_burst_signal *sig, const rt_burst_rule *rule, size_t merge_gap,
                      rt_span *spans, size_t cap, double *scratch)
{
    rt_span *const out[1] = {spans};
    size_t found = 0;
    rt_find_bursts_rules(sig, rule, 1, merge_gap, out, cap, &found, scratch);
    return found;
}

size_t rt_count_tonic(const double *env, size_t from, size_t to, const double *background,
                      const size_t *starts, size_t n_blocks, double rel, double abs_uv)
{
    size_t count = 0, cursor = 0;
    for (size_t i = from; i < to; i++) {
        size_t b = block_of(i, starts, n_blocks, &cursor);
        int tonic = 0;
        if (rel > 0 && at_threshold(env[i], background[b], rel))
            tonic = 1;
        if (abs_uv > 0 && env[i] > abs_uv)
            tonic = 1;
        count += (size_t)tonic;
    }
    return count;
}

void rt_count_tonic_blocks(const double *env, const double *background, const size_t *starts,
                           size_t n_blocks, double rel, double abs_uv, size_t *counts)
{
    bool use_rel = rel > 0, use_abs = abs_uv > 0;
    for (size_t b = 0; b < n_blocks; b++) {
        /* at_threshold's level, once per block */
        double level = rel * background[b] * (1.0 - RT_RATIO_SLACK);
        size_t count = 0;
        for (size_t i = starts[b]; i < starts[b + 1]; i++)
            count += (size_t)((use_rel && env[i] >= level) | (use_abs && env[i] > abs_uv));
        counts[b] = count;
    }
}
