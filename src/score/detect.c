/* Envelope, background, bursts and tonic share: the signal definitions that
 * turn the published visual rules into measurements (docs/scoring.md). */
#include "detect.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Thresholds are compared with this relative slack so that a burst built at
 * exactly k x background is not lost to floating-point rounding. */
#define RT_RATIO_SLACK 1e-9

void rt_envelope(double *x, size_t n, size_t window, double *env, double *scratch)
{
    if (n == 0)
        return;
    size_t half = window / 2;
    size_t w = 2 * half + 1; /* the window is centred, so its length is odd */
    /* scratch is a ring holding |x[j]| for j in [i - half, i + half]: env may
     * overwrite x[i] while later windows still need it. Slot of sample j is
     * j mod w, tracked incrementally (no division on the hot path). */
    double sum = 0.0;
    for (size_t j = 0; j <= half && j < n; j++) {
        scratch[j] = fabs(x[j]);
        sum += scratch[j];
    }
    size_t drop_slot = 0;           /* slot of sample i - half */
    size_t add_slot = (half + 1) % w; /* slot of sample i + half + 1 */
    for (size_t i = 0; i < n; i++) {
        size_t lo = i >= half ? i - half : 0;
        size_t hi = i + half < n ? i + half : n - 1;
        env[i] = sum / (double)(hi - lo + 1);
        if (i >= half) {
            sum -= scratch[drop_slot];
            if (++drop_slot == w)
                drop_slot = 0;
        }
        size_t add = i + half + 1;
        if (add < n) {
            scratch[add_slot] = fabs(x[add]);
            sum += scratch[add_slot];
        }
        if (++add_slot == w)
            add_slot = 0;
    }
}

static int compare_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Hoare's selection: places the k-th smallest at v[k]. */
static double select_kth(double *v, size_t n, size_t k)
{
    size_t lo = 0, hi = n - 1;
    while (lo < hi) {
        double pivot = v[lo + (hi - lo) / 2];
        size_t i = lo, j = hi;
        while (i <= j) {
            while (v[i] < pivot)
                i++;
            while (v[j] > pivot)
                j--;
            if (i <= j) {
                double t = v[i];
                v[i] = v[j];
                v[j] = t;
                i++;
                if (j == 0)
                    break;
                j--;
            }
        }
        if (k <= j)
            hi = j;
        else if (k >= i)
            lo = i;
        else
            break;
    }
    return v[k];
}

double rt_quantile(double *v, size_t n, double q)
{
    if (n == 1)
        return v[0];
    if (n <= 8) {
        qsort(v, n, sizeof *v, compare_double);
        double pos = q * (double)(n - 1);
        size_t i = (size_t)floor(pos);
        if (i >= n - 1)
            return v[n - 1];
        return v[i] + (pos - (double)i) * (v[i + 1] - v[i]);
    }
    double pos = q * (double)(n - 1);
    size_t i = (size_t)floor(pos);
    if (i >= n - 1)
        return select_kth(v, n, n - 1);
    double a = select_kth(v, n, i);
    /* after selection everything above i is >= a: the next order statistic is their minimum */
    double b = v[i + 1];
    for (size_t j = i + 2; j < n; j++)
        if (v[j] < b)
            b = v[j];
    return a + (pos - (double)i) * (b - a);
}

void rt_block_quantiles(const double *env, const size_t *starts, size_t n_blocks, double q,
                        size_t stride, double *medians, double *scratch)
{
    if (stride < 1)
        stride = 1;
    for (size_t b = 0; b < n_blocks; b++) {
        size_t len = 0;
        for (size_t i = starts[b]; i < starts[b + 1]; i += stride)
            scratch[len++] = env[i];
        if (len == 0) {
            medians[b] = b > 0 ? medians[b - 1] : 0.0;
            continue;
        }
        medians[b] = rt_quantile(scratch, len, q);
    }
}

void rt_background(const double *medians, size_t n_blocks, size_t window, double q,
                   double *background, double *scratch)
{
    if (window < 1)
        window = 1;
    size_t half = window / 2;
    for (size_t b = 0; b < n_blocks; b++) {
        size_t lo = b >= half ? b - half : 0;
        size_t hi = b + (window - half); /* exclusive */
        if (hi > n_blocks)
            hi = n_blocks;
        size_t len = hi - lo;
        memcpy(scratch, medians + lo, len * sizeof *scratch);
        background[b] = rt_quantile(scratch, len, q);
    }
}

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

/* Where the envelope falls below `level`, searching outward from a run;
 * returns a fractional sample position on the half-sample grid, so that a
 * rectangular burst of N samples measures exactly N samples. */
static double edge_before(const double *env, size_t from, double level)
{
    size_t i = from;
    while (i > 0 && env[i - 1] >= level)
        i--;
    if (i == 0)
        return 0.0;
    /* env[i-1] < level <= env[i]: interpolate, then shift by half a sample
     * because a centred moving average crosses half height at edge - 0.5 */
    double a = env[i - 1], b = env[i];
    double frac = (b > a) ? (level - a) / (b - a) : 0.0;
    return (double)(i - 1) + frac + 0.5;
}

static double edge_after(const double *env, size_t n, size_t last, double level)
{
    size_t i = last;
    while (i + 1 < n && env[i + 1] >= level)
        i++;
    if (i + 1 >= n)
        return (double)n;
    double a = env[i], b = env[i + 1];
    double frac = (a > b) ? (a - level) / (a - b) : 0.0;
    return (double)i + frac + 0.5;
}

size_t rt_find_bursts(const double *env, size_t n, const double *background,
                      const size_t *starts, size_t n_blocks, double rate_hz,
                      const rt_burst_rule *rule, size_t merge_gap, rt_span *spans, size_t cap,
                      double *scratch)
{
    size_t found = 0;
    size_t cursor = 0;
    size_t i = 0;
    double tolerance = 0.5; /* samples: measured durations are exact to half a sample */
    while (i < n) {
        size_t b = block_of(i, starts, n_blocks, &cursor);
        if (!at_threshold(env[i], background[b], rule->k)) {
            i++;
            continue;
        }
        /* grow the run, bridging gaps shorter than merge_gap */
        size_t first = i, last = i, j = i + 1, gap = 0;
        while (j < n) {
            size_t bj = block_of(j, starts, n_blocks, &cursor);
            if (at_threshold(env[j], background[bj], rule->k)) {
                last = j;
                gap = 0;
            } else if (++gap >= merge_gap) {
                break;
            }
            j++;
        }
        /* the run's level: median envelope, every 4th sample (smooth over a window) */
        size_t len = 0;
        for (size_t k = first; k <= last; k += 4)
            scratch[len++] = env[k];
        double level = rt_quantile(scratch, len, 0.5);
        double bg = background[block_of(first + len / 2, starts, n_blocks, &cursor)];
        double half = bg + 0.5 * (level - bg);
        double start = edge_before(env, first, half);
        double end = edge_after(env, n, last, half);
        double dur = end - start;
        if (dur >= rule->min_s * rate_hz - tolerance && dur <= rule->max_s * rate_hz + tolerance) {
            if (found < cap) {
                spans[found].start = start;
                spans[found].end = end;
                spans[found].ratio = bg > 0 ? level / bg : INFINITY;
            }
            found++;
        }
        /* continue after the measured extent so one burst is counted once */
        size_t next = (size_t)ceil(end);
        i = next > last + 1 ? next : last + 1;
    }
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
