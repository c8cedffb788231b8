/* Synthetic nights: determinism, the four files and their agreement, the EMG
 * levels in the recording, and an independent recount of every index in
 * truth.json from the placed activity it lists. Nights are 1-2 h so the
 * whole file runs in seconds; the 8-h hypnogram is checked on the plan. */
#include "support.h"

#include <edflib.h>
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/synth.h"
#include "synth/synth_internal.h"

enum { MAX_ROWS = 4096 };

static const char *const roles[5] = {"chin", "arm-left", "arm-right", "leg-left", "leg-right"};

static char night_dir[RT_SYNTH_PROFILE_COUNT][4096];
static uint64_t night_seed;

static void write_night(rt_synth_profile profile, double hours, uint64_t seed, const char *dir)
{
    rt_synth_options o;
    rt_synth_options_default(&o);
    o.profile = profile;
    o.hours = hours;
    o.seed = seed;
    o.patient = "Fictional_Sleeper";
    rt_error err;
    rt_error_clear(&err);
    rt_status st = rt_synth_write(&o, dir, &err);
    if (st != RT_OK)
        fail_msg("rt_synth_write: %s", err.message);
}

static int setup_nights(void **state)
{
    (void)state;
    night_seed = rt_test_seed();
    for (int p = 0; p < RT_SYNTH_PROFILE_COUNT; p++) {
        char name[64];
        snprintf(name, sizeof name, "synth_%s", rt_synth_profile_name((rt_synth_profile)p));
        snprintf(night_dir[p], sizeof night_dir[p], "%s", rt_test_dir(name));
        write_night((rt_synth_profile)p, 2.0, night_seed, night_dir[p]);
    }
    return 0;
}


static int files_equal(const char *a, const char *b)
{
    size_t na, nb;
    char *x = rt_test_read_all(a, &na), *y = rt_test_read_all(b, &nb);
    int eq = na == nb && memcmp(x, y, na) == 0;
    free(x);
    free(y);
    return eq;
}


typedef struct row {
    long start_s, duration_s;
    char label[32];
} row;

/* Reads a start_s,duration_s,label table; returns the row count. */
static int read_table(const char *dir, const char *name, row *rows)
{
    char path[4200], line[256];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    FILE *f = fopen(path, "r");
    if (!f)
        fail_msg("cannot open %s", path);
    assert_non_null(fgets(line, sizeof line, f));
    int n = 0;
    while (fgets(line, sizeof line, f)) {
        assert_true(n < MAX_ROWS);
        assert_int_equal(sscanf(line, "%ld,%ld,%31[^\n]", &rows[n].start_s, &rows[n].duration_s, rows[n].label),
                         3);
        n++;
    }
    fclose(f);
    return n;
}

static void same_seed_same_files_other_seed_other_files(void **state)
{
    (void)state;
    static const char *const files[] = {"night.edf", "stages.csv", "events.csv", "truth.json"};
    char a[4096], b[4096], c[4096];
    snprintf(a, sizeof a, "%s", rt_test_dir("synth_det_a"));
    snprintf(b, sizeof b, "%s", rt_test_dir("synth_det_b"));
    snprintf(c, sizeof c, "%s", rt_test_dir("synth_det_c"));
    write_night(RT_SYNTH_APNEA, 1.0, night_seed, a);
    write_night(RT_SYNTH_APNEA, 1.0, night_seed, b);
    write_night(RT_SYNTH_APNEA, 1.0, night_seed + 1, c);
    for (int i = 0; i < 4; i++) {
        char pa[4200], pb[4200], pc[4200];
        snprintf(pa, sizeof pa, "%s/%s", a, files[i]);
        snprintf(pb, sizeof pb, "%s/%s", b, files[i]);
        snprintf(pc, sizeof pc, "%s/%s", c, files[i]);
        assert_true(files_equal(pa, pb));
        if (i == 0 || i == 3) /* the stage table may coincide; signal and truth may not */
            assert_false(files_equal(pa, pc));
    }
}

static void rejects_bad_options(void **state)
{
    (void)state;
    rt_synth_options o;
    rt_synth_options_default(&o);
    rt_error err;
    o.hours = 0.5;
    assert_int_equal(rt_synth_write(&o, rt_test_dir("synth_bad"), &err), RT_ERR_USAGE);
    o.hours = 1;
    assert_int_equal(rt_synth_write(&o, "/nonexistent/folder", &err), RT_ERR_IO);
    rt_synth_profile p;
    assert_int_equal(rt_synth_profile_from_name("borderline", &p), 0);
    assert_int_equal(p, RT_SYNTH_BORDERLINE);
    assert_int_equal(rt_synth_profile_from_name("Borderline", &p), -1);
    assert_string_equal(rt_synth_profile_name(RT_SYNTH_APNEA), "apnea");
}

/* --- independent recount of the indices -------------------------------- */

