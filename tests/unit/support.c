/* Shared helpers for the cmocka unit tests. */
#include "support.h"

#include "dsp/bandpass.h"

#include <errno.h>
#include <math.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

rt_timeline *rt_test_timeline(void)
{
    rt_timeline *tl = NULL;
    rt_error err;
    if (rt_timeline_new(&tl, &err) != RT_OK)
        fail_msg("rt_timeline_new: %s", err.message);
    return tl;
}

rt_labelmap *rt_test_labelmap(void)
{
    rt_labelmap *map = NULL;
    rt_error err;
    if (rt_labelmap_new(&map, &err) != RT_OK)
        fail_msg("rt_labelmap_new: %s", err.message);
    return map;
}

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

/* Signal header field widths in file order (EDF specification). */
static const int EDF_SIGNAL_WIDTH[10] = {16, 80, 8, 8, 8, 8, 8, 80, 8, 32};

void rt_test_edf_put(unsigned char *at, int width, const char *text)
{
    memset(at, ' ', (size_t)width);
    memcpy(at, text, strlen(text) < (size_t)width ? strlen(text) : (size_t)width);
}

long long rt_test_edf_signal_offset(int ns, int field, int k)
{
    long long off = 256;
    for (int i = 0; i < field; i++)
        off += (long long)ns * EDF_SIGNAL_WIDTH[i];
    return off + (long long)k * EDF_SIGNAL_WIDTH[field];
}

void rt_test_edf_put_signal(unsigned char *h, int ns, int field, int k, const char *text)
{
    rt_test_edf_put(h + rt_test_edf_signal_offset(ns, field, k), EDF_SIGNAL_WIDTH[field], text);
}

