/* Quality control of an EMG stretch (src/quality/marks.c, mains.c): marks
 * of clipping, flat line and pops with their times and none on clean EMG;
 * the mains line decided 50, 60 or none on EMG-like and mixed-noise
 * signals, its strength against the band by Parseval; the notch list; the
 * prefilter text and the rate check; the QRS window helpers.
 * Test EMG is Gaussian noise band-passed to 20-150 Hz (a surface EMG
 * spectrum lies mostly in 20-150 Hz: common practice) at a rectified level
 * of 1-2 uV (from memory). */
#include "support.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "quality/quality.h"
#include "dsp/bandpass.h"
#include "dsp/fft_plans.h"

static const double PI = 3.14159265358979323846;
static const double RATE = 512.0;

/* Room for the marks' work array of n doubles (kept between calls; freed at exit). */
static double *work_buf;
static double *work_for(size_t n)
{
    static size_t cap;
    if (n > cap) {
        free(work_buf);
        work_buf = malloc(n * sizeof *work_buf);
        assert_non_null(work_buf);
        cap = n;
    }
    return work_buf;
}

static double power(const double *x, size_t n)
{
    double s = 0.0;
    for (size_t i = 0; i < n; i++)
        s += x[i] * x[i];
    return s / (double)n;
}

static rt_channel_info chin_info(double rate)
{
    rt_channel_info ch;
    memset(&ch, 0, sizeof ch);
    strcpy(ch.label, "Chin1-Chin2");
    strcpy(ch.unit, "uV");
    strcpy(ch.prefilter, "HP:10Hz LP:100Hz");
    ch.rate_hz = rate;
    ch.phys_min = -500.0;
    ch.phys_max = 500.0;
    ch.dig_min = -32768;
    ch.dig_max = 32767;
    ch.is_voltage = true;
    ch.uv_per_unit = 1.0;
    return ch;
}

static void add_line(double *x, size_t n, double rate, double f, double amp, int harmonics)
{
    for (size_t i = 0; i < n; i++)
        for (int h = 1; h <= harmonics + 1; h++)
            x[i] += amp / h * sin(2.0 * PI * f * h * (double)i / rate + 0.3 * h);
}

static int cleanup(void **state)
{
    (void)state;
    rt_fft_plans_cleanup();
    free(work_buf);
    return 0;
}

/* ---- mains ---- */

static void test_mains_none_on_clean_emg(void **state)
{
    (void)state;
    for (int trial = 0; trial < 3; trial++) {
        size_t n = (size_t)(60 * RATE);
        double *x = rt_test_band_noise(n, RATE, 20.0, 150.0, 1.0 + trial);
        rt_mains m;
        rt_error err;
        assert_int_equal(rt_mains_estimate(x, n, RATE, 10.0, 100.0, &m, &err), RT_OK);
        assert_false(m.present);
        assert_true(m.line_hz == 0.0);
        assert_int_equal(m.n_notches, 0);
        assert_true(m.prominence_db < RT_MAINS_PROMINENCE_DB);
        free(x);
    }
}

static void test_mains_50_and_60(void **state)
{
    (void)state;
    const double lines[2] = {50.0, 60.0};
    for (int c = 0; c < 2; c++) {
        size_t n = (size_t)(60 * RATE);
        double *x = rt_test_band_noise(n, RATE, 20.0, 150.0, 1.0);
        double p_emg = power(x, n);
        double amp = 2.0; /* uV, fundamental; harmonics 1/2, 1/3 of it */
        add_line(x, n, RATE, lines[c], amp, 2);
        rt_mains m;
        rt_error err;
        assert_int_equal(rt_mains_estimate(x, n, RATE, 10.0, 100.0, &m, &err), RT_OK);
        assert_true(m.present);
        assert_true(m.line_hz == lines[c]);
        /* Parseval: a sinusoid of amplitude A carries A^2/2; inside 10-100 Hz lie
         * the fundamental and (for 50 Hz) the 100-Hz harmonic; the EMG's power in
         * the band is its whole power less the 100-150 Hz part, which this check
         * bounds by taking the whole (hence the 1.5 dB one-sided margin). */
        double in_band = amp * amp / 2.0 + (lines[c] == 50.0 ? amp * amp / 8.0 : 0.0);
        double expect_db = 10.0 * log10(in_band / p_emg);
        print_message("# line %g Hz: line_db %.2f, Parseval with whole EMG %.2f, prominence %.1f dB\n",
                      lines[c], m.line_db, expect_db, m.prominence_db);
        assert_true(m.line_db > expect_db - 0.5 && m.line_db < expect_db + 3.0);
        /* every component recovered: excess power within 10 % of sum A_h^2/2 below 0.45 fs */
        double total = amp * amp / 2.0 * (1.0 + 0.25 + 1.0 / 9.0);
        assert_true(fabs(m.power_uv2[c] - total) < 0.1 * total);
        /* notches: harmonics below 0.45 x 512 = 230.4 Hz and below 2 x 100 Hz */
        if (lines[c] == 50.0) {
            assert_int_equal(m.n_notches, 3);
            assert_true(m.notch_hz[0] == 50.0 && m.notch_hz[1] == 100.0 && m.notch_hz[2] == 150.0);
        } else {
            assert_int_equal(m.n_notches, 3);
            assert_true(m.notch_hz[0] == 60.0 && m.notch_hz[1] == 120.0 && m.notch_hz[2] == 180.0);
        }
        rt_bandpass_spec spec = rt_bandpass_spec_defaults(RATE);
        rt_mains_apply(&m, &spec);
        assert_int_equal(spec.n_notches, m.n_notches);
        assert_true(spec.notch_hz[0] == lines[c] && spec.notch_width_hz > 0.0);
        free(x);
    }
}