typedef struct night_truth {
    int n_bouts;
    int bout_first[64], bout_epochs[64];
    double bout_bg[64];
    size_t n_bursts;
    int *b_role;
    double *b_on, *b_dur, *b_uv;
    size_t n_tonic;
    double t_on[512], t_dur[512], t_uv[512];
    int n_events;
    row events[MAX_ROWS];
} night_truth;

static int role_index(const char *name)
{
    for (int r = 0; r < 5; r++)
        if (strcmp(name, roles[r]) == 0)
            return r;
    fail_msg("unknown role %s", name);
    return -1;
}

static void truth_load(json_t *t, const char *dir, night_truth *nt)
{
    memset(nt, 0, sizeof *nt);
    json_t *bouts = json_object_get(json_object_get(t, "rem"), "bouts");
    nt->n_bouts = (int)json_array_size(bouts);
    assert_true(nt->n_bouts > 0 && nt->n_bouts <= 64);
    for (int i = 0; i < nt->n_bouts; i++) {
        json_t *b = json_array_get(bouts, (size_t)i);
        nt->bout_first[i] = (int)json_integer_value(json_object_get(b, "first_epoch"));
        nt->bout_epochs[i] = (int)json_integer_value(json_object_get(b, "epochs"));
        nt->bout_bg[i] = json_number_value(json_object_get(b, "chin_bg_uv"));
    }
    json_t *bursts = json_object_get(t, "bursts");
    nt->n_bursts = json_array_size(bursts);
    nt->b_role = calloc(nt->n_bursts + 1, sizeof(int));
    nt->b_on = calloc(nt->n_bursts + 1, sizeof(double));
    nt->b_dur = calloc(nt->n_bursts + 1, sizeof(double));
    nt->b_uv = calloc(nt->n_bursts + 1, sizeof(double));
    for (size_t i = 0; i < nt->n_bursts; i++) {
        json_t *b = json_array_get(bursts, i);
        nt->b_role[i] = role_index(json_string_value(json_object_get(b, "role")));
        nt->b_on[i] = json_number_value(json_object_get(b, "onset_s"));
        nt->b_dur[i] = json_number_value(json_object_get(b, "duration_s"));
        nt->b_uv[i] = json_number_value(json_object_get(b, "rect_uv"));
    }
    json_t *tonic = json_object_get(t, "tonic");
    nt->n_tonic = json_array_size(tonic);
    assert_true(nt->n_tonic <= 512);
    for (size_t i = 0; i < nt->n_tonic; i++) {
        json_t *b = json_array_get(tonic, i);
        nt->t_on[i] = json_number_value(json_object_get(b, "onset_s"));
        nt->t_dur[i] = json_number_value(json_object_get(b, "duration_s"));
        nt->t_uv[i] = json_number_value(json_object_get(b, "rect_uv"));
    }
    nt->n_events = read_table(dir, "events.csv", nt->events);
}

static void truth_free(night_truth *nt)
{
    free(nt->b_role);
    free(nt->b_on);
    free(nt->b_dur);
    free(nt->b_uv);
}

static double overlap(double a0, double a1, double b0, double b1)
{
    double lo = a0 > b0 ? a0 : b0, hi = a1 < b1 ? a1 : b1;
    return hi > lo ? hi - lo : 0.0;
}

/* Bit r set when a burst of role r overlaps [t0, t1). */
static int roles_in(const night_truth *nt, double t0, double t1)
{
    int mask = 0;
    for (size_t i = 0; i < nt->n_bursts; i++)
        if (overlap(nt->b_on[i], nt->b_on[i] + nt->b_dur[i], t0, t1) > 0)
            mask |= 1 << nt->b_role[i];
    return mask;
}

static int tonic_covers(const night_truth *nt, double t0, double t1)
{
    for (size_t i = 0; i < nt->n_tonic; i++)
        if (nt->t_on[i] <= t0 && t1 <= nt->t_on[i] + nt->t_dur[i])
            return 1;
    return 0;
}

static int event_touches(const night_truth *nt, double t0, double t1)
{
    for (int i = 0; i < nt->n_events; i++)
        if (overlap((double)nt->events[i].start_s, (double)(nt->events[i].start_s + nt->events[i].duration_s),
                    t0, t1) > 0)
            return 1;
    return 0;
}

static double pct(long num, long den)
{
    return den ? 100.0 * (double)num / (double)den : NAN;
}

static void check_index(json_t *obj, const char *group, const char *key, double want)
{
    json_t *v = group ? json_object_get(json_object_get(obj, group), key) : json_object_get(obj, key);
    if (isnan(want)) {
        assert_true(json_is_null(v));
        return;
    }
    /* truth.json prints 12 significant digits: 1e-8 of a percentage. */
    double got = json_number_value(v);
    if (fabs(got - want) > 1e-8)
        fail_msg("%s.%s: truth %.12g, recount %.12g", group ? group : "", key, got, want);
}

