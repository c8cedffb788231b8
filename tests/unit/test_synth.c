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

static char night_dir[RT_SYNTH_PROFILE_COUNT][4096];
static uint64_t night_seed;

static void write_night(rt_synth_profile profile, double hours, uint64_t seed, const char *dir)
{
    rt_synth_options o = rt_test_synth_options(hours, seed);
    o.profile = profile;
    o.patient = "Fictional_Sleeper";
    rt_test_synth_write(&o, dir);
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
    char a[4096], b[4096], c[4096];
    snprintf(a, sizeof a, "%s", rt_test_dir("synth_det_a"));
    snprintf(b, sizeof b, "%s", rt_test_dir("synth_det_b"));
    snprintf(c, sizeof c, "%s", rt_test_dir("synth_det_c"));
    write_night(RT_SYNTH_APNEA, 1.0, night_seed, a);
    write_night(RT_SYNTH_APNEA, 1.0, night_seed, b);
    write_night(RT_SYNTH_APNEA, 1.0, night_seed + 1, c);
    for (int i = 0; i < 4; i++) {
        assert_true(rt_test_files_equal(a, b, rt_test_synth_files[i]));
        if (i == 0 || i == 3) /* the stage table may coincide; signal and truth may not */
            assert_false(rt_test_files_equal(a, c, rt_test_synth_files[i]));
    }
}

static void rejects_bad_options(void **state)
{
    (void)state;
    rt_synth_options o;
    rt_synth_options_default(&o);
    rt_error err;
    o.hours = 0.5;
    rt_test_synth_refused(&o, rt_test_dir("synth_bad"));
    o.hours = 1;
    assert_int_equal(rt_synth_write(&o, "/nonexistent/folder", &err), RT_ERR_IO);
    rt_synth_profile p;
    assert_int_equal(rt_synth_profile_from_name("borderline", &p), 0);
    assert_int_equal(p, RT_SYNTH_BORDERLINE);
    assert_int_equal(rt_synth_profile_from_name("Borderline", &p), -1);
    assert_string_equal(rt_synth_profile_name(RT_SYNTH_APNEA), "apnea");
}

/* --- independent recount of the indices -------------------------------- */

/* What truth.json says beside the indices agrees with its lists: events.csv
 * holds its events, and minis_3s lists every REM mini in time order with the
 * roles of every placed burst overlapping it (whatever its ratio), whether a
 * tonic stretch covers its epoch, and whether an event touches it. */
static void lists_agree(json_t *t, const char *dir)
{
    rt_test_truth view, *v = &view;
    rt_test_truth_load(t, v);
    row *ev = calloc(MAX_ROWS, sizeof *ev);
    assert_non_null(ev);
    assert_int_equal(read_table(dir, "events.csv", ev), v->n_events);
    for (size_t i = 0; i < v->n_events; i++) {
        assert_true((double)ev[i].start_s == v->events[i].on && (double)ev[i].duration_s == v->events[i].dur);
        assert_string_equal(ev[i].label, v->events[i].type);
    }
    free(ev);
    json_t *minis = json_object_get(t, "minis_3s");
    size_t mi = 0;
    for (int b = 0; b < v->n_bouts; b++)
        for (int e = v->bout_first[b]; e < v->bout_first[b] + v->bout_epochs[b]; e++)
            for (int m = 0; m < 10; m++, mi++) {
                json_t *jm = json_array_get(minis, mi), *ph = json_object_get(jm, "phasic");
                assert_non_null(jm);
                double e0 = 30.0 * e, s0 = e0 + 3 * m;
                assert_int_equal(json_integer_value(json_object_get(jm, "epoch")), e);
                assert_int_equal(json_integer_value(json_object_get(jm, "mini")), m);
                assert_true(json_number_value(json_object_get(jm, "onset_s")) == s0);
                int listed = 0;
                for (size_t k = 0; k < json_array_size(ph); k++)
                    listed |= 1 << rt_test_role_index(json_string_value(json_array_get(ph, k)));
                assert_int_equal(listed, rt_test_roles_in(v, s0, s0 + 3, NULL));
                assert_int_equal(json_array_size(json_object_get(jm, "tonic")) > 0,
                                 rt_test_tonic_covers(v, e0, e0 + 30));
                assert_int_equal(json_is_true(json_object_get(jm, "excluded")), rt_test_event_touches(v, s0, s0 + 3));
            }
    assert_int_equal(mi, json_array_size(minis));
    rt_test_truth_free(v);
}

/* Every index of truth.json, with and without the event exclusions, is the
 * independent recount of support.c (sources there) from the lists. */