/* Mixed noise: EMG plus ECG-like spikes, baseline wander, a 1/f-like drift
 * and a weak line of the other family's harmonic absent. */
static void test_mains_mixed_noise(void **state)
{
    (void)state;
    const double lines[2] = {50.0, 60.0};
    for (int c = 0; c < 2; c++) {
        double rate = c == 0 ? 256.0 : 200.0;
        size_t n = (size_t)(120 * rate);
        double *x = rt_test_band_noise(n, rate, 20.0, 0.45 * rate, 1.5);
        double walk = 0.0;
        for (size_t i = 0; i < n; i++) {
            double t = (double)i / rate;
            walk = 0.999 * walk + 0.3 * rt_test_gauss(); /* red noise */
            double beat = fmod(t, 0.87) - 0.3;
            x[i] += walk + 30.0 * sin(2.0 * PI * 0.25 * t) + 20.0 * exp(-0.5 * pow(beat / 0.012, 2));
        }
        add_line(x, n, rate, lines[c], 1.0, 0);
        rt_mains m;
        rt_error err;
        assert_int_equal(rt_mains_estimate(x, n, rate, 10.0, 100.0, &m, &err), RT_OK);
        print_message("# mixed, %g Hz at %g Hz: present %d, line %g, prominence %.1f dB\n", lines[c], rate,
                      m.present, m.line_hz, m.prominence_db);
        assert_true(m.present);
        assert_true(m.line_hz == lines[c]);
        /* 200 Hz: 0.45 x 200 = 90 Hz leaves the fundamental only */
        if (rate == 200.0) {
            assert_int_equal(m.n_notches, 1);
        }
        free(x);
    }
}

static void test_mains_short_and_bad(void **state)
{
    (void)state;
    double x[600];
    for (int i = 0; i < 600; i++)
        x[i] = sin(2.0 * PI * 50.0 * i / RATE);
    rt_mains m;
    rt_error err;
    /* 600 samples < 5 half-segments of 512: too short to decide */
    assert_int_equal(rt_mains_estimate(x, 600, RATE, 10.0, 100.0, &m, &err), RT_OK);
    assert_false(m.present);
    assert_int_equal(rt_mains_estimate(x, 600, 0.0, 10.0, 100.0, &m, &err), RT_ERR_USAGE);
    assert_int_equal(rt_mains_estimate(x, 600, RATE, 100.0, 10.0, &m, &err), RT_ERR_USAGE);
    /* below 2 x 50 / 0.45 Hz no line can be seen */
    assert_int_equal(rt_mains_estimate(x, 600, 100.0, 10.0, 40.0, &m, &err), RT_OK);
    assert_false(m.present);
}

/* ---- marks ---- */

/* Clean EMG with bursts 20x the background (0.1-5 s, as the rules' bursts). */
static double *clean_with_bursts(size_t n, double rate)
{
    double *x = rt_test_band_noise(n, rate, 20.0, 150.0, 1.0);
    double *b = rt_test_band_noise(n, rate, 20.0, 150.0, 1.0);
    for (double t0 = 3.0; t0 + 6.0 < (double)n / rate; t0 += 7.3) {
        double dur = 0.1 + fmod(t0, 4.9);
        for (size_t i = (size_t)(t0 * rate); i < (size_t)((t0 + dur) * rate); i++)
            x[i] += 19.0 * b[i];
    }
    free(b);
    return x;
}