/* Recounts each index with the definitions of the brief (docs/synthetic-
 * nights.md) from the lists in truth.json and events.csv, and compares. The
 * sources of the formulas: AASM Manual (30-s epochs, 10 x 3-s minis, >= 5 of
 * 10 minis phasic); Frauscher et al. 2012, Sleep 35:835 (SINBAR 3-s minis,
 * chin "any", FDS); Montplaisir et al. 2010, Mov Disord 25:2044 (20-s tonic,
 * 2-s phasic); Ferri et al. 2010, Sleep Med 11:947 (RAI). */
static void recount(json_t *t, const char *dir, int exclude)
{
    night_truth *nt = malloc(sizeof *nt);
    assert_non_null(nt);
    truth_load(t, dir, nt);
    json_t *minis = json_object_get(t, "minis_3s");
    size_t mi = 0;
    long ep = 0, ep_tonic = 0, ep_pchin = 0, ep_pany = 0, ep_rswa = 0, ep_combo = 0;
    long m3 = 0, m3_chin = 0, m3_any = 0, m3_fds = 0, m3_combo = 0, m2 = 0, m2_chin = 0;
    long w20 = 0, w20_tonic = 0, secs = 0, p1 = 0, p2 = 0;
    for (int b = 0; b < nt->n_bouts; b++) {
        double t0 = 30.0 * nt->bout_first[b];
        long len = 30L * nt->bout_epochs[b];
        for (int e = nt->bout_first[b]; e < nt->bout_first[b] + nt->bout_epochs[b]; e++) {
            double e0 = 30.0 * e;
            int n_chin = 0, n_any = 0, combo = 0;
            int tonic = tonic_covers(nt, e0, e0 + 30);
            for (int m = 0; m < 10; m++, mi++) {
                /* minis_3s lists every REM mini in time order, and what it
                 * says agrees with the burst, tonic and event lists. */
                json_t *jm = json_array_get(minis, mi);
                assert_non_null(jm);
                double s0 = e0 + 3 * m;
                assert_int_equal(json_integer_value(json_object_get(jm, "epoch")), e);
                assert_int_equal(json_integer_value(json_object_get(jm, "mini")), m);
                assert_true(json_number_value(json_object_get(jm, "onset_s")) == s0);
                int mask = roles_in(nt, s0, s0 + 3), listed = 0;
                json_t *ph = json_object_get(jm, "phasic");
                for (size_t k = 0; k < json_array_size(ph); k++)
                    listed |= 1 << role_index(json_string_value(json_array_get(ph, k)));
                assert_int_equal(listed, mask);
                assert_int_equal(json_array_size(json_object_get(jm, "tonic")) > 0, tonic);
                int excl = event_touches(nt, s0, s0 + 3);
                assert_int_equal(json_is_true(json_object_get(jm, "excluded")), excl);
                int chin = mask & 1, arm = (mask & 6) != 0;
                n_chin += chin;
                n_any += mask != 0;
                combo += chin || tonic || arm;
                if (exclude && excl)
                    continue;
                m3++;
                m3_chin += chin;
                m3_any += chin || tonic;
                m3_fds += arm;
                m3_combo += chin || tonic || arm;
            }
            for (int m = 0; m < 15; m++) {
                double s0 = e0 + 2 * m;
                if (exclude && event_touches(nt, s0, s0 + 2))
                    continue;
                m2++;
                m2_chin += roles_in(nt, s0, s0 + 2) & 1;
            }
            if (exclude && event_touches(nt, e0, e0 + 30))
                continue;
            ep++;
            ep_tonic += tonic;
            ep_pchin += n_chin >= 5;
            ep_pany += n_any >= 5;
            ep_rswa += tonic || n_any >= 5;
            ep_combo += combo >= 5; /* SINBAR 30-s: 5 of 10 minis (Frauscher et al. 2014) */
        }
        for (long w = 0; w < len / 20; w++) {
            double s0 = t0 + 20.0 * w;
            if (exclude && event_touches(nt, s0, s0 + 20))
                continue;
            w20++;
            w20_tonic += tonic_covers(nt, s0, s0 + 20);
        }
        /* RAI: designed mean rectified chin per second, minus the minimum of
         * the 60 values around it (j-30 .. j+29, clipped to the bout). */
        double *v = calloc((size_t)len, sizeof *v);
        assert_non_null(v);
        for (long j = 0; j < len; j++) {
            double s0 = t0 + (double)j;
            double val = nt->bout_bg[b];
            for (size_t i = 0; i < nt->n_tonic; i++)
                if (nt->t_on[i] <= s0 && s0 + 1 <= nt->t_on[i] + nt->t_dur[i])
                    val = nt->t_uv[i];
            for (size_t i = 0; i < nt->n_bursts; i++) {
                if (nt->b_role[i] != 0)
                    continue;
                double f = overlap(nt->b_on[i], nt->b_on[i] + nt->b_dur[i], s0, s0 + 1);
                if (f > 0)
                    val = val * (1 - f) + nt->b_uv[i] * f;
            }
            v[j] = val;
        }
        for (long j = 0; j < len; j++) {
            double lo = INFINITY;
            for (long k = j - 30; k <= j + 29; k++)
                if (k >= 0 && k < len && v[k] < lo)
                    lo = v[k];
            if (exclude && event_touches(nt, t0 + j, t0 + j + 1))
                continue;
            double d = v[j] - lo;
            secs++;
            p1 += d <= 1.0;
            p2 += d > 1.0 && d <= 2.0;
        }
        free(v);
    }
    assert_int_equal(mi, json_array_size(minis));
    json_t *ix = json_object_get(t, exclude ? "indices_events_excluded" : "indices");
    check_index(ix, "aasm", "tonic_chin_epochs", pct(ep_tonic, ep));
    check_index(ix, "aasm", "phasic_chin_epochs", pct(ep_pchin, ep));
    check_index(ix, "aasm", "phasic_any_epochs", pct(ep_pany, ep));
    check_index(ix, "aasm", "rswa_epochs", pct(ep_rswa, ep));
    check_index(ix, "sinbar", "chin_phasic_3s", pct(m3_chin, m3));
    check_index(ix, "sinbar", "chin_any_3s", pct(m3_any, m3));
    check_index(ix, "sinbar", "chin_tonic_30s", pct(ep_tonic, ep));
    check_index(ix, "sinbar", "fds_phasic_3s", pct(m3_fds, m3));
    check_index(ix, "sinbar", "chin_any_fds_phasic_3s", pct(m3_combo, m3));
    check_index(ix, "sinbar", "chin_any_fds_phasic_30s", pct(ep_combo, ep));
    check_index(ix, "montreal", "tonic_chin", pct(w20_tonic, w20));
    check_index(ix, "montreal", "phasic_chin", pct(m2_chin, m2));
    double q1 = pct(p1, secs), q2 = pct(p2, secs);
    check_index(ix, NULL, "rai", secs ? q1 / (100.0 - q2) : NAN);
    truth_free(nt);
    free(nt);
}

