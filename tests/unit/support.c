/* Shared helpers for the cmocka unit tests. */
#include "support.h"

#include "score/bandpass.h"

#include <errno.h>
#include <math.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

static void remove_tree(const char *path)
{
    char cmd[4200];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", path);
    if (system(cmd) != 0)
        fail_msg("cannot clear %s", path);
}

const char *rt_test_dir(const char *name)
{
    static char path[4096];
    const char *base = getenv("REMTONE_TMP");
    snprintf(path, sizeof path, "%s/%s", base ? base : "/tmp", name);
    remove_tree(path);
    if (mkdir(path, 0755) != 0 && errno != EEXIST)
        fail_msg("cannot create %s: %s", path, strerror(errno));
    return path;
}

void rt_test_write_file(const char *path, const void *data, size_t len)
{
    FILE *f = fopen(path, "wb");
    if (!f)
        fail_msg("cannot write %s: %s", path, strerror(errno));
    if (len && fwrite(data, 1, len, f) != len)
        fail_msg("short write to %s", path);
    fclose(f);
}

const char *rt_test_text_file(const char *dir, const char *name, const char *text)
{
    static char path[4400];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    rt_test_write_file(path, text, strlen(text));
    return path;
}

uint64_t rt_test_seed(void)
{
    const char *s = getenv("REMTONE_SEED");
    uint64_t seed = s ? strtoull(s, NULL, 10) : 20261201u;
    printf("# seed %" PRIu64 " (set REMTONE_SEED to repeat)\n", seed);
    return seed;
}

static uint64_t rng_state = 1;

void rt_test_rng_seed(uint64_t seed) { rng_state = seed | 1u; }

double rt_test_uniform(void)
{
    rng_state ^= rng_state >> 12;
    rng_state ^= rng_state << 25;
    rng_state ^= rng_state >> 27;
    return ((double)((rng_state * 2685821657736338717u) >> 11) + 0.5) / 9007199254740992.0;
}

double rt_test_gauss(void)
{
    return sqrt(-2.0 * log(rt_test_uniform())) *
           cos(2.0 * 3.14159265358979323846 * rt_test_uniform());
}

void rt_test_filter(double *x, size_t n, double rate_hz, double lo_hz, double hi_hz)
{
    rt_bandpass_spec spec = rt_bandpass_spec_defaults(rate_hz);
    spec.low_hz = lo_hz;
    spec.high_hz = hi_hz;
    rt_error err;
    rt_bandpass *bp = rt_bandpass_new(&spec, &err);
    assert_non_null(bp);
    assert_int_equal(rt_bandpass_apply(bp, x, n, &err), RT_OK);
    rt_bandpass_free(bp);
}

double *rt_test_band_noise(size_t n, double rate_hz, double lo_hz, double hi_hz, double rect_uv)
{
    double *x = malloc(n * sizeof *x);
    assert_non_null(x);
    for (size_t i = 0; i < n; i++)
        x[i] = rt_test_gauss();
    rt_test_filter(x, n, rate_hz, lo_hz, hi_hz);
    double m = 0.0;
    for (size_t i = 0; i < n; i++)
        m += fabs(x[i]);
    m /= (double)n;
    for (size_t i = 0; i < n; i++)
        x[i] *= rect_uv / m;
    return x;
}

char *rt_test_read_all(const char *path, size_t *len)
{
    FILE *f = fopen(path, "rb");
    if (!f)
        fail_msg("cannot open %s: %s", path, strerror(errno));
    fseek(f, 0, SEEK_END);
    long n = ftell(f);
    fseek(f, 0, SEEK_SET);
    char *buf = malloc((size_t)n + 1);
    assert_non_null(buf);
    assert_int_equal(fread(buf, 1, (size_t)n, f), (size_t)n);
    buf[n] = '\0';
    fclose(f);
    *len = (size_t)n;
    return buf;
}

json_t *rt_test_load_truth(const char *dir)
{
    char path[4200];
    snprintf(path, sizeof path, "%s/truth.json", dir);
    json_error_t jerr;
    json_t *t = json_load_file(path, 0, &jerr);
    if (!t)
        fail_msg("%s: %s (line %d)", path, jerr.text, jerr.line);
    return t;
}

void rt_test_score_synthetic(const rt_synth_options *o, const char *dir, bool with_events,
                             rt_recording **rec, rt_night **night)
{
    rt_error err;
    if (rt_synth_write(o, dir, &err) != RT_OK)
        fail_msg("%s", err.message);
    char path[4200];
    snprintf(path, sizeof path, "%s/night.edf", dir);
    *rec = rt_recording_open(path, &err);
    if (!*rec)
        fail_msg("%s", err.message);
    rt_role_map roles;
    assert_int_equal(rt_roles_resolve(*rec, NULL, &roles, &err), RT_OK);
    rt_timeline *tl = rt_timeline_new();
    snprintf(path, sizeof path, "%s/stages.csv", dir);
    assert_int_equal(rt_timeline_load_stages_csv(tl, path, NULL, &err), RT_OK);
    if (with_events) {
        snprintf(path, sizeof path, "%s/events.csv", dir);
        assert_int_equal(rt_timeline_load_events_csv(tl, path, NULL, &err), RT_OK);
    }
    if (rt_night_score(*rec, &roles, tl, NULL, NULL, night, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_timeline_free(tl);
}