static void test_marks_none_on_clean(void **state)
{
    (void)state;
    size_t n = (size_t)(120 * RATE);
    double *x = clean_with_bursts(n, RATE);
    rt_channel_info ch = chin_info(RATE);
    rt_quality_mark marks[8];
    size_t k = rt_quality_marks(x, n, RATE, &ch, work_for(n), marks, 8);
    for (size_t i = 0; i < k && i < 8; i++)
        print_message("# unexpected %s %.2f-%.2f\n", rt_quality_reason_name(marks[i].reason),
                      marks[i].start_s, marks[i].end_s);
    assert_int_equal(k, 0);
    free(x);
}

static size_t marks_of(const rt_quality_mark *m, size_t n, rt_quality_reason r, size_t *first)
{
    size_t c = 0;
    for (size_t i = 0; i < n; i++)
        if (m[i].reason == r) {
            if (c == 0)
                *first = i;
            c++;
        }
    return c;
}

static void test_marks_clipping(void **state)
{
    (void)state;
    size_t n = (size_t)(60 * RATE);
    double *x = clean_with_bursts(n, RATE);
    /* a 1-Hz 1500-uV swing from 20 s to 24 s, clipped by the +-500 uV range */
    for (size_t i = (size_t)(20 * RATE); i < (size_t)(24 * RATE); i++) {
        double v = x[i] + 1500.0 * sin(2.0 * PI * ((double)i / RATE - 20.0));
        x[i] = fmax(-500.0, fmin(500.0, v));
    }
    rt_channel_info ch = chin_info(RATE);
    rt_quality_mark marks[16];
    size_t k = rt_quality_marks(x, n, RATE, &ch, work_for(n), marks, 16), f = 0;
    assert_int_equal(marks_of(marks, k, RT_QUALITY_CLIPPING, &f), 1);
    /* the swing first reaches 500 at asin(1/3)/(2 pi) = 0.054 s; marks widen by 0.25 s */
    assert_true(fabs(marks[f].start_s - (20.054 - RT_QUALITY_CLIP_PAD_S)) < 0.02);
    assert_true(marks[f].end_s > 23.5 && marks[f].end_s < 24.3);
    /* a mV channel: limits scale by uv_per_unit */
    for (size_t i = 0; i < n; i++)
        x[i] /= 1000.0;
    ch.phys_min = -0.5;
    ch.phys_max = 0.5;
    ch.uv_per_unit = 1000.0;
    for (size_t i = 0; i < n; i++)
        x[i] *= 1000.0;
    k = rt_quality_marks(x, n, RATE, &ch, work_for(n), marks, 16);
    assert_int_equal(marks_of(marks, k, RT_QUALITY_CLIPPING, &f), 1);
    /* no header limits: no clipping looked for */
    k = rt_quality_marks(x, n, RATE, NULL, work_for(n), marks, 16);
    assert_int_equal(marks_of(marks, k, RT_QUALITY_CLIPPING, &f), 0);
    free(x);
}

static void test_marks_flat(void **state)
{
    (void)state;
    size_t n = (size_t)(60 * RATE);
    double *x = clean_with_bursts(n, RATE);
    /* detached from 40 s: one constant value */
    for (size_t i = (size_t)(40 * RATE); i < n; i++)
        x[i] = 3.7;
    /* near zero for 5 s from 10 s (0.01 uV noise on a 20-uV offset) */
    for (size_t i = (size_t)(10 * RATE); i < (size_t)(15 * RATE); i++)
        x[i] = 20.0 + 0.01 * rt_test_gauss();
    /* near zero for 2 s only from 25 s: shorter than 3 s, not marked */
    for (size_t i = (size_t)(25 * RATE); i < (size_t)(27 * RATE); i++)
        x[i] = 0.01 * rt_test_gauss();
    rt_channel_info ch = chin_info(RATE);
    rt_quality_mark marks[16];
    size_t k = rt_quality_marks(x, n, RATE, &ch, work_for(n), marks, 16), f = 0;
    assert_int_equal(marks_of(marks, k, RT_QUALITY_FLAT, &f), 2);
    /* block-aligned detection: within one 0.5-s block of the true edges */
    assert_true(fabs(marks[f].start_s - 10.0) <= 0.5 && fabs(marks[f].end_s - 15.0) <= 0.5);
    assert_true(fabs(marks[f + 1].start_s - 40.0) <= 0.01);
    assert_true(fabs(marks[f + 1].end_s - 60.0) < 1e-9);
    assert_true(fabs(rt_quality_marked_s(marks, k, RT_QUALITY_FLAT, 60.0) -
                     (marks[f].end_s - marks[f].start_s + 20.0)) < 0.02);
    /* the count is returned even when it exceeds cap */
    assert_int_equal(rt_quality_marks(x, n, RATE, &ch, work_for(n), NULL, 0), k);
    free(x);
}