static void truth_indices_match_an_independent_recount(void **state)
{
    (void)state;
    for (int p = 0; p < RT_SYNTH_PROFILE_COUNT; p++) {
        json_t *t = rt_test_load_truth(night_dir[p]);
        recount(t, night_dir[p], 0);
        recount(t, night_dir[p], 1);
        if (p != RT_SYNTH_APNEA) /* no respiratory events: nothing to leave out */
            assert_true(json_equal(json_object_get(t, "indices"), json_object_get(t, "indices_events_excluded")));
        json_decref(t);
    }
}

/* The grid rules of docs/synthetic-nights.md, checked on the lists. */
static void placement_follows_the_grid_rules(void **state)
{
    (void)state;
    for (int p = 0; p < RT_SYNTH_PROFILE_COUNT; p++) {
        json_t *t = rt_test_load_truth(night_dir[p]);
        night_truth *nt = malloc(sizeof *nt);
        assert_non_null(nt);
        truth_load(t, night_dir[p], nt);
        json_t *bursts = json_object_get(t, "bursts");
        for (size_t i = 0; i < nt->n_bursts; i++) {
            double sec = floor(nt->b_on[i]), u = nt->b_on[i] - sec;
            /* 1e-9: onsets are whole seconds plus a 1-ms grid value. */
            assert_true(u >= 0.10 - 1e-9 && u <= 0.20 + 1e-9);
            assert_true(nt->b_dur[i] >= 0.30 - 1e-9 && nt->b_dur[i] <= 0.70 + 1e-9);
            int in_bout = 0;
            for (int b = 0; b < nt->n_bouts; b++) {
                double t0 = 30.0 * nt->bout_first[b], t1 = t0 + 30.0 * nt->bout_epochs[b];
                if (nt->b_on[i] >= t0 + 2 && nt->b_on[i] + nt->b_dur[i] <= t1 - 2) {
                    in_bout = 1;
                    double bg = nt->b_role[i] == 0 ? nt->bout_bg[b] : 1.0;
                    double factor = nt->b_uv[i] / bg;
                    assert_true(factor >= 8.0 - 1e-3 && factor <= 15.0 + 1e-3);
                }
            }
            assert_true(in_bout);
            if (nt->b_role[i] == 0)
                assert_false(tonic_covers(nt, sec, sec + 1));
            for (size_t j = i + 1; j < nt->n_bursts; j++)
                if (nt->b_role[j] == nt->b_role[i])
                    assert_true(floor(nt->b_on[j]) != sec);
            json_t *jb = json_array_get(bursts, i);
            if (json_is_true(json_object_get(jb, "arousal_bound"))) {
                assert_int_equal(p, RT_SYNTH_APNEA);
                int in_arousal = 0;
                for (int k = 0; k < nt->n_events; k++)
                    if (strcmp(nt->events[k].label, "resp-arousal") == 0 && nt->events[k].start_s <= sec &&
                        sec + 1 <= nt->events[k].start_s + nt->events[k].duration_s)
                        in_arousal = 1;
                assert_true(in_arousal);
            }
        }
        for (size_t i = 0; i < nt->n_tonic; i++) {
            int ok = 0;
            for (int b = 0; b < nt->n_bouts; b++) {
                double t0 = 30.0 * nt->bout_first[b], t1 = t0 + 30.0 * nt->bout_epochs[b];
                double rel = nt->t_on[i] - t0;
                if (rel >= 0 && nt->t_on[i] < t1)
                    ok = fmod(rel, 60.0) == 0.0 &&
                         (nt->t_dur[i] == 60.0 || (nt->t_dur[i] == 30.0 && nt->t_on[i] + 30.0 == t1)) &&
                         nt->t_on[i] + nt->t_dur[i] <= t1;
            }
            assert_true(ok);
            assert_true(nt->t_uv[i] >= 15.0 && nt->t_uv[i] <= 25.0);
            /* At least one whole non-tonic pair between two tonic blocks. */
            if (i > 0 && nt->t_on[i] - (nt->t_on[i - 1] + nt->t_dur[i - 1]) < 60.0)
                fail_msg("tonic blocks at %.0f and %.0f are too close", nt->t_on[i - 1], nt->t_on[i]);
        }
        truth_free(nt);
        free(nt);
        json_decref(t);
    }
}

