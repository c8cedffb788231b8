/* Artifact switches of the synthetic night generator (src/synth/artifacts.c):
 * truth.json lists what the options asked for, the recording carries it
 * (mains amplitude by least squares, beats found by the QRS detector, ECG
 * locked in the chin, marks at the clipping, detachment and pops), a night
 * without artifacts carries none of it, switching artifacts on moves none of
 * the placed activity, and equal options give byte-identical files. The
 * quality functions used here are tested on their own in test_quality.c and
 * test_qrs.c; 1-h nights keep the file fast. */
#include "support.h"

#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "quality/quality.h"
#include "remtone/recording.h"
#include "remtone/synth.h"
#include "dsp/bandpass.h"
#include "dsp/fft_plans.h"

static char dir_art[4096], dir_art2[4096], dir_clean[4096];

static rt_synth_options artifact_options(uint64_t seed)
{
    rt_synth_options o = rt_test_synth_options(1.0, seed);
    /* one line a switch of remtone synth */
    o.mains_hz = 60.0; o.mains_uv = 4.0; o.mains_harmonics = 2;
    o.ecg_bleed_uv = 15.0; o.ecg_bleed_limb_uv = 5.0;
    o.heart_rate_bpm = 75.0;
    o.clip_start_s = 900.0; o.clip_duration_s = 10.0;
    o.detach_s = 3300.0;
    o.pops = 4;
    return o;
}

static int setup(void **state)
{
    (void)state;
    uint64_t seed = rt_test_seed();
    rt_synth_options o = artifact_options(seed);
    snprintf(dir_art, sizeof dir_art, "%s", rt_test_dir("synth_art"));
    rt_test_synth_write(&o, dir_art);
    snprintf(dir_art2, sizeof dir_art2, "%s", rt_test_dir("synth_art2"));
    rt_test_synth_write(&o, dir_art2);
    rt_synth_options c = rt_test_synth_options(1.0, seed);
    snprintf(dir_clean, sizeof dir_clean, "%s", rt_test_dir("synth_clean"));
    rt_test_synth_write(&c, dir_clean);
    return 0;
}

static int teardown(void **state)
{
    (void)state;
    rt_fft_plans_cleanup();
    return 0;
}

static char *slurp(const char *dir, const char *name, size_t *len)
{
    char path[4200];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    return rt_test_read_all(path, len);
}

static void test_deterministic(void **state)
{
    (void)state;
    for (int i = 0; i < 4; i++)
        assert_true(rt_test_files_equal(dir_art, dir_art2, rt_test_synth_files[i]));
}

/* Artifacts use streams of their own: the hypnogram, the placed activity and
 * every channel but the EMG and ECG ones are those of the clean night. */
static void test_plan_unmoved(void **state)
{
    (void)state;
    assert_true(rt_test_files_equal(dir_art, dir_clean, "stages.csv"));
    json_t *ta = rt_test_load_truth(dir_art), *tc = rt_test_load_truth(dir_clean);
    assert_true(json_equal(json_object_get(ta, "bursts"), json_object_get(tc, "bursts")));
    assert_true(json_equal(json_object_get(ta, "indices"), json_object_get(tc, "indices")));
    json_decref(ta);
    json_decref(tc);
    size_t n1, n2;
    double *e1 = rt_test_read_channel(dir_art, "C4-M1", 0, -1, &n1, NULL);
    double *e2 = rt_test_read_channel(dir_clean, "C4-M1", 0, -1, &n2, NULL);
    assert_int_equal(n1, n2);
    assert_memory_equal(e1, e2, n1 * sizeof *e1);
    free(e1);
    free(e2);
}

static void test_truth_lists_artifacts(void **state)
{
    (void)state;
    json_t *t = rt_test_load_truth(dir_art), *a = json_object_get(t, "artifacts");
    assert_non_null(a);
    json_t *m = json_object_get(a, "mains");
    assert_true(json_real_value(json_object_get(m, "line_hz")) == 60.0);
    json_t *comp = json_object_get(m, "components");
    assert_int_equal(json_array_size(comp), 3);
    const double hz[3] = {60, 120, 180}, amp[3] = {4, 2, 1};
    for (size_t i = 0; i < 3; i++) {
        assert_true(json_real_value(json_object_get(json_array_get(comp, i), "hz")) == hz[i]);
        assert_true(json_real_value(json_object_get(json_array_get(comp, i), "amplitude_uv")) == amp[i]);
    }
    json_t *ecg = json_object_get(a, "ecg");
    assert_true(json_real_value(json_object_get(ecg, "heart_rate_bpm")) == 75.0);
    assert_true(json_real_value(json_object_get(ecg, "chin_r_uv")) == 15.0);
    /* 75 bpm for 3600 s, the 3 % modulation averaging out: 4500 beats within 0.5 % */
    size_t nb = json_array_size(json_object_get(ecg, "r_s"));
    assert_true(fabs((double)nb - 4500.0) < 22.5);
    json_t *clip = json_object_get(a, "clipping");
    assert_true(json_real_value(json_object_get(clip, "start_s")) == 900.0);
    assert_true(json_real_value(json_object_get(clip, "end_s")) == 910.0);
    assert_true(json_real_value(json_object_get(json_object_get(a, "detached"), "from_s")) == 3300.0);
    json_t *pops = json_object_get(a, "pops");
    assert_int_equal(json_array_size(pops), 4);
    /* pops lie in REM epochs (stages.csv rows "start,duration,R") */
    size_t len;
    char *csv = slurp(dir_art, "stages.csv", &len);
    for (size_t i = 0; i < 4; i++) {
        double on = json_real_value(json_object_get(json_array_get(pops, i), "onset_s"));
        bool in_rem = false;
        for (char *line = strchr(csv, '\n'); line && line[1]; line = strchr(line + 1, '\n')) {
            double s0, d;
            char st[8];
            if (sscanf(line + 1, "%lf,%lf,%7s", &s0, &d, st) == 3 && strcmp(st, "R") == 0 && on >= s0 &&
                on < s0 + d)
                in_rem = true;
        }
        assert_true(in_rem);
    }
    free(csv);
    json_t *tc = rt_test_load_truth(dir_clean), *ac = json_object_get(tc, "artifacts");
    assert_true(json_is_null(json_object_get(ac, "mains")) && json_is_null(json_object_get(ac, "clipping")) &&
                json_is_null(json_object_get(ac, "detached")));
    assert_int_equal(json_array_size(json_object_get(ac, "pops")), 0);
    json_decref(tc);
    json_decref(t);
}