/* The flat-block and clipping tests decide at their very limits as their
 * definitions do (quality.h): a block is quiet when mad < RT_QUALITY_FLAT_UV
 * with mean and mad running sums in sample order, a sample clips at or
 * beyond the limits less RT_QUALITY_CLIP_FRACTION of the range or when not
 * finite. Groups of 7 blocks hold the same block again and again, with the
 * swing around its mean one ulp below, at and above the threshold; single
 * samples sit at, just inside and just outside the clipping limits. */
static bool reference_quiet(const double *x, size_t len)
{
    double mean = 0.0, mad = 0.0;
    for (size_t i = 0; i < len; i++)
        mean += x[i];
    mean /= (double)len;
    for (size_t i = 0; i < len; i++)
        mad += fabs(x[i] - mean);
    return mad / (double)len < RT_QUALITY_FLAT_UV;
}

static void test_marks_at_their_limits(void **state)
{
    (void)state;
    const double offsets[] = {0.0, 7.3, -123.456, 400.01};
    const double swings[] = {nextafter(RT_QUALITY_FLAT_UV, 0.0), RT_QUALITY_FLAT_UV,
                             nextafter(RT_QUALITY_FLAT_UV, 1.0), 0.9999999999 * RT_QUALITY_FLAT_UV,
                             1.0000000001 * RT_QUALITY_FLAT_UV};
    size_t block = (size_t)llround(RT_QUALITY_FLAT_BLOCK_S * RATE);
    size_t group = 7 * block, gap = (size_t)(2 * RATE);
    size_t n_groups = 4 * 5, n = n_groups * (group + gap) + gap;
    double *x = clean_with_bursts(n, RATE);
    size_t expect = 0;
    bool quiet[4 * 5];
    for (size_t g = 0; g < n_groups; g++) {
        double c = offsets[g / 5], h = swings[g % 5];
        double *b = x + gap + g * (group + gap);
        for (size_t i = 0; i < group; i++)
            b[i] = c + ((i & 1) ? -h : h);
        quiet[g] = reference_quiet(b, block);
        expect += quiet[g];
    }
    assert_true(expect > 0 && expect < n_groups); /* the limit falls between the groups */
    rt_channel_info ch = chin_info(RATE);
    rt_quality_mark marks[64];
    size_t k = rt_quality_marks(x, n, RATE, NULL, work_for(n), marks, 64), f = 0;
    assert_int_equal(marks_of(marks, k, RT_QUALITY_FLAT, &f), expect);
    for (size_t g = 0, m = 0; g < n_groups; g++) {
        if (!quiet[g])
            continue;
        while (marks[f + m].reason != RT_QUALITY_FLAT)
            m++;
        double t0 = (double)(gap + g * (group + gap)) / RATE;
        assert_true(fabs(marks[f + m].start_s - t0) < 1e-9);
        m++;
    }
    /* clipping: single samples 3 s apart at, inside and outside the limits */
    double *y = clean_with_bursts(n, RATE);
    double range = ch.phys_max - ch.phys_min, tol = RT_QUALITY_CLIP_FRACTION * range;
    double hi = ch.phys_max - tol, lo = ch.phys_min + tol;
    const double probes[] = {hi, nextafter(hi, 0.0), nextafter(hi, 1e9), lo, nextafter(lo, 0.0),
                             nextafter(lo, -1e9), NAN, INFINITY, -INFINITY, 0.0};
    size_t n_probes = sizeof probes / sizeof probes[0], clips = 0;
    for (size_t p = 0; p < n_probes; p++) {
        y[(size_t)((3.0 + 3.0 * (double)p) * RATE) + 5] = probes[p];
        clips += !isfinite(probes[p]) || probes[p] >= ch.phys_max - tol ||
                 probes[p] <= ch.phys_min + tol;
    }
    k = rt_quality_marks(y, n, RATE, &ch, work_for(n), marks, 64);
    assert_int_equal(marks_of(marks, k, RT_QUALITY_CLIPPING, &f), clips);
    free(x);
    free(y);
}

/* ---- the detectors against their plain definitions ---------------------
 * rt_quality_marks takes shortcuts for speed (clear stretches passed over
 * many samples at a time, constant runs found from each block's first and
 * last run end, a loose ratio test before the exact one, box steps computed
 * once); the marks must be exactly those of the definitions in quality.h
 * written sample by sample, as below, with the same running sums. The pop's
 * last test, which takes no shortcut, is the library's own
 * (rt_quality_electrode_step; test_marks_pops and
 * test_marks_spikes_are_not_pops check what it calls a pop). */
typedef struct plain_sink {
    rt_quality_mark m[512];
    size_t count;
    double duration_s;
    bool open;
    double last_end;
} plain_sink;