static double index_of(json_t *t, const char *group, const char *key)
{
    return json_number_value(json_object_get(json_object_get(json_object_get(t, "indices"), group), key));
}

/* Profiles land where they are meant to, against the SINBAR cutoffs of
 * Frauscher et al. 2012, Sleep 35:835-847 (chin "any" 3 s 18.2 %; chin "any"
 * + both FDS phasic 3 s 31.9 %). */
static void profiles_reach_their_targets(void **state)
{
    (void)state;
    json_t *typ = rt_test_load_truth(night_dir[RT_SYNTH_TYPICAL_OLDER]);
    json_t *rbd = rt_test_load_truth(night_dir[RT_SYNTH_RBD]);
    json_t *bor = rt_test_load_truth(night_dir[RT_SYNTH_BORDERLINE]);
    json_t *apn = rt_test_load_truth(night_dir[RT_SYNTH_APNEA]);
    double combo_rbd = index_of(rbd, "sinbar", "chin_any_fds_phasic_3s");
    double combo_typ = index_of(typ, "sinbar", "chin_any_fds_phasic_3s");
    printf("# rbd %.1f %%, typical-older %.1f %% (cutoff 31.9)\n", combo_rbd, combo_typ);
    assert_true(combo_rbd > 50.0);
    assert_true(combo_typ < 20.0);
    double chin_any = index_of(bor, "sinbar", "chin_any_3s");
    printf("# borderline chin any 3 s %.2f %% (cutoff 18.2)\n", chin_any);
    assert_true(fabs(chin_any - 18.2) <= 4.0);
    assert_true(index_of(rbd, "aasm", "tonic_chin_epochs") > 20.0);
    /* RAI: abnormal below 0.8, normal above 0.9 (Ferri et al. 2010). */
    assert_true(json_number_value(json_object_get(json_object_get(rbd, "indices"), "rai")) < 0.8);
    assert_true(json_number_value(json_object_get(json_object_get(typ, "indices"), "rai")) > 0.9);
    /* Apnea: ~20 events per hour of REM; each apnea or hypopnea is followed
     * at once by a 3-8 s respiratory arousal. */
    row *ev = calloc(MAX_ROWS, sizeof *ev);
    assert_non_null(ev);
    int n = read_table(night_dir[RT_SYNTH_APNEA], "events.csv", ev);
    assert_true(n >= 4 && n % 2 == 0);
    for (int i = 0; i < n; i += 2) {
        assert_true(strcmp(ev[i].label, "apnea") == 0 || strcmp(ev[i].label, "hypopnea") == 0);
        assert_true(ev[i].duration_s >= 10 && ev[i].duration_s <= 30);
        assert_string_equal(ev[i + 1].label, "resp-arousal");
        assert_int_equal(ev[i + 1].start_s, ev[i].start_s + ev[i].duration_s);
        assert_true(ev[i + 1].duration_s >= 3 && ev[i + 1].duration_s <= 8);
    }
    assert_int_equal(read_table(night_dir[RT_SYNTH_RBD], "events.csv", ev), 0);
    free(ev);
    json_decref(typ);
    json_decref(rbd);
    json_decref(bor);
    json_decref(apn);
}

/* --- the recording ------------------------------------------------------ */