void rt_test_edf_put_main(unsigned char *h, const rt_test_edf_main *m)
{
    char text[32];
    if (m->bdf)
        memcpy(h, "\xff" "BIOSEMI", 8);
    else
        rt_test_edf_put(h, 8, "0");
    rt_test_edf_put(h + 8, 80, m->patient);
    rt_test_edf_put(h + 88, 80, m->recording);
    rt_test_edf_put(h + 168, 8, m->date);
    rt_test_edf_put(h + 176, 8, m->time);
    snprintf(text, sizeof text, "%d", 256 * (m->ns + 1));
    rt_test_edf_put(h + 184, 8, text);
    rt_test_edf_put(h + 192, 44, m->reserved);
    snprintf(text, sizeof text, "%d", m->n_records);
    rt_test_edf_put(h + 236, 8, text);
    rt_test_edf_put(h + 244, 8, m->record_s);
    snprintf(text, sizeof text, "%d", m->ns);
    rt_test_edf_put(h + 252, 4, text);
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

void rt_test_bandpass(double *x, size_t n, const rt_bandpass_spec *spec)
{
    rt_error err;
    rt_bandpass *bp = NULL;
    if (rt_bandpass_new(spec, &bp, &err) != RT_OK)
        fail_msg("rt_bandpass_new: %s", err.message);
    assert_int_equal(rt_bandpass_apply(bp, x, n, &err), RT_OK);
    rt_bandpass_free(bp);
}

void rt_test_filter(double *x, size_t n, double rate_hz, double lo_hz, double hi_hz)
{
    rt_bandpass_spec spec = rt_bandpass_spec_defaults(rate_hz);
    spec.low_hz = lo_hz;
    spec.high_hz = hi_hz;
    rt_test_bandpass(x, n, &spec);
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
    *rec = NULL;
    if (rt_recording_open(path, rec, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_role_map roles;
    assert_int_equal(rt_roles_resolve(*rec, NULL, &roles, &err), RT_OK);
    rt_timeline *tl = rt_test_timeline();
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

rt_night *rt_test_score_dir(const char *dir, const char *stages, int threads, double block_s)
{
    rt_error err;
    char path[4200];
    snprintf(path, sizeof path, "%s/night.edf", dir);
    rt_recording *rec = NULL;
    if (rt_recording_open(path, &rec, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_role_map roles;
    assert_int_equal(rt_roles_resolve(rec, NULL, &roles, &err), RT_OK);
    rt_timeline *tl = rt_test_timeline();
    snprintf(path, sizeof path, "%s/stages.csv", dir);
    assert_int_equal(rt_timeline_load_stages_csv(tl, stages ? stages : path, NULL, &err), RT_OK);
    rt_night *night = NULL;
    if (rt_night_score_blocks(rec, &roles, tl, NULL, NULL, threads, block_s, &night, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_timeline_free(tl);
    rt_recording_close(rec);
    return night;
}

/* ---- synthetic nights --------------------------------------------------- */

const char *const rt_test_role_names[5] = {"chin", "arm-left", "arm-right", "leg-left", "leg-right"};
const char *const rt_test_role_labels[5] = {"Chin1-Chin2", "FDS L", "FDS R", "Tib L", "Tib R"};
const char *const rt_test_synth_files[4] = {"night.edf", "stages.csv", "events.csv", "truth.json"};

rt_synth_options rt_test_synth_options(double hours, uint64_t seed)
{
    rt_synth_options o;
    rt_synth_options_default(&o);
    o.hours = hours;
    o.seed = seed;
    return o;
}

void rt_test_synth_write(const rt_synth_options *o, const char *dir)
{
    rt_error err;
    rt_error_clear(&err);
    if (rt_synth_write(o, dir, &err) != RT_OK)
        fail_msg("rt_synth_write: %s", err.message);
}

void rt_test_synth_refused(const rt_synth_options *o, const char *dir)
{
    rt_error err;
    rt_error_clear(&err);
    assert_int_equal(rt_synth_write(o, dir, &err), RT_ERR_USAGE);
    assert_non_null(strstr(err.message, "synthetic night"));
}

bool rt_test_files_equal(const char *dir_a, const char *dir_b, const char *name)
{
    char pa[4200], pb[4200];
    snprintf(pa, sizeof pa, "%s/%s", dir_a, name);
    snprintf(pb, sizeof pb, "%s/%s", dir_b, name);
    size_t na, nb;
    char *x = rt_test_read_all(pa, &na), *y = rt_test_read_all(pb, &nb);
    bool eq = na == nb && memcmp(x, y, na) == 0;
    free(x);
    free(y);
    return eq;
}

double *rt_test_read_channel(const char *dir, const char *label, double t0_s, double dur_s, size_t *n,
                             rt_channel_info *info)
{
    char path[4200];
    snprintf(path, sizeof path, "%s/night.edf", dir);
    rt_error err;
    rt_recording *rec = NULL;
    if (rt_recording_open(path, &rec, &err) != RT_OK)
        fail_msg("%s", err.message);
    int ch = rt_recording_find_channel(rec, label);
    assert_true(ch >= 0);
    const rt_channel_info *ci = rt_recording_channel(rec, ch);
    if (info)
        *info = *ci;
    long long first = llround(t0_s * ci->rate_hz);
    *n = dur_s < 0 ? (size_t)(ci->n_samples - first) : (size_t)llround(dur_s * ci->rate_hz);
    double *x = malloc(*n * sizeof *x);
    assert_non_null(x);
    assert_int_equal(rt_recording_read_uv(rec, ch, first, *n, x, &err), RT_OK);
    rt_recording_close(rec);
    return x;
}

double rt_test_sine_amplitude(const double *x, size_t n, double rate_hz, double f_hz, double t0_s)
{
    double sc = 0, ss = 0;
    for (size_t i = 0; i < n; i++) {
        double ph = 2.0 * 3.14159265358979323846 * f_hz * (t0_s + (double)i / rate_hz);
        sc += x[i] * cos(ph);
        ss += x[i] * sin(ph);
    }
    return 2.0 * sqrt(sc * sc + ss * ss) / (double)n;
}

int rt_test_role_index(const char *name)
{
    for (int r = 0; r < 5; r++)
        if (name && strcmp(name, rt_test_role_names[r]) == 0)
            return r;
    fail_msg("unknown role %s", name ? name : "(none)");
    return -1;
}

double rt_test_overlap(double a0, double a1, double b0, double b1)
{
    double lo = fmax(a0, b0), hi = fmin(a1, b1);
    return hi > lo ? hi - lo : 0.0;
}

static double num(json_t *obj, const char *key) { return json_number_value(json_object_get(obj, key)); }

static void *zalloc(size_t n, size_t size)
{
    void *p = calloc(n + 1, size);
    assert_non_null(p);
    return p;
}

/* The objects of list as spans: onset under on_key, "duration_s", and
 * "rect_uv" or "type" where the object has them. */
static rt_test_span *spans(json_t *list, const char *on_key, size_t *n)
{
    *n = json_array_size(list);
    rt_test_span *s = zalloc(*n, sizeof *s);
    for (size_t i = 0; i < *n; i++) {
        json_t *j = json_array_get(list, i);
        const char *type = json_string_value(json_object_get(j, "type"));
        s[i].on = num(j, on_key);
        s[i].dur = num(j, "duration_s");
        s[i].uv = num(j, "rect_uv");
        snprintf(s[i].type, sizeof s[i].type, "%s", type ? type : "");
    }
    return s;
}

void rt_test_truth_load(json_t *t, rt_test_truth *v)
{
    memset(v, 0, sizeof *v);
    json_t *bouts = json_object_get(json_object_get(t, "rem"), "bouts");
    v->n_bouts = (int)json_array_size(bouts);
    assert_true(v->n_bouts > 0 && v->n_bouts <= 64);
    for (int i = 0; i < v->n_bouts; i++) {
        json_t *j = json_array_get(bouts, (size_t)i);
        v->bout_first[i] = (int)json_integer_value(json_object_get(j, "first_epoch"));
        v->bout_epochs[i] = (int)json_integer_value(json_object_get(j, "epochs"));
        v->bout_bg[i] = num(j, "chin_bg_uv");
    }
    json_t *bursts = json_object_get(t, "bursts");
    v->n_bursts = json_array_size(bursts);
    v->b = zalloc(v->n_bursts, sizeof *v->b);
    for (size_t i = 0; i < v->n_bursts; i++) {
        json_t *j = json_array_get(bursts, i), *c = json_object_get(j, "counts");
        rt_test_burst *b = &v->b[i];
        b->role = rt_test_role_index(json_string_value(json_object_get(j, "role")));
        b->on = num(j, "onset_s");
        b->dur = num(j, "duration_s");
        b->rect = num(j, "rect_uv");
        b->ratio = num(j, "ratio");
        b->gain = num(j, "gain");
        b->aasm = json_is_true(json_object_get(c, "aasm"));
        b->sinbar = json_is_true(json_object_get(c, "sinbar"));
        b->montreal = json_is_true(json_object_get(c, "montreal"));
    }
    v->tonic = spans(json_object_get(t, "tonic"), "onset_s", &v->n_tonic);
    v->events = spans(json_object_get(t, "events"), "start_s", &v->n_events);
    json_t *d = json_object_get(t, "difficulty");
    v->drift_end = num(d, "drift_end");
    v->night_s = num(d, "night_s");
    assert_true(v->drift_end > 0 && v->night_s > 0);
}

void rt_test_truth_free(rt_test_truth *v)
{
    free(v->b);
    free(v->tonic);
    free(v->events);
}

/* The rules as docs/scoring.md section 5 defines them (AASM Manual v2;
 * Frauscher et al. 2012, Sleep 35:835; Montplaisir et al. 2010, Mov Disord
 * 25:2044; from memory): AASM 0.1-5 s at >= 4x background on 3-s minis, SINBAR 0.1-5 s at >= 2x on
 * 3-s minis, Montreal 0.1-10 s at >= 4x on 2-s minis. Written out here, not
 * read from the truth, so the recount is independent. */
const rt_test_rule rt_test_rule_aasm = {4.0, 5.0}, rt_test_rule_sinbar = {2.0, 5.0},
                   rt_test_rule_montreal = {4.0, 10.0};

static int rule_counts(const rt_test_burst *b, const rt_test_rule *rule)
{
    return !rule || (b->ratio >= rule->k * (1 - 1e-9) && b->dur >= 0.1 - 1e-9 && b->dur <= rule->max_s + 1e-9);
}

int rt_test_roles_in(const rt_test_truth *v, double t0, double t1, const rt_test_rule *rule)
{
    int mask = 0;
    for (size_t i = 0; i < v->n_bursts; i++)
        if (rule_counts(&v->b[i], rule) && rt_test_overlap(v->b[i].on, v->b[i].on + v->b[i].dur, t0, t1) > 0)
            mask |= 1 << v->b[i].role;
    return mask;
}

int rt_test_tonic_covers(const rt_test_truth *v, double t0, double t1)
{
    for (size_t i = 0; i < v->n_tonic; i++)
        if (v->tonic[i].on <= t0 && t1 <= v->tonic[i].on + v->tonic[i].dur)
            return 1;
    return 0;
}

int rt_test_event_touches(const rt_test_truth *v, double t0, double t1)
{
    for (size_t i = 0; i < v->n_events; i++)
        if (rt_test_overlap(v->events[i].on, v->events[i].on + v->events[i].dur, t0, t1) > 0)
            return 1;
    return 0;
}

int rt_test_quiet_second(const rt_test_truth *v, int r, long s)
{
    if (r == 0 && (rt_test_tonic_covers(v, s - 1.0, s) || rt_test_tonic_covers(v, s, s + 1.0) ||
                   rt_test_tonic_covers(v, s + 1.0, s + 2.0)))
        return 0;
    for (size_t i = 0; i < v->n_bursts; i++)
        if (v->b[i].role == r && rt_test_overlap(v->b[i].on, v->b[i].on + v->b[i].dur, s - 1.0, s + 2.0) > 0)
            return 0;
    return 1;
}

double rt_test_gain_integral(const rt_test_truth *v, double a, double b)
{
    if (v->drift_end == 1.0)
        return b - a;
    double c = log(v->drift_end) / v->night_s;
    return (exp(c * b) - exp(c * a)) / c;
}

void rt_test_check_index(json_t *ix, const char *group, const char *key, double want)
{
    json_t *j = group ? json_object_get(json_object_get(ix, group), key) : json_object_get(ix, key);
    if (isnan(want)) {
        if (!json_is_null(j))
            fail_msg("%s.%s: truth %.12g, recount none (no units)", group ? group : "", key, json_number_value(j));
        return;
    }
    /* truth.json prints 12 significant digits: 1e-8 of a percentage. */
    double got = json_number_value(j);
    if (!json_is_number(j) || fabs(got - want) > 1e-8)
        fail_msg("%s.%s: truth %.12g, recount %.12g", group ? group : "", key, got, want);
}

static double pct(long part, long whole)
{
    return whole ? 100.0 * (double)part / (double)whole : NAN;
}

/* The RAI counts of one bout: per second the designed mean rectified chin,
 * the mean of level x drift gain with every chin burst piece weighted by the
 * gain's integral over it, minus the minimum of the 60 values around it
 * (j-30 .. j+29, clipped to the bout); p1 counts differences <= 1 uV, p2
 * those in (1, 2] uV (Ferri et al. 2010, Sleep Med 11:947). */
static void rai_counts(const rt_test_truth *v, int b, int exclude, long *secs, long *p1, long *p2)
{
    double t0 = 30.0 * v->bout_first[b];
    long len = 30L * v->bout_epochs[b];
    double *val = calloc((size_t)len, sizeof *val);
    assert_non_null(val);
    for (long j = 0; j < len; j++) {
        double s0 = t0 + (double)j, base = v->bout_bg[b], fsum = 0, asum = 0;
        for (size_t i = 0; i < v->n_tonic; i++)
            if (v->tonic[i].on <= s0 && s0 + 1 <= v->tonic[i].on + v->tonic[i].dur)
                base = v->tonic[i].uv;
        for (size_t i = 0; i < v->n_bursts; i++) {
            double a = fmax(v->b[i].on, s0), z = fmin(v->b[i].on + v->b[i].dur, s0 + 1);
            if (v->b[i].role == 0 && z > a) {
                fsum += rt_test_gain_integral(v, a, z);
                asum += v->b[i].rect * rt_test_gain_integral(v, a, z);
            }
        }
        val[j] = base * (rt_test_gain_integral(v, s0, s0 + 1) - fsum) + asum;
    }
    for (long j = 0; j < len; j++) {
        double lo = INFINITY;
        for (long k = j - 30; k <= j + 29; k++)
            if (k >= 0 && k < len)
                lo = fmin(lo, val[k]);
        if (exclude && rt_test_event_touches(v, t0 + (double)j, t0 + (double)j + 1))
            continue;
        (*secs)++;
        *p1 += val[j] - lo <= 1.0;
        *p2 += val[j] - lo > 1.0 && val[j] - lo <= 2.0;
    }
    free(val);
}

/* The recount follows the definitions of docs/synthetic-nights.md ("Index
 * formulas"), each from its source: AASM Manual (30-s epochs, 10 x 3-s minis,
 * >= 5 of 10 minis phasic); Frauscher et al. 2012, Sleep 35:835 (SINBAR 3-s
 * minis, chin "any", FDS); Montplaisir et al. 2010, Mov Disord 25:2044 (20-s
 * tonic, 2-s phasic); Ferri et al. 2010, Sleep Med 11:947 (RAI). */
void rt_test_truth_recount(json_t *t, int exclude)
{
    rt_test_truth v;
    rt_test_truth_load(t, &v);
    long ep = 0, ep_tonic = 0, ep_pchin = 0, ep_pany = 0, ep_rswa = 0, ep_combo = 0;
    long m3 = 0, m3_chin = 0, m3_any = 0, m3_fds = 0, m3_combo = 0, m2 = 0, m2_chin = 0, w20 = 0, w20_t = 0;
    long secs = 0, p1 = 0, p2 = 0;
    for (int b = 0; b < v.n_bouts; b++) {
        for (int e = v.bout_first[b]; e < v.bout_first[b] + v.bout_epochs[b]; e++) {
            double e0 = 30.0 * e;
            int tonic = rt_test_tonic_covers(&v, e0, e0 + 30), n_chin = 0, n_any = 0, combo = 0;
            for (int m = 0; m < 10; m++) {
                double s0 = e0 + 3 * m;
                int aasm = rt_test_roles_in(&v, s0, s0 + 3, &rt_test_rule_aasm);
                int sinbar = rt_test_roles_in(&v, s0, s0 + 3, &rt_test_rule_sinbar);
                n_chin += aasm & 1;
                n_any += aasm != 0;
                int chin = sinbar & 1, arm = (sinbar & 6) != 0;
                combo += chin || tonic || arm;
                if (exclude && rt_test_event_touches(&v, s0, s0 + 3))
                    continue;
                m3++;
                m3_chin += chin;
                m3_any += chin || tonic;
                m3_fds += arm;
                m3_combo += chin || tonic || arm;
            }
            for (int m = 0; m < 15; m++) {
                double s0 = e0 + 2 * m;
                if (exclude && rt_test_event_touches(&v, s0, s0 + 2))
                    continue;
                m2++;
                m2_chin += rt_test_roles_in(&v, s0, s0 + 2, &rt_test_rule_montreal) & 1;
            }
            if (exclude && rt_test_event_touches(&v, e0, e0 + 30))
                continue;
            ep++;
            ep_tonic += tonic;
            ep_pchin += n_chin >= 5;
            ep_pany += n_any >= 5;
            ep_rswa += tonic || n_any >= 5;
            ep_combo += combo >= 5; /* SINBAR 30-s: 5 of 10 minis (Frauscher et al. 2014) */
        }
        for (long w = 0; w < 30L * v.bout_epochs[b] / 20; w++) {
            double s0 = 30.0 * v.bout_first[b] + 20.0 * (double)w;
            if (exclude && rt_test_event_touches(&v, s0, s0 + 20))
                continue;
            w20++;
            w20_t += rt_test_tonic_covers(&v, s0, s0 + 20);
        }
        rai_counts(&v, b, exclude, &secs, &p1, &p2);
    }
    /* Each index: its group and key in truth.json, the units counted and
     * the units it is a percentage of. */
    const struct {
        const char *group, *key;
        long part, whole;
    } want[] = {
        {"aasm", "tonic_chin_epochs", ep_tonic, ep}, {"aasm", "phasic_chin_epochs", ep_pchin, ep},
        {"aasm", "phasic_any_epochs", ep_pany, ep}, {"aasm", "rswa_epochs", ep_rswa, ep},
        {"sinbar", "chin_phasic_3s", m3_chin, m3}, {"sinbar", "chin_any_3s", m3_any, m3},
        {"sinbar", "chin_tonic_30s", ep_tonic, ep}, {"sinbar", "fds_phasic_3s", m3_fds, m3},
        {"sinbar", "chin_any_fds_phasic_3s", m3_combo, m3}, {"sinbar", "chin_any_fds_phasic_30s", ep_combo, ep},
        {"montreal", "tonic_chin", w20_t, w20}, {"montreal", "phasic_chin", m2_chin, m2},
    };
    json_t *ix = json_object_get(t, exclude ? "indices_events_excluded" : "indices");
    for (size_t i = 0; i < sizeof want / sizeof want[0]; i++)
        rt_test_check_index(ix, want[i].group, want[i].key, pct(want[i].part, want[i].whole));
    /* RAI = p1 / (100 - p2), both in percent (Ferri et al. 2010). */
    double q1 = pct(p1, secs), q2 = pct(p2, secs);
    rt_test_check_index(ix, NULL, "rai", secs ? q1 / (100.0 - q2) : NAN);
    rt_test_truth_free(&v);
}

rt_night *rt_test_blank_night(void)
{
    rt_night *n = calloc(1, sizeof *n);
    assert_non_null(n);
    rt_score_params_default(&n->params);
    rt_cutoffs_published(&n->cutoffs);
    for (int i = 0; i < RT_IX_COUNT; i++) {
        n->index[i].value = NAN;
        n->index[i].status = RT_STATUS_NOT_COMPUTED;
    }
    return n;
}