static void plain_add(plain_sink *k, rt_quality_reason reason, double a, double b)
{
    a = a < 0.0 ? 0.0 : a;
    b = b > k->duration_s ? k->duration_s : b;
    if (b <= a)
        return;
    if (k->open && a - k->last_end < RT_QUALITY_MERGE_S) {
        if (b > k->last_end)
            k->last_end = k->m[k->count - 1].end_s = b;
        return;
    }
    assert_true(k->count < 512);
    k->m[k->count++] = (rt_quality_mark){a, b, reason};
    k->open = true;
    k->last_end = b;
}

static bool plain_clips(double v, double lo, double hi)
{
    return !isfinite(v) || v >= hi || v <= lo;
}

static double plain_box(const double *x, size_t j, size_t h)
{
    double s = 0.0;
    for (size_t q = 0; q < h; q++)
        s += x[j + q];
    return s / (double)h;
}

static size_t plain_marks(const double *x, size_t n, double rate, const rt_channel_info *ch,
                          rt_quality_mark *out)
{
    plain_sink k = {.count = 0, .duration_s = (double)n / rate};
    /* clipping */
    double range = ch->phys_max - ch->phys_min, tol = RT_QUALITY_CLIP_FRACTION * range;
    double hi = ch->phys_max - tol, lo = ch->phys_min + tol;
    k.open = false;
    for (size_t i = 0; i < n;) {
        if (!plain_clips(x[i], lo, hi)) {
            i++;
            continue;
        }
        size_t j = i;
        while (j < n && plain_clips(x[j], lo, hi))
            j++;
        plain_add(&k, RT_QUALITY_CLIPPING, (double)i / rate - RT_QUALITY_CLIP_PAD_S,
                  (double)j / rate + RT_QUALITY_CLIP_PAD_S);
        i = j;
    }
    /* flat: constant runs and quiet blocks, in the order the blocks end */
    k.open = false;
    size_t run_min = (size_t)ceil(RT_QUALITY_FLAT_RUN_S * rate);
    size_t block = (size_t)llround(RT_QUALITY_FLAT_BLOCK_S * rate);
    block = block < 2 ? 2 : block;
    size_t blocks_min = (size_t)ceil(RT_QUALITY_FLAT_MIN_S / RT_QUALITY_FLAT_BLOCK_S);
    size_t quiet_first = 0, quiet_count = 0, run_start = 0;
    for (size_t b0 = 0; b0 < n; b0 += block) {
        size_t b1 = b0 + block < n ? b0 + block : n;
        for (size_t i = b0; i < b1; i++) {
            if (i > 0 && x[i] == x[i - 1] && isfinite(x[i]))
                continue;
            if (i > 0 && i - run_start >= run_min)
                plain_add(&k, RT_QUALITY_FLAT, (double)run_start / rate, (double)i / rate);
            run_start = i;
        }
        bool quiet = b1 - b0 == block && reference_quiet(x + b0, block);
        if (quiet && quiet_count++ == 0)
            quiet_first = b0;
        if ((!quiet || b1 == n) && quiet_count > 0) {
            if (quiet_count >= blocks_min)
                plain_add(&k, RT_QUALITY_FLAT, (double)quiet_first / rate,
                          (double)(quiet_first + quiet_count * block) / rate);
            quiet_count = 0;
        }
    }
    if (n > 0 && n - run_start >= run_min)
        plain_add(&k, RT_QUALITY_FLAT, (double)run_start / rate, (double)n / rate);
    /* pops: each box step against the running one-sided sums */
    k.open = false;
    size_t h = (size_t)llround(RT_QUALITY_POP_BOX_S * rate);
    h = h < 1 ? 1 : h;
    size_t gap = 4 * h, side = (size_t)llround(RT_QUALITY_POP_SIDE_S * rate);
    if (side > 0 && n >= 2 * (side + gap + h) + 2) {
        double *d = calloc(n, sizeof *d);
        assert_non_null(d);
        for (size_t j = h; j + h <= n; j++)
            d[j] = fabs(plain_box(x, j, h) - plain_box(x, j - h, h));
        double left = 0.0, right = 0.0;
        size_t first = side + gap + h, last = n - side - gap - h;
        for (size_t j = first - gap - side; j < first - gap; j++)
            left += d[j];
        for (size_t j = first + gap + 1; j <= first + gap + side; j++)
            right += d[j];
        for (size_t i = first; i <= last; i++) {
            double step = d[i];
            if (isfinite(step) && step >= RT_QUALITY_POP_MIN_UV &&
                step > RT_QUALITY_POP_RATIO * (fmax(left, right) / (double)side) &&
                rt_quality_electrode_step(x, n, i, h, rate, step)) {
                double t = (double)i / rate;
                plain_add(&k, RT_QUALITY_POP, t - RT_QUALITY_POP_BEFORE_S, t + RT_QUALITY_POP_AFTER_S);
            }
            if (i < last) {
                left += d[i - gap] - d[i - gap - side];
                right += d[i + 1 + gap + side] - d[i + 1 + gap];
            }
        }
        free(d);
    }
    memcpy(out, k.m, k.count * sizeof *out);
    return k.count;
}