static void edf_has_the_montage_and_the_staging(void **state)
{
    (void)state;
    /* Labels, rates and units of the montage the generator promises. */
    static const struct {
        const char *label;
        int rate;
        const char *unit;
    } want[20] = {{"F4-M1", 128, "uV"}, {"C4-M1", 128, "uV"}, {"O2-M1", 128, "uV"}, {"F3-M2", 128, "uV"},
                  {"C3-M2", 128, "uV"}, {"O1-M2", 128, "uV"}, {"E1-M2", 128, "uV"}, {"E2-M1", 128, "uV"},
                  {"Chin1-Chin2", 512, "uV"}, {"FDS L", 512, "uV"}, {"FDS R", 512, "uV"}, {"Tib L", 512, "uV"},
                  {"Tib R", 512, "uV"}, {"ECG", 256, "mV"}, {"Airflow", 32, "uV"}, {"Thor", 32, "uV"},
                  {"Abdo", 32, "uV"}, {"SpO2", 1, "%"}, {"Snore", 128, "uV"}, {"Pos", 1, ""}};
    const char *dir = night_dir[RT_SYNTH_APNEA];
    char path[4200];
    snprintf(path, sizeof path, "%s/night.edf", dir);
    struct edf_hdr_struct hdr;
    assert_int_equal(edfopen_file_readonly(path, &hdr, EDFLIB_READ_ALL_ANNOTATIONS), 0);
    assert_int_equal(hdr.filetype, EDFLIB_FILETYPE_EDFPLUS);
    assert_int_equal(hdr.edfsignals, 20);
    assert_int_equal(hdr.datarecords_in_file, 7200);
    assert_true(hdr.datarecord_duration == EDFLIB_TIME_DIMENSION);
    assert_int_equal(hdr.starttime_hour, 22);
    assert_int_equal(hdr.starttime_minute, 30);
    for (int c = 0; c < 20; c++) {
        char label[17];
        snprintf(label, sizeof label, "%s", hdr.signalparam[c].label);
        for (int k = (int)strlen(label) - 1; k >= 0 && label[k] == ' '; k--)
            label[k] = '\0';
        assert_string_equal(label, want[c].label);
        assert_int_equal(hdr.signalparam[c].smp_in_datarecord, want[c].rate);
        char unit[9];
        snprintf(unit, sizeof unit, "%s", hdr.signalparam[c].physdimension);
        for (int k = (int)strlen(unit) - 1; k >= 0 && unit[k] == ' '; k--)
            unit[k] = '\0';
        assert_string_equal(unit, want[c].unit);
    }
    assert_non_null(strstr(hdr.signalparam[8].transducer, "AgAgCl electrode"));
    assert_non_null(strstr(hdr.signalparam[8].prefilter, "HP:10Hz LP:100Hz"));
    assert_true(hdr.signalparam[8].phys_max == 500.0 && hdr.signalparam[8].phys_min == -500.0);

    /* Stage runs of stages.csv and the EDF+ "Sleep stage ..." annotations
     * (EDF+ specification, Kemp & Olivan 2003) tell the same story, and so
     * do events.csv and the event annotations. */
    static const char *const aasm[] = {"W", "N1", "N2", "N3", "R"};
    static const char *const edf[] = {"Sleep stage W", "Sleep stage 1", "Sleep stage 2", "Sleep stage 3",
                                      "Sleep stage R"};
    row *st = calloc(MAX_ROWS, sizeof *st), *ev = calloc(MAX_ROWS, sizeof *ev);
    assert_non_null(st);
    assert_non_null(ev);
    int n_st = read_table(dir, "stages.csv", st), n_ev = read_table(dir, "events.csv", ev);
    int k_st = 0, k_ev = 0;
    long covered = 0;
    for (long long i = 0; i < hdr.annotations_in_file; i++) {
        struct edf_annotation_struct a;
        assert_int_equal(edf_get_annotation(hdr.handle, (int)i, &a), 0);
        long on = (long)(a.onset / EDFLIB_TIME_DIMENSION), dur = (long)(a.duration_l / EDFLIB_TIME_DIMENSION);
        if (strncmp(a.annotation, "Sleep stage", 11) == 0) {
            assert_true(k_st < n_st);
            int s = -1;
            for (int j = 0; j < 5; j++)
                if (strcmp(st[k_st].label, aasm[j]) == 0)
                    s = j;
            assert_true(s >= 0);
            assert_string_equal(a.annotation, edf[s]);
            assert_int_equal(on, st[k_st].start_s);
            assert_int_equal(dur, st[k_st].duration_s);
            assert_int_equal(on, covered);
            covered += dur;
            k_st++;
        } else {
            static const char *const csv_names[] = {"apnea", "hypopnea", "resp-arousal"};
            static const char *const edf_names[] = {"Obstructive apnea", "Hypopnea", "Respiratory arousal"};
            assert_true(k_ev < n_ev);
            int found = 0;
            for (int j = 0; j < 3; j++)
                if (strcmp(a.annotation, edf_names[j]) == 0) {
                    assert_string_equal(ev[k_ev].label, csv_names[j]);
                    found = 1;
                }
            assert_true(found);
            assert_int_equal(on, ev[k_ev].start_s);
            assert_int_equal(dur, ev[k_ev].duration_s);
            k_ev++;
        }
    }
    assert_int_equal(k_st, n_st);
    assert_int_equal(k_ev, n_ev);
    assert_int_equal(covered, 7200);
    free(st);
    free(ev);
    edfclose_file(hdr.handle);
}