static void test_mains_in_signal(void **state)
{
    (void)state;
    const char *labels[2] = {"Chin1-Chin2", "Tib L"};
    for (int c = 0; c < 2; c++) {
        size_t n;
        double *x = rt_test_read_channel(dir_art, labels[c], 60.0, 600.0, &n, NULL);
        rt_mains m;
        rt_error err;
        assert_int_equal(rt_mains_estimate(x, n, 512.0, 10.0, 100.0, &m, &err), RT_OK);
        assert_true(m.present && m.line_hz == 60.0);
        double a1 = rt_test_sine_amplitude(x, n, 512.0, 60.0, 60.0);
        double a2 = rt_test_sine_amplitude(x, n, 512.0, 120.0, 60.0);
        print_message("# %s: 60 Hz %.3f uV, 120 Hz %.3f uV, line %.1f dB\n", labels[c], a1, a2, m.line_db);
        assert_true(fabs(a1 - 4.0) < 0.2 && fabs(a2 - 2.0) < 0.2);
        free(x);
        x = rt_test_read_channel(dir_clean, labels[c], 60.0, 600.0, &n, NULL);
        assert_int_equal(rt_mains_estimate(x, n, 512.0, 10.0, 100.0, &m, &err), RT_OK);
        assert_false(m.present);
        free(x);
    }
}

static double *truth_beats(const char *dir, size_t *nb)
{
    json_t *t = rt_test_load_truth(dir);
    json_t *r = json_object_get(json_object_get(json_object_get(t, "artifacts"), "ecg"), "r_s");
    *nb = json_array_size(r);
    double *b = malloc(*nb * sizeof *b);
    for (size_t i = 0; i < *nb; i++)
        b[i] = json_real_value(json_array_get(r, i));
    json_decref(t);
    return b;
}

/* The ECG channel's beats are truth.json's, found by the detector with the
 * EC57 150-ms match (from memory) and > 99 % sensitivity and PPV. */
static void test_ecg_beats(void **state)
{
    (void)state;
    const char *dirs[2] = {dir_art, dir_clean};
    for (int d = 0; d < 2; d++) {
        size_t nb, n;
        double *ref = truth_beats(dirs[d], &nb);
        double *x = rt_test_read_channel(dirs[d], "ECG", 0.0, -1, &n, NULL);
        rt_qrs_beats beats;
        rt_error err;
        assert_int_equal(rt_qrs_detect(x, n, 256.0, false, &beats, &err), RT_OK);
        size_t tp = 0, j = 0;
        for (size_t i = 0; i < nb; i++) {
            while (j < beats.n && beats.r_s[j] < ref[i] - 0.15)
                j++;
            if (j < beats.n && fabs(beats.r_s[j] - ref[i]) <= 0.15) {
                tp++;
                j++;
            }
        }
        double se = (double)tp / (double)nb, ppv = (double)tp / (double)beats.n;
        print_message("# ECG channel: %zu beats in truth, %zu found, Se %.4f PPV %.4f\n", nb, beats.n, se, ppv);
        assert_true(se > 0.99 && ppv > 0.99);
        rt_qrs_beats_free(&beats);
        free(ref);
        free(x);
    }
}