/* EMG with bursts, plus what the detectors look for, at random places:
 * constant runs a sample shorter than, as long as and longer than the
 * flat-run limit (some across block edges), quiet stretches, clipped runs,
 * single NaN and infinite samples, steps with a slow decay (pops), lone
 * spikes, and stretches of a repeating 16-bit code. */
static double *hostile_emg(size_t n, double rate)
{
    double *x = clean_with_bursts(n, rate);
    size_t run_min = (size_t)ceil(RT_QUALITY_FLAT_RUN_S * rate);
    for (int e = 0; e < 120; e++) {
        size_t at = (size_t)(rt_test_uniform() * (double)(n - 3 * run_min - 2));
        switch (e % 8) {
        case 0: /* a constant run around the limit */
        {
            size_t len = run_min - 1 + (size_t)(rt_test_uniform() * 3.0);
            for (size_t i = 0; i < len; i++)
                x[at + i] = x[at];
            break;
        }
        case 1: /* quiet: a lead off the skin */
            for (size_t i = 0; i < 2 * run_min + run_min / 2; i++)
                x[at + i] = 3.0 + 0.02 * sin((double)i);
            break;
        case 2: /* clipped */
            for (size_t i = 0; i < run_min / 8 + 1; i++)
                x[at + i] = 500.0;
            break;
        case 3:
            x[at] = rt_test_uniform() < 0.5 ? NAN : -INFINITY;
            break;
        case 4: /* a pop: a step that decays slowly, 8-200 uV (some near the ratio limit) */
        {
            double size = 8.0 * pow(25.0, rt_test_uniform());
            for (size_t i = 0; i < run_min && at + i < n; i++)
                x[at + i] += size * exp(-(double)i / (0.2 * rate));
            break;
        }
        case 5: /* a lone spike */
            x[at] += 250.0;
            break;
        case 6: /* a 16-bit code held and released, sample by sample */
            for (size_t i = 0; i < run_min / 2; i++)
                x[at + i] = (i % 3 == 0) ? 0.0305 * (double)(i % 7) : x[at + i - 1 + (i == 0)];
            break;
        default: /* a large step up and down */
            for (size_t i = 0; i < run_min / 4; i++)
                x[at + i] += 60.0;
            break;
        }
    }
    return x;
}

static void test_marks_match_plain_definitions(void **state)
{
    (void)state;
    /* box lengths 1, 2, 4 and 16 samples, rates around the common ones and odd ones */
    const double rates[] = {200.0, 256.0, 333.0, 500.0, 512.0, 1000.0, 4096.0};
    rt_test_rng_seed(rt_test_seed() + 11);
    static rt_quality_mark got[512], want[512];
    for (size_t r = 0; r < sizeof rates / sizeof rates[0]; r++)
        for (int trial = 0; trial < 3; trial++) {
            double rate = rates[r];
            size_t n = (size_t)((40.0 + 7.0 * trial) * rate) + (size_t)trial;
            double *x = hostile_emg(n, rate);
            rt_channel_info ch = chin_info(rate);
            size_t k = rt_quality_marks(x, n, rate, &ch, work_for(n), got, 512);
            size_t m = plain_marks(x, n, rate, &ch, want);
            assert_true(k > 0);
            assert_int_equal(k, m);
            for (size_t i = 0; i < k; i++) {
                if (got[i].reason != want[i].reason || memcmp(&got[i].start_s, &want[i].start_s, sizeof(double)) ||
                    memcmp(&got[i].end_s, &want[i].end_s, sizeof(double)))
                    fail_msg("%g Hz, trial %d, mark %zu: %s %.17g-%.17g, plainly %s %.17g-%.17g", rate, trial,
                             i, rt_quality_reason_name(got[i].reason), got[i].start_s, got[i].end_s,
                             rt_quality_reason_name(want[i].reason), want[i].start_s, want[i].end_s);
            }
            free(x);
        }
}