/* Reads one channel of a night (physical units). */
static double *read_signal(const char *dir, int channel, long *n)
{
    char path[4200];
    snprintf(path, sizeof path, "%s/night.edf", dir);
    struct edf_hdr_struct hdr;
    assert_int_equal(edfopen_file_readonly(path, &hdr, EDFLIB_DO_NOT_READ_ANNOTATIONS), 0);
    *n = (long)hdr.signalparam[channel].smp_in_file;
    double *x = malloc((size_t)*n * sizeof *x);
    assert_non_null(x);
    assert_int_equal(edfread_physical_samples(hdr.handle, channel, (int)*n, x), (int)*n);
    edfclose_file(hdr.handle);
    return x;
}

/* The EMG levels in the file are the planned ones. For Gaussian noise the
 * mean rectified value is sigma * sqrt(2/pi) (mean of the half-normal
 * distribution), so the generator's sigma = r * sqrt(pi/2) should give a
 * measured rectified mean of r. 10 % tolerance: with ~40 Hz of bandwidth a
 * clean REM stretch of a few hundred seconds estimates the mean to ~1 %. */
static void emg_levels_follow_the_plan(void **state)
{
    (void)state;
    for (int p = 0; p < RT_SYNTH_PROFILE_COUNT; p++) {
        const char *dir = night_dir[p];
        json_t *t = rt_test_load_truth(dir);
        night_truth *nt = malloc(sizeof *nt);
        assert_non_null(nt);
        truth_load(t, dir, nt);
        row *st = calloc(MAX_ROWS, sizeof *st);
        assert_non_null(st);
        int n_st = read_table(dir, "stages.csv", st);
        for (int r = 0; r < 5; r++) {
            long n;
            double *x = read_signal(dir, 8 + r, &n);
            double peak = 0;
            for (long i = 0; i < n; i++)
                peak = fmax(peak, fabs(x[i]));
            /* Clipping would show as samples at the +-500 uV rails. */
            assert_true(peak < 499.0);
            /* Clean REM seconds: no burst of this role within 1 s, not tonic. */
            double sum = 0;
            long cnt = 0;
            int b = 0;
            for (long s = 30L * nt->bout_first[b] + 3; s < 30L * (nt->bout_first[b] + nt->bout_epochs[b]) - 3; s++) {
                if (roles_in(nt, s - 1.0, s + 2.0) & (1 << r))
                    continue;
                if (r == 0 && (tonic_covers(nt, s - 1.0, s) || tonic_covers(nt, s, s + 1.0) ||
                               tonic_covers(nt, s + 1.0, s + 2.0)))
                    continue;
                for (long i = s * 512; i < (s + 1) * 512; i++)
                    sum += fabs(x[i]);
                cnt += 512;
            }
            assert_true(cnt >= 100 * 512);
            double rem_uv = sum / (double)cnt, design = r == 0 ? nt->bout_bg[0] : 1.0;
            if (fabs(rem_uv - design) > 0.10 * design)
                fail_msg("%s %s: REM rectified mean %.3f uV, designed %.3f uV",
                         rt_synth_profile_name((rt_synth_profile)p), roles[r], rem_uv, design);
            /* NREM (N2) is above REM atonia: chin designed 4.5 uV, limbs 2.5 uV. */
            double nsum = 0;
            long ncnt = 0;
            for (int k = 0; k < n_st; k++)
                if (strcmp(st[k].label, "N2") == 0)
                    for (long i = (st[k].start_s + 1) * 512; i < (st[k].start_s + st[k].duration_s - 1) * 512; i++) {
                        nsum += fabs(x[i]);
                        ncnt++;
                    }
            assert_true(ncnt > 0);
            double n2_uv = nsum / (double)ncnt, n2_design = r == 0 ? 4.5 : 2.5;
            assert_true(n2_uv > 2.0 * rem_uv);
            /* +-15 % epoch variation plus the 10 % estimate tolerance. */
            assert_true(fabs(n2_uv - n2_design) < 0.25 * n2_design);
            /* Placed bursts show: each one well above its background, and
             * over all bursts the measured level is the planned one. A burst
             * is 0.3-0.7 s (~25 independent values at 40 Hz bandwidth), so a
             * single estimate scatters by ~15 %; the pooled ratio by ~1 %. */
            double ratio_sum = 0, ratio_sq = 0;
            long n_b = 0;
            for (size_t i = 0; i < nt->n_bursts; i++) {
                if (nt->b_role[i] != r)
                    continue;
                double bs = 0;
                long bc = 0;
                for (long k = (long)ceil(nt->b_on[i] * 512); k < (long)floor((nt->b_on[i] + nt->b_dur[i]) * 512); k++) {
                    bs += fabs(x[k]);
                    bc++;
                }
                /* 0.4 x plan = 4 standard errors low, still >= 3.2 x background. */
                assert_true(bs / (double)bc > 0.4 * nt->b_uv[i]);
                ratio_sum += bs / (double)bc / nt->b_uv[i];
                ratio_sq += pow(bs / (double)bc / nt->b_uv[i], 2);
                n_b++;
            }
            if (n_b >= 10) {
                /* Pooled: within 4 standard errors (measured) plus 1 %. */
                double mean = ratio_sum / (double)n_b;
                double sd = sqrt(fmax(0.0, ratio_sq / (double)n_b - mean * mean));
                if (fabs(mean - 1.0) > 4.0 * sd / sqrt((double)n_b) + 0.01)
                    fail_msg("%s: bursts measured/planned %.3f (sd %.3f, n %ld)", roles[r], mean, sd, n_b);
            }
            free(x);
        }
        free(st);
        truth_free(nt);
        free(nt);
        json_decref(t);
    }
}

