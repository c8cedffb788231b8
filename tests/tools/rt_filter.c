/* Test helper around the conditioning band-pass (src/dsp/bandpass.h), used
 * by tests/ref/test_bandpass_scipy.py and for timing by hand:
 *
 *   rt_filter filter [options] IN OUT   filter raw little-endian float64 samples
 *   rt_filter gain [options] F...        print "f_hz gain" per frequency
 *   rt_filter info [options]             print "low_hz high_hz block margin"
 *   rt_filter time [options] SECONDS     filter SECONDS of noise, print the time
 *
 * options: --rate HZ (required) --low HZ --high HZ --order N --notch HZ
 * (repeatable) --notch-width HZ --block N (0 = automatic). Defaults are the
 * scorer's (rt_bandpass_spec_defaults). Exit 0 on success, 1 on usage errors,
 * 2 on I/O or filter errors. */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/utsname.h>
#include <time.h>

#include "dsp/bandpass.h"
#include "dsp/fft_plans.h"

static void usage(void)
{
    fprintf(stderr, "usage: rt_filter filter|gain|info|time --rate HZ [--low HZ] [--high HZ] "
                    "[--order N] [--notch HZ]... [--notch-width HZ] [--block N] [ARGS]\n");
    exit(1);
}

static double number(const char *s)
{
    char *end;
    double v = strtod(s, &end);
    if (end == s || *end != '\0') {
        fprintf(stderr, "rt_filter: not a number: %s\n", s);
        exit(1);
    }
    return v;
}

static int host_is_little_endian(void)
{
    const uint16_t one = 1;
    return *(const unsigned char *)&one == 1;
}

static double *read_samples(const char *path, size_t *n)
{
    FILE *f = fopen(path, "rb");
    if (!f) {
        perror(path);
        exit(2);
    }
    size_t cap = 1 << 16, len = 0;
    double *x = malloc(cap * sizeof *x);
    size_t got;
    while (x && (got = fread(x + len, sizeof *x, cap - len, f)) > 0) {
        len += got;
        if (len == cap) {
            cap *= 2;
            double *grown = realloc(x, cap * sizeof *x);
            if (!grown)
                free(x);
            x = grown;
        }
    }
    fclose(f);
    if (!x) {
        fprintf(stderr, "rt_filter: out of memory\n");
        exit(2);
    }
    *n = len;
    return x;
}

static double seconds_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* Fills x with uniform noise from a fixed linear congruential generator:
 * the timing does not depend on the values, only on having no zeros/NaN. */
static void fill_noise(double *x, size_t n)
{
    uint64_t s = 88172645463325252u;
    for (size_t i = 0; i < n; i++) {
        s = s * 6364136223846793005u + 1442695040888963407u;
        x[i] = (double)(s >> 11) / 9007199254740992.0 - 0.5;
    }
}

static int run_time(rt_bandpass *bp, double rate_hz, double seconds)
{
    size_t n = (size_t)(seconds * rate_hz);
    double *x = malloc((n ? n : 1) * sizeof *x);
    if (!x)
        return 2;
    fill_noise(x, n);
    rt_error err;
    double best = 1e30;
    for (int rep = 0; rep < 5; rep++) {
        double t0 = seconds_now();
        if (rt_bandpass_apply(bp, x, n, &err) != RT_OK) {
            fprintf(stderr, "rt_filter: %s\n", err.message);
            free(x);
            return 2;
        }
        double t = seconds_now() - t0;
        if (t < best)
            best = t;
    }
    struct utsname u;
    uname(&u);
    printf("%zu samples (%.0f s at %g Hz), block %zu, margin %zu: best of 5 %.4f s "
           "(%.1f Msamples/s) on %s %s\n",
           n, seconds, rate_hz, rt_bandpass_block_samples(bp), rt_bandpass_margin_samples(bp),
           best, (double)n / best / 1e6, u.machine, u.release);
    free(x);
    return 0;
}

int main(int argc, char **argv)
{
    if (argc < 2)
        usage();
    const char *mode = argv[1];
    rt_bandpass_spec spec = rt_bandpass_spec_defaults(0);
    size_t block = 0;
    int i = 2;
    for (; i < argc && strncmp(argv[i], "--", 2) == 0; i += 2) {
        if (i + 1 >= argc)
            usage();
        const char *opt = argv[i], *val = argv[i + 1];
        if (!strcmp(opt, "--rate"))
            spec.rate_hz = number(val);
        else if (!strcmp(opt, "--low"))
            spec.low_hz = number(val);
        else if (!strcmp(opt, "--high"))
            spec.high_hz = number(val);
        else if (!strcmp(opt, "--order"))
            spec.order = (int)number(val);
        else if (!strcmp(opt, "--notch") && spec.n_notches < RT_BANDPASS_MAX_NOTCHES)
            spec.notch_hz[spec.n_notches++] = number(val);
        else if (!strcmp(opt, "--notch-width"))
            spec.notch_width_hz = number(val);
        else if (!strcmp(opt, "--block"))
            block = (size_t)number(val);
        else
            usage();
    }
    rt_error err;
    rt_bandpass *bp = NULL;
    if (rt_bandpass_new_with_block(&spec, block, &bp, &err) != RT_OK) {
        fprintf(stderr, "rt_filter: %s\n", err.message);
        return err.status == RT_ERR_USAGE ? 1 : 2;
    }
    int rc = 0;
    if (!strcmp(mode, "gain")) {
        for (; i < argc; i++)
            printf("%.17g %.17g\n", number(argv[i]), rt_bandpass_gain(bp, number(argv[i])));
    } else if (!strcmp(mode, "info")) {
        printf("%.17g %.17g %zu %zu\n", rt_bandpass_low_hz(bp), rt_bandpass_high_hz(bp),
               rt_bandpass_block_samples(bp), rt_bandpass_margin_samples(bp));
    } else if (!strcmp(mode, "time") && i + 1 == argc) {
        rc = run_time(bp, spec.rate_hz, number(argv[i]));
    } else if (!strcmp(mode, "filter") && i + 2 == argc) {
        if (!host_is_little_endian()) {
            fprintf(stderr, "rt_filter: raw float64 files are little-endian; this host is not\n");
            rc = 2;
        } else {
            size_t n;
            double *x = read_samples(argv[i], &n);
            if (rt_bandpass_apply(bp, x, n, &err) != RT_OK) {
                fprintf(stderr, "rt_filter: %s\n", err.message);
                rc = 2;
            } else {
                FILE *f = fopen(argv[i + 1], "wb");
                if (!f || fwrite(x, sizeof *x, n, f) != n || fclose(f) != 0) {
                    perror(argv[i + 1]);
                    rc = 2;
                }
            }
            free(x);
        }
    } else {
        rt_bandpass_free(bp);
        usage();
    }
    rt_bandpass_free(bp);
    rt_fft_plans_cleanup();
    return rc;
}
