/* Rectified envelope and quantiles: the level measurements every stage uses
 * (conditioning, background, bursts, quality). Pure functions on arrays. */
#include "levels.h"

#include <math.h>
#include <stdbool.h>
#include <stdlib.h>
#include <string.h>

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

/* Hoare's selection: places the k-th smallest at v[k]. For long arrays, and
 * for arrays holding NaN, which have no order: there the quantile is what
 * this gives. */
static double select_kth_hoare(double *v, size_t n, size_t k)
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

/* Moves the elements of src[lo..hi] that pass (x < p, or x <= p with
 * or_equal) to the front of dst[lo..hi], which it fills from both ends: no
 * branch on the data (a comparison's outcome cannot be guessed on noise) and
 * no store waits for the one before it. Returns where the others begin. */
static size_t partition(const double *src, double *dst, size_t lo, size_t hi, double p,
                        bool or_equal)
{
    size_t a = lo, b = hi + 1;
    if (or_equal)
        for (size_t j = lo; j <= hi; j++) {
            double x = src[j];
            size_t in = (size_t)(x <= p);
            dst[a] = x;
            dst[b - 1] = x;
            a += in;
            b -= 1 - in;
        }
    else
        for (size_t j = lo; j <= hi; j++) {
            double x = src[j];
            size_t in = (size_t)(x < p);
            dst[a] = x;
            dst[b - 1] = x;
            a += in;
            b -= 1 - in;
        }
    return a;
}

static double median3(double a, double b, double c)
{
    if (a > b) {
        double t = a;
        a = b;
        b = t;
    }
    return c <= a ? a : c >= b ? b : c;
}

static double min_of(const double *v, size_t from, size_t to, double m)
{
    for (size_t j = from; j < to; j++)
        m = v[j] < m ? v[j] : m;
    return m;
}

/* The k-th and (k+1)-th smallest of v[0..n) (no NaN, k + 1 < n), which
 * it reorders, with tmp (n doubles). Each round partitions the range left
 * from one of v and tmp into the other, without branches, around a median of
 * three; when no element lies below the pivot it splits off those equal to
 * it, so that repeated values cannot make it quadratic. A round that keeps
 * the lower part leaves the upper part where it was written, untouched by
 * later rounds, and every element above the k-th lies in the range left or
 * in such a part, the last of which holds the smallest of them. Both values
 * are order statistics, whatever the algorithm. */
static void select_pair(double *v, size_t n, size_t k, double *tmp, double *kth, double *next)
{
    double *cur = v, *other = tmp;
    const double *upper = NULL; /* the last upper part left behind: upper[up_lo..up_hi] */
    size_t up_lo = 0, up_hi = 0, lo = 0, hi = n - 1;
    while (lo < hi) {
        double p = median3(cur[lo], cur[lo + (hi - lo) / 2], cur[hi]);
        size_t less = partition(cur, other, lo, hi, p, false); /* [lo, less) < p <= [less, hi] */
        if (k < less || less > lo) {
            double *t = cur;
            cur = other;
            other = t;
            if (k < less) {
                upper = cur;
                up_lo = less;
                up_hi = hi;
                hi = less - 1;
            } else {
                lo = less;
            }
            continue;
        }
        size_t equal = partition(other, cur, lo, hi, p, true); /* [lo, equal) == p < rest */
        if (k < equal) /* everything in (k, hi] is at least p */
            break;
        lo = equal;
    }
    double above = upper ? min_of(upper, up_lo, up_hi + 1, INFINITY) : INFINITY;
    *kth = cur[k];
    *next = min_of(cur, k + 1, hi + 1, above);
}

/* Arrays up to this size (32 KiB of doubles: the per-second levels, the
 * mini-epoch and NREM epoch medians, most bursts) select through a buffer on
 * the stack; longer ones are mostly contiguous envelope, whose runs make
 * Hoare's branches predictable, and it was the faster there when measured
 * (bench-style timing of 10^5 contiguous envelope samples). */
enum { SELECT_STACK = 4096 };

double rt_quantile(double *v, size_t n, double q)
{
    if (n == 1)
        return v[0];
    /* type 7 (Hyndman & Fan 1996): between the i-th and (i+1)-th order statistics */
    double pos = q * (double)(n - 1), a, b;
    size_t i = (size_t)floor(pos);
    if (n <= 8) {
        qsort(v, n, sizeof *v, compare_double);
        if (i >= n - 1)
            return v[n - 1];
        a = v[i];
        b = v[i + 1];
    } else {
        bool nan = false;
        for (size_t j = 0; j < n; j++)
            nan |= v[j] != v[j];
        if (i >= n - 1)
            return select_kth_hoare(v, n, n - 1);
        if (nan || n > SELECT_STACK) {
            a = select_kth_hoare(v, n, i);
            /* everything above i is now >= a: the next order statistic is their minimum */
            b = min_of(v, i + 2, n, v[i + 1]);
        } else {
            double tmp[SELECT_STACK];
            select_pair(v, n, i, tmp, &a, &b);
        }
    }
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