/* ECG locked in the band-passed chin where bleed was asked for, not elsewhere. */
static void test_bleed_in_chin(void **state)
{
    (void)state;
    const char *dirs[2] = {dir_art, dir_clean};
    for (int d = 0; d < 2; d++) {
        size_t nb, n;
        double *r = truth_beats(dirs[d], &nb);
        double t0 = 1200.0, dur = 600.0;
        double *x = rt_test_read_channel(dirs[d], "Chin1-Chin2", t0, dur, &n, NULL);
        for (size_t i = 0; i < nb; i++)
            r[i] -= t0;
        rt_bandpass_spec spec = rt_bandpass_spec_defaults(512.0);
        spec.n_notches = 3;
        spec.notch_hz[0] = 60;
        spec.notch_hz[1] = 120;
        spec.notch_hz[2] = 180;
        rt_test_bandpass(x, n, &spec);
        rt_error err;
        rt_ecg_removal rep;
        assert_int_equal(rt_ecg_subtract(x, n, 512.0, r, nb, RT_ECG_PRE_S, RT_ECG_POST_S, &rep, &err), RT_OK);
        print_message("# chin %s: %zu beats, template p2p %.2f uV, locked %.1f dB, found %d\n",
                      d == 0 ? "with bleed" : "clean", rep.beats_used, rep.template_p2p_uv, rep.locked_db,
                      rep.found);
        assert_true(rep.found == (d == 0));
        free(x);
        free(r);
    }
}

static void test_marks_in_signal(void **state)
{
    (void)state;
    size_t n;
    rt_channel_info ci;
    double *x = rt_test_read_channel(dir_art, "Chin1-Chin2", 0.0, -1, &n, &ci);
    rt_quality_mark marks[64];
    double *work = malloc(n * sizeof *work);
    assert_non_null(work);
    size_t k = rt_quality_marks(x, n, ci.rate_hz, &ci, work, marks, 64);
    assert_true(k <= 64);
    json_t *t = rt_test_load_truth(dir_art), *pops = json_object_get(json_object_get(t, "artifacts"), "pops");
    size_t n_clip = 0, n_flat = 0, n_pop = 0, pops_outside = 0;
    for (size_t i = 0; i < k; i++) {
        print_message("# %s %.3f-%.3f\n", rt_quality_reason_name(marks[i].reason), marks[i].start_s, marks[i].end_s);
        if (marks[i].reason == RT_QUALITY_CLIPPING) {
            n_clip++;
            /* 1-Hz swing of 1500 uV: reaches 500 uV after asin(1/3)/(2 pi) = 0.054 s */
            assert_true(fabs(marks[i].start_s - (900.054 - RT_QUALITY_CLIP_PAD_S)) < 0.02);
            assert_true(marks[i].end_s > 909.5 && marks[i].end_s <= 910.3);
        } else if (marks[i].reason == RT_QUALITY_FLAT) {
            n_flat++;
            assert_true(fabs(marks[i].start_s - 3300.0) < 0.01 && fabs(marks[i].end_s - 3600.0) < 1e-6);
        } else if (marks[i].end_s <= 899.0 || marks[i].start_s >= 911.0) {
            n_pop++; /* steps inside the clipped stretch are left out there anyway */
        }
    }
    for (size_t p = 0; p < json_array_size(pops); p++) {
        double on = json_real_value(json_object_get(json_array_get(pops, p), "onset_s"));
        if ((on >= 899.0 && on < 911.0) || on >= 3299.0)
            continue;
        pops_outside++;
        bool hit = false;
        for (size_t i = 0; i < k; i++)
            hit |= marks[i].reason == RT_QUALITY_POP && marks[i].start_s <= on && marks[i].end_s > on;
        assert_true(hit);
    }
    assert_int_equal(n_clip, 1);
    assert_int_equal(n_flat, 1);
    assert_int_equal(n_pop, pops_outside);
    json_decref(t);
    free(work);
    free(x);
    /* the clean night: no marks at all on any EMG channel */
    for (int c = 0; c < 5; c++) {
        x = rt_test_read_channel(dir_clean, rt_test_role_labels[c], 0.0, -1, &n, &ci);
        double *w = malloc(n * sizeof *w);
        assert_non_null(w);
        assert_int_equal(rt_quality_marks(x, n, ci.rate_hz, &ci, w, marks, 64), 0);
        free(w);
        free(x);
    }
}

static void test_options_checked(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("synth_bad");
    for (int c = 0; c < 6; c++) {
        rt_synth_options o = rt_test_synth_options(1.0, 1); /* rt_synth_options_default's seed */
        switch (c) {
        case 0: o.mains_hz = 55.0; o.mains_uv = 1.0; break;
        case 1: o.mains_hz = 50.0; o.mains_uv = 1.0; o.mains_harmonics = 5; break;
        case 2: o.ecg_bleed_uv = -1.0; break;
        case 3: o.heart_rate_bpm = 200.0; break;
        case 4: o.clip_start_s = 3595.0; o.clip_duration_s = 10.0; break;
        default: o.detach_s = 3600.0; break;
        }
        rt_test_synth_refused(&o, dir);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_deterministic),
        cmocka_unit_test(test_plan_unmoved),
        cmocka_unit_test(test_truth_lists_artifacts),
        cmocka_unit_test(test_mains_in_signal),
        cmocka_unit_test(test_ecg_beats),
        cmocka_unit_test(test_bleed_in_chin),
        cmocka_unit_test(test_marks_in_signal),
        cmocka_unit_test(test_options_checked),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