static void test_marks_pops(void **state)
{
    (void)state;
    size_t n = (size_t)(60 * RATE);
    double *x = clean_with_bursts(n, RATE);
    const double at[3] = {7.0, 21.25, 44.0};
    const double amp[3] = {150.0, -80.0, 200.0};
    for (int p = 0; p < 3; p++)
        for (size_t i = (size_t)(at[p] * RATE); i < n; i++)
            x[i] += amp[p] * exp(-((double)i / RATE - at[p]) / 0.1);
    /* and a lone spike (one sample) at 29 s */
    x[(size_t)(29.0 * RATE)] += 60.0;
    rt_channel_info ch = chin_info(RATE);
    rt_quality_mark marks[16];
    size_t k = rt_quality_marks(x, n, RATE, &ch, work_for(n), marks, 16), f = 0;
    for (size_t i = 0; i < k && i < 16; i++)
        print_message("# %s %.3f-%.3f\n", rt_quality_reason_name(marks[i].reason), marks[i].start_s,
                      marks[i].end_s);
    assert_int_equal(marks_of(marks, k, RT_QUALITY_POP, &f), 4);
    const double sorted[4] = {7.0, 21.25, 29.0, 44.0};
    for (int p = 0; p < 4; p++) {
        const rt_quality_mark *m = &marks[f + (size_t)p];
        assert_true(m->start_s <= sorted[p] && m->end_s > sorted[p]);
        assert_true(fabs(m->start_s - (sorted[p] - RT_QUALITY_POP_BEFORE_S)) < 0.01);
    }
    free(x);
}

/* Degenerate input: nothing found, nothing read out of bounds (valgrind
 * and the sanitizer builds watch this), non-finite samples count as clipped. */
/* Motor-unit potentials are not pops, at any rate: sparse biphasic spikes
 * (derivative-of-Gaussian shape, sigma 3 ms, +-150 uV, 8 per second) on quiet
 * EMG leave no pop mark, while a step of 100 uV decaying with 0.1 s, in a
 * second without spikes (the step must stand out of its neighbourhood), does,
 * from 200 to 2000 Hz (a pop is a step with a slow decay, common practice;
 * a motor-unit potential is biphasic and lasts a few ms, common practice). */
static void test_marks_spikes_are_not_pops(void **state)
{
    (void)state;
    const double rates[4] = {200.0, 512.0, 1000.0, 2000.0};
    for (int r = 0; r < 4; r++) {
        double rate = rates[r];
        size_t n = (size_t)(20 * rate);
        double *x = rt_test_band_noise(n, rate, 10.0, 0.45 * rate < 100.0 ? 0.45 * rate : 100.0, 1.0);
        for (double c = 0.3; c < 20.0; c += 0.125) {
            if (c > 9.6 && c < 10.6)
                continue; /* the quiet second of the pop */
            for (size_t i = (size_t)((c - 0.015) * rate); i < (size_t)((c + 0.015) * rate); i++) {
                double v = ((double)i / rate - c) / 0.003;
                x[i] += -150.0 * v * exp(0.5 - 0.5 * v * v);
            }
        }
        rt_channel_info ch = chin_info(rate);
        rt_quality_mark marks[64];
        size_t f = 0, k = rt_quality_marks(x, n, rate, &ch, work_for(n), marks, 64);
        print_message("# %g Hz: %zu pop marks on motor-unit spikes\n", rate,
                      marks_of(marks, k, RT_QUALITY_POP, &f));
        assert_int_equal(marks_of(marks, k, RT_QUALITY_POP, &f), 0);
        for (size_t i = (size_t)(10.06 * rate); i < n; i++)
            x[i] += 100.0 * exp(-((double)i / rate - 10.06) / 0.1);
        k = rt_quality_marks(x, n, rate, &ch, work_for(n), marks, 64);
        assert_int_equal(marks_of(marks, k, RT_QUALITY_POP, &f), 1);
        assert_true(marks[f].start_s <= 10.06 && marks[f].end_s > 10.06);
        free(x);
    }
}

static void test_marks_edges(void **state)
{
    (void)state;
    rt_channel_info ch = chin_info(RATE);
    rt_quality_mark marks[8];
    double one = 1.0;
    assert_int_equal(rt_quality_marks(&one, 0, RATE, &ch, work_for(1), marks, 8), 0);
    assert_int_equal(rt_quality_marks(&one, 1, RATE, &ch, work_for(1), marks, 8), 0);
    assert_int_equal(rt_quality_marks(&one, 1, 0.0, &ch, work_for(1), marks, 8), 0);
    assert_int_equal(rt_quality_marks(NULL, 10, RATE, &ch, work_for(10), marks, 8), 0);
    double x[40];
    for (int i = 0; i < 40; i++)
        x[i] = sin(i);
    x[20] = NAN;
    size_t k = rt_quality_marks(x, 40, 1.0, &ch, work_for(40), marks, 8), f = 0;
    assert_int_equal(marks_of(marks, k, RT_QUALITY_CLIPPING, &f), 1);
    assert_true(marks[f].start_s <= 20.0 && marks[f].end_s >= 21.0);
    assert_true(rt_quality_marked_s(marks, 0, RT_QUALITY_POP, 10.0) == 0.0);
}

/* ---- header ---- */