/* --- the 8-h hypnogram, checked on the plan without writing files ------- */

static void eight_hour_hypnogram_is_an_older_adult_night(void **state)
{
    (void)state;
    for (uint64_t k = 0; k < 20; k++) {
        rt_synth_options o;
        rt_synth_options_default(&o);
        o.seed = night_seed + k;
        o.profile = (rt_synth_profile)(k % RT_SYNTH_PROFILE_COUNT);
        synth_plan plan;
        rt_error err;
        assert_int_equal(rt_synth_plan_build(&plan, &o, &err), RT_OK);
        assert_int_equal(plan.n_epochs, 960);
        int latency = 0, sleep = 0, rem = 0, n3_first_half = 0, n3 = 0;
        while (plan.stage[latency] == SYNTH_W)
            latency++;
        for (int e = 0; e < plan.n_epochs; e++) {
            sleep += plan.stage[e] != SYNTH_W;
            rem += plan.stage[e] == SYNTH_R;
            n3 += plan.stage[e] == SYNTH_N3;
            n3_first_half += plan.stage[e] == SYNTH_N3 && e < plan.n_epochs / 2;
        }
        /* Common practice (older adults): latency ~15 min, REM ~20 % of
         * sleep in ~90-min cycles, REM bouts lengthening, N3 early. */
        assert_true(latency >= 26 && latency <= 34);
        double rem_pct = 100.0 * rem / sleep;
        assert_true(rem_pct >= 15.0 && rem_pct <= 25.0);
        assert_true(plan.n_bouts >= 4 && plan.n_bouts <= 6);
        assert_true(plan.bouts[0].epochs >= 8 && plan.bouts[0].epochs <= 24);
        assert_true(plan.bouts[plan.n_bouts - 1].epochs >= 36 && plan.bouts[plan.n_bouts - 1].epochs <= 64);
        assert_true(n3_first_half > 0.8 * n3);
        synth_indices ix;
        rt_synth_indices_compute(&plan, 0, &ix);
        if (o.profile == RT_SYNTH_RBD)
            assert_true(ix.sinbar_chin_any_fds_phasic_3s > 50.0);
        else if (o.profile == RT_SYNTH_BORDERLINE)
            assert_true(fabs(ix.sinbar_chin_any_3s - 18.2) <= 2.0);
        else
            assert_true(ix.sinbar_chin_any_fds_phasic_3s < 20.0);
        rt_synth_plan_free(&plan);
    }
}

static void short_nights_keep_rem_near_a_fifth_of_sleep(void **state)
{
    (void)state;
    for (int p = 0; p < RT_SYNTH_PROFILE_COUNT; p++) {
        row *st = calloc(MAX_ROWS, sizeof *st);
        assert_non_null(st);
        int n = read_table(night_dir[p], "stages.csv", st);
        long sleep = 0, rem = 0, t = 0;
        for (int k = 0; k < n; k++) {
            assert_int_equal(st[k].start_s, t); /* runs tile the night */
            assert_int_equal(st[k].duration_s % 30, 0);
            if (k > 0)
                assert_string_not_equal(st[k].label, st[k - 1].label);
            t += st[k].duration_s;
            if (strcmp(st[k].label, "W") != 0)
                sleep += st[k].duration_s;
            if (strcmp(st[k].label, "R") == 0)
                rem += st[k].duration_s;
        }
        assert_int_equal(t, 7200);
        double rem_pct = 100.0 * (double)rem / (double)sleep;
        assert_true(rem_pct >= 15.0 && rem_pct <= 25.0);
        free(st);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(rejects_bad_options),
        cmocka_unit_test(same_seed_same_files_other_seed_other_files),
        cmocka_unit_test(truth_indices_match_an_independent_recount),
        cmocka_unit_test(placement_follows_the_grid_rules),
        cmocka_unit_test(profiles_reach_their_targets),
        cmocka_unit_test(edf_has_the_montage_and_the_staging),
        cmocka_unit_test(emg_levels_follow_the_plan),
        cmocka_unit_test(short_nights_keep_rem_near_a_fifth_of_sleep),
        cmocka_unit_test(eight_hour_hypnogram_is_an_older_adult_night),
    };
    return cmocka_run_group_tests(tests, setup_nights, NULL);
}