static void truth_indices_match_an_independent_recount(void **state)
{
    (void)state;
    for (int p = 0; p < RT_SYNTH_PROFILE_COUNT; p++) {
        json_t *t = rt_test_load_truth(night_dir[p]);
        lists_agree(t, night_dir[p]);
        rt_test_truth_recount(t, 0);
        rt_test_truth_recount(t, 1);
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
        rt_test_truth v;
        rt_test_truth_load(t, &v);
        json_t *bursts = json_object_get(t, "bursts");
        for (size_t i = 0; i < v.n_bursts; i++) {
            const rt_test_burst *bu = &v.b[i];
            double sec = floor(bu->on), u = bu->on - sec;
            /* 1e-9: onsets are whole seconds plus a 1-ms grid value. */
            assert_true(u >= 0.10 - 1e-9 && u <= 0.20 + 1e-9);
            assert_true(bu->dur >= 0.30 - 1e-9 && bu->dur <= 0.70 + 1e-9);
            int in_bout = 0;
            for (int b = 0; b < v.n_bouts; b++) {
                double t0 = 30.0 * v.bout_first[b], t1 = t0 + 30.0 * v.bout_epochs[b];
                if (bu->on >= t0 + 2 && bu->on + bu->dur <= t1 - 2) {
                    in_bout = 1;
                    double bg = bu->role == 0 ? v.bout_bg[b] : 1.0;
                    double factor = bu->rect / bg;
                    assert_true(factor >= 8.0 - 1e-3 && factor <= 15.0 + 1e-3);
                    /* The listed ratio, which the recount's rules read, is
                     * this level over this background (construction; truth
                     * prints 12 significant digits). */
                    assert_true(fabs(bu->ratio - factor) <= 1e-9 * factor);
                }
            }
            assert_true(in_bout);
            if (bu->role == 0)
                assert_false(rt_test_tonic_covers(&v, sec, sec + 1));
            for (size_t j = i + 1; j < v.n_bursts; j++)
                if (v.b[j].role == bu->role)
                    assert_true(floor(v.b[j].on) != sec);
            json_t *jb = json_array_get(bursts, i);
            if (json_is_true(json_object_get(jb, "arousal_bound"))) {
                assert_int_equal(p, RT_SYNTH_APNEA);
                int in_arousal = 0;
                for (size_t k = 0; k < v.n_events; k++)
                    if (strcmp(v.events[k].type, "resp-arousal") == 0 && v.events[k].on <= sec &&
                        sec + 1 <= v.events[k].on + v.events[k].dur)
                        in_arousal = 1;
                assert_true(in_arousal);
            }
        }
        for (size_t i = 0; i < v.n_tonic; i++) {
            int ok = 0;
            for (int b = 0; b < v.n_bouts; b++) {
                double t0 = 30.0 * v.bout_first[b], t1 = t0 + 30.0 * v.bout_epochs[b];
                double rel = v.tonic[i].on - t0;
                if (rel >= 0 && v.tonic[i].on < t1)
                    ok = fmod(rel, 60.0) == 0.0 &&
                         (v.tonic[i].dur == 60.0 || (v.tonic[i].dur == 30.0 && v.tonic[i].on + 30.0 == t1)) &&
                         v.tonic[i].on + v.tonic[i].dur <= t1;
            }
            assert_true(ok);
            assert_true(v.tonic[i].uv >= 15.0 && v.tonic[i].uv <= 25.0);
            /* At least one whole non-tonic pair between two tonic blocks. */
            if (i > 0 && v.tonic[i].on - (v.tonic[i - 1].on + v.tonic[i - 1].dur) < 60.0)
                fail_msg("tonic blocks at %.0f and %.0f are too close", v.tonic[i - 1].on, v.tonic[i].on);
        }
        rt_test_truth_free(&v);
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
        rt_test_truth v;
        rt_test_truth_load(t, &v);
        row *st = calloc(MAX_ROWS, sizeof *st);
        assert_non_null(st);
        int n_st = read_table(dir, "stages.csv", st);
        for (int r = 0; r < 5; r++) {
            size_t n;
            double *x = rt_test_read_channel(dir, rt_test_role_labels[r], 0, -1, &n, NULL);
            double peak = 0;
            for (size_t i = 0; i < n; i++)
                peak = fmax(peak, fabs(x[i]));
            /* Clipping would show as samples at the +-500 uV rails. */
            assert_true(peak < 499.0);
            /* Clean REM seconds: no burst of this role within 1 s, not tonic. */
            double sum = 0;
            long cnt = 0;
            int b = 0;
            for (long s = 30L * v.bout_first[b] + 3; s < 30L * (v.bout_first[b] + v.bout_epochs[b]) - 3; s++) {
                if (!rt_test_quiet_second(&v, r, s))
                    continue;
                for (long i = s * 512; i < (s + 1) * 512; i++)
                    sum += fabs(x[i]);
                cnt += 512;
            }
            assert_true(cnt >= 100 * 512);
            double rem_uv = sum / (double)cnt, design = r == 0 ? v.bout_bg[0] : 1.0;
            if (fabs(rem_uv - design) > 0.10 * design)
                fail_msg("%s %s: REM rectified mean %.3f uV, designed %.3f uV",
                         rt_synth_profile_name((rt_synth_profile)p), rt_test_role_names[r], rem_uv, design);
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
            for (size_t i = 0; i < v.n_bursts; i++) {
                if (v.b[i].role != r)
                    continue;
                double bs = 0;
                long bc = 0;
                for (long k = (long)ceil(v.b[i].on * 512); k < (long)floor((v.b[i].on + v.b[i].dur) * 512); k++) {
                    bs += fabs(x[k]);
                    bc++;
                }
                /* 0.4 x plan = 4 standard errors low, still >= 3.2 x background. */
                assert_true(bs / (double)bc > 0.4 * v.b[i].rect);
                ratio_sum += bs / (double)bc / v.b[i].rect;
                ratio_sq += pow(bs / (double)bc / v.b[i].rect, 2);
                n_b++;
            }
            if (n_b >= 10) {
                /* Pooled: within 4 standard errors (measured) plus 1 %. */
                double mean = ratio_sum / (double)n_b;
                double sd = sqrt(fmax(0.0, ratio_sq / (double)n_b - mean * mean));
                if (fabs(mean - 1.0) > 4.0 * sd / sqrt((double)n_b) + 0.01)
                    fail_msg("%s: bursts measured/planned %.3f (sd %.3f, n %ld)", rt_test_role_names[r], mean, sd, n_b);
            }
            free(x);
        }
        free(st);
        rt_test_truth_free(&v);
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