static void test_prefilter_parse(void **state)
{
    (void)state;
    rt_prefilter f;
    /* the EDF specification's example form (Kemp et al. 1992: "HP:0.1Hz LP:75Hz N:50Hz") */
    assert_int_equal(rt_prefilter_parse("HP:0.1Hz LP:75Hz N:50Hz", &f), 3);
    assert_true(f.hp_hz == 0.1 && f.lp_hz == 75.0 && f.notch_hz == 50.0);
    assert_int_equal(rt_prefilter_parse("hp: 10 Hz  lp:100hz", &f), 2);
    assert_true(f.hp_hz == 10.0 && f.lp_hz == 100.0 && isnan(f.notch_hz));
    assert_int_equal(rt_prefilter_parse("HP:DC LP:1kHz Notch:60Hz", &f), 3);
    assert_true(f.hp_hz == 0.0 && f.lp_hz == 1000.0 && f.notch_hz == 60.0);
    assert_int_equal(rt_prefilter_parse("HP:0,3Hz N:off", &f), 1);
    assert_true(fabs(f.hp_hz - 0.3) < 1e-12 && isnan(f.notch_hz));
    /* time constant 0.1 s: corner 1/(2 pi 0.1) = 1.5915 Hz (first-order RC) */
    assert_int_equal(rt_prefilter_parse("HP:0.1s", &f), 1);
    assert_true(fabs(f.hp_hz - 1.5915494) < 1e-6);
    assert_int_equal(rt_prefilter_parse("", &f), 0);
    assert_int_equal(rt_prefilter_parse(NULL, &f), 0);
    assert_int_equal(rt_prefilter_parse("no filter info: ::: 12 Hz", &f), 0);
}

static void test_channel_check(void **state)
{
    (void)state;
    rt_channel_info ch = chin_info(512.0);
    rt_channel_check c;
    rt_quality_check_channel(&ch, 10.0, 100.0, &c);
    assert_false(c.rate_below_min || c.hp_above_band || c.lp_below_band || c.notch_at_source);
    /* AASM Manual: 200 Hz minimum (from memory) */
    ch.rate_hz = 199.0;
    strcpy(ch.prefilter, "HP:20Hz LP:70Hz N:50Hz");
    rt_quality_check_channel(&ch, 10.0, 100.0, &c);
    assert_true(c.rate_below_min && c.hp_above_band && c.lp_below_band && c.notch_at_source);
    ch.rate_hz = 200.0;
    rt_quality_check_channel(&ch, 10.0, 100.0, &c);
    assert_false(c.rate_below_min);
}

/* ---- QRS windows ---- */

static void test_qrs_windows(void **state)
{
    (void)state;
    const double r[4] = {1.0, 1.1, 2.0, 3.0};
    rt_time_span w[4];
    size_t k = rt_qrs_windows(r, 4, 0.08, 0.08, w, 4);
    assert_int_equal(k, 3);
    assert_true(fabs(w[0].start_s - 0.92) < 1e-12 && fabs(w[0].end_s - 1.18) < 1e-12);
    assert_true(fabs(w[1].start_s - 1.92) < 1e-12);
    assert_int_equal(rt_qrs_windows(r, 4, 0.08, 0.08, w, 1), 3);
    k = rt_qrs_windows(r, 4, 0.08, 0.08, w, 4);
    assert_true(fabs(rt_qrs_overlap(w, k, 1.9, 2.1) - 0.8) < 1e-9);
    assert_true(rt_qrs_overlap(w, k, 2.5, 2.6) == 0.0);
    assert_true(fabs(rt_qrs_overlap(w, k, 0.95, 1.05) - 1.0) < 1e-12);
    assert_true(rt_qrs_overlap(w, k, 2.0, 2.0) == 0.0);
}

int main(void)
{
    rt_test_rng_seed(rt_test_seed());
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_mains_none_on_clean_emg),
        cmocka_unit_test(test_mains_50_and_60),
        cmocka_unit_test(test_mains_mixed_noise),
        cmocka_unit_test(test_mains_short_and_bad),
        cmocka_unit_test(test_marks_none_on_clean),
        cmocka_unit_test(test_marks_clipping),
        cmocka_unit_test(test_marks_flat),
        cmocka_unit_test(test_marks_pops),
        cmocka_unit_test(test_marks_spikes_are_not_pops),
        cmocka_unit_test(test_marks_edges),
        cmocka_unit_test(test_prefilter_parse),
        cmocka_unit_test(test_channel_check),
        cmocka_unit_test(test_qrs_windows),
        cmocka_unit_test(test_marks_at_their_limits),
        cmocka_unit_test(test_marks_match_plain_definitions),
    };
    return cmocka_run_group_tests(tests, NULL, cleanup);
}
